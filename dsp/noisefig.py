"""Noise figure formulas: Y-factor, second-stage correction, Friis cascade, passive loss, gain method,
and a DUT's gain and noise factor from noise-source readings, each with its standard uncertainty.

A broadband noise source switched between a hot and a cold state gives, from the ratio of the two
noise powers (the Y-factor), the receive system's noise factor. With a device under test (DUT) in
front of the receiver, the change of the hot-minus-cold excess gives the DUT's gain (its insertion
loss), and the second-stage correction gives the DUT's own noise figure. A tone of known absolute
level gives the noise figure without a noise source (the gain method).

Noise powers here are linear and may be in any unit (full-scale power per Hz, say) as long as the
numbers compared share it; noise factors and gains are linear; dB only in the ``*_db`` views.
From spectra: :mod:`rxbench.dsp.subbands` (mean density per sub-band and its degrees of freedom),
:mod:`rxbench.dsp.stitch` (curves of several tunings into one), :mod:`rxbench.dsp.noise_source` (a
whole noise-source measurement at one tuning).

References
----------
Friis, H. T., "Noise figures of radio receivers", Proc. IRE 32(7), 1944.
Bedrosian, E., "The output noise temperature of a lossy network", RAND, 1960.
Pozar, D. M., *Microwave Engineering*, noise chapter (Y-factor method) [from memory].
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

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
