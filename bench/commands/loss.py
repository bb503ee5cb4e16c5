"""``rxbench loss``: insertion loss of a device, direct or by substitution, with its GUM budget.

Direct: ``--thru C --dut C [--thru-after C] [--pair]``; substitution: ``--step DB=C ... --dut C
[--dut-step DB]``. This module parses the flags, reads the captures alike and renders the result
of :mod:`rxbench.methods.loss`, the method a session calls too.
"""

from __future__ import annotations

import argparse
import math

import numpy as np

from rxbench.options import add_tone_reading_options
from rxbench.compared import read_tones
from rxbench.errors import UsageError
from rxbench.methods.common import SWR_FROM_OPTIONS, has_tone, pool
from rxbench.methods.loss import direct_loss, substitution_loss
from rxbench.output import CAUTIONS, add_json_option, emit, fmt_db
from rxbench.recordings import add_capture_options, capture_from_args, step_capture_from_args
from rxbench.quantities import arg as quantity_arg




def add_parser(sub) -> None:
    p = sub.add_parser(
        "loss", help="insertion loss of a device, direct or by substitution, with its uncertainty",
        description="Insertion loss of a device from tone captures. Direct: the same generator level "
                    "through a thru and through the DUT (--thru/--dut). Substitution: thru captures at "
                    "known attenuator settings (--step DB=CAPTURE ...) and the DUT (--dut) at --dut-step; "
                    "the dongle is then only a comparator.",
        epilog=CAUTIONS)
    g = p.add_argument_group("direct method")
    g.add_argument("--thru", action="append", default=[], metavar="CAPTURE",
                   help="thru capture before the DUT (repeat for several)")
    g.add_argument("--thru-after", action="append", default=[], metavar="CAPTURE",
                   help="thru captured again after the DUT: drift is interpolated to the DUT's time")
    g.add_argument("--linearity-db", type=quantity_arg("tolerance_db"), metavar="DB",
                   help="half-width of the dongle's linearity error between the two levels, dB "
                        "(rectangular; from a ladder check)")
    g = p.add_argument_group("substitution method")
    g.add_argument("--step", action="append", default=[], metavar="DB=CAPTURE",
                   help="thru capture with the attenuator at DB (repeat for each step; DB may come from "
                        "the capture's metadata when only CAPTURE is given)")
    g.add_argument("--dut-step", type=quantity_arg("attenuation_db"), metavar="DB",
                   help="attenuator setting while the DUT was captured, dB (default 0)")
    p.add_argument("--dut", action="append", default=[], metavar="CAPTURE",
                   help="capture through the DUT (repeat for several)")
    p.add_argument("--pair", action="store_true",
                   help="the DUT is two identical devices back to back: per-device loss = pair loss / 2")
    g = p.add_argument_group("uncertainty")
    g.add_argument("--atten-tolerance-db", type=quantity_arg("tolerance_db"), metavar="DB",
                   help="attenuator setting tolerance, ± dB (rectangular)")
    g.add_argument("--source-swr", type=quantity_arg("swr"), metavar="SWR", help="SWR of the source (generator and pads)")
    g.add_argument("--load-swr", type=quantity_arg("swr"), metavar="SWR", help="SWR of the dongle's input")
    g.add_argument("--dut-swr", type=quantity_arg("swr"), metavar="SWR", help="SWR of the DUT's ports")
    g.add_argument("--budget", action="store_true", help="print the uncertainty budget")
    add_tone_reading_options(p)
    add_capture_options(p)
    add_json_option(p)
    p.set_defaults(func=run)


def budget_table(budget) -> str:
    """The budget as a small fixed-width table (dB)."""
    lines = ["uncertainty budget (dB)",
             f"  {'component':<34} {'kind':<4} {'distribution':<12} {'a':>6} {'u':>7} {'c':>6} {'|c|u':>7}  note"]
    for c in budget.components:
        a = "-" if c.half_width is None else f"{c.half_width:.3f}"
        lines.append(f"  {c.name:<34} {c.kind:<4} {c.distribution:<12} {a:>6} {c.u:7.4f} "
                     f"{c.sensitivity:6.2f} {c.contribution:7.4f}  {c.note}".rstrip())
    lines.append(f"  {'combined standard uncertainty u_c':<72} {budget.combined_u:7.4f}")
    lines.append(f"  {f'expanded uncertainty U (k = {budget.k:g})':<72} {budget.expanded_u:7.4f}")
    dof = budget.dof_eff
    lines.append(f"  {'effective degrees of freedom':<72} {dof:7.0f}" if dof < 1000 else
                 f"  {'effective degrees of freedom':<72} {'>1000':>7}")
    return "\n".join(lines)


# --------------------------------------------------------------------------------------------


def _check_options(args) -> str:
    if not args.dut:
        raise UsageError("give the DUT capture with --dut")
    if args.thru and args.step:
        raise UsageError("give either --thru (direct method) or --step (substitution), not both")
    if not args.thru and not args.step:
        raise UsageError("give --thru CAPTURE (direct method) or --step DB=CAPTURE ... (substitution)")
    method = "direct" if args.thru else "substitution"
    if method == "substitution":
        if args.thru_after:
            raise UsageError("--thru-after applies to the direct method (--thru), not to substitution")
        if args.linearity_db is not None:
            raise UsageError("--linearity-db applies to the direct method; substitution does not rely "
                             "on the dongle's linearity")
    elif args.dut_step is not None:
        raise UsageError("--dut-step applies to substitution (--step); the direct method compares "
                         "thru and DUT at the same setting")
    for name in ("atten_tolerance_db", "linearity_db"):
        v = getattr(args, name)
        if v is not None and not (math.isfinite(v) and v >= 0):
            raise UsageError(f"--{name.replace('_', '-')} must be a finite number >= 0, got {v}")
    for name in ("source_swr", "load_swr", "dut_swr"):
        v = getattr(args, name)
        if v is not None and not (math.isfinite(v) and v >= 1):
            raise UsageError(f"--{name.replace('_', '-')} must be a finite number >= 1, got {v}")
    if args.dut_step is not None and not (math.isfinite(args.dut_step) and args.dut_step >= 0):
        raise UsageError(f"--dut-step must be a finite number >= 0 dB, got {args.dut_step}")
    return method


def _swr(args) -> dict:
    return {key: getattr(args, key) for key in SWR_FROM_OPTIONS}


def _direct(args, readings, n_thru, n_dut):
    thru_r, dut_r, after_r = readings[:n_thru], readings[n_thru:n_thru + n_dut], readings[n_thru + n_dut:]
    p = {"thru": pool(thru_r, "thru"), "DUT": pool(dut_r, "DUT")}
    if after_r:
        p["thru after"] = pool(after_r, "thru-after")
    result = direct_loss(p["thru"], p["DUT"], p.get("thru after"), linearity_db=args.linearity_db, swr=_swr(args),
                         n_devices=2 if args.pair else 1, drift_ppm=args.drift_ppm)
    if after_r:
        rows = [("thru before", p["thru"], n_thru), ("DUT", p["DUT"], n_dut),
                ("thru after", p["thru after"], len(after_r)),
                ("thru at DUT time", (result.loss.reference_dbfs, math.nan), None)]
    else:
        rows = [("thru", p["thru"], n_thru), ("DUT", p["DUT"], n_dut)]
    return result, [(label, x if isinstance(x, tuple) else (x.dbfs, x.u_db), n) for label, x, n in rows]


def _substitution(args, readings, steps_db, n_dut):
    step_r, dut_r = readings[:len(steps_db)], readings[len(steps_db):]
    warnings = []
    steps = {}
    for db, r in zip(steps_db, step_r):
        if not has_tone(r):
            warnings.append(f"{r.capture.path}: no tone at step {db:g} dB; that step is left out")
            continue
        steps[db] = pool([r])
    dut = pool(dut_r, "DUT")
    result = substitution_loss(steps, dut, dut_attenuation_db=0.0 if args.dut_step is None else args.dut_step,
                               tolerance_db=args.atten_tolerance_db, swr=_swr(args),
                               n_devices=2 if args.pair else 1, drift_ppm=args.drift_ppm)
    lo, hi = result.loss.bracket_db
    rows = [(f"step {lo:g} dB", (steps[lo].dbfs, steps[lo].u_db), 1), ("DUT", (dut.dbfs, dut.u_db), n_dut),
            (f"step {hi:g} dB", (steps[hi].dbfs, steps[hi].u_db), 1)]
    return result, rows, warnings


def run(args: argparse.Namespace) -> int:
    method = _check_options(args)
    if method == "direct":
        captures = [capture_from_args(p, args) for p in (*args.thru, *args.dut, *args.thru_after)]
        readings, warnings = read_tones(captures, near_hz=args.near, nperseg=args.nperseg,
                                        drift_ppm=args.drift_ppm, noise_band_hz=args.noise_band)
        result, rows = _direct(args, readings, len(args.thru), len(args.dut))
    else:
        steps = [step_capture_from_args(s, args) for s in args.step]
        dbs = [db for db, _ in steps]
        if len(set(dbs)) != len(dbs):
            raise UsageError(f"--step: each attenuator setting may appear once, got {sorted(dbs)}")
        order = np.argsort(dbs)
        dbs = [dbs[i] for i in order]
        captures = [steps[i][1] for i in order] + [capture_from_args(p, args) for p in args.dut]
        readings, warnings = read_tones(captures, near_hz=args.near, nperseg=args.nperseg,
                                        drift_ppm=args.drift_ppm, noise_band_hz=args.noise_band)
        result, rows, more = _substitution(args, readings, dbs, len(args.dut))
        warnings += more
    warnings += result.warnings
    out = result.to_dict()
    out["warnings"] = warnings
    emit(args, out, "\n".join(_human(result, rows, args)), warnings)
    return 0


def _human(result, rows, args) -> list[str]:
    loss, U = result.loss, result.expanded_uncertainty_db
    digits = 3 if U < 0.095 else 2
    lines = [f"insertion loss, {result.method} method"]
    for label, (p, u), n in rows:
        count = "" if n is None else f"  ({n} capture{'s' if n != 1 else ''})"
        unc = "" if not math.isfinite(u) else f"  u {u:.3f} dB"
        lines.append(f"  {label:<18} {fmt_db(p, 3):>9} dBFS{unc}{count}")
    if result.method == "substitution":
        lines.append(f"  {'ladder setting':<18} {loss.attenuation_db:9.3f} dB  (DUT at {result.dut_attenuation_db:g} dB)")
    lines.append(f"  {'loss':<18} {loss.loss_db:9.{digits}f} dB  ± {U:.{digits}f} dB  (U, k = {loss.budget.k:g}, "
                 "about 95 %)")
    if args.pair:
        lines.append(f"  {'per device':<18} {result.per_device_db:9.{digits}f} dB  ± "
                     f"{result.expanded_uncertainty_per_device_db:.{digits}f} dB  (pair / 2)")
    if args.budget:
        lines += ["", budget_table(loss.budget)]
        if args.pair:
            lines.append("  (per device: half of each contribution)")
    return lines
