"""Tone methods of a session: its ``step`` captures go to the ladder check, its ``thru`` and ``dut``
captures to the direct loss, and the ``dut`` against the ladder to the substitution loss — the
methods ``rxbench ladder`` and ``rxbench loss`` call (:mod:`rxbench.methods`).

This module only groups the captures by setting and time, pools repeats, and turns a method's
MeasurementError into a warning.
"""

from __future__ import annotations

from dataclasses import replace

from typing import TYPE_CHECKING

from rxbench.errors import MeasurementError, UnlikeCapturesError
from rxbench.dsp.same_signal import DEFAULT_PPM
from rxbench.methods.common import SWR_FROM_PLAN, PooledTone, has_tone, pool
from rxbench.methods.ladder import LadderResult, ladder_check
from rxbench.methods.loss import direct_loss, substitution_loss
from rxbench.session.folder import Entry
from rxbench.session.grouping import _compatible, _mhz, _same_signal, not_alike

if TYPE_CHECKING:
    from rxbench.session.analysis import Analysis


def _pool(entries: list[Entry], readings: dict) -> PooledTone:
    return pool([readings[e] for e in entries])


def _ladder(center, steps: list[Entry], readings, warnings, drift_ppm: float) -> tuple[LadderResult | None, dict]:
    """Check the ladder at one centre frequency; returns (result or None, pooled readings by dB)."""
    where = f"ladder at {_mhz(center)}"
    usable = []
    for e in steps:
        if e.attenuation_db is None:
            warnings.append(f"{where}: {e.name} gives no rxbench:attenuation_db; left out")
        elif not has_tone(readings.get(e)):
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
    try:
        result = ladder_check(pooled, drift_ppm=drift_ppm)
    except (MeasurementError, UnlikeCapturesError) as exc:
        warnings.append(f"{where}: no check: {exc}")
        return None, pooled
    warnings.extend(f"{where}: {w}" for w in result.warnings)
    return result, pooled


def _tone_losses(center, group: list[Entry], readings, analysis: Analysis, drift_ppm: float) -> None:
    warnings = analysis.warnings
    where = f"loss at {_mhz(center)}"
    group = _same_signal(group, readings, where, warnings, drift_ppm)
    steps = [e for e in group if e.role == "step"]
    ladder, pooled_ladder = _ladder(center, steps, readings, warnings, drift_ppm) if steps else (None, {})
    if ladder is not None:
        analysis.ladders.append(ladder)
    duts_all = [e for e in group if e.role == "dut"]
    for e in duts_all:
        if not has_tone(readings.get(e)):
            warnings.append(f"{where}: no tone read in DUT capture {e.name}; left out")
    duts_all = [e for e in duts_all if has_tone(readings.get(e))]
    thrus_all = [e for e in group if e.role == "thru" and has_tone(readings.get(e))]
    by_att: dict = {}
    for e in duts_all:  # several devices at one setting: each its own loss, against the same thru/ladder
        by_att.setdefault((e.attenuation_or_zero, e.device), []).append(e)
    for (att, device), duts in sorted(by_att.items()):
        duts = _compatible(duts, duts[0], where, warnings)
        n_dev = max(e.n_devices for e in duts)
        dut = _pool(duts, readings)
        swr = dict(duts[0].swr)
        # Direct: thru captures at the same attenuator setting.
        thrus = [e for e in thrus_all if e.attenuation_or_zero == att]
        thrus = _compatible(thrus, duts[0], f"direct {where}", warnings)
        if thrus:
            _direct(center, att, dut, duts, thrus, readings, ladder, n_dev, swr, analysis, device, drift_ppm)
        elif not pooled_ladder:
            warnings.append(f"{where}: DUT captured at {att:g} dB but no thru at that setting and no ladder; "
                            "no loss")
        # Substitution: the DUT against the ladder.
        if not pooled_ladder:
            continue
        ref = pooled_ladder[next(iter(pooled_ladder))].readings[0].capture
        why = not_alike(duts[0], next(e for e in steps if e.capture is ref))
        if why is not None:
            warnings.append(f"substitution {where}: {why}; no substitution loss")
            continue
        if len(pooled_ladder) < 2:
            continue
        step_entries = [e for e in steps if e.attenuation_db in pooled_ladder]
        tols = [e.attenuator_tolerance_db for e in step_entries + duts if e.attenuator_tolerance_db is not None]
        try:
            loss = substitution_loss(pooled_ladder, dut, dut_attenuation_db=att,
                                     tolerance_db=max(tols) if tols else None,
                                     tolerance_how="plan: [attenuator] tolerance_db", swr=swr,
                                     swr_given_by=SWR_FROM_PLAN, n_devices=n_dev, drift_ppm=drift_ppm)
        except (MeasurementError, UnlikeCapturesError) as exc:
            warnings.append(f"substitution {where}: {exc}")
            continue
        warnings.extend(f"substitution {where}: {w}" for w in loss.warnings)
        analysis.losses.append(replace(loss, device=device))


def _direct(center, att, dut: PooledTone, duts: list[Entry], thrus: list[Entry], readings, ladder, n_dev, swr,
            analysis, device: str = "", drift_ppm: float = DEFAULT_PPM) -> None:
    """The direct loss from the thrus at the DUT's setting: the thrus before the DUT, and those after
    it (when the captures give their times) to take out linear drift."""
    warnings = analysis.warnings
    where = f"direct loss at {_mhz(center)}"
    before = after = None
    if dut.time_s is not None and all(e.time_s is not None for e in thrus):
        first = min(e.time_s for e in duts)
        last = max(e.time_s for e in duts)
        b = [e for e in thrus if e.time_s <= first]
        a = [e for e in thrus if e.time_s > last]
        before = _pool(b, readings) if b else None
        after = _pool(a, readings) if a else None
        if before is None:
            before, after = after, None
    else:
        before = _pool(thrus, readings)
    linearity_db, how = None, "add a ladder, or use substitution"
    if ladder is not None:
        linearity_db = ladder.linearity_between(min(dut.dbfs, before.dbfs), max(dut.dbfs, before.dbfs))
        if linearity_db is None:
            how = "the ladder check does not show the dongle linear between these levels; prefer the substitution loss"
    try:
        loss = direct_loss(before, dut, after, linearity_db=linearity_db, linearity_how=how, swr=swr,
                           swr_given_by=SWR_FROM_PLAN, n_devices=n_dev, dut_attenuation_db=att,
                           drift_ppm=drift_ppm)
    except (MeasurementError, UnlikeCapturesError) as exc:
        warnings.append(f"{where}: {exc}")
        return
    warnings.extend(f"{where}: {w}" for w in loss.warnings)
    # the ladder check's verdict between the two levels (None: no ladder)
    analysis.losses.append(replace(loss, device=device,
                                   dongle_linear=None if ladder is None else linearity_db is not None))
