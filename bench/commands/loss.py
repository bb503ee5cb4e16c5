"""``rxbench loss``: insertion loss of a device, direct or by substitution, with its GUM budget.

Direct: ``--thru C --dut C [--thru-after C] [--pair]``; substitution: ``--step DB=C ... --dut C
[--dut-step DB]``. The numerics are in :mod:`dsp.ladder`; this module reads the captures, checks
that they can be compared, and reports. The helpers that read a set of captures alike are shared
with ``rxbench ladder``.
"""

from __future__ import annotations

import argparse
import math

import numpy as np

from rxbench.analyze import add_drift_option, SWR_FROM_OPTIONS, capture_start_s, mismatch_budget, pool_tones, read_tones, tone_db
from rxbench.errors import MeasurementError, UsageError
from rxbench.output import CAUTIONS, add_json_option, emit, fmt_db
from rxbench.recordings import add_capture_options, capture_from_args, step_capture_from_args
from rxbench.dsp.ladder import direct_loss, substitution_loss
from rxbench.dsp.uncertainty import coverage_factor
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
    p.add_argument("--near", type=quantity_arg("offset"), metavar="HZ", help="measure the tone near this offset from centre, Hz")
    p.add_argument("--nperseg", type=int, metavar="N", help="FFT segment length (default: from the capture length)")
    add_drift_option(p)
    add_capture_options(p)
    add_json_option(p)
    p.set_defaults(func=run)


# --------------------------------------------------------------------------------------------
# Shared with `rxbench ladder`


def reading_dict(reading, **more) -> dict:
    p, u, _ = tone_db(reading)
    t = reading.tone
    return {"capture": str(reading.capture.path), "power_dbfs": p, "u_power_db": u,
            "offset_hz": None if t is None else t.offset_hz, "snr_db": None if t is None else t.snr_db,
            "clip_fraction": reading.health.clip_fraction, **more}


def _capture_time_s(cap):
    """Mid-capture time from the metadata (s since the epoch), or None."""
    start = capture_start_s(cap)
    return None if start is None else start + cap.duration_s / 2


def budget_rows(budget) -> list[dict]:
    return [{"name": c.name, "type": c.kind, "distribution": c.distribution, "half_width_db": c.half_width,
             "u_db": c.u, "sensitivity": c.sensitivity, "contribution_db": c.contribution, "dof": c.dof,
             "note": c.note} for c in budget.components]


def budget_table(budget) -> str:
    """The budget as a small fixed-width table (dB)."""
    lines = ["uncertainty budget (dB)",
             f"  {'component':<34} {'type':<4} {'distribution':<12} {'a':>6} {'u':>7} {'c':>6} {'|c|u':>7}  note"]
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


def _mismatch(args, loss_db, warnings):
    swr = {key: getattr(args, key) for key in SWR_FROM_OPTIONS}
    comps, warning = mismatch_budget(swr, loss_db, SWR_FROM_OPTIONS)
    if warning:
        warnings.append(warning)
    return comps


def _direct(args, readings, n_thru, n_dut, warnings):
    thru_r, dut_r, after_r = readings[:n_thru], readings[n_thru:n_thru + n_dut], readings[n_thru + n_dut:]
    thru = pool_tones(thru_r, "thru")
    dut = pool_tones(dut_r, "DUT")
    kw = {}
    times_from = None
    if after_r:
        after = pool_tones(after_r, "thru-after")
        caps = [r.capture for r in readings]
        stamps = [_capture_time_s(c) for c in caps]
        if all(s is not None for s in stamps):
            times_from = "metadata"
        else:
            times_from = "order given"
            if any(s is not None for s in stamps):
                warnings.append("only some captures carry a start time; drift is interpolated by the order "
                                "the captures were given")
            stamps = list(range(len(caps)))
        t = [float(np.mean(stamps[:n_thru])), float(np.mean(stamps[n_thru:n_thru + n_dut])),
             float(np.mean(stamps[n_thru + n_dut:]))]
        kw = dict(thru_after_dbfs=after[0], u_thru_after_db=after[1], times_s=t)
        dof = (thru[2], dut[2], after[2])
    else:
        dof = (thru[2], dut[2], math.inf)
    linearity = 0.0 if args.linearity_db is None else args.linearity_db
    if args.linearity_db is None:
        warnings.append("the direct method assumes the dongle is linear between the thru and DUT levels; "
                        "that is not in the budget (give --linearity-db from a ladder check, or use "
                        "substitution)")

    def compute(extra):
        try:
            return direct_loss(thru[0], thru[1], dut[0], dut[1], dof=dof, linearity_db=linearity,
                               extra_components=extra, **kw)
        except ValueError as exc:
            raise MeasurementError(str(exc)) from None

    loss = compute(())
    loss = compute(_mismatch(args, loss.loss_db, warnings))
    if after_r and abs(loss.drift_db) > 2 * math.hypot(thru[1], after[1]):
        warnings.append(f"the thru moved by {loss.drift_db:+.3f} dB between before and after; corrected by "
                        "interpolating linearly in time")
    detail = {"thru_dbfs": loss.reference_dbfs, "dut_dbfs": loss.dut_dbfs, "drift_db": loss.drift_db,
              "times_from": times_from,
              "readings": {"thru": [reading_dict(r) for r in thru_r], "dut": [reading_dict(r) for r in dut_r],
                           "thru_after": [reading_dict(r) for r in after_r]}}
    if after_r:
        rows = [("thru before", thru[0], thru[1], n_thru), ("DUT", dut[0], dut[1], n_dut),
                ("thru after", after[0], after[1], len(after_r)),
                ("thru at DUT time", loss.reference_dbfs, math.nan, None)]
    else:
        rows = [("thru", thru[0], thru[1], n_thru), ("DUT", dut[0], dut[1], n_dut)]
    return loss, detail, rows


def _substitution(args, readings, steps_db, n_dut, warnings):
    step_r, dut_r = readings[:len(steps_db)], readings[len(steps_db):]
    dut = pool_tones(dut_r, "DUT")
    nominal, reading, u, dof = [], [], [], []
    for db, r in zip(steps_db, step_r):
        p, ur, nu = tone_db(r)
        if not math.isfinite(p):
            warnings.append(f"{r.capture.path}: no tone at step {db:g} dB; that step is left out")
            continue
        nominal.append(db)
        reading.append(p)
        u.append(ur)
        dof.append(nu)
    if len(nominal) < 2:
        raise MeasurementError("substitution needs at least 2 ladder steps with a readable tone")
    dut_step = 0.0 if args.dut_step is None else args.dut_step
    tol = 0.0 if args.atten_tolerance_db is None else args.atten_tolerance_db
    if args.atten_tolerance_db is None:
        warnings.append("attenuator tolerance not given (--atten-tolerance-db): the uncertainty covers the "
                        "readings only, not the attenuator the result rests on")

    def compute(extra):
        try:
            return substitution_loss(nominal, reading, u, dut[0], dut[1], dut_step_db=dut_step,
                                     atten_tolerance_db=tol, dof_dut=dut[2], dof_steps=dof,
                                     extra_components=extra)
        except ValueError as exc:
            msg = str(exc)
            if "outside the ladder" in msg:
                msg += "; extend the ladder or capture the DUT at another --dut-step"
            raise MeasurementError(msg) from None

    loss = compute(())
    loss = compute(_mismatch(args, loss.loss_db, warnings))
    detail = {"attenuation_db": loss.attenuation_db, "bracket_db": list(loss.bracket_db),
              "dut_step_db": dut_step, "dut_dbfs": loss.dut_dbfs,
              "readings": {"steps": [reading_dict(r, nominal_db=db) for db, r in zip(steps_db, step_r)],
                           "dut": [reading_dict(r) for r in dut_r]}}
    lo, hi = loss.bracket_db
    rows = [(f"step {lo:g} dB", reading[nominal.index(lo)], u[nominal.index(lo)], 1),
            ("DUT", dut[0], dut[1], n_dut),
            (f"step {hi:g} dB", reading[nominal.index(hi)], u[nominal.index(hi)], 1)]
    return loss, detail, rows


def run(args: argparse.Namespace) -> int:
    method = _check_options(args)
    if method == "direct":
        captures = [capture_from_args(p, args) for p in (*args.thru, *args.dut, *args.thru_after)]
        readings, warnings = read_tones(captures, near_hz=args.near, nperseg=args.nperseg,
                                        drift_ppm=args.drift_ppm)
        loss, detail, rows = _direct(args, readings, len(args.thru), len(args.dut), warnings)
    else:
        steps = [step_capture_from_args(s, args) for s in args.step]
        dbs = [db for db, _ in steps]
        if len(set(dbs)) != len(dbs):
            raise UsageError(f"--step: each attenuator setting may appear once, got {sorted(dbs)}")
        order = np.argsort(dbs)
        dbs = [dbs[i] for i in order]
        captures = [steps[i][1] for i in order] + [capture_from_args(p, args) for p in args.dut]
        readings, warnings = read_tones(captures, near_hz=args.near, nperseg=args.nperseg,
                                        drift_ppm=args.drift_ppm)
        loss, detail, rows = _substitution(args, readings, dbs, len(args.dut), warnings)

    U = loss.expanded_uncertainty_db
    per_device = loss.loss_db / 2 if args.pair else loss.loss_db
    per_device_u = U / 2 if args.pair else U
    dof = loss.budget.dof_eff
    if dof < 10:
        warnings.append(f"only {dof:.1f} effective degrees of freedom behind the uncertainty: k = 2 covers "
                        f"less than 95 % (the Student t factor for 95 % would be "
                        f"{coverage_factor(dof, 0.95):.2f}); take more captures")
    if loss.loss_db + U < 0:
        warnings.append(f"the DUT reads stronger than the thru by more than the uncertainty "
                        f"({-loss.loss_db:.3f} dB): a passive device cannot gain; check the set-up")
    result = {
        "method": method,
        "insertion_loss_db": loss.loss_db,
        "expanded_uncertainty_db": U,
        "standard_uncertainty_db": loss.u_db,
        "coverage_factor": loss.budget.k,
        "effective_dof": loss.budget.dof_eff,
        "pair": bool(args.pair),
        "per_device_db": per_device,
        "per_device_expanded_uncertainty_db": per_device_u,
        "budget": budget_rows(loss.budget),
        **detail,
        "warnings": warnings,
    }
    digits = 3 if U < 0.095 else 2
    lines = [f"insertion loss, {method} method"]
    for label, p, u, n in rows:
        count = "" if n is None else f"  ({n} capture{'s' if n != 1 else ''})"
        unc = "" if not math.isfinite(u) else f"  u {u:.3f} dB"
        lines.append(f"  {label:<18} {fmt_db(p, 3):>9} dBFS{unc}{count}")
    if method == "substitution":
        lines.append(f"  {'ladder setting':<18} {loss.attenuation_db:9.3f} dB  (DUT at {detail['dut_step_db']:g} dB)")
    lines.append(f"  {'loss':<18} {loss.loss_db:9.{digits}f} dB  ± {U:.{digits}f} dB  (U, k = {loss.budget.k:g}, "
                 "about 95 %)")
    if args.pair:
        lines.append(f"  {'per device':<18} {per_device:9.{digits}f} dB  ± {per_device_u:.{digits}f} dB  "
                     "(pair / 2)")
    if args.budget:
        lines += ["", budget_table(loss.budget)]
        if args.pair:
            lines.append("  (per device: half of each contribution)")
    emit(args, result, "\n".join(lines), warnings)
    return 0
