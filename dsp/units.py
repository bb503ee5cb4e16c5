"""Units and constants: dB and linear, dBm and watts, noise temperature and noise figure.

All physical constants live here. Zero power maps to -inf dB, never to a made-up floor.
"""

from __future__ import annotations

import numpy as np

#: Boltzmann constant, J/K (exact by definition in the 2019 SI; tests check it against scipy.constants).
K_B = 1.380649e-23
#: Reference temperature of noise figure definitions, K (IEEE).
T0_K = 290.0
#: kT0 in dBm/Hz: -173.975 (the familiar "-174" is a rounding).
KT0_DBM_PER_HZ = 10.0 * np.log10(K_B * T0_K * 1e3)


def scalar_or_array(x):
    """A float for 0-d input, a float ndarray otherwise (the return convention of ``dsp``)."""
    x = np.asarray(x, dtype=float)
    return x.item() if x.ndim == 0 else x


def db_from_power(ratio):
    """Power ratio -> dB: ``10*log10(ratio)``; 0 -> -inf, negative -> ValueError."""
    r = np.asarray(ratio, dtype=float)
    if np.any(r < 0):
        raise ValueError(f"power ratio must be >= 0, got {ratio!r}")
    with np.errstate(divide="ignore"):
        out = 10.0 * np.log10(r)
    return scalar_or_array(out)


def power_from_db(db):
    """dB -> power ratio: ``10**(db/10)``."""
    out = np.power(10.0, np.asarray(db, dtype=float) / 10.0)
    return scalar_or_array(out)


def db_from_amplitude(ratio):
    """Amplitude (voltage) ratio -> dB: ``20*log10(|ratio|)``; 0 -> -inf."""
    r = np.abs(np.asarray(ratio, dtype=float))
    with np.errstate(divide="ignore"):
        out = 20.0 * np.log10(r)
    return scalar_or_array(out)


def amplitude_from_db(db):
    """dB -> amplitude (voltage) ratio: ``10**(db/20)``."""
    out = np.power(10.0, np.asarray(db, dtype=float) / 20.0)
    return scalar_or_array(out)


def dbm_from_w(power_w):
    """Watts -> dBm."""
    return db_from_power(np.asarray(power_w, dtype=float) * 1e3)


def w_from_dbm(power_dbm):
    """dBm -> watts."""
    return power_from_db(np.asarray(power_dbm, dtype=float)) * 1e-3


def noise_temperature_k(noise_factor, t0_k: float = T0_K):
    """Noise factor F (linear) -> equivalent noise temperature Te = T0*(F - 1), K."""
    f = np.asarray(noise_factor, dtype=float)
    if np.any(f < 1):
        raise ValueError(f"noise factor must be >= 1, got {noise_factor!r}")
    out = t0_k * (f - 1.0)
    return scalar_or_array(out)


def noise_factor(noise_temperature, t0_k: float = T0_K):
    """Noise temperature Te (K) -> noise factor F = 1 + Te/T0 (linear)."""
    t = np.asarray(noise_temperature, dtype=float)
    if np.any(t < 0):
        raise ValueError(f"noise temperature must be >= 0 K, got {noise_temperature!r}")
    out = 1.0 + t / t0_k
    return scalar_or_array(out)


def noise_temperature_from_nf_db(nf_db, t0_k: float = T0_K):
    """Noise figure (dB) -> noise temperature (K)."""
    return noise_temperature_k(power_from_db(nf_db), t0_k)


def nf_db_from_noise_temperature(noise_temperature, t0_k: float = T0_K):
    """Noise temperature (K) -> noise figure (dB)."""
    return db_from_power(noise_factor(noise_temperature, t0_k))
