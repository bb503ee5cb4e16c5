"""``rxbench ladder --step DB=C ...``: check each attenuator step, and the dongle's linear range.

This module parses the flags, reads the captures alike and renders the result of
:func:`rxbench.methods.ladder.ladder_check`, the method a session calls too.
"""

from __future__ import annotations

import argparse
import math

from rxbench.options import add_tone_reading_options
from rxbench.compared import read_tones
from rxbench.errors import UsageError
from rxbench.methods.common import pool
from rxbench.methods.ladder import DEFAULT_LINEARITY_DB, DEFAULT_TOLERANCE_DB, ladder_check
from rxbench.output import CAUTIONS, add_json_option, emit, fmt_db
from rxbench.recordings import add_capture_options, step_capture_from_args
from rxbench.quantities import arg as quantity_arg


def add_parser(sub) -> None:
    p = sub.add_parser(
        "ladder", help="check the attenuator steps and the dongle's linear range",
        description="Thru captures at known attenuator settings: the error of each step against its "
                    "nominal value (referenced so that one bad step cannot pollute the others), where the "
                    "dongle compresses at the top and sinks into noise at the bottom, and its usable "
                    "linear range.",
        epilog=CAUTIONS)
    p.add_argument("--step", action="append", default=[], metavar="DB=CAPTURE",
                   help="thru capture with the attenuator at DB (repeat; at least 3 steps)")
    p.add_argument("--tolerance-db", type=quantity_arg("tolerance_db"), default=DEFAULT_TOLERANCE_DB, metavar="DB",
                   help="flag a step whose error exceeds this, dB (default %(default)g)")
    p.add_argument("--linearity-db", type=quantity_arg("tolerance_db"), default=DEFAULT_LINEARITY_DB, metavar="DB",
                   help="shortfall at the top that counts as compression, dB (default %(default)g)")
    p.add_argument("--reference-step", type=quantity_arg("attenuation_db"), metavar="DB",
                   help="reference the errors to this step instead of the median of the linear steps")
    add_tone_reading_options(p)
    add_capture_options(p)
    add_json_option(p)
    p.set_defaults(func=run)


def _signed(value: float) -> str:
    return f"{value:+.2f}" if math.isfinite(value) else "n/a"


def run(args: argparse.Namespace) -> int:
    if len(args.step) < 3:
        raise UsageError(f"a ladder check needs at least 3 --step DB=CAPTURE, got {len(args.step)}")
    for name in ("tolerance_db", "linearity_db"):
        v = getattr(args, name)
        if not (math.isfinite(v) and v >= 0) or (name == "tolerance_db" and v == 0):
            raise UsageError(f"--{name.replace('_', '-')} must be a finite number "
                             f"{'> 0' if name == 'tolerance_db' else '>= 0'}, got {v}")
    steps = sorted((step_capture_from_args(s, args) for s in args.step), key=lambda s: s[0])
    dbs = [db for db, _ in steps]
    if len(set(dbs)) != len(dbs):
        raise UsageError(f"--step: each attenuator setting may appear once, got {dbs}")
    if len(dbs) < 3:
        raise UsageError(f"--step: a ladder check needs at least 3 steps, got {len(dbs)}")
    readings, warnings = read_tones([cap for _, cap in steps], near_hz=args.near, nperseg=args.nperseg,
                                    drift_ppm=args.drift_ppm, noise_band_hz=args.noise_band)
    result = ladder_check({db: pool([r], missing_ok=True) for db, r in zip(dbs, readings)},
                          tolerance_db=args.tolerance_db, linearity_db=args.linearity_db,
                          reference_db=args.reference_step, drift_ppm=args.drift_ppm)
    warnings += result.warnings
    out = result.to_dict()
    out["warnings"] = warnings
    emit(args, out, _human(result, out["steps"]), warnings)
    return 0


def _human(result, steps_out) -> str:
    c = result.check
    ref = "median of the linear steps" if c.reference == "median" else c.reference
    lines = [f"ladder check: {len(steps_out)} steps, reference {ref} "
             f"({c.offset_dbfs:.2f} dBFS at 0 dB), tolerance ±{c.tolerance_db:g} dB",
             f"  {'nominal':>8} {'reading':>10} {'measured':>9} {'error':>7} {'u':>6} {'SNR':>6}",
             f"  {'dB':>8} {'dBFS':>10} {'dB':>9} {'dB':>7} {'dB':>6} {'dB':>6}"]
    for s in steps_out:
        mark = "FLAGGED" if s["flagged"] else ("" if s["region"] == "linear" else s["region"])
        snr = "-" if s["snr_db"] is None else f"{s['snr_db']:.1f}"
        lines.append(f"  {s['nominal_db']:8g} {fmt_db(s['reading_dbfs']):>10} {fmt_db(s['measured_db']):>9} "
                     f"{_signed(s['error_db']):>7} "
                     f"{fmt_db(s['u_error_db'], 3):>6} {snr:>6}  {mark}".rstrip())
    limits = {"compression": "compression", "noise": "noise", "ladder": "end of the ladder"}
    lower_bound = " (at least: the ladder ended first)" if "ladder" in (c.top_limited_by, c.bottom_limited_by) else ""
    lines.append(f"usable linear range: {c.usable_range_db:g} dB{lower_bound}, steps {c.usable_top_db:g} .. "
                 f"{c.usable_bottom_db:g} dB (top: {limits[c.top_limited_by]}, bottom: "
                 f"{limits[c.bottom_limited_by]})")
    n = int(c.flagged.sum())
    lines.append(f"{n} step{'s' if n != 1 else ''} outside ±{c.tolerance_db:g} dB" if n else
                 f"all linear-range steps within ±{c.tolerance_db:g} dB")
    return "\n".join(lines)
