"""Narrowband signals in spectra: the mean of a path's spectra, detection above the local noise with a
stated false-alarm rate, matching two paths' signals across a common frequency offset, and reading
each signal in one capture.

Everything stands on :mod:`rxbench.dsp.spectrum` (one PSD per capture), :mod:`rxbench.dsp.floor`
(noise density, detection threshold) and :mod:`rxbench.dsp.tone` (tone power and SNR); this module
adds no FFT of its own.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rxbench.dsp.floor import detection_threshold, median_bias, noise_floor, usable_mask
from rxbench.dsp.spectrum import Psd
from rxbench.dsp.tone import BAND_HALFWIDTH_BINS, DEFAULT_SNR_BANDWIDTH_HZ, measure_tone
from rxbench.dsp.units import db_from_power

#: Default probability that noise alone produces at least one detection in a path's mean spectrum.
DEFAULT_FALSE_ALARM = 0.01
#: Half-width of the window around each bin (or signal) over which the local noise is taken, bins.
LOCAL_HALFWIDTH_BINS = 32


def check_compatible(psds, what: str) -> None:
    first = psds[0]
    for p in psds[1:]:
        if (p.sample_rate_hz != first.sample_rate_hz or p.nperseg != first.nperseg
                or p.one_sided != first.one_sided):
            raise ValueError(
                f"{what}: spectra differ in sample rate ({p.sample_rate_hz:g} vs {first.sample_rate_hz:g} Hz), "
                f"FFT length ({p.nperseg} vs {first.nperseg}) or sidedness"
            )


def mean_psd(psds) -> Psd:
    """The average of several captures' PSDs (same rate, FFT length and window), weighted by segments.

    Notes
    -----
    Independent captures add their degrees of freedom; for unequal weights w_k = segments the
    effective value is (sum w_k)**2 / sum(w_k**2/nu_k) (Satterthwaite). Sub-averages are stacked in
    capture order.
    """
    psds = list(psds)
    if not psds:
        raise ValueError("no spectra to average")
    check_compatible(psds, "mean_psd")
    w = np.array([p.n_segments for p in psds], dtype=float)
    density = np.sum([wi * p.density for wi, p in zip(w, psds)], axis=0) / w.sum()
    dof = float(w.sum() ** 2 / np.sum(w**2 / np.array([p.dof for p in psds])))
    first = psds[0]
    return Psd(
        frequency_hz=first.frequency_hz,
        density=density,
        batch_density=np.vstack([p.batch_density for p in psds]),
        batch_counts=np.concatenate([p.batch_counts for p in psds]),
        bin_width_hz=first.bin_width_hz,
        enbw_hz=first.enbw_hz,
        dof=dof,
        n_segments=int(w.sum()),
        sample_rate_hz=first.sample_rate_hz,
        one_sided=first.one_sided,
        window=first.window,
    )


def local_noise_density(spectrum: Psd, halfwidth_bins: int = LOCAL_HALFWIDTH_BINS) -> np.ndarray:
    """Noise density around every bin: a sliding median over +/- ``halfwidth_bins``, bias-corrected.

    Notes
    -----
    The sliding form of :func:`dsp.floor.noise_floor`: the median of chi2(nu)/nu-distributed bins
    divided by :func:`dsp.floor.median_bias` is unbiased for the mean density. Signals inside the
    window bias it upward a little (conservative for detection) as long as they fill well under half
    of it.
    """
    if halfwidth_bins < 4:
        raise ValueError(f"{halfwidth_bins=} must be at least 4")
    import scipy.ndimage  # here, not at the top: a slow import

    med = scipy.ndimage.median_filter(spectrum.density, size=2 * halfwidth_bins + 1, mode="nearest")
    return med / median_bias(spectrum.dof)


@dataclass(frozen=True)
class Peak:
    """A narrowband signal standing above the local noise of a spectrum."""

    offset_hz: float
    ratio_db: float  # peak bin over the local noise density, dB


def detect_peaks(
    spectrum: Psd,
    *,
    false_alarm: float = DEFAULT_FALSE_ALARM,
    halfwidth_bins: int = LOCAL_HALFWIDTH_BINS,
    edge_fraction: float = 0.1,
    dc_halfwidth_hz: float | None = None,
) -> list[Peak]:
    """Narrowband signals above the local noise, with a stated false-alarm rate.

    Parameters
    ----------
    spectrum : Psd
        Usually the mean of one path's captures (:func:`mean_psd`).
    false_alarm : float
        Probability that noise alone puts at least one bin of the searched band over the threshold.
    halfwidth_bins : int
        Half-width of the local-noise window, bins.
    edge_fraction, dc_halfwidth_hz : float
        Band edges and DC spike left out, as in :func:`dsp.floor.usable_mask`.

    Returns
    -------
    list of Peak
        One peak per contiguous run of bins over the threshold (its strongest bin), ascending in
        frequency. Runs closer than 2*BAND_HALFWIDTH_BINS + 1 bins are one signal.

    Notes
    -----
    A noise bin of a Welch average is S*chi2(nu)/nu; the threshold is the chi2 upper quantile at
    false_alarm / n_bins (a Bonferroni bound, conservative since neighbouring bins are correlated),
    :func:`dsp.floor.detection_threshold`, times the local density of :func:`local_noise_density`.
    """
    if not 0.0 < false_alarm < 1.0:
        raise ValueError(f"{false_alarm=} must lie strictly between 0 and 1")
    usable, _, _ = usable_mask(spectrum, edge_fraction=edge_fraction, dc_halfwidth_hz=dc_halfwidth_hz)
    if usable.sum() < 8:
        raise ValueError(f"only {int(usable.sum())} usable bins: the spectrum is too coarse to search")
    local = local_noise_density(spectrum, halfwidth_bins)
    threshold = detection_threshold(spectrum.dof, int(usable.sum()), false_alarm)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = spectrum.density / local
    above = usable & (ratio > threshold)
    idx = np.flatnonzero(above)
    if idx.size == 0:
        return []
    gap = 2 * BAND_HALFWIDTH_BINS + 1
    runs = np.split(idx, np.flatnonzero(np.diff(idx) > gap) + 1)
    peaks = []
    for run in runs:
        k = int(run[np.argmax(spectrum.density[run])])
        peaks.append(Peak(float(spectrum.frequency_hz[k]), float(db_from_power(ratio[k]))))
    return peaks


def _mutual_nearest(fa: np.ndarray, fb: np.ndarray, tolerance_hz: float) -> list[tuple[int, int]]:
    if fa.size == 0 or fb.size == 0:
        return []
    dist = np.abs(fa[:, None] - fb[None, :])
    best_b = np.argmin(dist, axis=1)
    best_a = np.argmin(dist, axis=0)
    return [(i, int(k)) for i, k in enumerate(best_b) if best_a[k] == i and dist[i, k] <= tolerance_hz]


def match_frequencies(freqs_a_hz, freqs_b_hz, *, tolerance_hz: float, max_offset_hz: float):
    """Estimate the common frequency offset of B relative to A and match the two lists of signals.

    Parameters
    ----------
    freqs_a_hz, freqs_b_hz : array_like
        Signal frequencies found in path A and path B, Hz.
    tolerance_hz : float
        Largest residual frequency difference of a match once the common offset is removed, Hz.
    max_offset_hz : float
        Largest common offset considered (the dongles' tuning error, e.g. 100 ppm of the centre), Hz.

    Returns
    -------
    offset_hz : float
        Common offset, B - A, Hz (0 when nothing matches).
    matches : list of (int, int)
        Index pairs (into A, into B), mutual nearest neighbours within the tolerance.

    Notes
    -----
    Every difference f_B - f_A within +/-max_offset_hz (and zero) is a candidate offset; the one that
    matches the most signals wins (ties: the smaller sum of squared residuals, then the smaller offset).
    The offset is then refined as the median difference of the matched pairs and the lists matched
    again. A dongle's tuning error shifts the whole band alike to within ppm * bandwidth, far below a
    bin for the bandwidths of these dongles.
    """
    fa = np.asarray(freqs_a_hz, dtype=float)
    fb = np.asarray(freqs_b_hz, dtype=float)
    if tolerance_hz <= 0 or max_offset_hz < 0:
        raise ValueError(f"{tolerance_hz=} must be > 0 and {max_offset_hz=} >= 0")
    candidates = {0.0}
    for d in (fb[None, :] - fa[:, None]).ravel():
        if abs(d) <= max_offset_hz:
            candidates.add(float(d))
    best = None
    for delta in sorted(candidates, key=abs):
        m = _mutual_nearest(fa, fb - delta, tolerance_hz)
        resid = sum((fb[k] - delta - fa[i]) ** 2 for i, k in m)
        key = (-len(m), resid, abs(delta))
        if best is None or key < best[0]:
            best = (key, delta, m)
    _, delta, m = best
    if not m:
        return 0.0, []
    delta = float(np.median([fb[k] - fa[i] for i, k in m]))
    return delta, _mutual_nearest(fa, fb - delta, tolerance_hz)


def local_floor(spectrum: Psd, offset_hz: float, halfwidth_bins: int = LOCAL_HALFWIDTH_BINS, **kwargs):
    """:func:`dsp.floor.noise_floor` restricted to +/- ``halfwidth_bins`` around ``offset_hz``."""
    w = halfwidth_bins * spectrum.bin_width_hz
    return noise_floor(spectrum, exclude_hz=[(-np.inf, offset_hz - w), (offset_hz + w, np.inf)], adaptive=False,
                       **kwargs)


@dataclass(frozen=True)
class SignalReadings:
    """Readings of several signals in one capture (NaN where the signal was not found)."""

    offset_hz: np.ndarray
    power: np.ndarray  # FS**2, noise subtracted
    noise_density: np.ndarray  # FS**2/Hz, local
    snr_db: np.ndarray


def read_signals(
    spectrum: Psd,
    offsets_hz,
    *,
    search_hz: float,
    halfwidth_bins: int = LOCAL_HALFWIDTH_BINS,
    snr_bandwidth_hz: float = DEFAULT_SNR_BANDWIDTH_HZ,
    dc_halfwidth_hz: float | None = None,
) -> SignalReadings:
    """Read each signal near ``offsets_hz`` in one capture with :func:`dsp.tone.measure_tone`
    against its local noise floor. A signal that does not stand above the noise within
    ``search_hz`` (a deep fade), or whose noise-subtracted power is not positive, reads NaN."""
    offsets = np.asarray(offsets_hz, dtype=float)
    out = np.full((4, offsets.size), np.nan)
    for j, f in enumerate(offsets):
        try:
            fl = local_floor(spectrum, f, halfwidth_bins, dc_halfwidth_hz=dc_halfwidth_hz)
        except ValueError:
            continue
        out[2, j] = fl.density
        try:
            t = measure_tone(spectrum, fl, near_hz=f, search_hz=search_hz, snr_bandwidth_hz=snr_bandwidth_hz)
        except ValueError:
            continue
        if t.power > 0:
            out[0, j], out[1, j], out[3, j] = t.offset_hz, t.power, t.snr_db
    return SignalReadings(out[0], out[1], out[2], out[3])

