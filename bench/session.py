"""A session folder and everything its captures support.

A session is a folder of SigMF captures (written by ``rxbench capture`` or by hand), each carrying
its role (``thru``, ``dut``, ``step``, ``hot``, ``cold``, ``antenna``, ``load``), attenuator
setting, gain and step name in the ``rxbench:`` metadata. :func:`open_session` finds the captures
and sorts out the ones that cannot be used (incomplete, unreadable, without a role);
:func:`analyze_session` reads every capture once and runs whatever the roles present allow:

- tone readings of every ``thru``, ``dut`` and ``step`` capture;
- the ladder check of the ``step`` captures (three or more attenuator settings);
- direct insertion loss (``thru`` and ``dut`` at the same attenuator setting; a thru after the DUT
  removes linear drift) and substitution loss (the ``dut`` against the ladder);
- the Y-factor noise figure from ``hot``/``cold`` captures, and with hot/cold captures taken
  through the DUT, the DUT's insertion loss and noise figure per sub-band, stitched across centre
  frequencies into curves;
- the external-noise excess from ``antenna`` against ``load`` captures (a knee fit when there are
  antenna captures through several attenuator settings);
- the SNR cost of the measured loss on each band where the excess was measured.

Captures are compared only when they were taken alike: same sample rate, same kind of samples,
same tuning and same gain. Anything else is left out with a warning that says why, never turned
into a number. The analysis is plain data (dicts and lists, JSON-ready), plus the spectra kept
for the plots.

The numerics are all in :mod:`dsp`; this module only groups captures and calls it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from rxbench import keys
from rxbench.analyze import (CENTER_TOLERANCE_HZ, SWR_FROM_PLAN, Reading, capture_start_s, mismatch_budget,
                           pool_tones, read_capture, setup_difference, signal_differences, tone_dict)
from rxbench.errors import CaptureError, RxbenchError, UsageError
from rxbench.recordings import META_SUFFIX, Capture, open_capture
from rxbench.dsp import bands as bands_mod
from rxbench.dsp import environment as env
from rxbench.dsp.bands import AMATEUR_BANDS
from rxbench.dsp import ladder as ladder_mod
from rxbench.dsp import noisefig
from rxbench.dsp.same_signal import DEFAULT_PPM
from rxbench.dsp.uncertainty import DEFAULT_K, Budget, Component
from rxbench.dsp.units import T0_K, db_from_power, noise_temperature_from_nf_db

#: Roles whose captures carry a generator tone.
TONE_ROLES = ("thru", "dut", "step")
#: Roles whose captures are read for their noise only.
NOISE_ROLES = ("hot", "cold", "antenna", "load")
#: Folder names the report writer uses; captures inside them are not part of the session.
REPORT_DIR_PREFIX = "report"
#: Folder where a re-run keeps the recordings it replaced; they are not part of the session.
REPLACED_DIR = "replaced"
#: Sub-bands per capture for noise-source curves.
N_SUB_BANDS = 8
#: Below this Y-factor the noise figure is hardly measurable, dB.
LOW_Y_DB = 1.0
#: Below this excess the antenna noise is too close to the receiver's own to say much about Ta, dB.
LOW_EXCESS_DB = 1.0
#: Half-width of the dongle's linearity between two levels, once a ladder check found them linear, dB
#: (the check's own limit, :data:`dsp.ladder.DEFAULT_LINEARITY_DB`).
LADDER_LINEARITY_DB = ladder_mod.DEFAULT_LINEARITY_DB

_DB = 10.0 / math.log(10.0)
#: Name of the prediction with galactic noise added to the quietest man-made category.
QUIET_GALACTIC = "quiet-rural + galactic"


def band_name(frequency_hz: float | None) -> str:
    """The amateur band holding ``frequency_hz`` ("10 m"), or the frequency in MHz."""
    if frequency_hz is None:
        return "unknown frequency"
    for name, low, high in AMATEUR_BANDS:
        if low <= frequency_hz <= high:
            return name
    return f"{frequency_hz / 1e6:.3f} MHz"


# --------------------------------------------------------------------------------------------
# Opening a session


@dataclass(frozen=True, eq=False)
class Entry:
    """One usable capture of a session and what its metadata says about it."""

    capture: Capture
    role: str
    step: str
    attenuation_db: float | None
    gain_db: float | None
    through_dut: bool
    time_s: float | None
    enr_db: float | None
    n_devices: int
    attenuator_tolerance_db: float | None
    tone_offset_hz: float | None = None
    dropped_samples: int = 0
    u_enr_db: float | None = None
    swr: tuple[tuple[str, float], ...] = ()  # source_swr, load_swr, dut_swr recorded from the plan
    device: str = ""  # which device is in the path (the plan step's label), when named

    @property
    def name(self) -> str:
        return self.capture.name

    @property
    def center_hz(self) -> float | None:
        return self.capture.center_hz

    @property
    def attenuation_or_zero(self) -> float:
        return 0.0 if self.attenuation_db is None else self.attenuation_db


@dataclass(frozen=True)
class Session:
    """The captures of a session folder.

    Attributes
    ----------
    folder : Path
    entries : tuple of Entry
        Usable captures, in time order (then by name).
    incomplete : tuple of Path
        Captures marked incomplete (an interrupted capture, ``.partial``): listed, not analysed.
    skipped : tuple of (Path, str)
        Captures left out and why (unreadable, no role, bad metadata).
    plan_path, log_path : Path or None
        The copy of the plan and the log, when the folder has them.
    """

    folder: Path
    entries: tuple
    incomplete: tuple
    skipped: tuple
    plan_path: Path | None = None
    log_path: Path | None = None

    @property
    def warnings(self) -> list[str]:
        out = [f"{p.name}: incomplete capture (interrupted); skipped" for p in self.incomplete]
        out += [f"{p.name}: {why}; skipped" for p, why in self.skipped]
        return out


def _is_report_dir(name: str) -> bool:
    if name == REPORT_DIR_PREFIX:
        return True
    head, sep, tail = name.partition("-")
    return head == REPORT_DIR_PREFIX and sep == "-" and tail.isdigit()


def _session_files(folder: Path) -> list[Path]:
    found = []
    for p in sorted(folder.rglob("*" + META_SUFFIX)):
        parts = p.relative_to(folder).parts
        if any(part.startswith(".") for part in parts):
            continue  # temporary files of a capture being written
        if any(_is_report_dir(part) or part == REPLACED_DIR for part in parts[:-1]):
            continue
        found.append(p)
    return found


def _number(extra, key) -> float | None:
    value = extra.get(key)
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise ValueError(f"rxbench:{key} is {value!r}, not a finite number")
    return float(value)


def _entry(cap: Capture) -> Entry:
    """An Entry from a capture's metadata; ValueError names what is wrong."""
    x = cap.extra
    role = x.get(keys.ROLE)
    if role is None:
        raise ValueError("no rxbench:role in its metadata (which part of the measurement is it?)")
    if role not in keys.ROLES:
        raise ValueError(f"rxbench:role {role!r} is not one of {', '.join(keys.ROLES)}")
    att = _number(x, keys.ATTENUATION_DB)
    if att is not None and att < 0:
        raise ValueError(f"rxbench:attenuation_db is {att:g}, below 0 dB")
    enr = _number(x, keys.ENR_DB)
    tol = _number(x, keys.ATTENUATOR_TOLERANCE_DB)
    devices = x.get(keys.DEVICES, 1)
    if isinstance(devices, bool) or not isinstance(devices, int) or devices < 1:
        raise ValueError(f"rxbench:devices is {devices!r}, not a whole number >= 1")
    through = x.get(keys.WITH_DUT) is True or role == "dut"
    swr = []
    for key in keys.SWRS:
        value = _number(x, key)
        if value is not None and value < 1:
            raise ValueError(f"rxbench:{key} is {value:g}, below 1")
        if value is not None:
            swr.append((key, value))
    return Entry(
        capture=cap, role=role, step=str(x.get(keys.STEP, "")), attenuation_db=att,
        gain_db=_number(x, keys.GAIN_DB), through_dut=through,
        time_s=capture_start_s(cap), enr_db=enr, n_devices=devices, attenuator_tolerance_db=tol,
        tone_offset_hz=_number(x, keys.TONE_OFFSET_HZ) if role in TONE_ROLES else None,
        dropped_samples=int(_number(x, keys.DROPPED_SAMPLES) or 0),
        u_enr_db=_number(x, keys.U_ENR_DB),
        swr=tuple(swr),
        device=str(x.get(keys.DEVICE, "")) if through else "",
    )


def open_session(folder) -> Session:
    """Find the captures of a session folder.

    Raises
    ------
    UsageError
        The folder does not exist, is a file, or holds no usable capture.
    """
    folder = Path(folder)
    if not folder.exists():
        raise UsageError(f"{folder}: no such session folder")
    if not folder.is_dir():
        raise UsageError(f"{folder}: is a file; give the session folder that holds the captures")
    entries, incomplete, skipped = [], [], []
    for meta in _session_files(folder):
        if ".partial" in meta.name:
            incomplete.append(meta)
            continue
        try:
            cap = open_capture(meta)
        except CaptureError as exc:
            skipped.append((meta, exc.problem))
            continue
        if cap.extra.get(keys.INCOMPLETE):
            incomplete.append(meta)
            continue
        try:
            entries.append(_entry(cap))
        except ValueError as exc:
            skipped.append((meta, str(exc)))
    if not entries:
        what = []
        if incomplete:
            what.append(f"{len(incomplete)} incomplete")
        if skipped:
            what.append(f"{len(skipped)} unusable ({skipped[0][0].name}: {skipped[0][1]})")
        detail = f" ({'; '.join(what)})" if what else ""
        raise UsageError(f"{folder}: no usable capture (SigMF recording with an rxbench role) found{detail}")
    entries.sort(key=lambda e: (e.time_s if e.time_s is not None else math.inf, e.name))
    plans = sorted(folder.glob("*.toml"))
    logs = sorted(folder.glob("log.txt")) + sorted(folder.glob("*.log"))
    return Session(folder, tuple(entries), tuple(incomplete), tuple(skipped),
                   plans[0] if plans else None, logs[0] if logs else None)


# --------------------------------------------------------------------------------------------
# Comparing captures


def mismatch(a: Entry, b: Entry) -> str | None:
    """Why two captures cannot be compared, or None when they were taken alike."""
    return setup_difference(a.capture, b.capture)


def _compatible(entries: list[Entry], ref: Entry, what: str, warnings: list[str]) -> list[Entry]:
    keep = []
    for e in entries:
        why = mismatch(e, ref)
        if why is None:
            keep.append(e)
        else:
            warnings.append(f"{what}: left out {e.name}: {why}")
    return keep


def _same_signal(entries: list[Entry], readings, where: str, warnings: list[str], drift_ppm: float) -> list[Entry]:
    """Leave out, with a warning, the entries whose tone is not the signal the others hold
    (:func:`analyze.signal_differences`); entries without a tone are left to the caller."""
    toned = [e for e in entries if readings[e].tone is not None]
    if not toned:
        return entries
    check, problems = signal_differences([readings[e] for e in toned], drift_ppm=drift_ppm)
    warnings.extend(f"{where}: left out {p}" for p in problems)
    out = {toned[i] for i in check.rejected}
    return [e for e in entries if e not in out]


def _center_key(center_hz: float | None):
    return None if center_hz is None else round(center_hz / CENTER_TOLERANCE_HZ) * CENTER_TOLERANCE_HZ


def _groups(entries, roles) -> dict:
    out: dict = {}
    for e in entries:
        if e.role in roles:
            out.setdefault(_center_key(e.center_hz), []).append(e)
    return out


def _mhz(center_hz) -> str:
    return "unknown frequency" if center_hz is None else f"{center_hz / 1e6:.3f} MHz"


# --------------------------------------------------------------------------------------------
# Results


@dataclass
class Analysis:
    """Everything a session supports. ``to_dict()`` is the JSON view; ``readings`` feed the plots."""

    session: Session
    readings: dict = field(default_factory=dict)  # Entry -> Reading
    captures: list = field(default_factory=list)
    ladders: list = field(default_factory=list)
    losses: list = field(default_factory=list)
    noise_figure: list = field(default_factory=list)
    loss_vs_frequency: dict | None = None
    devices: dict = field(default_factory=dict)  # device label -> stitched curve (several devices compared)
    per_band: list = field(default_factory=list)  # loss per amateur band, per device (bench.sweep_report)
    per_band_noise_figure: list = field(default_factory=list)
    device_differences: list = field(default_factory=list)
    retune_steps: list = field(default_factory=list)
    external_noise: list = field(default_factory=list)
    snr_cost: list = field(default_factory=list)
    warnings: list = field(default_factory=list)

    def best_loss(self, center_hz=None) -> dict | None:
        """The tone-based loss with the smallest expanded uncertainty (at ``center_hz`` if given)."""
        cands = [x for x in self.losses
                 if center_hz is None or _center_key(x["center_hz"]) == _center_key(center_hz)]
        return min(cands, key=lambda x: x["expanded_uncertainty_db"], default=None)

    def summary(self) -> dict:
        best = self.best_loss()
        out = {
            "insertion_loss_db": None if best is None else best["insertion_loss_db"],
            "expanded_uncertainty_db": None if best is None else best["expanded_uncertainty_db"],
            "method": None if best is None else best["method"],
            "per_device_db": None if best is None else best["per_device_db"],
            "frequency_hz": None if best is None else best["frequency_hz"],
        }
        nfs = [n for n in self.noise_figure if n.get("noise_figure_db") is not None]
        if nfs:
            n = min(nfs, key=lambda v: v["expanded_uncertainty_db"])
            out["noise_figure_db"] = n["noise_figure_db"]
            out["noise_figure_expanded_uncertainty_db"] = n["expanded_uncertainty_db"]
        out["snr_cost"] = [{"band": c["band"], "frequency_hz": c["frequency_hz"],
                            "snr_degradation_db": c["snr_degradation_db"],
                            "expanded_uncertainty_db": c["expanded_uncertainty_db"]} for c in self.snr_cost]
        return out

    def to_dict(self) -> dict:
        s = self.session
        return {
            "session": str(s.folder),
            "plan": None if s.plan_path is None else s.plan_path.name,
            "n_captures": len(s.entries),
            "summary": self.summary(),
            "captures": self.captures,
            "incomplete": [p.name for p in s.incomplete],
            "skipped": [{"file": p.name, "reason": why} for p, why in s.skipped],
            "ladder": self.ladders,
            "losses": self.losses,
            "noise_figure": self.noise_figure,
            "loss_vs_frequency": self.loss_vs_frequency,
            "devices": self.devices,
            "per_band": self.per_band,
            "per_band_noise_figure": self.per_band_noise_figure,
            "device_differences": self.device_differences,
            "retune_steps": self.retune_steps,
            "external_noise": self.external_noise,
            "snr_cost": self.snr_cost,
            "coverage_factor": DEFAULT_K,
            "warnings": self.warnings,
        }


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


# --------------------------------------------------------------------------------------------
# Tone methods


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
    for e in duts_all:
        by_att.setdefault(e.attenuation_or_zero, []).append(e)
    for att, duts in sorted(by_att.items()):
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
                continue
            if len(pooled_ladder) < 2:
                continue
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
                continue
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
    analysis.losses.append(_loss_dict(loss, center, dut.offset_hz, n_dev, caps, att))


# --------------------------------------------------------------------------------------------
# Noise source


def _enr_for(entries: list[Entry], where, warnings):
    vals = sorted({e.enr_db for e in entries if e.enr_db is not None})
    if not vals:
        return None
    if len(vals) > 1:
        warnings.append(f"{where}: the hot captures give different ENRs ({', '.join(f'{v:g}' for v in vals)} dB); "
                        f"using {vals[0]:g} dB")
    return vals[0]


def _noise_source(center, group: list[Entry], readings, analysis: Analysis, n_sub_bands: int):
    warnings = analysis.warnings
    where = f"noise figure at {_mhz(center)}"
    cold = [e for e in group if e.role == "cold" and not e.through_dut]
    hot = [e for e in group if e.role == "hot" and not e.through_dut]
    cold_d = [e for e in group if e.role == "cold" and e.through_dut]
    hot_d = [e for e in group if e.role == "hot" and e.through_dut]
    if not cold or not hot:
        missing = "cold" if not cold else "hot"
        warnings.append(f"{where}: no {missing} capture without the DUT; no noise figure")
        return None
    ref = cold[0]
    cold, hot = _compatible(cold, ref, where, warnings), _compatible(hot, ref, where, warnings)
    cold_d, hot_d = _compatible(cold_d, ref, where, warnings), _compatible(hot_d, ref, where, warnings)
    if not hot:
        return None
    enr_db = _enr_for(hot + hot_d, where, warnings)
    if enr_db is None:
        warnings.append(f"{where}: the hot captures give no ENR (rxbench:enr_db); no noise figure")
        return None
    with_dut = bool(cold_d and hot_d)
    if (cold_d or hot_d) and not with_dut:
        warnings.append(f"{where}: hot and cold through the DUT are both needed for its loss; only one found")
    u_enr_db = max((e.u_enr_db or 0.0 for e in hot), default=0.0)
    psd = [[readings[e].psd for e in es] for es in (cold, hot) + ((cold_d, hot_d) if with_dut else ())]
    try:
        ns = noisefig.noise_source_analysis(*psd, enr_db=enr_db, n_sub_bands=n_sub_bands, u_enr_db=u_enr_db,
                                            dc_halfwidth_hz=None if ref.capture.is_complex else 0.0)
    except ValueError as exc:
        warnings.append(f"{where}: {exc}")
        return None
    if not ns.valid[-1]:
        warnings.append(f"{where}: the hot captures do not read above the cold ones over the band; "
                        "no noise figure")
        return None
    yf = ns.receiver
    y_db = yf.y_db
    if y_db[-1] < LOW_Y_DB:
        warnings.append(f"{where}: the hot capture is only {y_db[-1]:.2f} dB above the cold one; the noise "
                        "figure is poorly determined (a stronger noise source would help)")
    if not ns.valid[:-1].all():
        warnings.append(f"{where}: in {int((~ns.valid[:-1]).sum())} sub-band(s) the hot reading is not above "
                        "the cold one; no noise figure there")
    nf, u_nf = yf.nf_db, yf.u_nf_db
    res = {
        "center_hz": center, "enr_db": enr_db, "u_enr_db": u_enr_db,
        "y_db": float(y_db[-1]), "noise_figure_db": float(nf[-1]), "u_noise_figure_db": float(u_nf[-1]),
        "expanded_uncertainty_db": DEFAULT_K * float(u_nf[-1]),
        "noise_temperature_k": float(yf.noise_temperature_k[-1]),
        "u_noise_temperature_k": float(yf.u_noise_temperature_k[-1]),
        "band_hz": [float(ns.low_hz[-1]), float(ns.high_hz[-1])],
        "captures": {"cold": [e.name for e in cold], "hot": [e.name for e in hot]},
        "insertion_loss_db": None, "expanded_uncertainty_loss_db": None, "dut_noise_figure_db": None,
    }
    sub = {"offset_hz": ns.center_hz[:-1].tolist(), "width_hz": (ns.high_hz - ns.low_hz)[:-1].tolist(),
           "noise_figure_db": nf[:-1].tolist(), "u_noise_figure_db": u_nf[:-1].tolist()}
    dut = ns.dut
    if dut is not None and not ns.valid_dut[-1]:
        warnings.append(f"{where} through the DUT: the hot captures through the DUT do not read above the cold "
                        "ones over the band; no loss")
    elif dut is not None:
        if not ns.valid_dut[:-1].all():
            warnings.append(f"{where} through the DUT: in {int((~ns.valid_dut[:-1]).sum())} sub-band(s) no "
                            "excess came through the DUT; no loss there")
        il, u_il = dut.insertion_loss_db, dut.u_insertion_loss_db
        dnf, u_dnf = dut.nf_db, dut.u_nf_db
        res.update({
            "insertion_loss_db": float(il[-1]), "u_insertion_loss_db": float(u_il[-1]),
            "expanded_uncertainty_loss_db": DEFAULT_K * float(u_il[-1]),
            "dut_noise_figure_db": float(dnf[-1]), "u_dut_noise_figure_db": float(u_dnf[-1]),
        })
        res["captures"].update({"cold_dut": [e.name for e in cold_d], "hot_dut": [e.name for e in hot_d]})
        own = noisefig.excess_u_db(ns.n_hot_dut, ns.n_cold_dut, ns.dof_hot_dut, ns.dof_cold_dut)
        sub.update({"insertion_loss_db": il[:-1].tolist(), "u_insertion_loss_db": u_il[:-1].tolist(),
                    "u_insertion_loss_own_db": np.asarray(own, dtype=float)[:-1].tolist(),
                    "dut_noise_figure_db": dnf[:-1].tolist(), "u_dut_noise_figure_db": u_dnf[:-1].tolist()})
    res["sub_bands"] = sub
    res["device"] = cold_d[0].device if with_dut else ""
    res["n_devices"] = cold_d[0].n_devices if with_dut else 1
    return res


def _stitch(noise: list[dict]) -> dict | None:
    """Loss and noise figure across frequency, from the sub-bands of every tuning."""
    tuned = [n for n in noise if n["center_hz"] is not None]
    if not tuned:
        return None
    freqs, keep = noisefig.stitch_offsets([n["center_hz"] for n in tuned],
                                          [n["sub_bands"]["offset_hz"] for n in tuned], [n["band_hz"] for n in tuned])
    cols = {"frequency_hz": [], "width_hz": [], "noise_figure_db": [], "u_noise_figure_db": [],
            "insertion_loss_db": [], "u_insertion_loss_db": [], "u_insertion_loss_own_db": [], "dut_noise_figure_db": [],
            "u_dut_noise_figure_db": []}
    for n, f, m in zip(tuned, freqs, keep):
        sub = n["sub_bands"]
        m = m & ~np.isnan(sub["noise_figure_db"])  # a sub-band without a noise figure is no point
        cols["frequency_hz"] += f[m].tolist()
        for key in list(cols)[1:]:
            vals = sub.get(key)
            cols[key] += ([None if math.isnan(v) else v for v in np.asarray(vals, dtype=float)[m].tolist()]
                          if vals is not None else [None] * int(m.sum()))
    order = np.argsort(cols["frequency_hz"])
    out = {k: [v[i] for i in order] for k, v in cols.items()}
    out["k"] = DEFAULT_K
    out["has_loss"] = any(v is not None for v in out["insertion_loss_db"])
    return out


def loss_at(analysis: Analysis, frequency_hz: float, half_band_hz: float):
    """The measured insertion loss at ``frequency_hz``, its standard uncertainty, where it was measured.

    A tone-based loss counts when its tone lies within ``half_band_hz``; otherwise the noise-source
    curve is used: the sub-band holding the frequency, or a straight line between two neighbouring
    sub-bands (never extrapolated beyond the curve). Returns (loss_db, u_db, at_hz, source) or None.
    """
    cands = [x for x in analysis.losses
             if x["frequency_hz"] is not None and abs(x["frequency_hz"] - frequency_hz) <= half_band_hz]
    if cands:
        best = min(cands, key=lambda x: x["expanded_uncertainty_db"])
        return (best["insertion_loss_db"], best["u_db"], best["frequency_hz"],
                f"{best['method']} loss at {best['frequency_hz'] / 1e6:.4f} MHz")
    curve = analysis.loss_vs_frequency
    if curve is None or not curve["has_loss"]:
        return None
    pts = [(f, l, u, w) for f, l, u, w in zip(curve["frequency_hz"], curve["insertion_loss_db"],
                                               curve["u_insertion_loss_db"], curve["width_hz"]) if l is not None]
    f = np.array([p[0] for p in pts])
    i = int(np.searchsorted(f, frequency_hz))
    for j in (i - 1, i):
        if 0 <= j < len(pts) and abs(pts[j][0] - frequency_hz) < pts[j][3] / 2:
            return pts[j][1], pts[j][2], pts[j][0], f"noise-source loss, sub-band at {pts[j][0] / 1e6:.4f} MHz"
    if 0 < i < len(pts) and f[i] - f[i - 1] <= pts[i][3] + pts[i - 1][3]:
        w = (frequency_hz - f[i - 1]) / (f[i] - f[i - 1])
        loss = (1 - w) * pts[i - 1][1] + w * pts[i][1]
        u = math.hypot((1 - w) * pts[i - 1][2], w * pts[i][2])
        return loss, u, frequency_hz, "noise-source loss, interpolated between two sub-bands"
    return None


def _nf_at(analysis: Analysis, frequency_hz: float, half_band_hz: float):
    """Receiver noise figure (dB) and its u at ``frequency_hz``: same tuning or the curve; else None."""
    for n in analysis.noise_figure:
        if n["center_hz"] is not None and abs(n["center_hz"] - frequency_hz) <= half_band_hz:
            return n["noise_figure_db"], n["u_noise_figure_db"]
    curve = analysis.loss_vs_frequency
    if curve is None or not curve["frequency_hz"]:
        return None
    f = np.array(curve["frequency_hz"])
    w = np.array(curve["width_hz"])
    near = np.abs(f - frequency_hz) <= w
    if not near.any():
        return None
    i = int(np.argmin(np.abs(f - frequency_hz)))
    return curve["noise_figure_db"][i], curve["u_noise_figure_db"][i]


# --------------------------------------------------------------------------------------------
# External noise and what the loss costs


def _external(center, group: list[Entry], readings, analysis: Analysis):
    warnings = analysis.warnings
    where = f"external noise at {_mhz(center)}"
    ant = [e for e in group if e.role == "antenna" and not e.through_dut]
    ant_dut = [e for e in group if e.role == "antenna" and e.through_dut]
    for e in group:
        if e.role == "load" and e.through_dut:
            warnings.append(f"{where}: {e.name} is a load through the DUT; the excess uses the load without it")
        if e.role == "antenna" and e.through_dut and e.attenuation_or_zero != 0.0:
            warnings.append(f"{where}: {e.name} is the antenna through the DUT and an attenuator; left out")
    load = [e for e in group if e.role == "load" and not e.through_dut]
    if not ant:
        warnings.append(f"{where}: no antenna capture without the DUT; no excess")
        return None
    ref = ant[0]
    ant, load = _compatible(ant, ref, where, warnings), _compatible(load, ref, where, warnings)
    ant_dut = _compatible([e for e in ant_dut if e.attenuation_or_zero == 0.0], ref, where, warnings)
    by_att: dict = {}
    for e in ant:
        by_att.setdefault(e.attenuation_or_zero, []).append(e)

    def dens(es):
        d = np.array([readings[e].floor.density for e in es])
        u = np.array([readings[e].floor.u_density for e in es])
        return float(d.mean()), float(math.sqrt(np.sum(u**2)) / len(es))

    points = {att: dens(es) for att, es in sorted(by_att.items())}
    load_d = dens(load) if load else None
    res = {"center_hz": center, "band": band_name(center), "frequency_hz": center,
           "sample_rate_hz": ref.capture.sample_rate_hz,
           "captures": {"antenna": {f"{a:g}": [e.name for e in es] for a, es in by_att.items()},
                        "load": [e.name for e in load]}, "knee": None}
    if load_d is None and len(points) < 2:
        warnings.append(f"{where}: an antenna capture but no load capture (and no antenna ladder); no excess")
        return None
    if 0.0 in points and load_d is not None:
        (da, ua), (dl, ul) = points[0.0], load_d
        excess = float(db_from_power(da / dl))
        u_excess = _DB * math.hypot(ua / da, ul / dl)
        res.update(antenna_density_dbfs_per_hz=float(db_from_power(da)),
                   load_density_dbfs_per_hz=float(db_from_power(dl)))
    else:
        excess = u_excess = None
    if len(points) >= 2 or (points and 0.0 not in points and load_d is not None):
        loss = np.array(list(points))
        d = np.array([v[0] for v in points.values()])
        u = np.array([v[1] for v in points.values()])
        kw = {} if load_d is None else {"load_density": load_d[0], "u_load_density": load_d[1]}
        try:
            fit = env.fit_knee(loss, d, u_density=u, **kw)
        except ValueError as exc:
            warnings.append(f"{where}: knee fit: {exc}")
            fit = None
        if fit is not None:
            res["knee"] = {"steps_db": loss.tolist(), "density_dbfs_per_hz": db_from_power(d).tolist(),
                           "residuals_db": fit.residuals_db.tolist(), "residual_rms_db": fit.residual_rms_db,
                           "excess_db": fit.excess_db, "u_excess_db": fit.u_excess_db}
            if excess is None and math.isfinite(fit.u_excess_db):
                excess, u_excess = fit.excess_db, fit.u_excess_db
    if excess is None:
        warnings.append(f"{where}: no antenna capture at 0 dB with a load, and no usable fit; no excess")
        return None
    res.update(excess_db=excess, u_excess_db=u_excess, expanded_uncertainty_db=DEFAULT_K * u_excess)
    res["through_dut"] = None
    if ant_dut and 0.0 in points:
        (da, ua), (dd, ud) = points[0.0], dens(ant_dut)
        res["through_dut"] = {"density_dbfs_per_hz": float(db_from_power(dd)),
                              "drop_db": float(db_from_power(da / dd)), "u_drop_db": _DB * math.hypot(ua / da, ud / dd),
                              "captures": [e.name for e in ant_dut]}
    if excess < LOW_EXCESS_DB:
        warnings.append(f"{where}: the antenna brings only {excess:.2f} dB more noise than the load: "
                        "the receiver's own noise dominates, so every dB of loss costs nearly a dB of SNR")
    half = 0.5 * ref.capture.sample_rate_hz
    nf = _nf_at(analysis, center, half) if center is not None else None
    res.update(receiver_noise_figure_db=None, antenna_temperature_k=None, fa_db=None)
    if nf is not None:
        trx = noise_temperature_from_nf_db(nf[0])
        try:
            ta = env.antenna_temperature_from_excess(excess, trx)
        except ValueError as exc:
            warnings.append(f"{where}: {exc}")
        else:
            res.update(receiver_noise_figure_db=nf[0], antenna_temperature_k=float(ta),
                       fa_db=float(env.fa_db_from_temperature(ta)) if ta > 0 else None)
    if center is not None and env.VALID_RANGE_HZ[0] <= center <= env.VALID_RANGE_HZ[1]:
        res["itu_fa_db"] = {k: float(env.man_made_fa_db(center, k)) for k in env.MAN_MADE_NOISE}
        res["itu_fa_db"][QUIET_GALACTIC] = float(env.external_fa_db(center, "quiet-rural", galactic=True))
    return res


def _cost(x_db: float, loss_db: float) -> float:
    """SNR cost of a loss given the excess X over a matched load: 10*log10(1 + (L - 1)/X), dB."""
    return float(env.snr_degradation_db(max(loss_db, 0.0), T0_K * 10 ** (x_db / 10), 0.0))


def _snr_costs(analysis: Analysis) -> None:
    for ex in analysis.external_noise:
        f = ex["frequency_hz"]
        where = f"SNR cost on {ex['band']}"
        if f is None:
            analysis.warnings.append(f"{where}: the captures give no frequency; cannot match a loss")
            continue
        found = loss_at(analysis, f, 0.5 * ex["sample_rate_hz"])
        if found is None:
            analysis.warnings.append(f"{where} ({f / 1e6:.3f} MHz): no loss measured at this frequency; "
                                     "the excess alone is reported")
            continue
        loss_db, u_loss, loss_hz, source = found
        if loss_db < 0:
            analysis.warnings.append(f"{where}: the measured loss is {loss_db:.2f} dB (below 0); cost taken at 0 dB")
        x, u_x = ex["excess_db"], ex["u_excess_db"]
        cost = _cost(x, loss_db)
        h = 1e-3
        d_l = (_cost(x, loss_db + h) - _cost(x, loss_db - h)) / (2 * h)
        d_x = (_cost(x + h, loss_db) - _cost(x - h, loss_db)) / (2 * h)
        u = math.hypot(d_l * u_loss, d_x * u_x)
        entry = {"band": ex["band"], "frequency_hz": f, "loss_db": loss_db, "u_loss_db": u_loss,
                 "loss_source": source, "loss_frequency_hz": loss_hz, "excess_db": x, "u_excess_db": u_x, "snr_degradation_db": cost,
                 "u_db": u, "expanded_uncertainty_db": DEFAULT_K * u, "k": DEFAULT_K,
                 "receiver_noise_figure_db": ex.get("receiver_noise_figure_db"), "predicted": None}
        thru_dut = ex.get("through_dut")
        if thru_dut is not None:
            # SNR through the DUT over SNR without it: L * N_dut / N_antenna (noise densities at the
            # dongle), so the cost is L - drop, with no model of the noise needed.
            direct = loss_db - thru_dut["drop_db"]
            u_direct = math.hypot(u_loss, thru_dut["u_drop_db"])
            entry.update(snr_degradation_through_dut_db=direct, expanded_uncertainty_through_dut_db=DEFAULT_K * u_direct)
            if abs(direct - cost) > DEFAULT_K * math.hypot(u, u_direct) + 0.05:
                analysis.warnings.append(
                    f"{where}: the cost from the excess ({cost:.2f} dB) and from the antenna through the DUT "
                    f"({direct:.2f} dB) disagree; check that the band noise was steady between the captures")
        nf = ex.get("receiver_noise_figure_db")
        if nf is not None and ex.get("itu_fa_db"):
            trx = noise_temperature_from_nf_db(nf)
            entry["predicted"] = {
                k: float(env.snr_degradation_db(max(loss_db, 0.0), env.temperature_from_fa_db(fa), trx))
                for k, fa in ex["itu_fa_db"].items()}
        analysis.snr_cost.append(entry)


# --------------------------------------------------------------------------------------------
# The whole analysis


def _capture_dict(e: Entry, r: Reading | None, error: str | None) -> dict:
    cap = e.capture
    out = {
        "name": e.name, "file": cap.path.name, "role": e.role, "step": e.step,
        "attenuation_db": e.attenuation_db, "gain_db": e.gain_db, "through_dut": e.through_dut,
        "center_hz": cap.center_hz, "sample_rate_hz": cap.sample_rate_hz, "duration_s": cap.duration_s,
        "datetime": cap.datetime, "error": error,
    }
    if r is not None:
        out.update({
            "tone": tone_dict(r.tone, cap.center_hz) if e.role in TONE_ROLES else None,
            "noise": {"density_dbfs_per_hz": db_from_power(r.floor.density),
                      "u_density_db": _DB * r.floor.u_density / r.floor.density},
            "clip_fraction": r.clip_fraction, "warnings": list(r.warnings),
        })
    return out


def analyze_session(session: Session, *, n_sub_bands: int = N_SUB_BANDS, drift_ppm: float = DEFAULT_PPM,
                    progress=None) -> Analysis:
    """Read every capture of ``session`` once and run every method its roles support.

    Parameters
    ----------
    session : Session
    n_sub_bands : int
        Sub-bands per tuning for the noise-source curves.
    drift_ppm : float
        How far the tone may move between captures of one loss or ladder, ppm of the centre frequency
        on top of 3 bins; a capture whose tone lies farther off is left out with a warning.
    progress : callable, optional
        Called as ``progress(i, n, name)`` before each capture is read.

    Returns
    -------
    Analysis
    """
    a = Analysis(session)
    a.warnings.extend(session.warnings)
    for e in session.entries:
        if e.dropped_samples:
            a.warnings.append(f"{e.name}: {e.dropped_samples} samples were dropped while capturing; the "
                              "recording has gaps (its readings are used, but capture it again if they matter)")
    n = len(session.entries)
    for i, e in enumerate(session.entries):
        if progress is not None:
            progress(i, n, e.name)
        try:
            r = read_capture(e.capture, want_tone=e.role in TONE_ROLES, near_hz=e.tone_offset_hz)
        except RxbenchError as exc:
            a.warnings.append(f"{e.name}: {exc}; skipped")
            a.captures.append(_capture_dict(e, None, str(exc)))
            continue
        a.readings[e] = r
        a.warnings.extend(r.warnings)
        a.captures.append(_capture_dict(e, r, None))
    readable = [e for e in session.entries if e in a.readings]

    for center, group in _groups(readable, TONE_ROLES).items():
        _tone_losses(center, group, a.readings, a, drift_ppm)
    for center, group in _groups(readable, ("hot", "cold")).items():
        # several devices at one centre: each against the same reference captures
        labels = sorted({e.device for e in group if e.through_dut}) or [""]
        for label in labels:
            part = [e for e in group if not e.through_dut or e.device == label]
            res = _noise_source(center, part, a.readings, a, n_sub_bands)
            if res is not None:
                a.noise_figure.append(res)
    a.noise_figure.sort(key=lambda x: (x["center_hz"] is None, x["center_hz"] or 0.0))
    from rxbench.sweep_report import analyse_bands

    analyse_bands(a, _stitch)
    for center, group in _groups(readable, ("antenna", "load")).items():
        res = _external(center, group, a.readings, a)
        if res is not None:
            a.external_noise.append(res)
    a.external_noise.sort(key=lambda x: (x["center_hz"] is None, x["center_hz"] or 0.0))
    _snr_costs(a)
    # A warning said twice (by two methods reading one capture) is said once.
    a.warnings = list(dict.fromkeys(a.warnings))
    return a
