"""Tone methods of a session: the ladder check, direct and substitution insertion loss."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from rxbench.analyze import SWR_FROM_PLAN, mismatch_budget, pool_tones
from rxbench.dsp import ladder as ladder_mod
from rxbench.dsp.uncertainty import Budget, Component
from rxbench.session.folder import Entry
from rxbench.session.grouping import _compatible, _mhz, _same_signal, mismatch

if TYPE_CHECKING:
    from rxbench.session.analysis import Analysis


#: Half-width of the dongle's linearity between two levels, once a ladder check found them linear, dB
#: (the check's own limit, :data:`dsp.ladder.DEFAULT_LINEARITY_DB`).
LADDER_LINEARITY_DB = ladder_mod.DEFAULT_LINEARITY_DB


def budget_dict(budget: Budget) -> list[dict]:
    """The lines of an uncertainty budget, JSON-ready."""
    out = []
    for c in budget.components:
        note = c.note
        if not note and c.name.startswith("attenuator setting") and c.half_width == 0:
            note = "tolerance not stated (plan: [attenuator] tolerance_db); not counted"
        out.append({"name": c.name, "u_db": c.u, "sensitivity": c.sensitivity, "contribution_db": c.contribution,
                    "dof": c.dof, "kind": c.kind, "distribution": c.distribution, "half_width_db": c.half_width,
                    "note": note})
    return out


@dataclass
class _Pooled:
    """Readings of one role at one setting, pooled."""

    entries: list
    dbfs: float
    u_db: float
    dof: float
    offset_hz: float

    @property
    def time_s(self) -> float | None:
        """Mean mid-capture time (s since the epoch), as ``rxbench loss`` takes it; None unless all are known."""
        t = [e.time_s + e.capture.duration_s / 2 for e in self.entries if e.time_s is not None]
        return float(np.mean(t)) if len(t) == len(self.entries) and t else None

    @property
    def names(self) -> list[str]:
        return [e.name for e in self.entries]


def _pool(entries: list[Entry], readings: dict) -> _Pooled:
    mean, u_mean, dof_mean = pool_tones([readings[e] for e in entries])
    return _Pooled(list(entries), mean, u_mean, dof_mean, float(np.mean([readings[e].tone.offset_hz for e in entries])))


def _has_tone(e: Entry, readings: dict) -> bool:
    r = readings.get(e)
    t = None if r is None else r.tone
    return t is not None and t.power > 0 and math.isfinite(t.u_power_db)


def _ladder(center, steps: list[Entry], readings, warnings) -> tuple[dict | None, dict]:
    """Check the ladder at one centre frequency; returns (result dict or None, pooled readings by dB)."""
    where = f"ladder at {_mhz(center)}"
    usable = []
    for e in steps:
        if e.attenuation_db is None:
            warnings.append(f"{where}: {e.name} gives no rxbench:attenuation_db; left out")
        elif not _has_tone(e, readings):
            warnings.append(f"{where}: no tone read in {e.name}; left out")
        else:
            usable.append(e)
    if not usable:
        return None, {}
    usable = _compatible(usable, usable[0], where, warnings)
    by_db: dict = {}
    for e in usable:
        by_db.setdefault(e.attenuation_db, []).append(e)
    pooled = {db: _pool(es, readings) for db, es in sorted(by_db.items())}
    if len(pooled) < 3:
        if steps:
            warnings.append(f"{where}: {len(pooled)} attenuator setting(s); the ladder check needs 3 or more")
        return None, pooled
    nominal = np.array(list(pooled))
    reading = np.array([p.dbfs for p in pooled.values()])
    u = np.array([p.u_db for p in pooled.values()])
    try:
        chk = ladder_mod.check_ladder(nominal, reading, u)
    except ValueError as exc:
        warnings.append(f"{where}: no check: {exc}")
        return None, pooled
    rows = []
    for i, db in enumerate(chk.nominal_db):
        p = pooled[float(db)]
        rows.append({
            "nominal_db": float(db), "reading_dbfs": float(chk.reading_dbfs[i]),
            "u_reading_db": float(chk.u_reading_db[i]), "measured_db": float(chk.measured_db[i]),
            "error_db": float(chk.error_db[i]), "u_error_db": float(chk.u_error_db[i]),
            "expanded_error_uncertainty_db": float(chk.k * chk.u_error_db[i]),
            "flagged": bool(chk.flagged[i]), "region": chk.region[i], "captures": p.names,
        })
        if chk.flagged[i]:
            warnings.append(
                f"{where}: the {db:g} dB step reads {chk.error_db[i]:+.2f} dB off its nominal value "
                f"(tolerance {chk.tolerance_db:g} dB) in the dongle's linear range: the attenuator, not the dongle")
    if chk.compression_db > 0:
        warnings.append(f"{where}: the dongle compresses at the top of the ladder "
                        f"({chk.compression_db:.2f} dB short at {chk.nominal_db[0]:g} dB)")
    return {
        "center_hz": center, "frequency_hz": None if center is None else center + float(np.mean(
            [p.offset_hz for p in pooled.values()])),
        "steps": rows, "offset_dbfs": chk.offset_dbfs, "u_offset_db": chk.u_offset_db,
        "reference": chk.reference, "compression_db": chk.compression_db,
        "usable_top_db": chk.usable_top_db, "usable_bottom_db": chk.usable_bottom_db,
        "usable_range_db": chk.usable_range_db, "top_limited_by": chk.top_limited_by,
        "bottom_limited_by": chk.bottom_limited_by, "tolerance_db": chk.tolerance_db,
        "linearity_db": chk.linearity_db, "k": chk.k,
        "n_flagged": int(np.sum(chk.flagged)),
    }, pooled


def _loss_dict(loss, center, offset_hz, n_devices, captures: dict, dut_attenuation_db: float) -> dict:
    u = loss.u_db
    return {
        "method": loss.method,
        "dut_attenuation_db": dut_attenuation_db,
        "center_hz": center,
        "frequency_hz": None if center is None else center + offset_hz,
        "insertion_loss_db": loss.loss_db,
        "u_db": u,
        "expanded_uncertainty_db": loss.expanded_uncertainty_db,
        "k": loss.budget.k,
        "dof_eff": loss.budget.dof_eff,
        "n_devices": n_devices,
        "per_device_db": loss.loss_db / n_devices,
        "expanded_uncertainty_per_device_db": loss.expanded_uncertainty_db / n_devices,
        "dut_dbfs": loss.dut_dbfs,
        "reference_dbfs": loss.reference_dbfs,
        "drift_db": loss.drift_db,
        "attenuation_db": loss.attenuation_db,
        "bracket_db": None if loss.bracket_db is None else list(loss.bracket_db),
        "budget": budget_dict(loss.budget),
        "captures": captures,
    }


def _linear_between(ladder: dict | None, low_dbfs: float, high_dbfs: float) -> bool | None:
    """Did the ladder check find the dongle linear over [low, high] dBFS? None without a ladder."""
    if ladder is None:
        return None
    lin = [s["reading_dbfs"] for s in ladder["steps"] if s["region"] == ladder_mod.LINEAR]
    if not lin:
        return False
    return min(lin) <= low_dbfs + 1.0 and high_dbfs - 1.0 <= max(lin)


def _tone_losses(center, group: list[Entry], readings, analysis: Analysis, drift_ppm: float) -> None:
    warnings = analysis.warnings
    where = f"loss at {_mhz(center)}"
    group = _same_signal(group, readings, where, warnings, drift_ppm)
    steps = [e for e in group if e.role == "step"]
    ladder, pooled_ladder = _ladder(center, steps, readings, warnings) if steps else (None, {})
    if ladder is not None:
        analysis.ladders.append(ladder)
    duts_all = [e for e in group if e.role == "dut"]
    for e in duts_all:
        if not _has_tone(e, readings):
            warnings.append(f"{where}: no tone read in DUT capture {e.name}; left out")
    duts_all = [e for e in duts_all if _has_tone(e, readings)]
    thrus_all = [e for e in group if e.role == "thru" and _has_tone(e, readings)]
    by_att: dict = {}
    for e in duts_all:  # several devices at one setting: each its own loss, against the same thru/ladder
        by_att.setdefault((e.attenuation_or_zero, e.device), []).append(e)
    for (att, device), duts in sorted(by_att.items()):
        first_new = len(analysis.losses)
        try:
            _tone_losses_at(center, att, duts, thrus_all, pooled_ladder, ladder, readings, analysis, where)
        finally:
            for d in analysis.losses[first_new:]:
                d["device"] = device


def _tone_losses_at(center, att, duts, thrus_all, pooled_ladder, ladder, readings, analysis, where) -> None:
    """Direct and substitution loss of the DUT captures ``duts`` (one setting, one device) at a centre."""
    warnings = analysis.warnings
    duts = _compatible(duts, duts[0], where, warnings)
    n_dev = max(e.n_devices for e in duts)
    dut = _pool(duts, readings)
    # Direct: thru captures at the same attenuator setting.
    thrus = [e for e in thrus_all if e.attenuation_or_zero == att]
    thrus = _compatible(thrus, duts[0], f"direct {where}", warnings)
    if thrus:
        _direct(center, att, dut, thrus, readings, ladder, n_dev, analysis)
    elif not pooled_ladder:
        warnings.append(f"{where}: DUT captured at {att:g} dB but no thru at that setting and no ladder; "
                        "no loss")
    # Substitution: the DUT against the ladder.
    if pooled_ladder:
        ref = pooled_ladder[next(iter(pooled_ladder))].entries[0]
        why = mismatch(duts[0], ref)
        if why is not None:
            warnings.append(f"substitution {where}: {why}; no substitution loss")
            return
        if len(pooled_ladder) < 2:
            return
        nominal = list(pooled_ladder)
        tols = [e.attenuator_tolerance_db for p in pooled_ladder.values() for e in p.entries] + \
               [e.attenuator_tolerance_db for e in duts]
        tols = [t for t in tols if t is not None]
        drift = _ladder_drift(pooled_ladder, dut, readings, f"substitution {where}", warnings)

        def substitution(extra):
            return ladder_mod.substitution_loss(
                nominal, [p.dbfs for p in pooled_ladder.values()], [p.u_db for p in pooled_ladder.values()],
                dut.dbfs, dut.u_db, dut_step_db=att, atten_tolerance_db=max(tols, default=0.0),
                dof_dut=dut.dof, dof_steps=[p.dof for p in pooled_ladder.values()],
                extra_components=(drift, *extra))

        try:
            loss = _with_mismatch(substitution, dut, f"substitution {where}", warnings)
        except ValueError as exc:
            warnings.append(f"substitution {where}: {exc}")
            return
        if not tols:
            warnings.append(f"substitution {where}: the attenuator's tolerance is not stated (plan: "
                            "[attenuator] tolerance_db); the loss is only as good as its steps, and the "
                            "budget leaves them out")
        d = _loss_dict(loss, center, dut.offset_hz, n_dev, {"dut": dut.names, "ladder": {
            f"{db:g}": p.names for db, p in pooled_ladder.items()}}, att)
        analysis.losses.append(d)


def _ladder_drift(pooled_ladder: dict, dut: _Pooled, readings, where: str, warnings: list[str]) -> Component:
    """The generator's drift between the ladder and the DUT, as a budget line.

    A ladder step captured again after the DUT shows how far the level moved meanwhile; the largest
    change seen bounds the drift in the DUT's reading against the ladder (rectangular, half-width
    that change). Without such a re-read the line is zero and says it was not assessed.
    """
    times = [e.time_s for e in dut.entries]
    if any(t is None for t in times):
        return Component.not_assessed("generator drift", "captures without times")
    first, last = min(times), max(times)
    changes = []
    for nominal, step in pooled_ladder.items():
        before = [e for e in step.entries if e.time_s is not None and e.time_s < first]
        after = [e for e in step.entries if e.time_s is not None and e.time_s > last]
        if before and after:
            b, a = _pool(before, readings), _pool(after, readings)
            changes.append((a.dbfs - b.dbfs, math.hypot(a.u_db, b.u_db), nominal))
    if not changes:
        return Component.not_assessed("generator drift", "capture a ladder step again after the DUT")
    change, u_change, nominal = max(changes, key=lambda c: abs(c[0]))
    if abs(change) > 2 * u_change:  # more than the readings' own scatter explains
        warnings.append(f"{where}: the {nominal:g} dB step reads {change:+.3f} dB after the DUT against "
                        "before it; the generator or the dongle drifted, and the budget carries it")
    return Component.rectangular("generator drift", abs(change),
                                 note=f"{nominal:g} dB step re-read after the DUT: {change:+.3f} dB")


def _with_mismatch(compute, dut: _Pooled, where: str, warnings: list[str]):
    """``compute(extra_components)`` with the mismatch terms the plan's SWRs allow (they scale with
    the loss itself, hence the first pass without them)."""
    loss = compute(())
    comps, warning = mismatch_budget(dut.entries[0].swr, loss.loss_db, SWR_FROM_PLAN)
    if warning:
        warnings.append(f"{where}: {warning}")
    return compute(comps)


def _direct(center, att, dut: _Pooled, thrus: list[Entry], readings, ladder, n_dev, analysis) -> None:
    warnings = analysis.warnings
    where = f"direct loss at {_mhz(center)}"
    t_dut = dut.time_s
    before = after = None
    if t_dut is not None and all(e.time_s is not None for e in thrus):
        first = min(e.time_s for e in dut.entries)
        last = max(e.time_s for e in dut.entries)
        b = [e for e in thrus if e.time_s <= first]
        a = [e for e in thrus if e.time_s > last]
        before = _pool(b, readings) if b else None
        after = _pool(a, readings) if a else None
        if before is None:
            before, after = after, None
    else:
        before = _pool(thrus, readings)
    linear = _linear_between(ladder, dut.dbfs, before.dbfs)
    if linear is False:
        warnings.append(f"{where}: the ladder check does not show the dongle linear between the thru "
                        f"({before.dbfs:.1f} dBFS) and DUT ({dut.dbfs:.1f} dBFS) levels; prefer the "
                        "substitution loss")
    lin_db = LADDER_LINEARITY_DB if linear else 0.0
    if linear is None:
        warnings.append(f"{where}: no ladder in the session, so the dongle's linearity between the thru "
                        f"({before.dbfs:.1f} dBFS) and DUT ({dut.dbfs:.1f} dBFS) levels is not in the budget; "
                        "the uncertainty covers the readings only (add a ladder, or use substitution)")
    kw = {}
    if after is not None:
        kw = dict(thru_after_dbfs=after.dbfs, u_thru_after_db=after.u_db,
                  times_s=(before.time_s, t_dut, after.time_s))
    def direct(extra):
        return ladder_mod.direct_loss(before.dbfs, before.u_db, dut.dbfs, dut.u_db,
                                      dof=(before.dof, dut.dof, after.dof if after else math.inf),
                                      linearity_db=lin_db, extra_components=extra, **kw)

    try:
        loss = _with_mismatch(direct, dut, where, warnings)
    except ValueError as exc:
        warnings.append(f"{where}: {exc}")
        return
    caps = {"thru": before.names, "dut": dut.names}
    if after is not None:
        caps["thru_after"] = after.names
    d = _loss_dict(loss, center, dut.offset_hz, n_dev, caps, att)
    d["dongle_linear"] = linear  # the ladder check's verdict between the two levels (None: no ladder)
    analysis.losses.append(d)
