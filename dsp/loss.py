"""Insertion loss from tone readings: direct, and by substitution on an attenuator ladder, with
the budget lines they share (pooled repeats, impedance mismatch, the drift a re-read shows).

Everything here works on dB readings and their standard uncertainties (dB); reading captures is the
shell's job.

- :func:`substitution_loss` finds the ladder setting that reads the same as the DUT (the dongle is
  only a comparator, so its nonlinearity drops out).
- :func:`direct_loss` takes thru minus DUT, with the thru interpolated in time between a thru
  before and a thru after the DUT so that linear drift drops out.

Each loss carries a :class:`dsp.uncertainty.Budget`. The ladder itself is checked in
:mod:`dsp.ladder`.

References
----------
Kaylie, H., "Calibration of attenuators by the substitution method", IEEE Trans. Instrum. Meas.
15(4), 1966 [from memory]. Warner, F. L., *Microwave Attenuation Measurement*, Peregrinus, 1977
[from memory]. JCGM 100:2008 (GUM). Fritsch, F. N. and Carlson, R. E., "Monotone piecewise cubic
interpolation", SIAM J. Numer. Anal. 17(2), 1980 (the interpolant of scipy's PchipInterpolator).
Harris, I. A. and Warner, F. L., IEE Proc. H 128, 1981 (mismatch terms).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rxbench.dsp.ladder import as_1d, ladder_arrays
from rxbench.dsp.mismatch import gamma_from_swr, two_port_mismatch_terms_db
from rxbench.dsp.uncertainty import DEFAULT_K, Budget, Component, type_a, welch_satterthwaite


@dataclass(frozen=True)
class Loss:
    """An insertion loss with its uncertainty budget.

    Attributes
    ----------
    loss_db : float
        Insertion loss, dB (positive: the device loses).
    budget : Budget
        Components behind the uncertainty, dB.
    method : str
        ``"direct"`` or ``"substitution"``.
    reference_dbfs : float
        Direct: the thru reading at the DUT's time. Substitution: nan.
    dut_dbfs : float
        The DUT reading, dBFS.
    drift_db : float or None
        Direct with a thru after: thru after minus thru before, dB.
    attenuation_db : float or None
        Substitution: the ladder setting that reads like the DUT, dB.
    bracket_db : tuple or None
        Substitution: the two neighbouring steps (dB) it lies between.
    """

    loss_db: float
    budget: Budget
    method: str
    reference_dbfs: float
    dut_dbfs: float
    drift_db: float | None = None
    attenuation_db: float | None = None
    bracket_db: tuple | None = None

    @property
    def u_db(self) -> float:
        """Combined standard uncertainty, dB."""
        return self.budget.combined_u

    @property
    def expanded_uncertainty_db(self) -> float:
        """Expanded uncertainty U = k*u_c, dB."""
        return self.budget.expanded_u


def mean_reading(reading_dbfs, u_db, dof=None):
    """Pool repeated readings of one role (several thru captures, say).

    Parameters
    ----------
    reading_dbfs : array_like
        Readings, dBFS.
    u_db : array_like
        Standard uncertainty of each reading from its own estimator, dB.
    dof : array_like, optional
        Degrees of freedom of each ``u_db`` (default inf).

    Returns
    -------
    mean_dbfs, u_db, dof : float
        Mean reading and its Type A standard uncertainty with degrees of freedom.

    Notes
    -----
    From the estimators: u = sqrt(sum u_i^2)/n with Welch-Satterthwaite dof. From the scatter of
    n >= 2 readings: u = s/sqrt(n), nu = n - 1 (GUM 4.2). The larger of the two is kept: scatter
    beyond what the estimator explains (drift, reconnection) must not be hidden, and two or three
    repeats alone say little about the estimator's spread.
    """
    r = as_1d("reading_dbfs", reading_dbfs)
    u = as_1d("u_db", u_db)
    nu = np.full(r.size, np.inf) if dof is None else as_1d("dof", dof)
    if not r.size or not r.shape == u.shape == nu.shape:
        raise ValueError(f"readings, u and dof must be non-empty and of equal length: "
                         f"{r.size}, {u.size}, {nu.size}")
    if np.any(~np.isfinite(r)) or np.any(~np.isfinite(u)) or np.any(u < 0):
        raise ValueError(f"readings and u must be finite (u >= 0), got {r.tolist()}, {u.tolist()}")
    n = r.size
    u_est = math.sqrt(float(np.sum(u**2))) / n
    dof_est = welch_satterthwaite(u / n, nu) if u_est > 0 else math.inf
    if n >= 2:
        mean, u_scatter, dof_scatter = type_a(r)
        if u_scatter > u_est:
            return float(mean), float(u_scatter), float(dof_scatter)
    return float(np.mean(r)), u_est, dof_est


def mismatch_components(source_swr=None, load_swr=None, dut_swr=None, loss_db=0.0):
    """Mismatch terms of an insertion-loss measurement as U-shaped budget components.

    Parameters
    ----------
    source_swr, load_swr : float, optional
        SWR of the source (generator and attenuator) and of the load (the dongle's input).
    dut_swr : float, optional
        SWR of the device at both ports (|S11| = |S22| = |Gamma| from it).
    loss_db : float
        The device's loss; |S21*S12| = 10**(-loss/10) for a reciprocal device.

    Returns
    -------
    list of Component
        One per first-order term whose factors are all known; empty without source and load SWR.

    Notes
    -----
    a = 8.686*(|Gs*S11| + |Gl*S22| + |Gs*Gl| + |Gs*Gl*S21*S12|), each term U-shaped, u = a/sqrt(2)
    (Harris & Warner, IEE Proc. H 128, 1981), via :func:`dsp.mismatch.two_port_mismatch_terms_db`.
    """
    if source_swr is None or load_swr is None:
        return []
    gs, gl = gamma_from_swr(source_swr), gamma_from_swr(load_swr)
    gd = None if dut_swr is None else gamma_from_swr(dut_swr)
    s21s12 = 10.0 ** (-max(float(loss_db), 0.0) / 10.0)
    terms = two_port_mismatch_terms_db(gs, gl, gd or 0.0, gd or 0.0, s21s12)
    names = ("mismatch source-DUT", "mismatch DUT-load", "mismatch source-load",
             "mismatch source-load through DUT")
    return [Component.u_shaped(name, a) for j, (name, a) in enumerate(zip(names, terms))
            if gd is not None or j >= 2]


def drift_component(change_db, u_change_db, labels=None):
    """The drift a re-read reveals, as a budget line.

    Parameters
    ----------
    change_db, u_change_db : array_like
        For each re-read: reading after minus reading before (dB), and its standard uncertainty.
    labels : sequence of str, optional
        What each re-read was, for the line's note.

    Returns
    -------
    (Component, int, bool)
        A rectangular line of half-width the largest change (GUM 4.3.7: the drift is known only to
        lie within the change seen), the index of that change, and whether it exceeds twice its own
        uncertainty (more than the readings' scatter explains).
    """
    change = np.atleast_1d(np.asarray(change_db, dtype=float))
    u = np.atleast_1d(np.asarray(u_change_db, dtype=float))
    if change.size == 0 or change.shape != u.shape or not np.isfinite(change).all() or not (u >= 0).all():
        raise ValueError(f"changes and their uncertainties must be finite and alike, got {change_db!r}, {u_change_db!r}")
    i = int(np.argmax(np.abs(change)))
    label = "re-read" if labels is None else labels[i]
    comp = Component.rectangular("generator drift", abs(float(change[i])), note=f"{label}: {change[i]:+.3f} dB")
    return comp, i, bool(abs(change[i]) > 2 * u[i])


def direct_loss(thru_dbfs, u_thru_db, dut_dbfs, u_dut_db, *, thru_after_dbfs=None,
                u_thru_after_db=None, times_s=None, dof=(math.inf, math.inf, math.inf),
                linearity_db=0.0, extra_components=(), k=DEFAULT_K):
    """Direct insertion loss: thru reading minus DUT reading at the same generator level.

    Parameters
    ----------
    thru_dbfs, u_thru_db : float
        Thru reading before the DUT and its standard uncertainty (dBFS, dB).
    dut_dbfs, u_dut_db : float
        DUT reading and its standard uncertainty.
    thru_after_dbfs, u_thru_after_db : float, optional
        A thru reading taken again after the DUT.
    times_s : tuple of 3 float, optional
        Times of thru before, DUT, thru after (s, any origin); needed with ``thru_after_dbfs``.
        The DUT must lie between the two thrus.
    dof : tuple of 3 float
        Degrees of freedom of the three uncertainties.
    linearity_db : float
        Half-width of the dongle's linearity error between the two levels (rectangular); 0 when
        not assessed (the budget then says so).
    extra_components : sequence of Component
        Further terms, e.g. :func:`mismatch_components`.
    k : float
        Coverage factor.

    Returns
    -------
    Loss

    Notes
    -----
    L = r_thru(t_dut) - r_dut, with r_thru(t) = (1 - w)*r_before + w*r_after,
    w = (t_dut - t_before)/(t_after - t_before); sensitivities (1 - w), w and -1 (GUM 5.1.3).
    Linear drift of generator or dongle gain drops out; the method assumes the dongle is linear
    between the two levels, which the substitution method does not.
    """
    values = [thru_dbfs, u_thru_db, dut_dbfs, u_dut_db]
    if not all(np.isfinite(values)) or u_thru_db < 0 or u_dut_db < 0:
        raise ValueError(f"readings and uncertainties must be finite (u >= 0), got {values}")
    if linearity_db < 0:
        raise ValueError(f"linearity_db must be >= 0, got {linearity_db!r}")
    components = []
    drift = None
    if thru_after_dbfs is None:
        reference = float(thru_dbfs)
        components.append(Component.normal("thru reading", u_thru_db, dof=dof[0]))
    else:
        if times_s is None or len(times_s) != 3:
            raise ValueError(f"times_s must give (thru before, DUT, thru after), got {times_s!r}")
        t_before, t_dut, t_after = map(float, times_s)
        if not t_before < t_after:
            raise ValueError(f"the thru after must come later than the thru before, got times {times_s}")
        w = (t_dut - t_before) / (t_after - t_before)
        if not 0.0 <= w <= 1.0:
            raise ValueError(f"the DUT capture (t = {t_dut}) does not lie between the thru captures "
                             f"(t = {t_before} and {t_after}); drift would be extrapolated")
        if not np.isfinite([thru_after_dbfs, u_thru_after_db]).all() or u_thru_after_db < 0:
            raise ValueError(f"thru-after reading must be finite, got {thru_after_dbfs!r} "
                             f"± {u_thru_after_db!r}")
        reference = (1.0 - w) * thru_dbfs + w * thru_after_dbfs
        drift = float(thru_after_dbfs - thru_dbfs)
        components.append(Component.normal("thru reading (before)", u_thru_db,
                                           sensitivity=1.0 - w, dof=dof[0]))
        components.append(Component.normal("thru reading (after)", u_thru_after_db,
                                           sensitivity=w, dof=dof[2]))
    components.append(Component.normal("DUT reading", u_dut_db, sensitivity=-1.0, dof=dof[1]))
    components.append(Component.rectangular(
        "dongle linearity", linearity_db,
        note="" if linearity_db > 0 else "not assessed (check the range with a ladder)"))
    if thru_after_dbfs is None:
        components.append(Component.not_assessed("drift", "capture a thru after the DUT"))
    components.extend(extra_components)
    return Loss(loss_db=float(reference - dut_dbfs), budget=Budget(tuple(components), k),
                method="direct", reference_dbfs=float(reference), dut_dbfs=float(dut_dbfs),
                drift_db=drift)


def substitution_loss(nominal_db, reading_dbfs, u_reading_db, dut_dbfs, u_dut_db, *,
                      dut_step_db=0.0, atten_tolerance_db=0.0, dof_dut=math.inf, dof_steps=None,
                      extra_components=(), k=DEFAULT_K):
    """Insertion loss by substitution: the ladder setting that reads like the DUT.

    Parameters
    ----------
    nominal_db, reading_dbfs, u_reading_db : array_like
        The ladder: nominal settings (dB), thru readings (dBFS), their standard uncertainties (dB).
        Readings must fall strictly as the attenuation rises.
    dut_dbfs, u_dut_db : float
        The DUT reading (dBFS) and its standard uncertainty (dB), taken with the attenuator at
        ``dut_step_db``.
    dut_step_db : float
        Attenuator setting during the DUT capture, dB.
    atten_tolerance_db : float
        Half-width of the attenuator's setting tolerance (rectangular), dB.
    dof_dut : float, dof_steps : array_like, optional
        Degrees of freedom of the uncertainties.
    extra_components : sequence of Component
        Further terms, e.g. :func:`mismatch_components`.
    k : float
        Coverage factor.

    Returns
    -------
    Loss

    Raises
    ------
    ValueError
        When the DUT reading lies outside the ladder (never extrapolated), or when the readings do
        not fall monotonically.

    Notes
    -----
    Between the neighbouring steps (A_l, r_l) and (A_u, r_u) that bracket the DUT reading r_d,
    A = A_l + s*(r_l - r_d) with s = (A_u - A_l)/(r_l - r_u); L = A - A_dut. Sensitivities:
    dA/dr_d = -s, dA/dr_l = s*(1 - t), dA/dr_u = s*t with t = (r_l - r_d)/(r_l - r_u). The value
    stated is the monotone cubic (PCHIP, Fritsch & Carlson 1980) through all steps, which follows a
    curved (compressed) response better than the chord; their difference enters the budget as a
    rectangular interpolation term. The dongle serves only as a comparator (Kaylie 1966).
    """
    nominal, reading, u, order = ladder_arrays(nominal_db, reading_dbfs, u_reading_db,
                                                allow_missing=False)
    if nominal.size < 2:
        raise ValueError(f"substitution needs at least 2 ladder steps, got {nominal.size}")
    nu = np.full(nominal.size, np.inf) if dof_steps is None else as_1d("dof_steps", dof_steps)[order]
    if not (np.isfinite(dut_dbfs) and np.isfinite(u_dut_db) and u_dut_db >= 0):
        raise ValueError(f"the DUT reading must be finite, got {dut_dbfs!r} ± {u_dut_db!r}")
    rising = np.flatnonzero(np.diff(reading) >= 0)
    if rising.size:
        i = rising[0]
        raise ValueError(f"ladder readings do not fall with attenuation: step {nominal[i]:g} dB reads "
                         f"{reading[i]:.2f} dBFS, step {nominal[i + 1]:g} dB reads "
                         f"{reading[i + 1]:.2f} dBFS")
    if not reading[-1] <= dut_dbfs <= reading[0]:
        raise ValueError(f"the DUT reading {dut_dbfs:.2f} dBFS lies outside the ladder "
                         f"({reading[-1]:.2f} to {reading[0]:.2f} dBFS, steps {nominal[0]:g} to "
                         f"{nominal[-1]:g} dB); it would have to be extrapolated")
    i = min(int(np.searchsorted(-reading, -dut_dbfs, side="right")) - 1, nominal.size - 2)
    i = max(i, 0)
    a_l, a_u, r_l, r_u = nominal[i], nominal[i + 1], reading[i], reading[i + 1]
    s = (a_u - a_l) / (r_l - r_u)
    t = (r_l - dut_dbfs) / (r_l - r_u)
    chord = a_l + s * (r_l - dut_dbfs)
    from scipy.interpolate import PchipInterpolator  # here, not at the top: a slow import

    attenuation = float(PchipInterpolator(-reading, nominal)(-dut_dbfs))

    components = [
        Component.normal("DUT reading", u_dut_db, sensitivity=-s, dof=dof_dut),
        Component.normal(f"ladder reading {a_l:g} dB", u[i], sensitivity=s * (1 - t), dof=nu[i]),
        Component.normal(f"ladder reading {a_u:g} dB", u[i + 1], sensitivity=s * t, dof=nu[i + 1]),
        Component.rectangular("interpolation between steps", abs(attenuation - chord)),
        Component.rectangular("attenuator setting (ladder)", atten_tolerance_db),
    ]
    if dut_step_db != 0:
        components.append(Component.rectangular("attenuator setting (DUT)", atten_tolerance_db,
                                                sensitivity=-1.0))
    components.extend(extra_components)
    return Loss(loss_db=attenuation - float(dut_step_db), budget=Budget(tuple(components), k),
                method="substitution", reference_dbfs=math.nan, dut_dbfs=float(dut_dbfs),
                attenuation_db=attenuation, bracket_db=(float(a_l), float(a_u)))
