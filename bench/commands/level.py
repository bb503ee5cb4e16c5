"""``rxbench level``: a live level readout for setting up the bench before a measurement.

The dongle (or the simulated bench) streams; a few times a second the terminal shows the tone's
level (dBFS, and dBm with a known full-scale level), a bar of it against full scale, the SNR, the
noise density, the clip fraction and the level the set-up should give at the dongle's input. It
stops on Enter or Ctrl-C (or after ``--updates``). ``--json`` writes one JSON object per update, one
per line (JSON Lines), for a script to follow.

The settings come from a plan's step (``--plan PLAN --step NAME``: the same dongle settings,
generator level and attenuator setting the capture will use) or from options; either way they are
turned into a one-step plan, so the plan's checks and the input-level guard apply as in ``capture``.
"""

from __future__ import annotations

import argparse
import json
import math
import signal
import sys
import time

from rxbench.errors import UsageError
from rxbench.output import CAUTIONS, add_json_option, json_safe
from rxbench.quantities import arg as quantity_arg

#: Width of the level bar, characters; it spans BAR_RANGE_DB below full scale.
BAR_WIDTH = 30
BAR_RANGE_DB = 90.0


def add_parser(sub) -> None:
    p = sub.add_parser(
        "level",
        help="live level readout for setting the generator, gain and attenuator (dongle or simulated bench)",
        description=(
            "Show, a few times a second, the tone's level, SNR, noise density, clip fraction and the "
            "expected input level while you set up the generator, the gain and the attenuator. Stop "
            "with Enter or Ctrl-C. Settings from a plan's step (--plan, --step) or from the options. "
            + CAUTIONS
        ),
    )
    p.add_argument("--plan", metavar="PLAN", help="take the settings from this plan (TOML)")
    p.add_argument("--step", metavar="NAME", help="the plan's step to set up for (default: its first tone step)")
    p.add_argument("--center", type=quantity_arg("frequency"), metavar="HZ", help="centre frequency, Hz (without --plan)")
    p.add_argument("--rate", type=quantity_arg("sample_rate"), default=250000.0, metavar="HZ", help="sample rate, Hz (default 250000)")
    p.add_argument("--gain", type=quantity_arg("gain_db"), default=30.0, metavar="DB", help="tuner gain, dB (default 30)")
    p.add_argument("--ppm", type=int, default=0, metavar="N", help="frequency correction, ppm")
    p.add_argument("--full-scale-dbm", type=quantity_arg("level_dbm"), metavar="DBM",
                   help="input level that reaches full scale at this gain (for readings in dBm)")
    p.add_argument("--generator-dbm", type=quantity_arg("level_dbm"), metavar="DBM", help="the generator's output level, dBm")
    p.add_argument("--attenuation-db", type=quantity_arg("attenuation_db"), default=0.0, metavar="DB", help="the attenuator's setting, dB")
    p.add_argument("--tone-offset", type=quantity_arg("offset"), metavar="HZ",
                   help="read the tone near this offset from the centre (default: the strongest)")
    p.add_argument("--device", choices=("rtlsdr", "simulated"), default="rtlsdr",
                   help="the dongle (default) or the simulated bench")
    p.add_argument("--device-index", type=int, default=0, metavar="N", help="which dongle, when several are attached")
    p.add_argument("--seed", type=int, default=None, metavar="N", help="noise seed of the simulated bench")
    p.add_argument("--interval", type=quantity_arg("duration_s"), default=0.25, metavar="S",
                   help="seconds of samples per update (default 0.25: four updates a second)")
    p.add_argument("--updates", type=int, default=0, metavar="N", help="stop after N updates (default: run until stopped)")
    p.add_argument("--force", action="store_true",
                   help="run even where the settings would put more than 0 dBm into the dongle")
    add_json_option(p)
    p.set_defaults(func=run)


def _option_plan_text(args: argparse.Namespace) -> str:
    """The options as a one-step plan (numbers only: the text is built, never taken from the user)."""
    if args.center is None:
        raise UsageError("give --center HZ, or --plan PLAN (and --step NAME)")
    for name, value in (("--center", args.center), ("--rate", args.rate), ("--gain", args.gain),
                        ("--full-scale-dbm", args.full_scale_dbm), ("--generator-dbm", args.generator_dbm),
                        ("--attenuation-db", args.attenuation_db), ("--tone-offset", args.tone_offset)):
        if value is not None and not math.isfinite(value):
            raise UsageError(f"{name} must be a finite number, got {value!r}")
    dongle = [f"sample_rate_hz = {args.rate!r}", f"gain_db = {args.gain!r}", f"ppm = {args.ppm}", "settle_s = 0.05"]
    if args.full_scale_dbm is not None:
        dongle.append(f"full_scale_dbm = {args.full_scale_dbm!r}")
    generator = []
    if args.generator_dbm is not None:
        generator.append(f"level_dbm = {args.generator_dbm!r}")
    if args.tone_offset is not None:
        generator.append(f"offset_hz = {args.tone_offset!r}")
    return "\n".join(["[dongle]", *dongle, "[generator]", *generator, "[[step]]", 'name = "level"',
                      'role = "thru"', f"attenuation_db = {args.attenuation_db!r}", f"center_hz = {args.center!r}",
                      "duration_s = 1.0"]) + "\n"


def _setup(args: argparse.Namespace):
    """(plan, planned capture, warnings) for the readout, the input-level guard applied."""
    from rxbench.capture import check_bias_tee, check_levels
    from rxbench.plan import TONE_ROLES, load_plan, parse_plan

    if args.plan is not None:
        plan = load_plan(args.plan)
        caps = plan.expand()
        if args.step is not None:
            plan.step_named(args.step)  # PlanError naming the plan's steps
            cap = next(c for c in caps if c.step.name == args.step)
        else:
            cap = next((c for c in caps if c.role in TONE_ROLES), caps[0])
    else:
        if args.step is not None:
            raise UsageError("--step needs --plan")
        plan = parse_plan(_option_plan_text(args), "the options")
        cap = plan.expand()[0]
    warnings = list(plan.warnings) + check_levels(plan, force=args.force) + check_bias_tee(plan, force=args.force)
    return plan, cap, warnings


def bar(tone_dbfs: float | None) -> str:
    """``[######.....|..]``: the tone against full scale; ``|`` marks 3 dB below full scale."""
    if tone_dbfs is None:
        return "[" + " " * BAR_WIDTH + "]"
    filled = int(round(BAR_WIDTH * min(max((tone_dbfs + BAR_RANGE_DB) / BAR_RANGE_DB, 0.0), 1.0)))
    mark = int(round(BAR_WIDTH * (BAR_RANGE_DB - 3.0) / BAR_RANGE_DB))
    cells = ["#" if i < filled else "." for i in range(BAR_WIDTH)]
    if mark < BAR_WIDTH and cells[mark] == ".":
        cells[mark] = "|"
    return "[" + "".join(cells) + "]"


def update_line(level, expected_dbm: float | None) -> str:
    from rxbench.check import level_text

    parts = [bar(level.tone_dbfs), level_text(level)]
    if expected_dbm is not None:
        parts.append(f"set-up gives about {expected_dbm:+.1f} dBm at the input")
    if level.clipped:
        parts.append("CLIPPING")
    return "  ".join(parts)


def _stop_requested(timeout_s: float) -> bool:
    """Wait up to ``timeout_s``; True when the operator pressed Enter (terminals only)."""
    stdin = sys.stdin
    if stdin is not None and hasattr(stdin, "isatty") and stdin.isatty():
        import select

        ready, _, _ = select.select([stdin], [], [], max(timeout_s, 0.0))
        if ready:
            stdin.readline()
            return True
        return False
    if timeout_s > 0:
        time.sleep(timeout_s)
    return False


def readout(device, plan, cap, *, interval_s: float, updates: int, on_update, near_hz: float | None) -> int:
    """Stream from ``device`` set up for ``cap``; call ``on_update(i, level, reading)`` after each
    ``interval_s`` of samples until Enter, Ctrl-C or ``updates`` updates (the tone read near
    ``near_hz``, or the strongest). Returns the updates shown."""
    from rxbench.reading import read_capture
    from rxbench.capture import round_up_512
    from rxbench.check import level_of
    from rxbench.recordings import ENCODINGS, decode, memory_capture

    settings = plan.dongle
    device.open()
    shown = 0
    try:
        device.arrange(cap)
        applied = device.configure(settings, cap.center_hz)
        rate = applied.sample_rate_hz
        if settings.settle_s > 0:
            device.read_bytes(round_up_512(settings.settle_s * rate * 2))
        n_bytes = round_up_512(interval_s * rate * 2)
        next_at = time.monotonic()
        while not updates or shown < updates:
            raw = device.read_bytes(n_bytes)
            x = decode(raw, ENCODINGS["cu8"])
            reading = read_capture(memory_capture(x, rate, center_hz=applied.center_hz, name="live"),
                                   near_hz=near_hz)
            shown += 1
            on_update(shown, level_of(reading, settings.full_scale_dbm), reading)
            if updates and shown >= updates:
                break
            # the dongle paces itself; the simulated bench is paced here, so the display stays readable
            next_at += interval_s
            if _stop_requested(next_at - time.monotonic()):
                break
    except KeyboardInterrupt as exc:
        if getattr(exc, "signum", signal.SIGINT) != signal.SIGINT:
            raise  # SIGTERM/SIGHUP end the run with their own status (bench.interrupts)
        # Ctrl-C is the ordinary way to stop
    finally:
        device.close()
    return shown


def run(args: argparse.Namespace) -> int:
    from rxbench.device import open_source
    from rxbench.style import fmt_hz_band

    if not 0.02 <= args.interval <= 10:
        raise UsageError(f"--interval must be between 0.02 and 10 s, got {args.interval!r}")
    if args.updates < 0:
        raise UsageError(f"--updates must be >= 0, got {args.updates}")
    if args.device_index < 0:
        raise UsageError(f"--device-index must be >= 0, got {args.device_index}")
    plan, cap, warnings = _setup(args)
    device = open_source(args.device, device_index=args.device_index, seed=args.seed)
    sys.stderr.write(CAUTIONS + "\n")
    for w in warnings:
        sys.stderr.write(f"rxbench level: warning: {w}\n")
    expected = cap.input_dbm
    tty = not args.json and sys.stdout.isatty()
    what = f"step {cap.step.name!r} of {plan.source}" if args.plan else "the options"
    sys.stderr.write(f"level readout at {fmt_hz_band(cap.center_hz, 1.0)} ({what}); Enter or Ctrl-C stops\n")
    start = time.monotonic()

    def on_update(i, level, reading):
        if args.json:
            doc = {"update": i, "time_s": time.monotonic() - start, "center_hz": cap.center_hz,
                   **level.to_dict(), "expected_input_dbm": expected, "warnings": list(reading.warnings)}
            sys.stdout.write(json.dumps(json_safe(doc), allow_nan=False) + "\n")
        elif tty:
            sys.stdout.write("\r" + update_line(level, expected) + "\x1b[K")
        else:
            sys.stdout.write(update_line(level, expected) + "\n")
        sys.stdout.flush()

    near = cap.tone_offset_hz if args.plan is not None else args.tone_offset
    shown = readout(device, plan, cap, interval_s=args.interval, updates=args.updates, on_update=on_update,
                    near_hz=near)
    if tty:
        sys.stdout.write("\n")
    sys.stderr.write(f"level readout stopped after {shown} update(s)\n")
    return 0
