"""What every method shares: the coverage factor, budget lines as JSON, renamed keys kept as
aliases, tones pooled over repeated captures, and the impedance-mismatch terms of a loss budget."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Mapping

import numpy as np

from rxbench import keys
from rxbench.compared import require_comparable, require_same_signal
from rxbench.reading import capture_start_s, pool_tones, tone_db
from rxbench.dsp.same_signal import DEFAULT_PPM
from rxbench.dsp.loss import mismatch_components
from rxbench.dsp.subbands import N_SUB_BANDS  # noqa: F401  (the one default, re-exported)
from rxbench.dsp.uncertainty import DEFAULT_K, Budget, Component

#: Coverage factor of every expanded uncertainty rxbench reports (about 95 %; JCGM 100:2008, 6.2).
COVERAGE_FACTOR = DEFAULT_K


#: Where each SWR of a loss budget's impedance-mismatch terms comes from, per front end.
SWR_FROM_OPTIONS = {key: "--" + key.replace("_", "-") for key in keys.SWRS}
SWR_FROM_PLAN = {key: f"[match] {key}" for key in keys.SWRS}


def with_aliases(out: dict, aliases: Mapping[str, str]) -> dict:
    """``out`` with each old key name (``aliases``: old -> new) added beside the new one.

    A renamed public key keeps its old name for one release (README, "Renamed keys").
    """
    for old, new in aliases.items():
        if new in out:
            out[old] = out[new]
    return out


def budget_rows(budget: Budget) -> list[dict]:
    """The lines of an uncertainty budget, JSON-ready (``kind`` is "A" or "B"; ``type`` is its old name)."""
    return [with_aliases({"name": c.name, "u_db": c.u, "sensitivity": c.sensitivity,
                          "contribution_db": c.contribution, "dof": c.dof, "kind": c.kind,
                          "distribution": c.distribution, "half_width_db": c.half_width, "note": c.note},
                         {"type": "kind"})
            for c in budget.components]


def noted(budget: Budget, prefix: str, note: str) -> Budget:
    """``budget`` with ``note`` on every zero line whose name starts with ``prefix``."""
    return replace(budget, components=tuple(
        replace(c, note=note) if c.name.startswith(prefix) and not c.half_width else c
        for c in budget.components))


def mid_time_s(capture) -> float | None:
    """Mid-capture time from the metadata (s since the epoch), or None."""
    start = capture_start_s(capture)
    return None if start is None else start + capture.duration_s / 2


@dataclass(frozen=True, eq=False)
class PooledTone:
    """The tone of one role at one setting, pooled over its repeated captures.

    Attributes
    ----------
    readings : tuple of Reading
    dbfs, u_db, dof : float
        Mean tone reading (dBFS), its standard uncertainty (dB) and degrees of freedom
        (:func:`rxbench.reading.pool_tones`).
    offset_hz : float
        Mean tone offset from the centre, Hz.
    """

    readings: tuple
    dbfs: float
    u_db: float
    dof: float
    offset_hz: float

    @property
    def paths(self) -> list[str]:
        return [str(r.capture.path) for r in self.readings]

    @property
    def names(self) -> list[str]:
        return [r.capture.name for r in self.readings]

    @property
    def times_s(self) -> list[float | None]:
        return [mid_time_s(r.capture) for r in self.readings]

    @property
    def time_s(self) -> float | None:
        """Mean mid-capture time (s since the epoch); None unless every capture gives one."""
        t = self.times_s
        return float(np.mean(t)) if t and all(x is not None for x in t) else None

    @property
    def center_hz(self) -> float | None:
        return self.readings[0].capture.center_hz


def pool(readings, role: str = "", *, missing_ok: bool = False) -> PooledTone:
    """Pool the tones of repeated captures. MeasurementError names a capture without a tone, unless
    ``missing_ok``: then the pooled reading is nan (a ladder step lost in the noise)."""
    readings = tuple(readings)
    if missing_ok and not all(has_tone(r) for r in readings):
        return PooledTone(readings, math.nan, math.nan, math.inf, math.nan)
    mean, u, dof = pool_tones(readings, role)
    return PooledTone(readings, mean, u, dof, float(np.mean([r.tone.offset_hz for r in readings])))


def has_tone(reading) -> bool:
    """Does the reading hold a tone above the noise?"""
    return reading is not None and math.isfinite(tone_db(reading)[0])


def require_comparable_tones(*groups: PooledTone | None, drift_ppm: float = DEFAULT_PPM) -> None:
    """Refuse pooled readings that cannot be compared: captures not taken alike (sample rate, sample
    type, tuning, recorded dongle gain: :func:`rxbench.compared.require_comparable`), or tones that are
    not one signal (a tone elsewhere than the others', beyond 3 bins + ``drift_ppm``, or on the DC
    spike: :func:`rxbench.compared.require_same_signal`). Either raises UnlikeCapturesError naming the
    captures. Every tone method calls this on its inputs, so no view (command, session, Python API)
    can compare two different signals or two different set-ups; readings without a tone are the
    pooling's business (:func:`pool`)."""
    every = [r for g in groups if g is not None for r in g.readings]
    require_comparable([r.capture for r in every])
    readings = [r for r in every if has_tone(r)]
    if readings:
        require_same_signal(readings, drift_ppm=drift_ppm)


def reading_row(reading, **more) -> dict:
    """One capture's tone as a method's result shows it."""
    p, u, _ = tone_db(reading)
    t = reading.tone
    return {"capture": str(reading.capture.path), "power_dbfs": p, "u_power_db": u,
            "offset_hz": None if t is None else t.offset_hz, "snr_db": None if t is None else t.snr_db,
            "clip_fraction": reading.health.clip_fraction, **more}


def impedance_mismatch_terms(swr: Mapping, loss_db: float, given_by: Mapping[str, str]) -> tuple[list, str | None]:
    """The impedance-mismatch components of an insertion-loss budget, and a warning or None.

    ``swr`` maps ``source_swr``, ``load_swr`` and ``dut_swr`` to the values known (missing or None:
    unknown); ``given_by`` names where the user gives each (:data:`SWR_FROM_OPTIONS`,
    :data:`SWR_FROM_PLAN`). What cannot be assessed stays in the budget as a zero line that says
    so, never silently out of it.
    """
    known = {k: v for k, v in dict(swr).items() if v is not None}
    comps = mismatch_components(*(known.get(key) for key in keys.SWRS), loss_db)
    if comps:
        if keys.DUT_SWR not in known:
            comps.append(Component.not_assessed("mismatch at the DUT's ports", f"give {given_by[keys.DUT_SWR]}"))
        return comps, None
    warning = None
    if known:
        warning = (f"mismatch is not in the budget: it needs both {given_by[keys.SOURCE_SWR]} and "
                   f"{given_by[keys.LOAD_SWR]}")
    return [Component.not_assessed("mismatch", f"give {', '.join(given_by.values())}")], warning


def with_impedance_mismatch(compute, swr: Mapping, given_by: Mapping[str, str]):
    """``compute(extra_components)`` with the impedance-mismatch terms the SWRs allow.

    The terms scale with the loss itself, hence a first pass without them. Returns
    ``(loss, warning or None)``.
    """
    loss = compute(())
    comps, warning = impedance_mismatch_terms(swr, loss.loss_db, given_by)
    return compute(comps), warning
