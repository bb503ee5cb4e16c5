"""Tone reading: find a tone, refine its frequency below one bin, measure its power with the noise
under it subtracted, and give C/N0, SNR in a chosen bandwidth and a 95 % interval.

Notes
-----
The averaged PSD near a steady tone of power P at frequency f_t is
``S(f_k) = N0 + P * K(f_k - f_t) / bin_width``, with K the window kernel (:func:`dsp.spectrum.kernel`,
summing to 1 over all bins). The frequency is refined by a least-squares fit of that shape to the
bins around the peak. The power is the noise-subtracted band integral,
``P = sum_band (S_k - N0) * bin_width / sum_band K``, which is unbiased however close the tone is to
the noise (E[S_k] = N0 + P*K/bin_width exactly) and insensitive to where the tone falls between bins.
Its Type A uncertainty comes from the scatter of the same integral over time-ordered sub-averages
(which also picks up drift and gain wander), combined with the floor's own uncertainty.

References
----------
Rife, D. C. and Boorstyn, R. R., "Single-tone parameter estimation from discrete-time observations",
IEEE Trans. Inf. Theory IT-20(5), 1974 (the bound the power estimate is compared against).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from rxbench.dsp.floor import NoiseFloor, detection_threshold, usable_mask
from rxbench.dsp.same_signal import on_dc
from rxbench.dsp.spectrum import Psd, kernel
from rxbench.dsp.timeline import Timeline, tone_timeline
from rxbench.dsp.units import db_from_power

#: Half-width of the band integrated around a tone, bins (Hann main lobe is +/-2 bins).
BAND_HALFWIDTH_BINS = 4
#: A peak this many times wider (-3 dB) than the window's own line is a broad signal, not a tone.
BROAD_FACTOR = 3.0
#: Another line within this of the strongest (dB) is named as a second line.
SECOND_LINE_DB = 1.0
#: Default noise bandwidth for the reported SNR, Hz (a speech channel).
DEFAULT_SNR_BANDWIDTH_HZ = 2500.0


#: A tone present for less than this fraction of the capture is called intermittent.
INTERMITTENT_BELOW = 0.9

#: Bins either side of a tone's peak over which a pure line's width is worked out.
LINE_LOBE_BINS = 32

@dataclass(frozen=True)
class Tone:
    """A tone reading. Powers in full-scale units (FS**2), densities in FS**2/Hz.

    Attributes
    ----------
    offset_hz : float
        Frequency relative to the capture's centre (or absolute for real captures).
    power : float
        Tone power with the noise under it subtracted.
    u_power : float
        Standard uncertainty of ``power`` (Type A: sub-average scatter and floor).
    dof_u : float
        Degrees of freedom of ``u_power`` (Welch-Satterthwaite).
    noise_density : float
        Noise density used, FS**2/Hz.
    snr_bandwidth_hz : float
        Noise bandwidth of ``snr_db``.
    peak_to_floor_db : float
        Peak bin over the noise floor, dB: how clearly the tone stands out.
    width_hz, line_width_hz : float
        -3 dB width of the peak above the noise, and that of a pure line at the same place (the
        window's own width), Hz.
    second_offset_hz : float or None
        Another line whose power is within SECOND_LINE_DB of this one (None: there is none).
    second_db : float or None
        That line's power relative to this one's, dB.
    timeline : Timeline or None
        The time-resolved reading (:mod:`dsp.timeline`): on-fraction, on-power, level change.
    """

    offset_hz: float
    power: float
    u_power: float
    dof_u: float
    noise_density: float
    snr_bandwidth_hz: float
    peak_to_floor_db: float
    width_hz: float = float("nan")
    line_width_hz: float = float("nan")
    second_offset_hz: float | None = None
    second_db: float | None = None
    timeline: Timeline | None = None

    @property
    def is_broad(self) -> bool:
        return bool(self.width_hz > BROAD_FACTOR * self.line_width_hz)

    @property
    def on_fraction(self) -> float | None:
        return None if self.timeline is None else self.timeline.on_fraction

    @property
    def on_power_dbfs(self) -> float:
        p = self.power if self.timeline is None else self.timeline.on_power
        return db_from_power(max(p, 0.0))

    @property
    def on_cn0_dbhz(self) -> float:
        return self.on_power_dbfs - db_from_power(self.noise_density)

    @property
    def power_dbfs(self) -> float:
        return db_from_power(max(self.power, 0.0))

    @property
    def u_power_db(self) -> float:
        """Standard uncertainty in dB (first order: 10/ln10 * u/P); inf when P <= 0."""
        return float(10.0 / np.log(10.0) * self.u_power / self.power) if self.power > 0 else float("inf")

    @property
    def ci95_dbfs(self) -> tuple[float, float]:
        """95 % interval of the tone power, dBFS (Student t on ``dof_u``); low end -inf if it reaches 0."""
        k = float(special.stdtrit(self.dof_u, 0.975))
        lo, hi = self.power - k * self.u_power, self.power + k * self.u_power
        return db_from_power(max(lo, 0.0)), db_from_power(max(hi, 0.0))

    @property
    def cn0_dbhz(self) -> float:
        return db_from_power(max(self.power, 0.0) / self.noise_density)

    @property
    def snr_db(self) -> float:
        return self.cn0_dbhz - 10.0 * np.log10(self.snr_bandwidth_hz)


def find_tone(spectrum: Psd, floor: NoiseFloor, *, near_hz: float | None = None, search_hz: float | None = None):
    """Index of the strongest bin that stands above the noise, or None.

    With ``near_hz`` only bins within ``search_hz`` of it are searched (default: 10 bins or 1 kHz,
    whichever is wider). The DC region is never searched unless ``near_hz`` points into it.
    """
    f = spectrum.frequency_hz
    if near_hz is not None:
        if search_hz is None:
            search_hz = max(10 * spectrum.bin_width_hz, 1000.0)
        allowed = np.abs(f - near_hz) <= search_hz
    else:
        allowed = np.abs(f) > floor.dc_halfwidth_hz
        allowed &= np.abs(f) <= spectrum.sample_rate_hz / 2 - BAND_HALFWIDTH_BINS * spectrum.bin_width_hz
    if not allowed.any():
        raise ValueError(f"{near_hz=} Hz lies outside the captured band")
    d = np.where(allowed, spectrum.density, -np.inf)
    k = int(np.argmax(d))
    threshold = detection_threshold(spectrum.dof, int(allowed.sum())) * floor.density
    return k if spectrum.density[k] > threshold else None


def _refine(spectrum: Psd, k: int, noise_density: float) -> float:
    """Tone frequency (in fractional bins) by a least-squares fit of the window kernel to bins k-3..k+3.

    The one-parameter fit (the amplitude is solved linearly) is searched on a grid of offsets in
    [-1, 1] bin, refined twice around the best point and finished by a parabola through the last
    three residuals: about 0.0005 bin, with no iterative optimiser.
    """
    idx = np.arange(max(k - 3, 0), min(k + 4, spectrum.density.size))
    y = spectrum.density[idx] - noise_density

    def residuals(deltas):
        shapes = kernel(spectrum.window, (idx[None, :] - (k + deltas[:, None])).ravel()).reshape(deltas.size, idx.size)
        a = shapes @ y / np.einsum("ij,ij->i", shapes, shapes)
        return np.sum((y[None, :] - a[:, None] * shapes) ** 2, axis=1)

    centre, half = 0.0, 1.0
    for _ in range(3):
        grid = centre + np.linspace(-half, half, 21)
        grid = grid[np.abs(grid) <= 1.0]
        r = residuals(grid)
        i = int(np.argmin(r))
        centre, step = float(grid[i]), grid[1] - grid[0]
        half = step
    if 0 < i < grid.size - 1:  # parabola through the best point and its neighbours
        r0, r1, r2 = r[i - 1], r[i], r[i + 1]
        denom = r0 - 2 * r1 + r2
        if denom > 0:
            centre += 0.5 * step * (r0 - r2) / denom
    return k + centre

def measure_tone(
    spectrum: Psd,
    floor: NoiseFloor,
    *,
    near_hz: float | None = None,
    search_hz: float | None = None,
    snr_bandwidth_hz: float = DEFAULT_SNR_BANDWIDTH_HZ,
    band_halfwidth_bins: int = BAND_HALFWIDTH_BINS,
) -> Tone:
    """Measure the strongest tone (or the one near ``near_hz``).

    Parameters
    ----------
    spectrum : Psd
        Averaged PSD of the capture (at least 4 sub-averages for an uncertainty).
    floor : NoiseFloor
        Noise density under the tone (see :func:`dsp.floor.noise_floor`).
    near_hz, search_hz : float, optional
        Look only within ``search_hz`` of ``near_hz``.
    snr_bandwidth_hz : float
        Noise bandwidth for the SNR, Hz.
    band_halfwidth_bins : int
        Half-width of the integration band, bins; widen it for a tone that drifts by more than a bin.

    Returns
    -------
    Tone

    Raises
    ------
    ValueError
        No tone stands above the noise (false-alarm rate ~1 %), or too few sub-averages.
    """
    if snr_bandwidth_hz <= 0:
        raise ValueError(f"{snr_bandwidth_hz=} must be positive")
    if spectrum.batch_density.shape[0] < 4:
        raise ValueError(
            f"only {spectrum.batch_density.shape[0]} sub-averages: the capture is too short for an uncertainty"
        )
    k = find_tone(spectrum, floor, near_hz=near_hz, search_hz=search_hz)
    if k is None:
        where = f" near {near_hz:.1f} Hz" if near_hz is not None else ""
        raise ValueError(f"no tone stands above the noise{where}")
    n0 = floor.density
    f_bins = _refine(spectrum, k, n0)
    n = spectrum.density.size
    lo, hi = max(k - band_halfwidth_bins, 0), min(k + band_halfwidth_bins + 1, n)
    band = np.arange(lo, hi)
    captured = float(np.sum(kernel(spectrum.window, band - f_bins)))
    bw = spectrum.bin_width_hz
    power = (np.sum(spectrum.density[band]) - n0 * band.size) * bw / captured
    # Type A: scatter of the same integral over the time-ordered sub-averages.
    counts = spectrum.batch_counts.astype(float)
    per_batch = (spectrum.batch_density[:, band].sum(axis=1) - n0 * band.size) * bw / captured
    mean = np.sum(counts * per_batch) / counts.sum()
    m = per_batch.size
    var_batches = np.sum(counts * (per_batch - mean) ** 2) / (m - 1) / counts.sum()
    var_floor = (floor.u_density * band.size * bw / captured) ** 2
    u_power = float(np.sqrt(var_batches + var_floor))
    dof = (var_batches + var_floor) ** 2 / (var_batches**2 / (m - 1) + 1e-300) if var_batches > 0 else 1e6
    f0 = spectrum.frequency_hz[0] + f_bins * bw
    left, right = _half_power_points(spectrum.density - n0, k)
    # A pure line's own width: the window's kernel over the bins of its main lobe (a cosine window's
    # half-power points lie within two bins, a Kaiser's within a few).
    near = np.arange(max(k - LINE_LOBE_BINS, 0), min(k + LINE_LOBE_BINS + 1, n))
    line = np.subtract(*_half_power_points(kernel(spectrum.window, near - f_bins), k - near[0])[::-1])
    second = _second_line(spectrum, floor, k, (int(left), int(np.ceil(right))), near_hz=near_hz,
                          search_hz=search_hz)
    width = right - left
    usable, _, _ = usable_mask(spectrum, dc_halfwidth_hz=floor.dc_halfwidth_hz)
    timeline = tone_timeline(spectrum, n0, usable, (lo, hi), float(power))
    return Tone(
        offset_hz=float(f0),
        power=float(power),
        u_power=u_power,
        dof_u=float(min(dof, 1e6)),
        noise_density=float(n0),
        snr_bandwidth_hz=float(snr_bandwidth_hz),
        peak_to_floor_db=db_from_power(spectrum.density[k] / n0),
        width_hz=width * bw,
        line_width_hz=line * bw,
        second_offset_hz=None if second is None else float(spectrum.frequency_hz[second[0]]),
        second_db=None if second is None else second[1],
        timeline=timeline,
    )


def _half_power_points(y: np.ndarray, k: int) -> tuple[float, float]:
    """Where the peak of ``y`` at bin ``k`` falls to half its height either side (fractional bins,
    interpolated linearly): the -3 dB width is their difference."""
    half = 0.5 * y[k]
    left = k
    while left > 0 and y[left - 1] >= half:
        left -= 1
    right = k
    while right < y.size - 1 and y[right + 1] >= half:
        right += 1
    lo = left - (y[left] - half) / (y[left] - y[left - 1]) if left > 0 else float(left)
    hi = right + (y[right] - half) / (y[right] - y[right + 1]) if right < y.size - 1 else float(right)
    return float(lo), float(hi)


#: A line outside a band-limited floor's band counts when its bin stands this far (dB) above the
#: median of the LOCAL_BINS bins on either side of it beyond its integration band (the higher
#: side's: the edge of a noise passband stands above only one of its sides).
LINE_ELSEWHERE_DB = 10.0
LOCAL_BINS = 64


def line_elsewhere(spectrum: Psd, floor: NoiseFloor) -> float | None:
    """The offset (Hz) of the strongest bin outside the floor's band (``floor.band_hz``), clear of
    the DC spike and the band edges, that stands LINE_ELSEWHERE_DB above the median of the bins
    around it; None when there is none. For a band-limited floor taken where the strongest bins
    are (a noise passband that outshines a weaker line outside it, bin for bin)."""
    if floor.band_hz is None:
        return None
    f, d = spectrum.frequency_hz, spectrum.density
    usable, _, _ = usable_mask(spectrum, dc_halfwidth_hz=floor.dc_halfwidth_hz)
    outside = usable & ((f < floor.band_hz[0]) | (f > floor.band_hz[1]))
    if not outside.any():
        return None
    gap = BAND_HALFWIDTH_BINS + 1
    side = np.lib.stride_tricks.sliding_window_view(np.pad(d, LOCAL_BINS + gap, mode="edge"), LOCAL_BINS)
    at = np.flatnonzero(outside)
    left = np.median(side[at], axis=1)  # bins k - gap - LOCAL_BINS .. k - gap - 1
    right = np.median(side[at + LOCAL_BINS + 2 * gap + 1], axis=1)  # bins k + gap + 1 .. k + gap + LOCAL_BINS
    ratio = d[outside] / np.maximum(np.maximum(left, right), np.finfo(float).tiny)
    best = int(np.argmax(ratio))
    return float(f[outside][best]) if ratio[best] >= 10 ** (LINE_ELSEWHERE_DB / 10) else None


def _second_line(spectrum: Psd, floor: NoiseFloor, k: int, own_bins: tuple[int, int], *, near_hz=None,
                 search_hz=None):
    """(bin, dB relative to the tone at ``k``) of the strongest other peak standing above the noise
    within SECOND_LINE_DB of it, or None. Peaks are compared by the power in +/-2 bins above the
    floor (insensitive to where a line falls between bins); the DC region, the band edges and the
    tone's own peak (its -3 dB points ``own_bins`` and a bin beyond) are never candidates. A peak
    closer than the integration band's edge counts only when the density dips below half of both
    peaks between them (two lines, not the shoulder of one broad peak)."""
    f, d, n0 = spectrum.frequency_hz, spectrum.density, floor.density
    allowed = (np.abs(f) > floor.dc_halfwidth_hz) & (np.abs(f) <= floor.edge_hz)
    if near_hz is not None:
        allowed &= np.abs(f - near_hz) <= (search_hz or max(10 * spectrum.bin_width_hz, 1000.0))
    above = d > detection_threshold(spectrum.dof, int(allowed.sum()) or 1) * n0
    lo, hi = own_bins
    own = np.zeros(d.size, bool)
    own[max(lo - 1, 0) : hi + 2] = True
    candidates = allowed & above & ~own
    if not candidates.any():
        return None
    excess = np.convolve(d - n0, np.ones(5), mode="same")
    # Local maxima only: one candidate per peak.
    peaks = np.flatnonzero(candidates & (d >= np.roll(d, 1)) & (d >= np.roll(d, -1)))
    inside = (peaks >= lo - BAND_HALFWIDTH_BINS) & (peaks <= hi + BAND_HALFWIDTH_BINS)
    inside[inside] = [d[min(p, k) : max(p, k) + 1].min() >= 0.5 * min(d[p], d[k]) for p in peaks[inside]]
    peaks = peaks[~inside]  # (a peak inside the band stays when a dip separates it from the tone)
    if peaks.size == 0 or excess[k] <= 0:
        return None
    best = int(peaks[np.argmax(excess[peaks])])
    if excess[best] <= 0:
        return None
    rel = float(10 * np.log10(excess[best] / excess[k]))
    return (best, rel) if rel >= -SECOND_LINE_DB else None


@dataclass(frozen=True)
class ToneShape:
    """What a tone reading says about the signal's shape, decided once: for a reading's warnings and
    for the check after a capture (``rxbench.check``).

    ``on_fraction`` is set only when the tone is intermittent (present less than
    INTERMITTENT_BELOW of the time); ``level_change_db`` is 0 for a steady level.
    """

    on_fraction: float | None
    level_change_db: float
    drift_db_per_s: float | None
    broad: bool
    second_offset_hz: float | None
    second_db: float | None
    on_dc: bool
    varies_within_slots: bool = False

    @property
    def varies(self) -> bool:
        """Intermittent, its level changes, or it is keyed faster than the time track resolves: the
        power is an average over that."""
        return self.on_fraction is not None or self.level_change_db > 0 or self.varies_within_slots


def tone_shape(psd: Psd, floor: NoiseFloor, tone: Tone) -> ToneShape:
    """The shape findings of ``tone`` read from ``psd`` with ``floor``."""
    tl = tone.timeline
    on = tl.on_fraction if tl is not None and tl.on_fraction is not None and tl.on_fraction < INTERMITTENT_BELOW \
        else None
    return ToneShape(
        on_fraction=on,
        level_change_db=tl.level_change_db if tl is not None else 0.0,
        drift_db_per_s=tl.drift_db_per_s if tl is not None else None,
        broad=bool(tone.is_broad),
        second_offset_hz=tone.second_offset_hz,
        second_db=tone.second_db,
        on_dc=not psd.one_sided and on_dc(tone.offset_hz, psd.bin_width_hz, floor.dc_halfwidth_hz),
        varies_within_slots=tl is not None and tl.varies_within_slots,
    )
