"""Mismatch: SWR, return loss, |Gamma|, mismatch loss and the mismatch uncertainty of a loss reading.

References
----------
Harris, I. A. and Warner, F. L., "Re-examination of mismatch uncertainty when measuring microwave
power and attenuation", IEE Proc. H 128(1), 1981.
"""

from __future__ import annotations

import numpy as np

from rxbench.dsp.units import scalar_or_array


def _check_swr(swr):
    s = np.asarray(swr, dtype=float)
    if np.any(~np.isfinite(s)) or np.any(s < 1):
        raise ValueError(f"SWR must be a finite number >= 1, got {swr!r}")
    return s




def gamma_from_swr(swr):
    """Reflection coefficient magnitude from SWR: |Gamma| = (SWR - 1)/(SWR + 1)."""
    s = _check_swr(swr)
    return scalar_or_array((s - 1.0) / (s + 1.0))


def swr_from_gamma(gamma):
    """SWR from |Gamma|: (1 + |Gamma|)/(1 - |Gamma|); |Gamma| = 1 gives inf."""
    g = np.abs(np.asarray(gamma, dtype=float))
    if np.any(g > 1):
        raise ValueError(f"|Gamma| must be <= 1 for a passive load, got {gamma!r}")
    with np.errstate(divide="ignore"):
        return scalar_or_array((1.0 + g) / (1.0 - g))


def return_loss_db_from_gamma(gamma):
    """Return loss RL = -20*log10|Gamma|, dB (|Gamma| = 0 gives inf)."""
    g = np.abs(np.asarray(gamma, dtype=float))
    with np.errstate(divide="ignore"):
        return scalar_or_array(-20.0 * np.log10(g))


def gamma_from_return_loss_db(return_loss_db):
    """|Gamma| = 10**(-RL/20); a negative return loss (|Gamma| > 1) is refused."""
    rl = np.asarray(return_loss_db, dtype=float)
    if np.any(rl < 0):
        raise ValueError(f"return loss must be >= 0 dB for a passive load, got {return_loss_db!r}")
    return scalar_or_array(10.0 ** (-rl / 20.0))


def mismatch_loss_db(gamma):
    """Mismatch loss -10*log10(1 - |Gamma|^2), dB."""
    g = np.abs(np.asarray(gamma, dtype=float))
    with np.errstate(divide="ignore"):
        return scalar_or_array(-10.0 * np.log10(1.0 - g**2))


def source_load_mismatch_limits_db(gamma_source, gamma_load):
    """Limits of the source-load mismatch error, 20*log10(1 +/- |Gs||Gl|), dB.

    Returns ``(upper_db, lower_db)``; e.g. SWR 1.5 with SWR 2 -> (+0.561, -0.599).
    """
    p = np.abs(gamma_source) * np.abs(gamma_load)
    return scalar_or_array(20.0 * np.log10(1.0 + p)), scalar_or_array(20.0 * np.log10(1.0 - p))


def two_port_mismatch_limit_db(gamma_source, gamma_load, s11, s22, s21_s12):
    """First-order limit of the mismatch error of an insertion-loss measurement, dB.

    Parameters
    ----------
    gamma_source, gamma_load : float
        |Gamma| of the source and of the load (the receiver) seen by the device.
    s11, s22 : float
        |S11|, |S22| of the device.
    s21_s12 : float
        |S21*S12| of the device (its transmission squared for a reciprocal device).

    Returns
    -------
    float
        Half-width ``a`` (dB) of the error; each term is U-shaped, so its standard uncertainty is
        ``a/sqrt(2)``.

    Notes
    -----
    a = 8.686*(|Gs*S11| + |Gl*S22| + |Gs*Gl| + |Gs*Gl*S21*S12|) (Harris & Warner 1981).
    """
    gs, gl = abs(gamma_source), abs(gamma_load)
    terms = (gs * abs(s11), gl * abs(s22), gs * gl, gs * gl * abs(s21_s12))
    return float(20.0 / np.log(10.0) * sum(terms))


def two_port_mismatch_terms_db(gamma_source, gamma_load, s11, s22, s21_s12):
    """The four first-order terms (dB half-widths) behind :func:`two_port_mismatch_limit_db`."""
    gs, gl = abs(gamma_source), abs(gamma_load)
    c = 20.0 / np.log(10.0)
    return (c * gs * abs(s11), c * gl * abs(s22), c * gs * gl, c * gs * gl * abs(s21_s12))


def return_loss_through_loss_db(return_loss_at_load_db, one_way_loss_db):
    """Return loss seen through a one-way loss A: RL_in = RL_load + 2*A (common practice)."""
    if np.any(np.asarray(one_way_loss_db) < 0):
        raise ValueError(f"one-way loss must be >= 0 dB, got {one_way_loss_db!r}")
    return scalar_or_array(np.asarray(return_loss_at_load_db, dtype=float) + 2.0 * np.asarray(one_way_loss_db))


def return_loss_at_load_db(return_loss_measured_db, one_way_loss_db):
    """Return loss at the load from one read through a one-way loss A: RL_load = RL_meas - 2*A.

    A result below 0 dB is impossible for a passive load: the loss given is larger than the
    reading allows, and a ValueError says so.
    """
    rl = np.asarray(return_loss_measured_db, dtype=float) - 2.0 * np.asarray(one_way_loss_db, dtype=float)
    if np.any(np.asarray(one_way_loss_db) < 0):
        raise ValueError(f"one-way loss must be >= 0 dB, got {one_way_loss_db!r}")
    if np.any(rl < 0):
        raise ValueError(
            f"a return loss of {return_loss_measured_db} dB cannot be read through "
            f"{one_way_loss_db} dB of one-way loss (the load would return more than it receives)"
        )
    return scalar_or_array(rl)
