"""``rxbench capture PLAN --out SESSION``: run a measurement plan with the dongle (or the simulated
bench) into a session folder, prompting the operator at each step."""

from __future__ import annotations

import argparse
import shlex
import sys

from rxbench.capture import run_session
from rxbench.device import open_source
from rxbench.errors import UsageError
from rxbench.output import CAUTIONS, add_json_option, emit
from rxbench.plan import load_plan


def add_parser(sub) -> None:
    p = sub.add_parser(
        "capture",
        help="run a measurement plan into a session folder (dongle or simulated bench)",
        description=(
            "Run a measurement plan (TOML) step by step: tell the operator what to connect, capture "
            "each step as a SigMF recording with its role and settings, and keep a copy of the plan "
            "and a log. Re-running into the same folder resumes it. " + CAUTIONS
        ),
    )
    p.add_argument("plan", metavar="PLAN", help="the plan file (TOML)")
    p.add_argument("--out", metavar="SESSION", help="session folder (created, or resumed); required unless --dry-run")
    p.add_argument("--dry-run", action="store_true",
                   help="capture nothing: list the steps as the plan expands them (sweeps included), their "
                        "count, the total capture time and size, and how many operator actions they need")
    p.add_argument("--device", choices=("rtlsdr", "simulated"), default="rtlsdr",
                   help="capture from an RTL2832U dongle (default) or from the simulated bench")
    p.add_argument("--device-index", type=int, default=0, metavar="N", help="which dongle, when several are attached")
    p.add_argument("--seed", type=int, default=None, metavar="N",
                   help="noise seed of the simulated bench (default: a fresh one each run)")
    p.add_argument("--yes", action="store_true",
                   help="unattended: do not wait for the operator at each step (nothing needs moving)")
    p.add_argument("--force", action="store_true",
                   help="capture even where the plan's levels would put more than 0 dBm into the dongle, "
                        "or its captures would not fit in the free disk space")
    p.add_argument("--redo", action="append", default=[], metavar="STEP",
                   help="capture this step again (repeatable); its earlier recordings are kept aside")
    add_json_option(p)
    p.set_defaults(func=run)


def resume_command(args: argparse.Namespace) -> str:
    """The command that resumes this run (the same plan, folder and device; no --redo)."""
    words = ["rxbench", "capture", args.plan, "--out", args.out]
    if args.device != "rtlsdr":
        words += ["--device", args.device]
    if args.device_index:
        words += ["--device-index", str(args.device_index)]
    if args.yes:
        words.append("--yes")
    if args.force:
        words.append("--force")
    return shlex.join(words)


def run(args: argparse.Namespace) -> int:
    if args.device_index < 0:
        raise UsageError(f"--device-index must be >= 0, got {args.device_index}")
    plan = load_plan(args.plan)
    if args.dry_run:
        return _dry_run(args, plan)
    if not args.out:
        raise UsageError("--out SESSION is needed (or --dry-run to only list the steps)")
    device = open_source(args.device, device_index=args.device_index, seed=args.seed)
    # The cautions come once every check has passed, just before the first capture: never in front
    # of an error.
    preamble = CAUTIONS + (f"\nPlan: {plan.title}" if plan.title else "")
    try:
        result = run_session(plan, args.out, device, yes=args.yes, force=args.force, redo=tuple(args.redo),
                             progress=sys.stderr, preamble=preamble)
    except KeyboardInterrupt:
        sys.stderr.write(f"\ninterrupted: what was captured is kept; to resume, run\n  {resume_command(args)}\n")
        raise
    out = {
        "session": str(result.session_dir),
        "plan": str(plan.source),
        "device": device.name,
        "written": [str(p) for p in result.written],
        "kept": [str(p) for p in result.kept],
        "replaced": [str(p) for p in result.replaced],
        "skipped_steps": list(result.skipped),
        "stopped": result.stopped,
        "complete": not result.stopped and not result.skipped,
        "checks": [c.to_dict() for c in result.checks],
        "checks_failed": sum(not c.passed for c in result.checks),
        "warnings": list(result.warnings),
        "cautions": CAUTIONS,
    }
    lines = [f"session {result.session_dir}: {len(result.written)} capture(s) written, "
             f"{len(result.kept)} kept from before"]
    if result.replaced:
        lines.append(f"  earlier recordings of the redone steps are in {result.session_dir}/.replaced/")
    if result.skipped:
        lines.append(f"  skipped steps: {', '.join(result.skipped)} (run again to capture them)")
    failed = [c for c in result.checks if not c.passed]
    if failed:
        lines.append(f"  {len(failed)} capture(s) failed the check: "
                     + ", ".join(c.name for c in failed) + " (see the warnings; --redo STEP captures a step again)")
    if result.stopped:
        lines.append(f"  stopped before the end: to resume, run {resume_command(args)}")
    if out["complete"]:
        lines.append(f"  next: rxbench analyze {result.session_dir}")
    lines.append(CAUTIONS)
    emit(args, out, "\n".join(lines), result.warnings)
    return 0


def _dry_run(args, plan) -> int:
    from rxbench.sweep import dry_run

    d = dry_run(plan)
    lines = [f"Plan {plan.source}" + (f": {plan.title}" if plan.title else "")]
    for s in d["steps"]:
        where = f"{s['center_hz'] / 1e6:9.4f} MHz"
        path = (s["device"] or "DUT") + (f" x{s['devices']}" if s["devices"] > 1 else "") if s["with_dut"] else "-"
        lines.append(f"  {s['index']:4d} {s['name']:<32} {s['role']:<7} {where} att {s['attenuation_db']:g} dB  "
                     f"path {path:<16} {s['duration_s']:g} s x{s['repeats']}"
                     + (f"  | {s['instruction']}" if s["instruction"] else ""))
    lines.append(f"{d['step_count']} steps, {d['capture_count']} captures, about {d['capture_time_s']:.0f} s of "
                 f"capturing (settling included, operator time not), {d['size_bytes'] / 1e6:.1f} MB of recordings, "
                 f"{d['operator_actions']} operator actions after the first set-up")
    lines.append(CAUTIONS)
    emit(args, d, "\n".join(lines), list(plan.warnings))
    return 0
