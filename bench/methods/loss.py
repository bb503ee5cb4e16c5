"""Insertion loss from tone readings: direct (thru against DUT at one generator level) and by
substitution (the ladder setting that reads like the DUT).

Both take pooled tone readings (:class:`~rxbench.methods.common.PooledTone`) and settings and
return a :class:`LossResult`; ``rxbench loss`` and a session's ``thru``/``dut``/``step`` captures
call the same functions. The numerics are :func:`rxbench.dsp.loss.direct_loss` and
:func:`rxbench.dsp.loss.substitution_loss`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Mapping

from rxbench import keys
from rxbench.dsp import loss as loss_mod
from rxbench.dsp.uncertainty import Component, coverage_factor
from rxbench.errors import MeasurementError
from rxbench.dsp.same_signal import DEFAULT_PPM
from rxbench.methods.common import (SWR_FROM_OPTIONS, PooledTone, budget_rows, noted, pool, reading_row,
                                    require_comparable_tones, with_aliases, with_impedance_mismatch)

#: Old key names of a loss result (old -> new), kept for one release.
ALIASES = {"standard_uncertainty_db": "u_db", "k": "coverage_factor", "effective_dof": "dof_eff",
           "per_device_expanded_uncertainty_db": "expanded_uncertainty_per_device_db",
           "dut_step_db": "dut_attenuation_db"}
#: Below this many effective degrees of freedom k = 2 covers noticeably less than 95 %.
LOW_DOF = 10.0


@dataclass(frozen=True, eq=False)
class LossResult:
    """An insertion loss, its budget, its warnings and where it came from.

    Attributes
    ----------
    loss : rxbench.dsp.loss.Loss
        The number and its uncertainty budget.
    n_devices : int
        Identical devices in the path (2 for a back-to-back pair): per-device loss = loss / n.
    center_hz : float or None
        The captures' tuning.
    offset_hz : float
        The DUT tone's offset from the centre, Hz.
    dut_attenuation_db : float
        The attenuator setting while the DUT was captured.
    captures : dict
        Role -> capture names (substitution: ``ladder`` maps each step to its captures).
    readings : dict
        Role -> one row per capture (:func:`~rxbench.methods.common.reading_row`).
    settings : dict
        What the method was given: linearity, attenuator tolerance, SWRs.
    times_from : str or None
        Direct with a thru after: where the capture times came from (``metadata``, ``order given``).
    device : str
        The device label of the DUT captures (a session with several devices), else "".
    dongle_linear : bool or None
        Direct loss in a session with a ladder: whether the ladder check shows the dongle linear
        between the two levels (None: no ladder to tell).
    warnings : tuple of str
    """

    loss: loss_mod.Loss
    n_devices: int
    center_hz: float | None
    offset_hz: float
    dut_attenuation_db: float
    captures: dict = field(default_factory=dict)
    readings: dict = field(default_factory=dict)
    settings: dict = field(default_factory=dict)
    times_from: str | None = None
    warnings: tuple = ()
    device: str = ""
    dongle_linear: bool | None = None

    @property
    def method(self) -> str:
        return self.loss.method

    @property
    def insertion_loss_db(self) -> float:
        return self.loss.loss_db

    @property
    def u_db(self) -> float:
        return self.loss.u_db

    @property
    def expanded_uncertainty_db(self) -> float:
        return self.loss.expanded_uncertainty_db

    @property
    def per_device_db(self) -> float:
        return self.loss.loss_db / self.n_devices

    @property
    def expanded_uncertainty_per_device_db(self) -> float:
        return self.loss.expanded_uncertainty_db / self.n_devices

    @property
    def frequency_hz(self) -> float | None:
        return None if self.center_hz is None else self.center_hz + self.offset_hz

    def to_dict(self) -> dict:
        loss, budget = self.loss, self.loss.budget
        out = {
            "method": loss.method,
            "insertion_loss_db": loss.loss_db,
            "u_db": loss.u_db,
            "expanded_uncertainty_db": loss.expanded_uncertainty_db,
            "coverage_factor": budget.k,
            "dof_eff": budget.dof_eff,
            "n_devices": self.n_devices,
            "pair": self.n_devices == 2,
            "per_device_db": self.per_device_db,
            "expanded_uncertainty_per_device_db": self.expanded_uncertainty_per_device_db,
            "center_hz": self.center_hz,
            "frequency_hz": self.frequency_hz,
            "dut_attenuation_db": self.dut_attenuation_db,
            "dut_dbfs": loss.dut_dbfs,
            "reference_dbfs": None if math.isnan(loss.reference_dbfs) else loss.reference_dbfs,
            "drift_db": loss.drift_db,
            "times_from": self.times_from,
            "device": self.device,
            "dongle_linear": self.dongle_linear,
            "attenuation_db": loss.attenuation_db,
            "bracket_db": None if loss.bracket_db is None else list(loss.bracket_db),
            "budget": budget_rows(budget),
            "captures": self.captures,
            "readings": self.readings,
            "settings": self.settings,
            "warnings": list(self.warnings),
        }
        aliases = dict(ALIASES, thru_dbfs="reference_dbfs") if loss.method == "direct" else ALIASES
        return with_aliases(out, aliases)


def _swr_settings(swr: Mapping | None) -> dict:
    return {key: (swr or {}).get(key) for key in keys.SWRS}


def _checked(loss: loss_mod.Loss, warnings: list[str]) -> None:
    """Warnings every insertion loss earns, whatever the method."""
    dof = loss.budget.dof_eff
    if dof < LOW_DOF:
        warnings.append(f"only {dof:.1f} effective degrees of freedom behind the uncertainty: k = "
                        f"{loss.budget.k:g} covers less than 95 % (the Student t factor for 95 % would be "
                        f"{coverage_factor(dof, 0.95):.2f}); take more captures")
    U = loss.expanded_uncertainty_db
    if loss.loss_db + U < 0:
        warnings.append(f"the DUT reads stronger than the reference by more than the uncertainty "
                        f"({-loss.loss_db:.3f} dB): a passive device cannot gain; check the set-up")


def _order_times(*groups: PooledTone) -> tuple[tuple, str, str | None]:
    """Times of the pooled groups (s): from the metadata when every capture has one, else the
    order the captures were given. Returns (times, where from, warning or None)."""
    stamps = [t for g in groups for t in g.times_s]
    if all(s is not None for s in stamps):
        return tuple(g.time_s for g in groups), "metadata", None
    warning = None
    if any(s is not None for s in stamps):
        warning = ("only some captures carry a start time; drift is interpolated by the order the captures "
                   "were given")
    times, i = [], 0
    for g in groups:
        n = len(g.readings)
        times.append(i + (n - 1) / 2)
        i += n
    return tuple(times), "order given", warning


def direct_loss(thru: PooledTone, dut: PooledTone, thru_after: PooledTone | None = None, *,
                linearity_db: float | None = None, linearity_how: str = "give --linearity-db from a ladder "
                "check, or use substitution", swr: Mapping | None = None,
                swr_given_by: Mapping[str, str] = SWR_FROM_OPTIONS, n_devices: int = 1,
                dut_attenuation_db: float = 0.0, drift_ppm: float = DEFAULT_PPM) -> LossResult:
    """Direct insertion loss: the thru reading minus the DUT reading at one generator level.

    Parameters
    ----------
    thru, dut : PooledTone
        The thru before the DUT, and the DUT.
    thru_after : PooledTone, optional
        The thru captured again after the DUT: its drift is interpolated to the DUT's time
        (capture times from the metadata, else the order given).
    linearity_db : float or None
        Half-width of the dongle's linearity error between the two levels (rectangular), from a
        ladder check; None: not assessed (warned, with ``linearity_how`` to say how it could be).
    swr, swr_given_by : mapping
        Known SWRs (``source_swr``, ``load_swr``, ``dut_swr``) and where the user gives each.
    n_devices : int
        Identical devices in the path (2: a back-to-back pair).
    dut_attenuation_db : float
        The attenuator setting of both captures.
    drift_ppm : float
        How far the tone may move between the captures (ppm of the centre, on top of 3 bins).

    Raises
    ------
    UnlikeCapturesError
        The captures do not hold the same signal (:func:`~rxbench.methods.common.require_comparable_tones`).
    MeasurementError
        The readings cannot give a loss (e.g. the DUT does not lie between two thrus in time).
    """
    require_comparable_tones(thru, dut, thru_after, drift_ppm=drift_ppm)
    warnings: list[str] = []
    kw: dict = {}
    times_from = None
    if thru_after is not None:
        times, times_from, warning = _order_times(thru, dut, thru_after)
        if warning:
            warnings.append(warning)
        kw = dict(thru_after_dbfs=thru_after.dbfs, u_thru_after_db=thru_after.u_db, times_s=times)
    dof = (thru.dof, dut.dof, thru_after.dof if thru_after is not None else math.inf)
    if linearity_db is None:
        warnings.append(f"the dongle's linearity between the thru ({thru.dbfs:.1f} dBFS) and DUT "
                        f"({dut.dbfs:.1f} dBFS) levels is not in the budget; the uncertainty covers the "
                        f"readings only ({linearity_how})")

    def compute(extra):
        try:
            return loss_mod.direct_loss(thru.dbfs, thru.u_db, dut.dbfs, dut.u_db, dof=dof,
                                          linearity_db=linearity_db or 0.0, extra_components=extra, **kw)
        except ValueError as exc:
            raise MeasurementError(str(exc)) from None

    loss, warning = with_impedance_mismatch(compute, swr or {}, swr_given_by)
    if warning:
        warnings.append(warning)
    if thru_after is not None and abs(loss.drift_db) > 2 * math.hypot(thru.u_db, thru_after.u_db):
        warnings.append(f"the thru moved by {loss.drift_db:+.3f} dB between before and after; corrected by "
                        "interpolating linearly in time")
    _checked(loss, warnings)
    groups = {"thru": thru, "dut": dut, **({"thru_after": thru_after} if thru_after is not None else {})}
    return LossResult(
        loss, n_devices, dut.center_hz, dut.offset_hz, dut_attenuation_db,
        captures={role: g.names for role, g in groups.items()},
        readings={role: [reading_row(r) for r in g.readings] for role, g in groups.items()},
        settings={"linearity_db": linearity_db, **_swr_settings(swr), "drift_ppm": drift_ppm},
        times_from=times_from, warnings=tuple(warnings))


def generator_drift(steps: Mapping[float, PooledTone], dut: PooledTone) -> tuple[Component, str | None]:
    """The generator's drift between the ladder and the DUT, as a budget line (and a warning or None).

    A ladder step captured again after the DUT shows how far the level moved meanwhile; the largest
    change seen bounds the drift in the DUT's reading against the ladder
    (:func:`rxbench.dsp.loss.drift_component`). Without such a re-read the line is zero and says
    it was not assessed.
    """
    times = dut.times_s
    if any(t is None for t in times):
        return Component.not_assessed("generator drift", "captures without times"), None
    first, last = min(times), max(times)
    changes, nominals = [], []
    for nominal, step in steps.items():
        before = [r for r, t in zip(step.readings, step.times_s) if t is not None and t < first]
        after = [r for r, t in zip(step.readings, step.times_s) if t is not None and t > last]
        if before and after:
            b, a = pool(before), pool(after)
            changes.append((a.dbfs - b.dbfs, math.hypot(a.u_db, b.u_db)))
            nominals.append(nominal)
    if not changes:
        return Component.not_assessed("generator drift", "capture a ladder step again after the DUT"), None
    comp, i, beyond = loss_mod.drift_component([c[0] for c in changes], [c[1] for c in changes],
                                                 [f"{db:g} dB step re-read after the DUT" for db in nominals])
    warning = None
    if beyond:
        warning = (f"the {nominals[i]:g} dB step reads {changes[i][0]:+.3f} dB after the DUT against before it; the "
                   "generator or the dongle drifted, and the budget carries it")
    return comp, warning


def substitution_loss(steps: Mapping[float, PooledTone], dut: PooledTone, *, dut_attenuation_db: float = 0.0,
                      tolerance_db: float | None = None, tolerance_how: str = "give --atten-tolerance-db",
                      swr: Mapping | None = None, swr_given_by: Mapping[str, str] = SWR_FROM_OPTIONS,
                      n_devices: int = 1, drift_ppm: float = DEFAULT_PPM) -> LossResult:
    """Insertion loss by substitution: the ladder setting that reads like the DUT, interpolated.

    Parameters
    ----------
    steps : mapping of float to PooledTone
        The ladder: attenuator setting (dB) -> its pooled thru readings (two or more settings).
    dut : PooledTone
        The DUT, captured with the attenuator at ``dut_attenuation_db``.
    tolerance_db : float or None
        The attenuator's setting tolerance, +/- dB (rectangular); None: not stated (warned, and the
        budget's attenuator lines say ``tolerance_how``).
    swr, swr_given_by, n_devices, drift_ppm
        As for :func:`direct_loss`.

    Raises
    ------
    UnlikeCapturesError
        The steps and the DUT do not hold the same signal.
    MeasurementError
        Fewer than two steps, a ladder that does not fall with attenuation, or a DUT reading
        outside the ladder (never extrapolated).
    """
    require_comparable_tones(*steps.values(), dut, drift_ppm=drift_ppm)
    warnings: list[str] = []
    steps = dict(sorted(steps.items()))
    if len(steps) < 2:
        raise MeasurementError("substitution needs at least 2 ladder steps with a readable tone")
    drift, warning = generator_drift(steps, dut)
    if warning:
        warnings.append(warning)
    if tolerance_db is None:
        warnings.append(f"the attenuator's tolerance is not stated ({tolerance_how}): the uncertainty covers "
                        "the readings only, not the attenuator the result rests on")
    nominal = list(steps)

    def compute(extra):
        try:
            return loss_mod.substitution_loss(
                nominal, [p.dbfs for p in steps.values()], [p.u_db for p in steps.values()], dut.dbfs, dut.u_db,
                dut_step_db=dut_attenuation_db, atten_tolerance_db=tolerance_db or 0.0, dof_dut=dut.dof,
                dof_steps=[p.dof for p in steps.values()], extra_components=(drift, *extra))
        except ValueError as exc:
            msg = str(exc)
            if "outside the ladder" in msg:
                msg += "; extend the ladder or capture the DUT at another attenuator setting"
            raise MeasurementError(msg) from None

    loss, warning = with_impedance_mismatch(compute, swr or {}, swr_given_by)
    if warning:
        warnings.append(warning)
    if tolerance_db is None:
        loss = replace(loss, budget=noted(loss.budget, "attenuator setting",
                                          f"tolerance not stated ({tolerance_how}); not counted"))
    _checked(loss, warnings)
    return LossResult(
        loss, n_devices, dut.center_hz, dut.offset_hz, dut_attenuation_db,
        captures={"dut": dut.names, "ladder": {f"{db:g}": p.names for db, p in steps.items()}},
        readings={"steps": [reading_row(r, nominal_db=db) for db, p in steps.items() for r in p.readings],
                  "dut": [reading_row(r) for r in dut.readings]},
        settings={"tolerance_db": tolerance_db, **_swr_settings(swr), "drift_ppm": drift_ppm},
        warnings=tuple(warnings))
