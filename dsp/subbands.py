"""Mean noise density of spectra over common sub-bands of their usable band, with the degrees of
freedom of each mean (neighbouring bins of a windowed DFT are correlated).

References
----------
Welch, P. D., IEEE Trans. Audio Electroacoust. AU-15(2), 1967 (degrees of freedom of a PSD).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from rxbench.dsp.lines import in_intervals
from rxbench.dsp.floor import usable_mask
from rxbench.dsp.spectrum import Psd, band_power
from rxbench.dsp.units import power_from_db

#: Sub-bands across a capture's usable band, for every noise-source curve (``rxbench nf``, a session,
#: the Python API; the sweep planner overlaps neighbouring tunings by one of them). Resolution
#: against uncertainty: a sub-band's degrees of freedom grow with its width, so its standard
#: uncertainty grows as sqrt(N); 8 sub-bands of a 2.4 MS/s capture are 240 kHz wide, finer than the
#: slope of the transformers, splitters and band filters this tool is for, at 0.71 times the
#: uncertainty of 16. ``--sub-bands`` asks for more where a narrow filter's skirt needs them.
N_SUB_BANDS = 8


def band_dof(dof_per_bin, n_bins, window) -> np.ndarray:
    """Equivalent degrees of freedom of the mean density over ``n_bins`` neighbouring PSD bins.

    Parameters
    ----------
    dof_per_bin : float
        Degrees of freedom of one bin of the averaged PSD (``Psd.dof``).
    n_bins : int or array_like
        Contiguous bins averaged.
    window : ndarray
        The DFT window the PSD was made with (``Psd.window``).

    Returns
    -------
    ndarray or float
        nu_band = nu * n^2 / [n + 2*sum_{m=1}^{n-1} (n - m)*rho(m)^2].

    Notes
    -----
    Neighbouring bins of a windowed DFT of white noise are correlated; the correlation of bins m
    apart is rho(m) = |sum w^2 exp(-2j*pi*m*k/N)| / sum w^2 (Hann: 2/3 at m = 1, 1/6 at m = 2), and
    the power estimates are correlated by rho^2. Time overlap is already in ``dof_per_bin``; taking
    the two as separable is an approximation good to a few per cent for Hann at 50 % overlap.
    """
    w2 = np.asarray(window, dtype=float) ** 2
    rho2 = (np.abs(np.fft.fft(w2)) / w2.sum()) ** 2
    scalar = np.ndim(n_bins) == 0
    n = np.atleast_1d(np.asarray(n_bins, dtype=float))
    out = np.zeros_like(n)
    for i, ni in enumerate(n):
        if ni < 1:
            out[i] = 0.0
            continue
        # Lags beyond N/2 would only meet again round the circle (through +/-fs/2, which the
        # usable band never spans).
        m = np.arange(1, int(min(ni, w2.size // 2)))
        out[i] = dof_per_bin * ni**2 / (ni + 2.0 * np.sum((ni - m) * rho2[m]))
    return float(out[0]) if scalar else out


@dataclass(frozen=True)
class SubBands:
    """Mean densities of several spectra over common sub-bands (offsets from the centre, Hz).

    Attributes
    ----------
    low_hz, high_hz, center_hz : ndarray
        Sub-band limits and centres; the last entry of each array is the whole usable band.
    density : list of ndarray
        Per spectrum: mean density over the usable bins of each sub-band (FS**2/Hz).
    dof : list of ndarray
        Per spectrum: degrees of freedom of each mean (:func:`band_dof`).
    n_bins : list of ndarray
        Per spectrum: bins in each sub-band.
    enr : ndarray
        ENR (linear) of each sub-band, weighted by the first spectrum's density.
    """

    low_hz: np.ndarray
    high_hz: np.ndarray
    center_hz: np.ndarray
    density: list
    dof: list
    n_bins: list
    enr: np.ndarray


def sub_band_densities(spectra: Sequence[Psd], *, n_sub_bands: int = N_SUB_BANDS, edge_fraction: float = 0.1,
                       dc_halfwidth_hz: float | None = None, enr_db=None, exclude_hz=()) -> SubBands:
    """Mean density of each spectrum over ``n_sub_bands`` equal sub-bands of the common usable band.

    Parameters
    ----------
    spectra : sequence of Psd
        Spectra to compare (e.g. cold, hot, cold through the DUT, hot through the DUT). They may
        differ in sample rate and segment length: the sub-bands are fixed in Hz.
    n_sub_bands : int
        Number of sub-bands across the usable band.
    edge_fraction, dc_halfwidth_hz
        Band edges and DC spike left out, as in :func:`dsp.floor.usable_mask` (the widest
        exclusion among the spectra applies to all).
    enr_db : float or callable, optional
        ENR in dB, constant or a function of offset frequency (Hz, array) -> dB. Each sub-band's
        ENR is its mean weighted by the first spectrum's density (the cold one), which is exact
        when the receiver's noise temperature is flat over the sub-band.
    exclude_hz : array_like of (low, high), optional
        Closed frequency intervals left out of every spectrum (narrow lines,
        :func:`rxbench.dsp.lines.find_lines`).

    Returns
    -------
    SubBands
        The last entry of every array is the whole usable band.

    Notes
    -----
    Uses :func:`dsp.spectrum.band_power` on each spectrum: mean density = integral of the masked
    density / integral of the mask. Sub-band intervals are half-open [low, high) except the last.
    """
    if not spectra:
        raise ValueError("need at least one spectrum")
    n_sub_bands = int(n_sub_bands)
    if n_sub_bands < 1:
        raise ValueError(f"{n_sub_bands=} must be >= 1")
    masks, dc_hw, edge = [], 0.0, np.inf
    for s in spectra:
        m, d, e = usable_mask(s, edge_fraction=edge_fraction, dc_halfwidth_hz=dc_halfwidth_hz)
        masks.append(m)
        dc_hw, edge = max(dc_hw, d), min(edge, e)
    one_sided = any(s.one_sided for s in spectra)
    masks = [m & (np.abs(s.frequency_hz) <= edge) & (np.abs(s.frequency_hz) > dc_hw)
             & ~in_intervals(s.frequency_hz, exclude_hz) for m, s in zip(masks, spectra)]
    low_edge = dc_hw if one_sided else -edge
    edges = np.linspace(low_edge, edge, n_sub_bands + 1)
    low = np.append(edges[:-1], low_edge)
    high = np.append(edges[1:], edge)
    # Half-open sub-bands so that a bin on an edge is counted once.
    high_open = np.append(np.nextafter(edges[1:-1], -np.inf), [edge, edge])

    def means(s, mask, values):
        num = np.array([band_power(s, lo, hi, density=values * mask) for lo, hi in zip(low, high_open)])
        den = np.array([band_power(s, lo, hi, density=mask.astype(float)) for lo, hi in zip(low, high_open)])
        return num, den

    density, dof, n_bins = [], [], []
    for s, mask in zip(spectra, masks):
        num, den = means(s, mask, s.density)
        n = np.rint(den / s.bin_width_hz)
        if np.any(n < 1):
            raise ValueError(
                f"a sub-band holds no usable bins ({n_sub_bands=} is too many for "
                f"{s.bin_width_hz:g} Hz bins)")
        density.append(num / den)
        n_bins.append(n.astype(int))
        dof.append(np.asarray(band_dof(s.dof, n, s.window), dtype=float).reshape(n.shape))
    if enr_db is None:
        enr = np.full(low.size, np.nan)
    else:
        s0, m0 = spectra[0], masks[0]
        enr_bins = power_from_db(enr_db(s0.frequency_hz) if callable(enr_db)
                                 else np.full(s0.frequency_hz.shape, float(enr_db)))
        weighted, _ = means(s0, m0, s0.density * enr_bins)
        plain, _ = means(s0, m0, s0.density)
        enr = weighted / plain
    return SubBands(low_hz=low, high_hz=high, center_hz=(low + high) / 2.0, density=density, dof=dof,
                    n_bins=n_bins, enr=enr)
