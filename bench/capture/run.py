"""Running a plan: the operator's prompts and each step's instruction, the drift re-reads that must be
captured again with a step, every capture written atomically (a settling discard first; an
interrupted one kept as a ``.partial``), checked once written, and the time left.
"""

from __future__ import annotations

import math
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Sequence, TextIO

from rxbench import interrupts, keys
from rxbench.capture.folder import (LOG_NAME, REPLACED_DIR, SessionLog, move_aside, plan_bytes, prepare_session,
                                    round_up_512, verify_kept)
from rxbench.capture.guards import check_bias_tee, check_levels
from rxbench.device import CHUNK_BYTES, CaptureSource
from rxbench.errors import UsageError
from rxbench.files import check_free_space
from rxbench.output import Progress
from rxbench.plan import TONE_ROLES, Plan, PlannedCapture
from rxbench.recordings import META_SUFFIX, SigmfWriter, salvage_temporaries, sigmf_paths
from rxbench.style import fmt_hz, fmt_hz_band

def drift_partners(plan: Plan) -> dict[str, list[str]]:
    """For each step a drift correction depends on, the steps that must be captured with it.

    A ladder step re-read after the DUT (the same attenuation and centre frequency, later in the
    plan) bounds the generator's drift between the ladder and the DUT only when it really is
    captured after the DUT: capturing the DUT (or the earlier reading) again puts it after its
    re-read, so the re-read must be captured again too.
    """
    steps = plan.steps
    out: dict[str, list[str]] = {}
    for i, dut in enumerate(steps):
        if dut.role != "dut":
            continue
        before = {(s.attenuation_db, s.center_hz): s.name for s in steps[:i] if s.role == "step"}
        for later in steps[i + 1:]:
            key = (later.attenuation_db, later.center_hz)
            if later.role == "step" and key in before:
                for name in (dut.name, before[key]):
                    out.setdefault(name, [])
                    if later.name not in out[name]:
                        out[name].append(later.name)
    return out


def stdin_prompt(message: str) -> str:
    """Show ``message`` on stderr and read one line from stdin (EOF -> UsageError)."""
    sys.stderr.write(message)
    sys.stderr.flush()
    line = sys.stdin.readline() if sys.stdin is not None else ""
    if line and not sys.stdin.isatty():  # a piped answer is not echoed: end the prompt's line
        sys.stderr.write("\n")
    if not line:
        raise UsageError("no operator at the terminal (standard input closed): use --yes for an "
                         "unattended run")
    return line.strip()


@dataclass
class SessionRun:
    """What one run of a plan did."""

    session_dir: Path
    written: list[Path] = field(default_factory=list)
    kept: list[Path] = field(default_factory=list)
    skipped: list[str] = field(default_factory=list)
    replaced: list[Path] = field(default_factory=list)
    partial: Path | None = None
    stopped: bool = False
    warnings: list[str] = field(default_factory=list)
    checks: list = field(default_factory=list)  # bench.check.CaptureCheck of each capture written


def _instruction_text(plan: Plan, cap: PlannedCapture, total_steps: int) -> str:
    s = cap.step
    lines = [f"Step {s.index}/{total_steps} {s.name!r} ({s.role}, attenuator {s.attenuation_db:g} dB, "
             f"{fmt_hz_band(s.center_hz, 1.0)}, {s.duration_s:g} s x {s.repeats}):",
             f"  {s.instruction}"]
    if cap.role in TONE_ROLES:
        tone = fmt_hz(s.center_hz + (cap.tone_offset_hz or 0.0), 1.0)  # to the hertz: the generator's dial
        if cap.generator_dbm is not None:
            lines.append(f"  Generator: {cap.generator_dbm:+.1f} dBm at {tone} -> about "
                         f"{cap.input_dbm:+.1f} dBm at the dongle")
        else:
            lines.append(f"  Generator at {tone} (level not in the plan: check it is safe)")
    return "\n".join(lines)


def run_session(
    plan: Plan,
    session_dir,
    device: CaptureSource,
    *,
    yes: bool = False,
    force: bool = False,
    redo: Sequence[str] = (),
    progress: TextIO | None = None,
    prompt: Callable[[str], str] | None = None,
    check: bool = True,
    preamble: str | None = None,
) -> SessionRun:
    """Run ``plan`` into the session folder ``session_dir``: what was written, kept, skipped, replaced.

    Parameters
    ----------
    plan : Plan
        A validated plan (:func:`bench.plan.load_plan` / :func:`bench.plan.parse_plan`).
    session_dir : path
        Created if missing; an existing session of the same plan is resumed (captures already there
        are kept and skipped); one of another plan is refused.
    device : CaptureSource
        A :class:`bench.device.RtlSdrSource` or :class:`bench.simulated.SimulatedBench`, not yet open;
        it is opened and closed here.
    yes : bool
        Unattended: show each step's instruction but do not wait for the operator.
    force : bool
        Capture even where the estimated input level is above :data:`REFUSE_ABOVE_DBM`.
    redo : sequence of str
        Step names to capture again; their earlier recordings are moved to ``.replaced/``.
    progress : text stream, optional
        Where progress goes (stderr from the command line); None for silence.
    prompt : callable, optional
        Asks the operator (message -> reply); default reads stdin, prompting on stderr.
    check : bool
        Read every capture once it is written and check it against the plan (:mod:`bench.check`);
        a failed check is warned about, offered for capturing again, and with ``[check]
        stop_on_failure`` stops an unattended run.
    preamble : str, optional
        Shown on ``progress`` once every check has passed, just before the first capture (the
        cautions, so that they never stand in front of an error).

    Raises
    ------
    UsageError, PlanError, DeviceError, CaptureError
        Refused levels, a session of another plan, unknown --redo steps, dongle failures.
    KeyboardInterrupt
        After keeping the interrupted capture as a ``.partial`` recording marked incomplete.
    """
    for name in redo:
        plan.step_named(name)  # PlanError naming the plan for an unknown step
    warnings = list(plan.warnings) + check_levels(plan, force=force) + check_bias_tee(plan, force=force)
    redo = _with_drift_partners(plan, redo, yes=yes, ask=prompt or stdin_prompt, warnings=warnings)
    space = check_free_space(session_dir, plan_bytes(plan, session_dir, redo), what="the plan's captures",
                             force=force)
    if space:
        warnings.append(space)
    device.open()
    try:
        session = prepare_session(plan, session_dir)
        run = SessionRun(session, warnings=warnings)
        _run_captures(plan, session, device, run, yes=yes, redo=redo, show=Progress(progress),
                      ask=prompt or stdin_prompt, check=check, preamble=preamble)
    finally:
        device.close()
    return run


def _with_drift_partners(plan: Plan, redo: Sequence[str], *, yes: bool, ask: Callable[[str], str],
                         warnings: list[str]) -> tuple[str, ...]:
    """``redo`` with the re-reads a drift correction needs, as the operator chooses (warned either way)."""
    redo = tuple(redo)
    partners = drift_partners(plan)
    for name in list(redo):
        missing = [p for p in partners.get(name, ()) if p not in redo]
        if not missing:
            continue
        names = ", ".join(repr(m) for m in missing)
        msg = (f"--redo {name}: the generator's drift is judged from {names} captured after it; captured "
               f"again alone, {name!r} comes after that re-read and the drift is 'not assessed'")
        if yes:
            warnings.append(msg + f" (add --redo {' --redo '.join(missing)} to keep it assessed)")
            continue
        answer = ask(f"{msg}.\n  Capture {names} again too? [Y/n] > ").lower()
        if answer in ("", "y", "yes"):
            redo += tuple(missing)
        else:
            warnings.append(msg)
    return redo


@dataclass
class _Clock:
    """Elapsed and remaining time of a run (remaining from the capture time still to go, at the
    pace the source has delivered so far; the operator's time at the prompts is not in it)."""

    left_s: float  # capture time (samples / rate) still to take
    started: float = field(default_factory=time.monotonic)
    taken_s: float = 0.0  # capture time taken so far
    busy_s: float = 0.0  # wall time spent capturing so far

    def text(self, now_left_s: float) -> str:
        elapsed = time.monotonic() - self.started
        pace = self.busy_s / self.taken_s if self.taken_s > 0 else 1.0
        return f"{_mmss(elapsed)} elapsed, about {_mmss(now_left_s * pace)} left"


def _mmss(seconds: float) -> str:
    seconds = max(0, int(round(seconds)))
    return f"{seconds // 60}:{seconds % 60:02d}"


def _run_captures(plan: Plan, session: Path, device: CaptureSource, run: SessionRun, *, yes: bool,
                  redo: Sequence[str], show: Progress, ask: Callable[[str], str], check: bool = True,
                  preamble: str | None = None) -> None:
    log = SessionLog(session / LOG_NAME)
    log(f"run of {plan.source} with device {device.name}"
        + (f" (redo {', '.join(redo)})" if redo else "") + (" (unattended)" if yes else ""))
    for w in run.warnings:
        log(f"warning: {w}")
    salvaged, removed = salvage_temporaries(session)
    for p in salvaged:
        w = f"{p.name}: kept what a capture that was killed outright had left (marked incomplete)"
        run.warnings.append(w)
        log(f"warning: {w}")
    if removed:
        w = (f"removed {len(removed)} temporary file(s) an earlier run left behind: "
             + ", ".join(p.name for p in removed[:5]) + (" ..." if len(removed) > 5 else ""))
        run.warnings.append(w)
        log(w)
    todo: list[tuple[PlannedCapture, bool]] = []  # (capture, an earlier recording must move aside)
    for cap in plan.expand():
        meta = session / (cap.base_name + META_SUFFIX)
        there = meta.exists() or sigmf_paths(meta)[1].exists()
        if there and cap.step.name not in redo:
            why = verify_kept(meta, cap)
            if why is None:
                run.kept.append(meta)
                continue
            w = f"{cap.base_name}: not kept ({why}): it goes to {REPLACED_DIR}/ and is captured again"
            run.warnings.append(w)
            log(f"warning: {w}")
        todo.append((cap, there))
    if run.kept:
        show.line(f"resuming {session}: {len(run.kept)} capture(s) already there are kept")
    if not todo:
        log("nothing to capture: every capture of the plan is in the session")
        return
    if preamble:
        show.line(preamble)
    try:
        _capture_todo(plan, session, device, run, todo, yes=yes, show=show, ask=ask, log=log, check=check)
    except KeyboardInterrupt as exc:
        word = interrupts.describe(exc)[0]
        log(f"run {'interrupted by the operator (Ctrl-C)' if word == 'interrupted' else word}; "
            "the same command resumes it")
        raise
    log("run finished" + (" (stopped)" if run.stopped else ""))


def _capture_todo(plan: Plan, session: Path, device: CaptureSource, run: SessionRun, todo, *, yes: bool,
                  show: Progress, ask: Callable[[str], str], log: SessionLog, check: bool) -> None:
    from rxbench.check import Checker  # here: the reading's numerics load only when a capture is checked

    checker = Checker(plan.dongle.full_scale_dbm, plan.check_tolerance_db) if check else None
    clock = _Clock(left_s=sum(cap.duration_s for cap, _ in todo))
    n_steps = len(plan.steps)
    skipping: str | None = None
    announced: set[str] = set()
    for cap, move in todo:
        name = cap.step.name
        if skipping == name:
            continue
        if name not in announced:
            announced.add(name)
            text = _instruction_text(plan, cap, n_steps)
            if yes or not cap.step.instruction:  # a sweep step with nothing to change: no need to wait
                show.line(text)
            else:
                answer = ask(text + "\n  Enter: capture   s: skip this step   q: stop here > ").lower()
                if answer in ("q", "quit", "stop"):
                    log(f"operator stopped before {cap.base_name}")
                    run.stopped = True
                    return
                if answer in ("s", "skip"):
                    log(f"operator skipped step {name}")
                    run.skipped.append(name)
                    skipping = name
                    clock.left_s -= sum(c.duration_s for c, _ in todo if c.step.name == name)
                    continue
        if move:  # --redo: the earlier recording goes aside only now, just before its replacement
            run.replaced.extend(move_aside(session, session / (cap.base_name + META_SUFFIX)))
            log(f"moved the earlier {cap.base_name} to {REPLACED_DIR}/ to capture it again")
        while True:
            meta = _capture_one(plan, cap, session, device, show, log, run, clock)
            run.written.append(meta)
            if checker is None:
                break
            result = _check_one(checker, cap, meta)
            run.checks.append(result)
            show.line("  " + result.line())
            log(result.line())
            if result.passed:
                break
            if yes:
                run.warnings.append(result.line())
                if plan.stop_on_failed_check:
                    log(f"stopped after the failed check of {cap.base_name} ([check] stop_on_failure)")
                    show.line(f"stopped: the check of {cap.base_name} failed and the plan says stop_on_failure; "
                              f"fix the set-up and run with --redo {name}")
                    run.stopped = True
                    return
                break
            answer = ask("  r: capture it again   Enter: keep it and go on   q: stop here > ").lower()
            if answer in ("r", "redo", "again"):
                run.written.remove(meta)
                run.replaced.extend(move_aside(session, meta))
                log(f"operator captures {cap.base_name} again after the failed check; the first one is in "
                    f"{REPLACED_DIR}/")
                clock.left_s += cap.duration_s
                continue
            run.warnings.append(result.line() + " (kept by the operator)")
            if answer in ("q", "quit", "stop"):
                log(f"operator stopped after the failed check of {cap.base_name}")
                run.stopped = True
                return
            break


def _check_one(checker, cap: PlannedCapture, meta: Path):
    """Check a recording just written here: its samples are read as the raw cu8 they are, with the
    rate and frequency from its metadata (a schema validation of our own fresh file would cost more
    than the check itself)."""
    import json

    from rxbench.recordings import open_raw

    with open(meta, encoding="utf-8") as f:
        doc = json.load(f)
    rate = doc["global"][keys.SAMPLE_RATE]
    center = doc["captures"][0].get(keys.FREQUENCY)
    return checker.check(cap, open_raw(sigmf_paths(meta)[1], "cu8", rate, center))


def _capture_one(plan: Plan, cap: PlannedCapture, session: Path, device: CaptureSource,
                 show: Progress, log: SessionLog, run: SessionRun, clock: _Clock | None = None) -> Path:
    settings = plan.dongle
    device.arrange(cap)
    applied = device.configure(settings, cap.center_hz)
    rate = applied.sample_rate_hz
    # Every capture starts with a settling discard: the first samples after a retune or gain change,
    # and after (re)starting the stream, are not representative.
    settle_bytes = round_up_512(settings.settle_s * rate * 2) if settings.settle_s > 0 else 0
    total = round_up_512(math.ceil(cap.duration_s * rate) * 2)
    chunk = int(getattr(device, "chunk_bytes", CHUNK_BYTES))  # reads as large as the source's transfers
    label = f"{cap.number:02d} {cap.step.name}" + (f" #{cap.repeat}" if cap.step.repeats > 1 else "")
    done = 0
    while done < settle_bytes:
        n = min(chunk, settle_bytes - done)
        device.read_bytes(n)
        done += n
    dropped_before = device.dropped_bytes
    extra = {
        keys.ROLE: cap.role,
        keys.STEP: cap.step.name,
        keys.REPEAT: cap.repeat,
        keys.ATTENUATION_DB: cap.attenuation_db,
        keys.GAIN_DB: applied.gain_db,
        keys.WITH_DUT: cap.with_dut,
        keys.PPM: settings.ppm,
        keys.SIMULATED: device.name == "simulated",
    }
    if cap.generator_dbm is not None:
        extra[keys.GENERATOR_DBM] = cap.generator_dbm
    if cap.tone_offset_hz is not None:
        extra[keys.TONE_OFFSET_HZ] = cap.tone_offset_hz
    if cap.enr_db is not None:
        extra[keys.ENR_DB] = cap.enr_db
    if cap.u_enr_db is not None:
        extra[keys.U_ENR_DB] = cap.u_enr_db
    if cap.attenuator_tolerance_db is not None:
        extra[keys.ATTENUATOR_TOLERANCE_DB] = cap.attenuator_tolerance_db
    extra.update(dict(cap.swr))  # keys.SWRS: the plan's [match] names are the metadata keys
    if cap.step.devices != 1:
        extra[keys.DEVICES] = cap.step.devices
    if cap.step.device:
        extra[keys.DEVICE] = cap.step.device
    if settings.direct_sampling != "off":
        extra[keys.DIRECT_SAMPLING] = settings.direct_sampling
    if settings.upconverter_hz:
        extra[keys.UPCONVERTER_HZ] = settings.upconverter_hz
    writer = SigmfWriter(session / cap.base_name, sample_rate_hz=rate, datatype="cu8", center_hz=applied.center_hz,
                         description=cap.step.instruction, extra=extra,
                         durable=not getattr(device, "repeatable", False))
    done = 0
    t0 = time.monotonic()
    try:
        while done < total:
            n = min(chunk, total - done)
            writer.write(device.read_bytes(n))
            done += n
            if show.tty:
                timing = clock.text(clock.left_s - done / 2 / rate) if clock else ""
                show.update(label, done, total, timing)
        dropped = (device.dropped_bytes - dropped_before) // 2
        meta = writer.commit({keys.DROPPED_SAMPLES: dropped})
    except BaseException as exc:
        dropped = (device.dropped_bytes - dropped_before) // 2
        kept = writer.abandon(keep_partial=True)
        run.partial = kept
        what = "interrupted" if isinstance(exc, KeyboardInterrupt) else f"failed ({exc})"
        where = f"; partial kept as {kept.name} (marked incomplete)" if kept else "; nothing kept"
        log(f"{cap.base_name}: {what} after {done // 2} samples{where}")
        show.finish(label, what + where)
        raise
    n_samples = total // 2
    msg = f"{n_samples} samples at {fmt_hz(rate, 1.0)}, {fmt_hz(applied.center_hz, 1.0)}, gain {applied.gain_db:g} dB"
    if dropped:
        w = (f"{cap.base_name}: {dropped} samples were dropped during the capture (USB too slow?); the "
             "recording has gaps: lower the sample rate or capture again with --redo")
        run.warnings.append(w)
        log(f"warning: {w}")
    log(f"{cap.base_name}: written ({msg}, {dropped} dropped)")
    timing = ""
    if clock is not None:
        clock.taken_s += n_samples / rate
        clock.busy_s += time.monotonic() - t0
        clock.left_s -= n_samples / rate
        timing = f"; {clock.text(clock.left_s)}"
    show.finish(label, f"written {meta.name} ({n_samples / rate:.2f} s{timing})")
    return meta
