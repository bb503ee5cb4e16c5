"""Robust noise density: tones, the DC spike and the band edges excluded; the median's bias removed.

Notes
-----
Each bin of a Welch average of Gaussian noise is distributed as S * chi2(nu)/nu, nu the equivalent
degrees of freedom. The median of that distribution is ``chi2.ppf(0.5, nu)/nu`` times the mean
(ln 2 = -1.592 dB for one periodogram); dividing the sample median by it gives an unbiased density.
Bins that stand out above the noise (tones, spurs) are excluded before the median is taken, with a
detection threshold set for a false-alarm rate of about 1 % per spectrum.

Where the floor is not flat the estimate says so and is taken from the right place:
``band_range_db`` is the spread of the floor across the usable band (up to 32 sub-bands, signals
and DC left out); beyond BAND_RANGE_DB (a band-limited recording: an audio passband, a filter in
front of the dongle) the floor is taken from the sub-bands around the strongest signal whose floor
lies within 3 dB of the floor there, and ``band_hz`` names them. ``time_range_db`` is the spread of
the floor over the capture's time-ordered sub-averages (5th to 95th percentile); beyond
MOVING_FLOOR_DB the floor is taken from the steady, quietest time (sub-averages within 1 dB of the
lowest) and ``steady_fraction`` says how much of the capture that was.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from rxbench.dsp.spectrum import Psd

#: Probability that pure noise throws any one bin over the exclusion threshold, per spectrum.
FALSE_ALARM = 0.01
#: Bins excluded either side of a detected peak (the Hann main lobe is +/-2 bins).
PEAK_GUARD_BINS = 3
#: The floor's spread across the band (dB) beyond which the floor is taken near the signals.
BAND_RANGE_DB = 6.0
#: Sub-bands whose floors are within this of the signal's own (dB) join the region used.
REGION_TOLERANCE_DB = 3.0
#: The floor's spread over time (dB) beyond which it is called moving.
MOVING_FLOOR_DB = 2.0
#: Sub-averages within this of the quietest (dB) count as the steady floor of a moving one.
STEADY_TOLERANCE_DB = 1.0


@dataclass(frozen=True)
class NoiseFloor:
    """A robust noise density estimate.

    Attributes
    ----------
    density : float
        Noise density, FS**2/Hz (unbiased for Gaussian noise).
    u_density : float
        Standard uncertainty of ``density``, FS**2/Hz.
    mask : ndarray of bool
        Bins used for the estimate.
    dc_halfwidth_hz : float
        Half-width of the region around 0 Hz left out (the dongle's DC spike).
    edge_hz : float
        Bins with |f| beyond this were left out (anti-alias roll-off).
    band_range_db : float
        Spread of the floor across the usable band, dB (0 when too few bins to tell).
    band_hz : tuple or None
        (low, high) of the bins the floor was taken from when not the whole usable band (a
        named noise band, or the region around the signals of a band-limited recording).
    band_limited : bool
        True when the floor was taken near the signals because it varies across the band.
    time_range_db : float
        Spread of the floor over the capture's time-ordered sub-averages, dB.
    steady_fraction : float
        Fraction of the capture's time the floor was taken from (1 unless the floor moved).
    """

    density: float
    u_density: float
    mask: np.ndarray
    dc_halfwidth_hz: float
    edge_hz: float
    band_range_db: float = 0.0
    band_hz: tuple | None = None
    band_limited: bool = False
    time_range_db: float = 0.0
    steady_fraction: float = 1.0

    @property
    def n_bins(self) -> int:
        return int(self.mask.sum())


def _median(x: np.ndarray) -> float:
    """Median of a non-empty 1-D array by partial sort (``np.median`` gives the same number but
    imports ``numpy.ma`` for its NaN check, 8 ms of every command's start-up)."""
    k = x.size // 2
    if x.size % 2:
        return float(np.partition(x, k)[k])
    part = np.partition(x, [k - 1, k])
    return 0.5 * (float(part[k - 1]) + float(part[k]))


def chi2_density(x: float, dof: float) -> float:
    """Density of the chi-square distribution with ``dof`` degrees of freedom at x > 0.

    The textbook form exp((k/2 - 1) ln x - x/2 - ln Gamma(k/2) - (k/2) ln 2), with the log-gamma
    function from ``scipy.special``; ``scipy.stats.chi2.pdf`` evaluates the same expression but
    scipy.stats is a far heavier import than scipy.special.
    """
    half = 0.5 * dof
    return float(np.exp(special.xlogy(half - 1.0, x) - 0.5 * x - special.gammaln(half) - half * np.log(2.0)))


def median_bias(dof: float) -> float:
    """Median / mean of chi2(dof)/dof: the factor by which a median of PSD bins reads low.

    Examples
    --------
    >>> round(10 * np.log10(median_bias(2.0)), 3)   # one periodogram: ln 2
    -1.592
    """
    if dof <= 0:
        raise ValueError(f"{dof=} must be positive")
    return float(special.chdtri(dof, 0.5) / dof)


def detection_threshold(dof: float, n_bins: int, false_alarm: float = FALSE_ALARM) -> float:
    """Ratio to the mean density above which a bin is called a signal (chi2 tail)."""
    p = false_alarm / max(n_bins, 1)
    return float(special.chdtri(dof, p) / dof)


def usable_mask(spectrum: Psd, *, edge_fraction: float = 0.1, dc_halfwidth_hz: float | None = None):
    """Bins clear of the band edges and of the DC spike; returns (mask, dc_halfwidth_hz, edge_hz)."""
    if not 0.0 <= edge_fraction < 0.5:
        raise ValueError(f"{edge_fraction=} must be in [0, 0.5)")
    f = spectrum.frequency_hz
    edge_hz = (1.0 - edge_fraction) * spectrum.sample_rate_hz / 2.0
    if dc_halfwidth_hz is None:
        dc_halfwidth_hz = 4.0 * spectrum.bin_width_hz
    mask = (np.abs(f) <= edge_hz) & (np.abs(f) > dc_halfwidth_hz)
    return mask, float(dc_halfwidth_hz), float(edge_hz)


def noise_floor(
    spectrum: Psd,
    *,
    exclude_hz=(),
    edge_fraction: float = 0.1,
    dc_halfwidth_hz: float | None = None,
    band_hz: tuple[float, float] | None = None,
    seed_hz: float | None = None,
    adaptive: bool = True,
) -> NoiseFloor:
    """Noise density of a PSD, robust to tones, the DC spike and the band edges.

    Parameters
    ----------
    spectrum : Psd
        The averaged PSD.
    exclude_hz : sequence of (low_hz, high_hz)
        Further frequency ranges to leave out.
    edge_fraction : float
        Fraction of each half-band left out at the edges (anti-alias roll-off).
    dc_halfwidth_hz : float, optional
        Half-width around 0 Hz left out; default four bins. Use 0 for real (audio) captures.
    band_hz : (low_hz, high_hz), optional
        Take the floor from these frequencies only (a named noise band).
    seed_hz : float, optional
        Where the signal of interest is, for a floor that is not flat across the band (default:
        the strongest bin).
    adaptive : bool
        False: the whole band's (or ``band_hz``'s) median over the whole capture, as for a local
        floor, with no choice of region or of steady time (the ranges are still measured).

    Returns
    -------
    NoiseFloor

    Notes
    -----
    Median of the remaining bins divided by :func:`median_bias` (chi2 with ``spectrum.dof``).
    The standard uncertainty uses the large-sample standard error of a median,
    1/(2 f(m) sqrt(n)), with n reduced by the window's ENBW (neighbouring bins are correlated).
    """
    mask, dc_hw, edge_hz = usable_mask(spectrum, edge_fraction=edge_fraction, dc_halfwidth_hz=dc_halfwidth_hz)
    f = spectrum.frequency_hz
    for low, high in exclude_hz:
        mask &= ~((f >= low) & (f <= high))
    if band_hz is not None:
        low, high = sorted(band_hz)
        mask &= (f >= low) & (f <= high)
        if mask.sum() < 8:
            raise ValueError(f"the noise band {low:g} .. {high:g} Hz holds only {int(mask.sum())} usable bins; "
                             "need at least 8")
    if mask.sum() < 8:
        raise ValueError(f"only {int(mask.sum())} bins left for the noise floor; need at least 8")
    quiet = _without_signals(spectrum.density, mask, spectrum.dof)
    band_range_db, region = _band_region(spectrum, mask, quiet, seed_hz)
    band_limited = adaptive and band_hz is None and region is not None and band_range_db > BAND_RANGE_DB
    if band_limited:
        band_hz = (float(f[region].min()), float(f[region].max()))
        mask = _without_signals(spectrum.density, mask & region, spectrum.dof)
    else:
        mask = quiet
    time_range_db, quiet, scatter_db = _time_range(spectrum, mask)
    steady_fraction = 1.0
    if adaptive and time_range_db > max(MOVING_FLOOR_DB, 5.0 * scatter_db):
        counts = spectrum.batch_counts[quiet].astype(float)
        steady_fraction = float(counts.sum() / spectrum.batch_counts.sum())
        density = counts @ spectrum.batch_density[quiet] / counts.sum()
        nu = spectrum.dof * steady_fraction
    else:
        density, nu = spectrum.density, spectrum.dof
    bias = median_bias(nu)
    level = _median(density[mask]) / bias
    n_eff = mask.sum() / (spectrum.enbw_hz / spectrum.bin_width_hz)
    u_median = _median_error(nu, n_eff)
    return NoiseFloor(
        density=level,
        u_density=float(level * u_median / bias),
        mask=mask,
        dc_halfwidth_hz=dc_hw,
        edge_hz=edge_hz,
        band_range_db=band_range_db,
        band_hz=None if band_hz is None else (float(band_hz[0]), float(band_hz[1])),
        band_limited=band_limited,
        time_range_db=time_range_db,
        steady_fraction=steady_fraction,
    )


def _median_error(nu: float, n_eff: float) -> float:
    """Standard error of the median of ``n_eff`` independent chi2(nu)/nu bins, in units of their
    mean: 1/(2 f(m) sqrt(n)), f the density of chi2(nu)/nu at its median."""
    f_at_median = chi2_density(special.chdtri(nu, 0.5), nu) * nu  # density of chi2/nu at its median
    return float(1.0 / (2.0 * f_at_median * np.sqrt(n_eff)))


def _without_signals(d: np.ndarray, mask: np.ndarray, dof: float) -> np.ndarray:
    """``mask`` less the bins that stand out above the noise (and PEAK_GUARD_BINS either side)."""
    bias = median_bias(dof)
    threshold = detection_threshold(dof, int(mask.sum()))
    for _ in range(3):
        level = _median(d[mask]) / bias
        hot = mask & (d > threshold * level)
        if not hot.any():
            break
        grown = np.convolve(hot.astype(float), np.ones(2 * PEAK_GUARD_BINS + 1), mode="same") > 0
        mask = mask & ~grown
        if mask.sum() < 8:
            raise ValueError("signals cover nearly the whole band: no bins left for the noise floor")
    return mask


def _band_region(spectrum: Psd, usable: np.ndarray, quiet: np.ndarray, seed_hz: float | None):
    """(spread of the floor across the band in dB, the bins of the region around the signal).

    The usable bins are cut into up to 32 contiguous sub-bands; each sub-band's level is the median
    of its noise bins (``quiet``: signals left out), or of all its bins when signals cover most of
    it and of its neighbour (a passband full of noise above an empty stopband is "signal" to the
    whole band's floor); a lone covered sub-band (a broad signal) has no level.
    The region starts at the sub-band of ``seed_hz`` (default: the strongest bin) and grows over
    neighbours whose level is within REGION_TOLERANCE_DB of its own; it is None when it is a
    single sub-band (a signal, not a passband) or there are too few sub-bands to tell.
    """
    index = np.flatnonzero(usable)
    n_sub = min(32, index.size // 16)
    if n_sub < 2:
        return 0.0, None
    groups = np.array_split(index, n_sub)
    covered = np.array([quiet[g].sum() < g.size / 4 for g in groups])
    # A single covered sub-band is a signal; two or more side by side, a passband.
    run = covered & (np.concatenate([[False], covered[:-1]]) | np.concatenate([covered[1:], [False]]))
    levels = np.array([_median(spectrum.density[g]) if r else _median(spectrum.density[g[quiet[g]]]) if not c
                       else np.nan for g, c, r in zip(groups, covered, run)])
    known = np.isfinite(levels)
    if known.sum() < 2 or not np.all(levels[known] > 0):
        return 0.0, None
    band_range_db = float(10 * np.log10(levels[known].max() / levels[known].min()))
    if seed_hz is None:
        peak = int(index[np.argmax(spectrum.density[index])])
    else:
        peak = spectrum.index_of(seed_hz)
    start = min(np.flatnonzero(known), key=lambda j: abs(int(groups[j][groups[j].size // 2]) - peak))
    near = lambda j: known[j] and abs(10 * np.log10(levels[j] / levels[start])) <= REGION_TOLERANCE_DB  # noqa: E731
    lo = hi = start
    while lo > 0 and near(lo - 1):
        lo -= 1
    while hi < n_sub - 1 and near(hi + 1):
        hi += 1
    if hi == lo:
        return band_range_db, None
    region = np.zeros_like(usable)
    region[groups[lo][0] : groups[hi][-1] + 1] = True
    return band_range_db, region & usable


def level_movement(spectrum: Psd, mask: np.ndarray) -> tuple[float, float]:
    """How far the noise level in ``mask`` moves over the capture: (the 5-95 % spread of the
    time-ordered sub-averages' levels, dB; the scatter one sub-average's level has from the noise
    alone, dB). A noise source switched during the capture, a gain step or a loose connector moves
    it far beyond the scatter."""
    spread, _, scatter = _time_range(spectrum, mask)
    return spread, scatter


def _time_range(spectrum: Psd, mask: np.ndarray) -> tuple[float, np.ndarray, float]:
    """(spread of the floor over the time-ordered sub-averages in dB, the steady quiet ones, the
    standard error of one sub-average's floor in dB).

    Each sub-average's floor is the median of its noise bins over that median's bias for its own
    degrees of freedom; the spread is from the 5th to the 95th percentile.
    """
    counts = spectrum.batch_counts
    # Sub-averages with under half the usual segments (the capture's last, or one mostly of
    # exactly-zero samples, whose few segments may straddle a run's edge) do not judge the floor.
    whole = counts >= 0.5 * np.median(counts)
    rows = spectrum.batch_density[whole][:, mask]
    if len(rows) < 2:
        return 0.0, np.ones(len(counts), bool), 0.0
    dof = np.maximum(spectrum.dof * counts[whole] / counts.sum(), 0.5)
    levels = np.array([_median(r) / median_bias(nu) for r, nu in zip(rows, dof)])
    if not np.all(levels > 0):
        return 0.0, np.ones(len(counts), bool), 0.0
    db = 10 * np.log10(levels)
    spread = float(np.percentile(db, 95) - np.percentile(db, 5))
    n_eff = mask.sum() / (spectrum.enbw_hz / spectrum.bin_width_hz)
    scatter_db = 10 / np.log(10) * _median_error(float(np.median(dof)), n_eff)
    quiet = np.zeros(len(counts), bool)
    quiet[np.flatnonzero(whole)[db <= db.min() + STEADY_TOLERANCE_DB]] = True
    return spread, quiet, float(scatter_db)
