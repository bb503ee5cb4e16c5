"""Robust noise density: tones, the DC spike and the band edges excluded; the median's bias removed.

Notes
-----
Each bin of a Welch average of Gaussian noise is distributed as S * chi2(nu)/nu, nu the equivalent
degrees of freedom. The median of that distribution is ``chi2.ppf(0.5, nu)/nu`` times the mean
(ln 2 = -1.592 dB for one periodogram); dividing the sample median by it gives an unbiased density.
Bins that stand out above the noise (tones, spurs) are excluded before the median is taken, with a
detection threshold set for a false-alarm rate of about 1 % per spectrum.
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
    """

    density: float
    u_density: float
    mask: np.ndarray
    dc_halfwidth_hz: float
    edge_hz: float

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
    if mask.sum() < 8:
        raise ValueError(f"only {int(mask.sum())} bins left for the noise floor; need at least 8")
    d = spectrum.density
    bias = median_bias(spectrum.dof)
    threshold = detection_threshold(spectrum.dof, int(mask.sum()))
    for _ in range(3):
        level = _median(d[mask]) / bias
        hot = mask & (d > threshold * level)
        if not hot.any():
            break
        grown = np.convolve(hot.astype(float), np.ones(2 * PEAK_GUARD_BINS + 1), mode="same") > 0
        mask = mask & ~grown
        if mask.sum() < 8:
            raise ValueError("signals cover nearly the whole band: no bins left for the noise floor")
    level = _median(d[mask]) / bias
    nu = spectrum.dof
    # Density of chi2(nu)/nu at its median, times the noise level: f(m) for the standard error.
    f_at_median = chi2_density(special.chdtri(nu, 0.5), nu) * nu  # density of chi2/nu at its median
    n_eff = mask.sum() / (spectrum.enbw_hz / spectrum.bin_width_hz)
    u_median = 1.0 / (2.0 * f_at_median * np.sqrt(n_eff))  # in units of the mean
    return NoiseFloor(
        density=level,
        u_density=float(level * u_median / bias),
        mask=mask,
        dc_halfwidth_hz=dc_hw,
        edge_hz=edge_hz,
    )
