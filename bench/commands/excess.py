"""``rxbench excess``: how far the band noise from the antenna sits above the dongle's own noise,
what that means for the antenna temperature, and how much loss the station can afford.

Two captures on the same input, same gain and tuning: the antenna, and a 50-ohm load in its place.
Optionally a ladder of antenna captures through known attenuation (``--antenna-step DB=C``), fitted
to the lossy-network model to find the knee where added loss starts to cost SNR. This module parses
the flags, reads the captures alike and renders the result of
:func:`rxbench.methods.external.external_noise`, the method a session calls too.
"""

from __future__ import annotations

import argparse
import math

from rxbench.compared import require_comparable
from rxbench.reading import read_capture
from rxbench.errors import MeasurementError, UsageError
from rxbench.methods.external import external_noise
from rxbench.output import add_json_option, emit, fmt_db
from rxbench.recordings import Capture, add_capture_options, capture_from_args, step_capture_from_args
from rxbench.quantities import arg as quantity_arg

def add_parser(subparsers) -> None:
    p = subparsers.add_parser(
        "excess",
        help="antenna noise over the dongle's own (antenna vs 50-ohm load), and the loss you can afford",
        description=(
            "Compare the noise density with the antenna connected to that with a 50-ohm load on the same "
            "input: the excess tells how much loss the station can afford. With a ladder of antenna "
            "captures through known attenuation (--antenna-step DB=C), fit the knee."
        ),
    )
    p.add_argument("--antenna", metavar="C", help="capture with the antenna connected")
    p.add_argument("--load", metavar="C", help="capture with a 50-ohm load in place of the antenna")
    p.add_argument("--antenna-step", action="append", default=[], metavar="DB=C",
                   help="antenna capture through DB dB of attenuation (repeat; C alone if its metadata "
                        "gives the attenuation)")
    p.add_argument("--rx-nf-db", type=quantity_arg("noise_figure_db"), metavar="DB",
                   help="the receiver's noise figure, dB: gives the antenna temperature and Fa")
    add_capture_options(p)
    add_json_option(p)
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    if args.rx_nf_db is not None and not (0.0 <= args.rx_nf_db < math.inf):
        raise UsageError(f"--rx-nf-db must be a finite number >= 0 dB, got {args.rx_nf_db}")
    if args.antenna is None and not args.antenna_step:
        raise UsageError("give --antenna C (with --load C) or a ladder of --antenna-step DB=C")
    if not args.antenna_step and args.load is None:
        raise UsageError("--antenna needs --load: the excess is antenna noise over a 50-ohm load's")

    steps: list[tuple[float, Capture]] = [step_capture_from_args(s, args, "--antenna-step") for s in args.antenna_step]
    antenna = capture_from_args(args.antenna, args) if args.antenna is not None else None
    load = capture_from_args(args.load, args) if args.load is not None else None
    points = ([(0.0, antenna)] if antenna is not None else []) + steps
    settings = [db for db, _ in points]
    for db in sorted(set(settings)):
        if settings.count(db) > 1:
            raise UsageError(f"the antenna through {db:g} dB is given more than once (--antenna counts as 0 dB): "
                             "give each attenuator setting once")
    all_caps = [c for _, c in points] + ([load] if load is not None else [])
    warnings = require_comparable(all_caps)

    readings = {}
    for cap in all_caps:
        if id(cap) not in readings:
            r = read_capture(cap, want_tone=False)
            readings[id(cap)] = r
            warnings.extend(r.warnings)
    result = external_noise({db: [readings[id(cap)]] for db, cap in points},
                            [readings[id(load)]] if load is not None else [], rx_nf_db=args.rx_nf_db)
    if args.rx_nf_db is not None and result.antenna_temperature_k is None:
        raise MeasurementError(
            f"an excess of {result.excess_db:.2f} dB with --rx-nf-db {args.rx_nf_db:g} implies a negative "
            "antenna temperature: the noise figure is too high for these captures, or the load capture is "
            "not a matched load")
    warnings += result.warnings
    out = result.to_dict()
    out["warnings"] = warnings
    emit(args, out, _human(out, args), warnings)
    return 0


def _human(r: dict, args) -> str:
    lines = []
    where = f" at {r['frequency_hz'] / 1e6:.3f} MHz" if r["frequency_hz"] is not None else ""
    if r["measured_excess_db"] is not None:
        lines.append(f"antenna noise over the 50-ohm load{where}: {fmt_db(r['measured_excess_db'])} dB "
                     f"(u = {fmt_db(r['u_measured_excess_db'])} dB)")
        lines.append(f"  antenna {fmt_db(r['antenna_density_dbfs_per_hz'])} dBFS/Hz, "
                     f"load {fmt_db(r['load_density_dbfs_per_hz'])} dBFS/Hz")
    lad = r["knee"]
    if lad is not None:
        lines.append(f"ladder fit{where} (noise = external/L + T0*(1 - 1/L) + internal):")
        lines.append(f"  {'loss dB':>8} {'read dBFS/Hz':>13} {'model':>9} {'resid dB':>9}")
        for s in lad["steps"]:
            lines.append(f"  {s['loss_db']:>8g} {s['density_dbfs_per_hz']:>13.2f} "
                         f"{s['model_dbfs_per_hz']:>9.2f} {s['residual_db']:>+9.2f}")
        lines.append(f"  excess {fmt_db(r['excess_db'])} dB (u = {fmt_db(r['u_excess_db'])} dB), "
                     f"residual {lad['residual_rms_db']:.2f} dB RMS")
        if lad["external_density_dbfs_per_hz"] is not None:
            lines.append(f"  external {fmt_db(lad['external_density_dbfs_per_hz'])} dBFS/Hz, "
                         f"internal {fmt_db(lad['internal_density_dbfs_per_hz'])} dBFS/Hz")
    if r["fa_db"] is not None:
        lines.append(f"with NF {args.rx_nf_db:g} dB: antenna temperature {r['antenna_temperature_k']:.4g} K, "
                     f"Fa {fmt_db(r['fa_db'], 1)} dB")
    else:
        lines.append("give --rx-nf-db for the antenna temperature and Fa")
    if r["p372_fa_db"]:
        lines.append("  ITU-R P.372 medians here: " + ", ".join(
            f"{k} {v:.1f} dB" for k, v in r["p372_fa_db"].items()))
    lines.append("SNR cost of a loss ahead of this receiver on this antenna:")
    lines.append("  " + ", ".join(f"{c['loss_db']:g} dB -> {c['snr_degradation_db']:.2f} dB"
                                  for c in r["snr_cost"]))
    b = r["loss_budget_db"]
    lines.append(f"  affordable loss: {b['snr_cost_0.5_db']:.1f} dB for 0.5 dB of SNR, "
                 f"{b['snr_cost_1_db']:.1f} dB for 1 dB")
    nf = f"{args.rx_nf_db:g}" if args.rx_nf_db is not None else "X"
    lines.append(f"  for another loss: rxbench predict --antenna-excess-db {r['excess_db']:.1f} --rx-nf-db {nf} "
                 "--loss-db L")
    lines.append("")
    lines.extend(f"Note: {c}" for c in r["caveats"])
    return "\n".join(lines)
