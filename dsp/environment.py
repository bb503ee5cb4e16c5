"""External noise and what a loss costs: ITU-R P.372 man-made noise, antenna-noise excess, SNR cost.

A loss in front of a receiver costs its full dB of SNR only when the receiver's own noise dominates.
When the band's external noise (man-made, galactic, atmospheric) sits well above the receiver's, the
loss attenuates signal and external noise alike and the SNR barely moves. This module gives the
external noise from the ITU-R P.372 medians, turns a measured antenna-noise excess into an antenna
temperature, and computes the SNR cost of a loss (from temperatures, or from a measured excess
with its uncertainty). The excess itself, read from noise densities (and the knee fit of a ladder
of antenna readings), is in :mod:`dsp.excess`.

All temperatures are in kelvin, losses are power ratios >= 1 inside and dB at the edges.

References
----------
ITU-R Recommendation P.372, "Radio noise" (median man-made noise Fam = c - d*log10(f/MHz) for the
city, residential, rural and quiet-rural categories, and galactic noise).
Friis, H. T., "Noise figures of radio receivers", Proc. IRE 32, 1944.
Bedrosian, E., "The output noise temperature of a lossy network", RAND, 1960.
"""

from __future__ import annotations

import numpy as np

from rxbench.dsp.units import T0_K, db_from_power, power_from_db, scalar_or_array

#: ITU-R P.372 median man-made noise, Fam = c - d*log10(f/MHz) dB above kT0*b: (c, d) per category.
MAN_MADE_NOISE = {
    "city": (76.8, 27.7),
    "residential": (72.5, 27.7),
    "rural": (67.2, 27.7),
    "quiet-rural": (53.6, 28.6),
}
#: ITU-R P.372 median galactic noise, same form: (c, d).
GALACTIC_NOISE = (52.0, 23.0)
#: Frequency range (Hz) over which the man-made and galactic lines above are given.
VALID_RANGE_HZ = (0.3e6, 250e6)




def _check_frequency(frequency_hz):
    f = np.asarray(frequency_hz, dtype=float)
    lo, hi = VALID_RANGE_HZ
    if np.any(~np.isfinite(f)) or np.any(f < lo) or np.any(f > hi):
        raise ValueError(
            f"frequency_hz={frequency_hz!r} is outside the range of the ITU-R P.372 noise lines "
            f"({lo / 1e6:g}-{hi / 1e6:g} MHz)"
        )
    return f


def _line_db(frequency_hz, c_db: float, d_db: float):
    f = _check_frequency(frequency_hz)
    return scalar_or_array(c_db - d_db * np.log10(f / 1e6))


def man_made_fa_db(frequency_hz, environment: str):
    """Median man-made external noise figure Fam of an ITU-R P.372 environment category, dB.

    Parameters
    ----------
    frequency_hz : float or array_like
        Frequency, Hz, within 0.3-250 MHz.
    environment : {"city", "residential", "rural", "quiet-rural"}
        P.372 category.

    Returns
    -------
    float or ndarray
        Fam, dB above kT0*b (b the noise bandwidth).

    Raises
    ------
    ValueError
        Unknown category, or a frequency outside 0.3-250 MHz.

    Notes
    -----
    Fam = c - d*log10(f / 1 MHz), with (c, d) = (76.8, 27.7) city, (72.5, 27.7) residential,
    (67.2, 27.7) rural, (53.6, 28.6) quiet rural. These are medians; the decile spread is several dB.

    References
    ----------
    ITU-R Recommendation P.372, "Radio noise".

    Examples
    --------
    >>> round(man_made_fa_db(14e6, "residential"), 2)
    40.75
    """
    try:
        c_db, d_db = MAN_MADE_NOISE[environment]
    except KeyError:
        raise ValueError(
            f"environment={environment!r} is not one of {', '.join(MAN_MADE_NOISE)}"
        ) from None
    return _line_db(frequency_hz, c_db, d_db)


def galactic_fa_db(frequency_hz):
    """Median galactic noise figure, dB above kT0*b: 52.0 - 23.0*log10(f/MHz) (ITU-R P.372).

    It reaches the ground only above the ionosphere's critical frequency; below that the figure
    does not apply. Frequencies outside 0.3-250 MHz raise ValueError.
    """
    return _line_db(frequency_hz, *GALACTIC_NOISE)


def external_fa_db(frequency_hz, environment: str, *, galactic: bool = False):
    """External noise figure Fa of a P.372 category, with galactic noise power-added if asked, dB.

    Notes
    -----
    Fa = 10*log10(10**(Fam/10) + 10**(Fgal/10)) with ``galactic``, else Fa = Fam: noise powers from
    independent sources add.

    References
    ----------
    ITU-R Recommendation P.372, "Radio noise".
    """
    fa = power_from_db(man_made_fa_db(frequency_hz, environment))
    if galactic:
        fa = fa + power_from_db(galactic_fa_db(frequency_hz))
    return db_from_power(fa)


def temperature_from_fa_db(fa_db, t0_k: float = T0_K):
    """External noise figure Fa (dB) -> antenna noise temperature Ta = T0*10**(Fa/10), K."""
    return scalar_or_array(t0_k * np.asarray(power_from_db(fa_db)))


def fa_db_from_temperature(antenna_temperature_k, t0_k: float = T0_K):
    """Antenna noise temperature Ta (K) -> external noise figure Fa = 10*log10(Ta/T0), dB."""
    t = np.asarray(antenna_temperature_k, dtype=float)
    if np.any(t < 0):
        raise ValueError(f"antenna temperature must be >= 0 K, got {antenna_temperature_k!r}")
    return db_from_power(t / t0_k)


def _check_temperatures(antenna_temperature_k, receiver_temperature_k):
    ta = np.asarray(antenna_temperature_k, dtype=float)
    trx = np.asarray(receiver_temperature_k, dtype=float)
    if np.any(~np.isfinite(ta)) or np.any(ta < 0):
        raise ValueError(f"antenna temperature must be finite and >= 0 K, got {antenna_temperature_k!r}")
    if np.any(~np.isfinite(trx)) or np.any(trx < 0):
        raise ValueError(f"receiver temperature must be finite and >= 0 K, got {receiver_temperature_k!r}")
    if np.any(ta + trx <= 0):
        raise ValueError("antenna and receiver temperatures cannot both be 0 K")
    return ta, trx


def snr_degradation_db(loss_db, antenna_temperature_k, receiver_temperature_k, *,
                       loss_temperature_k: float = T0_K):
    """SNR cost of a passive loss placed between the antenna and the receiver, dB.

    Parameters
    ----------
    loss_db : float or array_like
        Loss, dB (>= 0).
    antenna_temperature_k : float or array_like
        Antenna noise temperature Ta, K.
    receiver_temperature_k : float or array_like
        Receiver noise temperature Trx = T0*(F - 1), K.
    loss_temperature_k : float, optional
        Physical temperature of the loss, K (default T0 = 290 K).

    Returns
    -------
    float or ndarray
        Drop in SNR, dB (>= 0, since L >= 1 and all temperatures are >= 0).

    Notes
    -----
    The loss attenuates the signal by L and turns the antenna noise Ta into Ta/L + T*(1 - 1/L);
    referred back to the antenna port the system temperature goes from Ta + Trx to
    Ta + (L - 1)*T + L*Trx, so

        dSNR = 10*log10[(Ta + (L - 1)*T + L*Trx) / (Ta + Trx)].

    With Ta = T = T0 the cost equals the loss in dB for any receiver. Given only the measured
    excess X = (Ta + Trx)/(T0 + Trx) of antenna noise over a matched load, the cost is
    10*log10(1 + (L - 1)/X) whatever the receiver: call this function with Ta = X*T0 and Trx = 0.

    References
    ----------
    Friis, Proc. IRE 32, 1944; Bedrosian, RAND, 1960 (noise of a lossy network);
    ITU-R Recommendation P.372 (Ta from Fa).

    Examples
    --------
    >>> round(snr_degradation_db(3.0, 290.0, 1539.8), 6)
    3.0
    """
    ld = np.asarray(loss_db, dtype=float)
    if np.any(~np.isfinite(ld)) or np.any(ld < 0):
        raise ValueError(f"loss_db must be finite and >= 0 dB, got {loss_db!r}")
    if not np.isfinite(loss_temperature_k) or loss_temperature_k < 0:
        raise ValueError(f"loss_temperature_k must be finite and >= 0 K, got {loss_temperature_k!r}")
    ta, trx = _check_temperatures(antenna_temperature_k, receiver_temperature_k)
    big_l = power_from_db(ld)
    system = ta + (big_l - 1.0) * loss_temperature_k + big_l * trx
    return db_from_power(system / (ta + trx))


def loss_for_snr_degradation_db(cost_db, antenna_temperature_k, receiver_temperature_k, *,
                                loss_temperature_k: float = T0_K):
    """The loss (dB) at which the SNR cost of :func:`snr_degradation_db` reaches ``cost_db``.

    Notes
    -----
    Solving r*(Ta + Trx) = Ta + (L - 1)*T + L*Trx for L, with r = 10**(cost_db/10):

        L = [r*(Ta + Trx) - Ta + T] / (T + Trx).

    In terms of the excess X = (Ta + Trx)/(T0 + Trx) of antenna noise over a matched load (T = T0),
    L = 1 + X*(r - 1): the affordable loss grows in proportion to the excess.
    """
    c = np.asarray(cost_db, dtype=float)
    if np.any(~np.isfinite(c)) or np.any(c < 0):
        raise ValueError(f"cost_db must be finite and >= 0 dB, got {cost_db!r}")
    ta, trx = _check_temperatures(antenna_temperature_k, receiver_temperature_k)
    t = float(loss_temperature_k)
    if t + np.min(trx) <= 0:
        raise ValueError("a loss at 0 K ahead of a noiseless receiver never costs SNR")
    r = power_from_db(c)
    big_l = (r * (ta + trx) - ta + t) / (t + trx)
    return db_from_power(big_l)


def antenna_temperature_from_excess(excess_db, receiver_temperature_k, *,
                                    load_temperature_k: float = T0_K):
    """Antenna noise temperature from the excess of antenna noise over a matched load, K.

    Parameters
    ----------
    excess_db : float or array_like
        10*log10(N_antenna / N_load): noise density read with the antenna, over that read with a
        matched load on the same input (same gain, same bandwidth), dB.
    receiver_temperature_k : float or array_like
        Receiver noise temperature Trx, K.
    load_temperature_k : float, optional
        Physical temperature of the load, K (default T0).

    Returns
    -------
    float or ndarray
        Ta, K.

    Raises
    ------
    ValueError
        If the excess is so far below 0 dB that Ta would be negative (the receiver temperature
        given is too high for the reading).

    Notes
    -----
    N_antenna / N_load = X = (Ta + Trx)/(T_load + Trx), so Ta = X*(T_load + Trx) - Trx.
    For X > 1 the result grows with Trx: a receiver noisier than assumed hides more external
    noise, and with Trx -> 0 the bound Ta >= X*T_load holds whatever the receiver.
    """
    x = power_from_db(np.asarray(excess_db, dtype=float))
    trx = np.asarray(receiver_temperature_k, dtype=float)
    if np.any(~np.isfinite(trx)) or np.any(trx < 0):
        raise ValueError(f"receiver temperature must be finite and >= 0 K, got {receiver_temperature_k!r}")
    ta = x * (load_temperature_k + trx) - trx
    if np.any(ta < 0):
        raise ValueError(
            f"an excess of {excess_db!r} dB with a receiver at {receiver_temperature_k!r} K implies a "
            f"negative antenna temperature: the excess or the receiver noise figure is wrong"
        )
    return scalar_or_array(ta)


def excess_db_from_temperature(antenna_temperature_k, receiver_temperature_k, *,
                               load_temperature_k: float = T0_K):
    """Predicted excess of antenna noise over a matched load: 10*log10[(Ta + Trx)/(T_load + Trx)], dB."""
    ta, trx = _check_temperatures(antenna_temperature_k, receiver_temperature_k)
    return db_from_power((ta + trx) / (load_temperature_k + trx))


def snr_cost_from_excess_db(loss_db, excess_db, u_loss_db=0.0, u_excess_db=0.0):
    """The SNR a loss costs behind an antenna-noise excess X, and its standard uncertainty, dB.

    ΔSNR = 10*log10(1 + (L - 1)/X) (ITU-R P.372 noise power added through a matched loss at T0;
    Friis 1944), the loss taken at 0 dB when below it. Its uncertainty by the first-order law of
    propagation (GUM 5.1.2) with the analytic sensitivities
    d(ΔSNR)/d(L_dB) = L/(X + L - 1) and d(ΔSNR)/d(X_dB) = -(L - 1)/(X + L - 1). Works on arrays.
    """
    loss = 10 ** (np.maximum(np.asarray(loss_db, dtype=float), 0.0) / 10)
    x = 10 ** (np.asarray(excess_db, dtype=float) / 10)
    cost = 10.0 * np.log10(1.0 + (loss - 1.0) / x)
    c_loss = np.where(np.asarray(loss_db, dtype=float) > 0, loss / (x + loss - 1.0), 0.0)
    c_x = -(loss - 1.0) / (x + loss - 1.0)
    u = np.hypot(c_loss * np.asarray(u_loss_db, dtype=float), c_x * np.asarray(u_excess_db, dtype=float))
    if cost.ndim == 0:
        return float(cost), float(u)
    return cost, u
