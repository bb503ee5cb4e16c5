"""The antenna-noise excess from noise-density readings: repeated readings pooled, the ratio of two
densities with its uncertainty, and the knee fit of antenna readings taken through a ladder of
known attenuation (the lossy-network model).

Densities are linear (any unit, e.g. full-scale power per Hz at the dongle) and only compared with
each other; losses are dB. What the excess means for the antenna temperature and the SNR a loss
costs is in :mod:`dsp.environment`.

References
----------
JCGM 100:2008 (GUM) 5.1.2. Bedrosian, E., "The output noise temperature of a lossy network", RAND,
1960. Friis, H. T., "Noise figures of radio receivers", Proc. IRE 32, 1944.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rxbench.dsp.units import T0_K, db_from_power, power_from_db



def mean_density(density, u_density) -> tuple[float, float]:
    """Mean of repeated noise-density readings and its standard uncertainty.

    The readings are taken as independent, each with its own standard uncertainty: u(mean) =
    sqrt(sum u_i^2)/n (GUM 5.1.2 with sensitivities 1/n).
    """
    d = np.atleast_1d(np.asarray(density, dtype=float))
    u = np.atleast_1d(np.asarray(u_density, dtype=float))
    if d.size == 0 or d.shape != u.shape:
        raise ValueError(f"density and u_density must be alike and not empty, got {density!r}, {u_density!r}")
    return float(d.mean()), float(np.sqrt(np.sum(u**2)) / d.size)


def density_ratio_db(numerator, u_numerator, denominator, u_denominator):
    """10*log10(numerator/denominator) and its standard uncertainty, dB.

    For independent inputs the first-order law of propagation (GUM 5.1.2) gives
    u = (10/ln 10) * sqrt((u_a/a)^2 + (u_b/b)^2). Works on arrays alike.
    """
    a, ua, b, ub = (np.asarray(v, dtype=float) for v in (numerator, u_numerator, denominator, u_denominator))
    if np.any(a <= 0) or np.any(b <= 0):
        raise ValueError(f"densities must be > 0, got {numerator!r} and {denominator!r}")
    ratio = 10.0 * np.log10(a / b)
    u = 10.0 / np.log(10.0) * np.hypot(ua / a, ub / b)
    if ratio.ndim == 0:
        return float(ratio), float(u)
    return ratio, u




@dataclass(frozen=True)
class KneeFit:
    """Fit of antenna-noise readings through a ladder of attenuation (see :func:`fit_knee`).

    Densities are in the unit of the readings (e.g. full-scale power per Hz at the dongle).

    Attributes
    ----------
    antenna_density : float
        Fitted reading with no attenuation, P(L=1) = G*k*(Ta + Trx).
    load_density : float
        Fitted reading with infinite attenuation (a matched load at T0), N = G*k*(T0 + Trx).
    excess_db : float
        10*log10(antenna_density / load_density): antenna noise over the receiver's own.
    u_excess_db : float
        Standard uncertainty of ``excess_db`` from the fit, dB (nan with no residual freedom and
        no reading uncertainties).
    external_density, internal_density : float
        G*k*Ta and G*k*Trx; only separable when the receiver temperature is known (else nan).
    residual_rms_db : float
        RMS of the fit residuals, dB.
    residuals_db : ndarray
        Reading minus model per point, dB, in the order given.
    n_points : int
        Number of readings used.
    """

    antenna_density: float
    load_density: float
    excess_db: float
    u_excess_db: float
    external_density: float
    internal_density: float
    residual_rms_db: float
    residuals_db: np.ndarray
    n_points: int


def fit_knee(loss_db, density, *, u_density=None, load_density=None, u_load_density=None,
             receiver_temperature_k=None) -> KneeFit:
    """Fit antenna-noise readings taken through known attenuation to the lossy-network model.

    Parameters
    ----------
    loss_db : array_like
        Attenuation ahead of the receiver at each reading, dB (>= 0; at least two distinct values,
        or one with ``load_density``).
    density : array_like
        Noise density read at each step (linear, e.g. FS^2/Hz), > 0.
    u_density : array_like, optional
        Standard uncertainty of each density (same unit); weights the fit.
    load_density, u_load_density : float, optional
        Reading with a matched load at T0 in place of the antenna (the limit L -> inf), and its
        standard uncertainty.
    receiver_temperature_k : float, optional
        Receiver noise temperature; needed only to split the readings into external and internal
        noise powers.

    Returns
    -------
    KneeFit

    Notes
    -----
    Through a loss L at T0 the antenna noise becomes Ta/L + T0*(1 - 1/L); the receiver adds Trx:

        P(L) = G*k*[Ta/L + T0*(1 - 1/L) + Trx] = (P1 - N)/L + N,

    with P1 = G*k*(Ta + Trx) and N = G*k*(T0 + Trx). The readings fix P1 and N (least squares on
    the dB readings, parameters log P1 and log N); splitting N into G*k*T0 and G*k*Trx needs Trx:
    G*k*T0 = N*T0/(T0 + Trx), external = G*k*Ta = P1 - N + G*k*T0, internal = N*Trx/(T0 + Trx).
    The SNR cost of a loss follows from the excess X = P1/N alone, dSNR = 10*log10(1 + (L - 1)/X)
    (see :func:`loss_for_snr_degradation_db` with Ta = X*T0, Trx = 0).

    References
    ----------
    Bedrosian, RAND, 1960 (output noise temperature of a lossy network); Friis, Proc. IRE 32, 1944.
    """
    ld = np.atleast_1d(np.asarray(loss_db, dtype=float))
    p = np.atleast_1d(np.asarray(density, dtype=float))
    if ld.shape != p.shape or ld.ndim != 1:
        raise ValueError(f"loss_db and density must be 1-D and the same length, got {ld.shape} and {p.shape}")
    if np.any(~np.isfinite(ld)) or np.any(ld < 0):
        raise ValueError(f"loss_db must be finite and >= 0 dB, got {loss_db!r}")
    if np.any(~np.isfinite(p)) or np.any(p <= 0):
        raise ValueError(f"density must be finite and > 0, got {density!r}")
    inv_l = 1.0 / power_from_db(ld)
    inv_l = np.atleast_1d(inv_l)
    y_db = np.atleast_1d(db_from_power(p))
    if u_density is None:
        sigma_db = np.ones_like(p)
        have_u = False
    else:
        u = np.atleast_1d(np.asarray(u_density, dtype=float))
        if u.shape != p.shape or np.any(~np.isfinite(u)) or np.any(u <= 0):
            raise ValueError(f"u_density must be finite, > 0 and match density, got {u_density!r}")
        sigma_db = 10.0 / np.log(10.0) * u / p
        have_u = True
    if load_density is not None:
        if not np.isfinite(load_density) or load_density <= 0:
            raise ValueError(f"load_density must be finite and > 0, got {load_density!r}")
        inv_l = np.append(inv_l, 0.0)
        y_db = np.append(y_db, db_from_power(load_density))
        if have_u:
            if u_load_density is None or not np.isfinite(u_load_density) or u_load_density <= 0:
                raise ValueError(f"u_load_density must be finite and > 0, got {u_load_density!r}")
            sigma_db = np.append(sigma_db, 10.0 / np.log(10.0) * u_load_density / load_density)
        else:
            sigma_db = np.append(sigma_db, 1.0)
    if np.unique(inv_l).size < 2:
        raise ValueError("the fit needs readings at two different attenuations (or one and a load)")
    n = inv_l.size

    # Start: weighted linear least squares of P = a/L + N in relative terms.
    lin = power_from_db(y_db)
    a_mat = np.column_stack([inv_l, np.ones(n)]) / lin[:, None]
    (a0, n0), *_ = np.linalg.lstsq(a_mat, np.ones(n), rcond=None)
    scale = float(np.max(lin))
    n0 = n0 if n0 > 0 else float(np.min(lin))
    p10 = a0 + n0 if a0 + n0 > 0 else float(np.max(lin))
    start = np.log([p10 / scale, n0 / scale])

    def model_db(theta):
        p1, nn = np.exp(theta) * scale
        return db_from_power(np.maximum((p1 - nn) * inv_l + nn, 1e-300))

    def resid(theta):
        return (y_db - model_db(theta)) / sigma_db

    from scipy import optimize  # here, not at the top: a slow import

    sol = optimize.least_squares(resid, start)
    p1, nn = np.exp(sol.x) * scale
    residuals_db = y_db - model_db(sol.x)
    dof = n - 2
    # Covariance of (log P1, log N); excess_db = (10/ln 10)*(log P1 - log N).
    jac = sol.jac
    try:
        cov = np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError:
        cov = np.full((2, 2), np.nan)
    chi2 = float(np.sum(resid(sol.x) ** 2))
    if have_u:
        cov = cov * (max(1.0, chi2 / dof) if dof > 0 else 1.0)
    elif dof > 0:
        cov = cov * chi2 / dof
    else:
        cov = np.full((2, 2), np.nan)
    g = np.array([1.0, -1.0])
    var = float(g @ cov @ g)
    u_excess_db = 10.0 / np.log(10.0) * np.sqrt(var) if var >= 0 else float("nan")

    if receiver_temperature_k is None:
        external = internal = float("nan")
    else:
        trx = float(receiver_temperature_k)
        if not np.isfinite(trx) or trx < 0:
            raise ValueError(f"receiver_temperature_k must be finite and >= 0 K, got {receiver_temperature_k!r}")
        gkt0 = nn * T0_K / (T0_K + trx)
        external = p1 - nn + gkt0
        internal = nn * trx / (T0_K + trx)
    return KneeFit(
        antenna_density=float(p1),
        load_density=float(nn),
        excess_db=float(db_from_power(p1 / nn)),
        u_excess_db=float(u_excess_db),
        external_density=float(external),
        internal_density=float(internal),
        residual_rms_db=float(np.sqrt(np.mean(residuals_db**2))),
        residuals_db=residuals_db,
        n_points=int(n),
    )
