"""Noise figure: Y-factor, second-stage correction, Friis cascade, passive loss, gain method, and the
noise-source loss of a device bin by bin.

A broadband noise source switched between a hot and a cold state gives, from the ratio of the two
noise powers (the Y-factor), the receive system's noise factor. With a device under test (DUT) in
front of the receiver, the change of the hot-minus-cold excess gives the DUT's gain at every
frequency in the capture (its insertion loss), and the second-stage correction gives the DUT's own
noise figure. A tone of known absolute level gives the noise figure without a noise source (the
gain method).

Noise powers here are linear and may be in any unit (full-scale power per Hz, say) as long as the
numbers compared share it; noise factors and gains are linear; dB only in the ``*_db`` views.

References
----------
Friis, H. T., "Noise figures of radio receivers", Proc. IRE 32(7), 1944.
Bedrosian, E., "The output noise temperature of a lossy network", RAND, 1960.
Pozar, D. M., *Microwave Engineering*, noise chapter (Y-factor method) [from memory].
Welch, P. D., IEEE Trans. Audio Electroacoust. AU-15(2), 1967 (degrees of freedom of a PSD).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from rxbench.dsp.floor import usable_mask
from rxbench.dsp.spectrum import Psd, band_power
from rxbench.dsp.units import KT0_DBM_PER_HZ, T0_K, db_from_power, power_from_db, scalar_or_array

_DB_PER_NEPER = 10.0 / np.log(10.0)  # dB per unit of relative power change




def _positive(name: str, value):
    v = np.asarray(value, dtype=float)
    if np.any(~np.isfinite(v)) or np.any(v <= 0):
        raise ValueError(f"{name}={value!r} must be finite and > 0")
    return v


# --------------------------------------------------------------------------------------------------
# Formulas
# --------------------------------------------------------------------------------------------------


def noise_factor_from_y(y, enr, *, t_cold_k=T0_K):
    """Noise factor of a receiver from the Y-factor of a noise source.

    Parameters
    ----------
    y : float or array_like
        Y = N_hot / N_cold, linear power ratio (> 1).
    enr : float or array_like
        Excess noise ratio of the source, linear: ENR = (T_hot - T0)/T0.
    t_cold_k : float or array_like
        Physical temperature of the source in its cold state, K.

    Returns
    -------
    float or ndarray
        Noise factor F (linear).

    Notes
    -----
    From Te = (T_hot - Y*T_cold)/(Y - 1) and F = 1 + Te/T0:
    F = [ENR - Y*(T_cold/T0 - 1)] / (Y - 1); with T_cold = T0, NF = ENR_dB - 10*log10(Y - 1).

    References
    ----------
    Pozar, *Microwave Engineering*, noise chapter (Y-factor method) [from memory].

    Examples
    --------
    >>> round(float(db_from_power(noise_factor_from_y(10.0, power_from_db(15.0)))), 3)
    5.458
    """
    y = _positive("y", y)
    enr = _positive("enr", enr)
    t_cold = _positive("t_cold_k", t_cold_k)
    if np.any(y <= 1.0):
        raise ValueError(f"y={y!r} must be > 1: the hot reading must exceed the cold one")
    return scalar_or_array((enr - y * (t_cold / T0_K - 1.0)) / (y - 1.0))


def y_sensitivity(y, enr, *, t_cold_k=T0_K):
    """How many dB the noise figure moves per dB of error in Y: d(NF_dB)/d(Y_dB) (negative).

    Notes
    -----
    dF/dY = -(F + T_cold/T0 - 1)/(Y - 1), so d(ln F)/d(ln Y) = -(F + T_cold/T0 - 1)*Y/((Y - 1)*F).
    It grows without bound as Y -> 1: a small Y makes every error in Y (drift, averaging, a
    mismatch that changes between the hot and cold states) a large error in NF.
    """
    f = np.asarray(noise_factor_from_y(y, enr, t_cold_k=t_cold_k), dtype=float)
    y = np.asarray(y, dtype=float)
    return scalar_or_array(-(f + np.asarray(t_cold_k, dtype=float) / T0_K - 1.0) * y / ((y - 1.0) * f))


def second_stage_correction(f_cascade, f_second, gain_first):
    """Noise factor of a first stage from the cascade's and the second stage's (Friis, solved for F1).

    Parameters
    ----------
    f_cascade : float or array_like
        Noise factor of stage 1 followed by stage 2, linear.
    f_second : float or array_like
        Noise factor of stage 2 alone, linear.
    gain_first : float or array_like
        Available gain of stage 1, linear (< 1 for a loss).

    Returns
    -------
    float or ndarray
        F1 = F12 - (F2 - 1)/G1.

    References
    ----------
    Friis, Proc. IRE 32, 1944.
    """
    g = _positive("gain_first", gain_first)
    return scalar_or_array(np.asarray(f_cascade, dtype=float) - (np.asarray(f_second, dtype=float) - 1.0) / g)


def friis_noise_factor(noise_factors: Sequence[float], gains: Sequence[float]) -> float:
    """Noise factor of a cascade: F = F1 + (F2 - 1)/G1 + (F3 - 1)/(G1*G2) + ...

    Parameters
    ----------
    noise_factors : sequence of float
        Noise factor of each stage in signal order, linear (>= 1).
    gains : sequence of float
        Available gain of each stage, linear; the last stage's gain may be left out.

    Returns
    -------
    float
        Noise factor of the cascade, linear.

    References
    ----------
    Friis, "Noise figures of radio receivers", Proc. IRE 32, 1944.

    Examples
    --------
    >>> round(float(db_from_power(friis_noise_factor([power_from_db(1), power_from_db(10)],
    ...                                               [power_from_db(20)]))), 2)
    1.3
    """
    f = np.asarray(noise_factors, dtype=float)
    g = np.asarray(gains, dtype=float)
    if f.ndim != 1 or f.size == 0:
        raise ValueError(f"noise_factors={noise_factors!r} must be a non-empty sequence")
    if np.any(~np.isfinite(f)) or np.any(f < 1.0):
        raise ValueError(f"noise_factors={noise_factors!r} must all be finite and >= 1")
    if g.ndim != 1 or g.size not in (f.size - 1, f.size):
        raise ValueError(f"gains={gains!r} must have {f.size - 1} or {f.size} entries")
    if g.size:
        _positive("gains", g)
    preceding = np.concatenate([[1.0], np.cumprod(g[: f.size - 1])])
    return float(f[0] + np.sum((f[1:] - 1.0) / preceding[1:]))


def passive_noise_factor(loss, temperature_k=T0_K):
    """Noise factor of a matched passive loss at a physical temperature: F = 1 + (L - 1)*T/T0.

    Parameters
    ----------
    loss : float or array_like
        Loss L as a power ratio >= 1 (3 dB -> 1.995).
    temperature_k : float or array_like
        Physical temperature of the loss, K.

    Returns
    -------
    float or ndarray
        Noise factor, linear (= L at T0).

    References
    ----------
    Bedrosian, "The output noise temperature of a lossy network", RAND, 1960.
    """
    loss = np.asarray(loss, dtype=float)
    if np.any(~np.isfinite(loss)) or np.any(loss < 1.0):
        raise ValueError(f"loss={loss!r} must be a power ratio >= 1")
    t = _positive("temperature_k", temperature_k)
    return scalar_or_array(1.0 + (loss - 1.0) * t / T0_K)


def nf_gain_method_db(level_dbm, cn0_dbhz):
    """Noise figure from a tone of known absolute level: NF = P_in - C/N0 - kT0 (dB).

    Parameters
    ----------
    level_dbm : float or array_like
        Tone level at the receiver's input, dBm (source terminated at T0).
    cn0_dbhz : float or array_like
        Measured carrier-to-noise-density ratio, dB-Hz.

    Returns
    -------
    float or ndarray
        Noise figure, dB. Equivalently P_in - SNR - 10*log10(B) + 173.975 with B the noise bandwidth.

    References
    ----------
    REFERENCES.md, "Gain method and known-signal method"; kT0 from CODATA k (scipy.constants).
    """
    return scalar_or_array(np.asarray(level_dbm, dtype=float) - np.asarray(cn0_dbhz, dtype=float) - KT0_DBM_PER_HZ)


def dut_gain(n_hot_dut, n_cold_dut, n_hot, n_cold):
    """Gain of a DUT from the noise-source excess with and without it: G = (Nh,dut - Nc,dut)/(Nh - Nc).

    Valid when the DUT's own noise is the same in both states of the source (it is: the source
    only changes what enters the DUT), and the receiver is linear. Any units, shared by all four.
    """
    d1 = np.asarray(n_hot_dut, dtype=float) - np.asarray(n_cold_dut, dtype=float)
    d2 = np.asarray(n_hot, dtype=float) - np.asarray(n_cold, dtype=float)
    if np.any(d2 <= 0):
        raise ValueError("the hot reading without the DUT does not exceed the cold one")
    if np.any(d1 <= 0):
        raise ValueError("the hot reading through the DUT does not exceed the cold one")
    return scalar_or_array(d1 / d2)


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


def _propagate(func: Callable, values: Sequence, rel_u: Sequence):
    """Standard uncertainty of func(*values) for independent inputs with relative uncertainties.

    Sensitivities by central differences in log space (step 1e-6), combined per GUM (JCGM 100:2008).
    """
    values = [np.asarray(v, dtype=float) for v in values]
    total = 0.0
    for i, (v, u) in enumerate(zip(values, rel_u)):
        u = np.asarray(u, dtype=float)
        if not np.any(u):
            continue
        h = 1e-6
        up = list(values)
        dn = list(values)
        up[i] = v * (1.0 + h)
        dn[i] = v * (1.0 - h)
        sens = (np.asarray(func(*up)) - np.asarray(func(*dn))) / (2.0 * h)  # d f / d ln x
        total = total + (sens * u) ** 2
    return scalar_or_array(np.sqrt(total))


def _rel_u(dof):
    """Relative standard uncertainty of a chi2(dof)/dof power estimate: sqrt(2/dof)."""
    d = np.asarray(dof, dtype=float)
    with np.errstate(divide="ignore"):
        return np.where(np.isfinite(d), np.sqrt(2.0 / d), 0.0)


# --------------------------------------------------------------------------------------------------
# Results with uncertainty
# --------------------------------------------------------------------------------------------------


class _NoiseFactorDb:
    """dB views of ``noise_factor`` and ``u_noise_factor``, shared by the noise-figure results."""

    @property
    def nf_db(self):
        return db_from_power(np.maximum(self.noise_factor, 0.0))

    @property
    def u_nf_db(self):
        return scalar_or_array(_DB_PER_NEPER * np.asarray(self.u_noise_factor) / np.asarray(self.noise_factor))


@dataclass(frozen=True)
class YFactor(_NoiseFactorDb):
    """Y-factor result, scalar or per sub-band (arrays).

    Attributes
    ----------
    y : float or ndarray
        N_hot / N_cold, linear.
    enr : float or ndarray
        ENR used, linear.
    t_cold_k : float
        Cold-state temperature, K.
    noise_factor, u_noise_factor : float or ndarray
        Noise factor F and its standard uncertainty (averaging and ENR), linear.
    """

    y: object
    enr: object
    t_cold_k: float
    noise_factor: object
    u_noise_factor: object

    @property
    def y_db(self):
        return db_from_power(self.y)

    @property
    def enr_db(self):
        return db_from_power(self.enr)

    @property
    def noise_temperature_k(self):
        return scalar_or_array(T0_K * (np.asarray(self.noise_factor) - 1.0))

    @property
    def u_noise_temperature_k(self):
        return scalar_or_array(T0_K * np.asarray(self.u_noise_factor))


def y_factor(n_hot, n_cold, enr, *, t_cold_k=T0_K, dof_hot=np.inf, dof_cold=np.inf, u_enr_db=0.0):
    """Y-factor noise factor with its standard uncertainty.

    Parameters
    ----------
    n_hot, n_cold : float or array_like
        Noise power (or mean density) with the source hot and cold, any shared linear unit.
    enr : float or array_like
        ENR, linear.
    t_cold_k : float
        Cold-state temperature, K.
    dof_hot, dof_cold : float or array_like
        Equivalent degrees of freedom of each reading (inf: exact).
    u_enr_db : float
        Standard uncertainty of the ENR, dB.

    Returns
    -------
    YFactor

    Notes
    -----
    F = [ENR - Y*(T_cold/T0 - 1)]/(Y - 1). Each reading is chi2(nu)/nu distributed, relative
    standard uncertainty sqrt(2/nu); u(Y)/Y = sqrt(2/nu_hot + 2/nu_cold); u(F) combines
    dF/dY = -(F + T_cold/T0 - 1)/(Y - 1) and dF/dENR = 1/(Y - 1) per GUM (JCGM 100:2008).
    """
    n_hot = _positive("n_hot", n_hot)
    n_cold = _positive("n_cold", n_cold)
    y = n_hot / n_cold
    f = noise_factor_from_y(y, enr, t_cold_k=t_cold_k)
    u_enr_rel = float(u_enr_db) / _DB_PER_NEPER

    def model(h, c, e):
        return (e - (h / c) * (t_cold_k / T0_K - 1.0)) / (h / c - 1.0)

    u_f = _propagate(model, [n_hot, n_cold, np.asarray(enr, dtype=float)],
                     [_rel_u(dof_hot), _rel_u(dof_cold), u_enr_rel])
    return YFactor(y=scalar_or_array(y), enr=scalar_or_array(enr), t_cold_k=float(t_cold_k), noise_factor=f, u_noise_factor=u_f)


@dataclass(frozen=True)
class DutFromNoise(_NoiseFactorDb):
    """A DUT measured with a noise source: gain (insertion loss) and its own noise factor.

    Attributes
    ----------
    gain, u_gain : float or ndarray
        Available gain of the DUT (< 1 for a loss) and its standard uncertainty, linear.
    noise_factor, u_noise_factor : float or ndarray
        The DUT's own noise factor by the second-stage correction, and its standard uncertainty.
    system : YFactor
        The Y-factor of the DUT followed by the receiver.
    """

    gain: object
    u_gain: object
    noise_factor: object
    u_noise_factor: object
    system: YFactor

    @property
    def insertion_loss_db(self):
        return scalar_or_array(-np.asarray(db_from_power(self.gain)))

    @property
    def u_insertion_loss_db(self):
        return scalar_or_array(_DB_PER_NEPER * np.asarray(self.u_gain) / np.asarray(self.gain))



def dut_from_noise(n_hot, n_cold, n_hot_dut, n_cold_dut, enr, *, t_cold_k=T0_K,
                   dof=(np.inf, np.inf, np.inf, np.inf), u_enr_db=0.0) -> DutFromNoise:
    """Gain and noise factor of a DUT from hot/cold readings without and with it in the path.

    Parameters
    ----------
    n_hot, n_cold : float or array_like
        Readings of the receiver alone (source hot, cold).
    n_hot_dut, n_cold_dut : float or array_like
        Readings with the DUT between source and receiver.
    enr : float or array_like
        ENR, linear.
    t_cold_k : float
        Cold-state temperature, K.
    dof : 4-tuple
        Degrees of freedom of the four readings, in the order above.
    u_enr_db : float
        Standard uncertainty of the ENR, dB (common to both Y-factors).

    Returns
    -------
    DutFromNoise

    Notes
    -----
    G = (Nh,dut - Nc,dut)/(Nh - Nc); F12 and F2 by the Y-factor; F1 = F12 - (F2 - 1)/G (Friis).
    Uncertainties propagate from the four independent readings and the ENR, so the correlation of
    G with F12 and F2 (they share readings) is kept.
    """
    readings = [_positive(name, v) for name, v in
                (("n_hot", n_hot), ("n_cold", n_cold), ("n_hot_dut", n_hot_dut), ("n_cold_dut", n_cold_dut))]
    enr = _positive("enr", enr)
    gain = dut_gain(readings[2], readings[3], readings[0], readings[1])
    f2 = noise_factor_from_y(readings[0] / readings[1], enr, t_cold_k=t_cold_k)
    system = y_factor(readings[2], readings[3], enr, t_cold_k=t_cold_k, dof_hot=dof[2], dof_cold=dof[3],
                      u_enr_db=u_enr_db)
    f1 = second_stage_correction(system.noise_factor, f2, gain)

    def model_f1(h, c, hd, cd, e):
        ratio = t_cold_k / T0_K - 1.0
        f12 = (e - hd / cd * ratio) / (hd / cd - 1.0)
        f2_ = (e - h / c * ratio) / (h / c - 1.0)
        return f12 - (f2_ - 1.0) * (h - c) / (hd - cd)

    rel = [_rel_u(d) for d in dof] + [float(u_enr_db) / _DB_PER_NEPER]
    u_f1 = _propagate(model_f1, readings + [enr], rel)
    u_g = _propagate(lambda h, c, hd, cd: (hd - cd) / (h - c), readings, rel[:4])
    return DutFromNoise(gain=gain, u_gain=u_g, noise_factor=f1, u_noise_factor=u_f1, system=system)


# --------------------------------------------------------------------------------------------------
# From spectra: the usable band, sub-bands, and stitching several centre frequencies
# --------------------------------------------------------------------------------------------------


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


def sub_band_densities(spectra: Sequence[Psd], *, n_sub_bands: int = 16, edge_fraction: float = 0.1,
                       dc_halfwidth_hz: float | None = None, enr_db=None) -> SubBands:
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
             for m, s in zip(masks, spectra)]
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


def stitch_masks(center_hz: Sequence[float], frequency_hz: Sequence, coverage_hz: Sequence) -> list:
    """Which points of several curves to keep when stitching them into one across frequency.

    Parameters
    ----------
    center_hz : sequence of float
        Centre (tuning) frequency of each capture, Hz.
    frequency_hz : sequence of array_like
        Absolute frequencies of each curve's points, Hz.
    coverage_hz : sequence of (low_hz, high_hz)
        Usable range of each capture, absolute Hz.

    Returns
    -------
    list of ndarray of bool
        Per curve, the points to keep: a point is dropped when another capture that also covers it
        is tuned closer to it (ties go to the earlier capture). Overlapping edges are thereby
        trimmed at the midpoint between neighbouring centres, where each capture is furthest from
        its own band edge.
    """
    centers = np.asarray(center_hz, dtype=float)
    if not (len(centers) == len(frequency_hz) == len(coverage_hz)):
        raise ValueError("center_hz, frequency_hz and coverage_hz must have one entry per capture")
    keep = []
    for i, f in enumerate(frequency_hz):
        f = np.asarray(f, dtype=float)
        mask = np.ones(f.shape, dtype=bool)
        di = np.abs(f - centers[i])
        for j, (lo, hi) in enumerate(coverage_hz):
            if j == i:
                continue
            covered = (f >= lo) & (f <= hi)
            dj = np.abs(f - centers[j])
            closer = (dj < di) | ((dj == di) & (j < i))
            mask &= ~(covered & closer)
        keep.append(mask)
    return keep


def stitch_offsets(center_hz: Sequence[float], offset_hz: Sequence, band_hz: Sequence) -> tuple[list, list]:
    """Absolute frequencies of sub-bands measured at several tunings, and which to keep in one curve.

    Parameters
    ----------
    center_hz : sequence of float
        Centre (tuning) frequency of each capture, Hz.
    offset_hz : sequence of array_like
        Per tuning, the sub-band centres as offsets from its centre frequency, Hz.
    band_hz : sequence of (low_hz, high_hz)
        Per tuning, its usable band as offsets from its centre frequency, Hz.

    Returns
    -------
    frequency_hz : list of ndarray
        Per tuning, the absolute sub-band centres, Hz.
    keep : list of ndarray of bool
        Per tuning, the sub-bands to keep (:func:`stitch_masks`: each frequency from the capture tuned
        closest to it).
    """
    centers = [float(c) for c in center_hz]
    freqs = [c + np.asarray(o, dtype=float) for c, o in zip(centers, offset_hz)]
    cover = [(c + float(lo), c + float(hi)) for c, (lo, hi) in zip(centers, band_hz)]
    return freqs, stitch_masks(centers, freqs, cover)


# --------------------------------------------------------------------------------------------------
# A noise-source measurement from its spectra
# --------------------------------------------------------------------------------------------------


def _where(func: Callable, valid: np.ndarray, n_out: int, *arrays) -> list:
    """``func`` applied to the elements where ``valid`` (arrays indexed, scalars passed as they are);
    NaN elsewhere. Returns ``n_out`` arrays shaped like ``valid``."""
    outs = [np.full(valid.shape, np.nan) for _ in range(n_out)]
    if valid.any():
        res = func(*[np.asarray(a)[valid] if np.ndim(a) else a for a in arrays])
        for o, r in zip(outs, res):
            o[valid] = r
    return outs


@dataclass(frozen=True)
class NoiseSourceResult:
    """A noise-source measurement at one tuning, per sub-band; the last entry of every array is the
    whole usable band.

    Attributes
    ----------
    low_hz, high_hz, center_hz : ndarray
        Sub-band limits and centres, offsets from the centre frequency, Hz.
    enr : ndarray
        ENR of each sub-band, linear.
    t_cold_k, u_enr_db : float
        Cold-state temperature (K) and the ENR's standard uncertainty (dB) used.
    n_cold, n_hot : ndarray
        Mean density of the pooled cold and hot captures (FS**2/Hz).
    dof_cold, dof_hot : ndarray
        Their degrees of freedom.
    valid : ndarray of bool
        Sub-bands where the cold reading is above zero and the hot one above it: the Y-factor
        exists there.
    receiver : YFactor
        The receive system's Y-factor and noise factor, arrays; NaN where not ``valid``.
    n_cold_dut, n_hot_dut, dof_cold_dut, dof_hot_dut : ndarray or None
        The same for the captures through the DUT (None without them).
    valid_dut : ndarray of bool or None
        Sub-bands ``valid`` where the hot reading through the DUT is also above the cold one.
    dut : DutFromNoise or None
        The DUT's gain and noise factor, arrays; NaN where not ``valid_dut``. Its ``system`` is the
        Y-factor through the DUT.
    """

    low_hz: np.ndarray
    high_hz: np.ndarray
    center_hz: np.ndarray
    enr: np.ndarray
    t_cold_k: float
    u_enr_db: float
    n_cold: np.ndarray
    n_hot: np.ndarray
    dof_cold: np.ndarray
    dof_hot: np.ndarray
    valid: np.ndarray
    receiver: YFactor
    n_cold_dut: np.ndarray | None = None
    n_hot_dut: np.ndarray | None = None
    dof_cold_dut: np.ndarray | None = None
    dof_hot_dut: np.ndarray | None = None
    valid_dut: np.ndarray | None = None
    dut: DutFromNoise | None = None


def noise_source_analysis(cold: Sequence[Psd], hot: Sequence[Psd], cold_dut: Sequence[Psd] = (),
                          hot_dut: Sequence[Psd] = (), *, enr_db, n_sub_bands: int = 16, t_cold_k=T0_K,
                          u_enr_db: float = 0.0, dc_halfwidth_hz: float | None = None,
                          edge_fraction: float = 0.1) -> NoiseSourceResult:
    """Y-factor noise figure per sub-band, and with captures through a DUT its gain and noise figure.

    Parameters
    ----------
    cold, hot : sequence of Psd
        Spectra of the receiver alone with the source off and on; repeated captures of one state
        are pooled.
    cold_dut, hot_dut : sequence of Psd, optional
        Spectra with the DUT between the source and the receiver; both or neither.
    enr_db : float or callable
        ENR in dB, constant or a function of offset frequency (Hz, array) -> dB
        (:func:`sub_band_densities`).
    n_sub_bands : int
        Sub-bands across the common usable band.
    t_cold_k : float
        Physical temperature of the source when off, K.
    u_enr_db : float
        Standard uncertainty of the ENR, dB.
    dc_halfwidth_hz, edge_fraction
        DC spike and band edges left out (:func:`dsp.floor.usable_mask`).

    Returns
    -------
    NoiseSourceResult

    Raises
    ------
    ValueError
        A sub-band holds no usable bin (too many sub-bands), a state has no spectrum, or only one of
        the two DUT states is given.

    Notes
    -----
    Each spectrum's mean density per sub-band comes from :func:`sub_band_densities` (ENR weighted
    by the first cold spectrum's density). Repeats of one state are pooled as the mean density,
    whose degrees of freedom are the sum of theirs (independent chi-squared estimates of one
    density). Then :func:`y_factor`, F = [ENR - Y*(T_cold/T0 - 1)]/(Y - 1), and with the DUT
    :func:`dut_from_noise`, G = (Nh,dut - Nc,dut)/(Nh - Nc) and F1 = F12 - (F2 - 1)/G, each in the
    sub-bands where its excess is positive; NaN elsewhere.

    References
    ----------
    Pozar, *Microwave Engineering*, noise chapter (Y-factor method) [from memory].
    Friis, "Noise figures of radio receivers", Proc. IRE 32, 1944.
    """
    groups = [list(cold), list(hot), list(cold_dut), list(hot_dut)]
    if not groups[0] or not groups[1]:
        raise ValueError(f"need at least one cold and one hot spectrum, got {len(groups[0])} and {len(groups[1])}")
    with_dut = bool(groups[2]) or bool(groups[3])
    if with_dut and not (groups[2] and groups[3]):
        raise ValueError(f"the DUT needs both cold and hot spectra, got {len(groups[2])} and {len(groups[3])}")
    if enr_db is None:
        raise ValueError("enr_db is needed")
    sb = sub_band_densities([s for g in groups for s in g], n_sub_bands=n_sub_bands, edge_fraction=edge_fraction,
                            dc_halfwidth_hz=dc_halfwidth_hz, enr_db=enr_db)
    if not np.all(np.isfinite(sb.enr) & (sb.enr > 0)):
        raise ValueError(f"enr_db={enr_db!r} gives a non-finite ENR")
    pooled, start = [], 0
    for g in groups:
        idx = range(start, start + len(g))
        start += len(g)
        pooled.append((np.mean([sb.density[i] for i in idx], axis=0), np.sum([sb.dof[i] for i in idx], axis=0))
                      if g else (None, None))
    (n_c, d_c), (n_h, d_h), (n_cd, d_cd), (n_hd, d_hd) = pooled
    t_cold_k, u_enr_db = float(t_cold_k), float(u_enr_db)

    def y_fn(h, c, e, dh, dc):
        r = y_factor(h, c, e, t_cold_k=t_cold_k, dof_hot=dh, dof_cold=dc, u_enr_db=u_enr_db)
        return r.y, r.noise_factor, r.u_noise_factor

    valid = (n_c > 0) & (n_h > n_c)
    y, f, u_f = _where(y_fn, valid, 3, n_h, n_c, sb.enr, d_h, d_c)
    receiver = YFactor(y=y, enr=sb.enr, t_cold_k=t_cold_k, noise_factor=f, u_noise_factor=u_f)
    dut = valid_d = None
    if with_dut:
        def dut_fn(h, c, hd, cd, e, d0, d1, d2, d3):
            d = dut_from_noise(h, c, hd, cd, e, t_cold_k=t_cold_k, dof=(d0, d1, d2, d3), u_enr_db=u_enr_db)
            s = d.system
            return d.gain, d.u_gain, d.noise_factor, d.u_noise_factor, s.y, s.noise_factor, s.u_noise_factor

        valid_d = valid & (n_cd > 0) & (n_hd > n_cd)
        gain, u_gain, f1, u_f1, y12, f12, u_f12 = _where(dut_fn, valid_d, 7, n_h, n_c, n_hd, n_cd, sb.enr,
                                                         d_h, d_c, d_hd, d_cd)
        dut = DutFromNoise(gain=gain, u_gain=u_gain, noise_factor=f1, u_noise_factor=u_f1,
                           system=YFactor(y=y12, enr=sb.enr, t_cold_k=t_cold_k, noise_factor=f12,
                                          u_noise_factor=u_f12))
    return NoiseSourceResult(
        low_hz=sb.low_hz, high_hz=sb.high_hz, center_hz=sb.center_hz, enr=sb.enr, t_cold_k=t_cold_k,
        u_enr_db=u_enr_db, n_cold=n_c, n_hot=n_h, dof_cold=d_c, dof_hot=d_h, valid=valid, receiver=receiver,
        n_cold_dut=n_cd, n_hot_dut=n_hd, dof_cold_dut=d_cd, dof_hot_dut=d_hd, valid_dut=valid_d, dut=dut)


def excess_u_db(n_hot, n_cold, dof_hot, dof_cold):
    """Standard uncertainty (dB) of 10*log10(n_hot - n_cold) from the two readings' chi-squared scatter.

    The part of a DUT's loss uncertainty (:func:`dut_from_noise`) that comes from the captures through
    the DUT alone: two devices measured against the same reference captures share the rest, which
    cancels in their difference. Linear propagation (JCGM 100:2008): u_rel = sqrt((Nh*r_h)**2 +
    (Nc*r_c)**2) / (Nh - Nc), r = sqrt(2/dof).
    """
    h, c = np.asarray(n_hot, dtype=float), np.asarray(n_cold, dtype=float)
    u = np.sqrt((h * _rel_u(dof_hot)) ** 2 + (c * _rel_u(dof_cold)) ** 2) / (h - c)
    return scalar_or_array(_DB_PER_NEPER * u)
