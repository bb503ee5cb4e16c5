"""``rxbench excess``: how far the band noise from the antenna sits above the dongle's own noise,
what that means for the antenna temperature, and how much loss the station can afford.

Two captures on the same input, same gain and tuning: the antenna, and a 50-ohm load in its place.
Optionally a ladder of antenna captures through known attenuation (``--antenna-step DB=C``), fitted
to the lossy-network model to find the knee where added loss starts to cost SNR.
"""

from __future__ import annotations

import argparse
import math

import numpy as np

from rxbench.analyze import read_capture, require_comparable
from rxbench.errors import MeasurementError, UsageError
from rxbench.output import add_json_option, emit, fmt_db
from rxbench.recordings import Capture, add_capture_options, capture_from_args, step_capture_from_args
from rxbench.dsp import environment as env
from rxbench.dsp.units import T0_K, db_from_power, noise_temperature_from_nf_db
from rxbench.quantities import arg as quantity_arg

#: SNR costs (dB) for which the affordable loss is reported.
BUDGET_COSTS_DB = (0.5, 1.0)
#: Losses (dB) for which the SNR cost is tabulated.
EXAMPLE_LOSSES_DB = (1.0, 3.0, 6.0, 10.0)
#: Below this excess (dB) the antenna noise is too close to the receiver's to say much about Ta.
LOW_EXCESS_DB = 1.0
#: Fit residual (RMS, dB) above which the ladder does not follow the model.
MAX_RESIDUAL_RMS_DB = 0.5

_DB = 10.0 / math.log(10.0)

CAVEATS = (
    "The excess is read over the capture's band at one time; band noise changes through the day and "
    "with the season, so repeat the reading at the hours you listen.",
    "The 50-ohm load is taken to be at 290 K and matched; the dongle's gain must be fixed (AGC off) "
    "and the same for every capture.",
    "The SNR cost of a loss follows from the excess alone; the noise figure is needed only to turn "
    "the excess into an antenna temperature and Fa.",
)


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


def _u_ratio_db(d1, u1, d2, u2) -> float:
    return _DB * math.hypot(u1 / d1, u2 / d2)


def _cost_table(excess_db: float) -> list[dict]:
    ta_equiv = T0_K * 10 ** (excess_db / 10)  # excess X acts as Ta = X*T0 ahead of a noiseless receiver
    costs = env.snr_degradation_db(np.array(EXAMPLE_LOSSES_DB), ta_equiv, 0.0)
    return [{"loss_db": l, "snr_degradation_db": float(c)} for l, c in zip(EXAMPLE_LOSSES_DB, costs)]


def _budget(excess_db: float) -> dict:
    ta_equiv = T0_K * 10 ** (excess_db / 10)
    losses = env.loss_for_snr_degradation_db(np.array(BUDGET_COSTS_DB), ta_equiv, 0.0)
    return {f"snr_cost_{c:g}_db": float(l) for c, l in zip(BUDGET_COSTS_DB, losses)}


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

    def dens(cap):
        f = readings[id(cap)].floor
        return f.density, f.u_density

    trx_k = noise_temperature_from_nf_db(args.rx_nf_db) if args.rx_nf_db is not None else None
    centre = all_caps[0].center_hz
    result: dict = {
        "frequency_hz": centre,
        "sample_rate_hz": all_caps[0].sample_rate_hz,
        "rx_nf_db": args.rx_nf_db,
        "receiver_temperature_k": trx_k,
    }

    # The direct reading: antenna over load.
    measured_excess_db = u_measured_db = None
    if antenna is not None and load is not None:
        (da, ua), (dl, ul) = dens(antenna), dens(load)
        measured_excess_db = float(db_from_power(da / dl))
        u_measured_db = _u_ratio_db(da, ua, dl, ul)
        result["antenna_density_dbfs_per_hz"] = float(db_from_power(da))
        result["load_density_dbfs_per_hz"] = float(db_from_power(dl))
    result["measured_excess_db"] = measured_excess_db
    result["u_measured_excess_db"] = u_measured_db

    # The ladder fit (when there is a ladder).
    ladder = None
    if steps:
        loss = np.array([db for db, _ in points])
        d = np.array([dens(c)[0] for _, c in points])
        u = np.array([dens(c)[1] for _, c in points])
        kwargs = {}
        if load is not None:
            kwargs = {"load_density": dens(load)[0], "u_load_density": dens(load)[1]}
        try:
            fit = env.fit_knee(loss, d, u_density=u, receiver_temperature_k=trx_k, **kwargs)
        except ValueError as exc:
            raise MeasurementError(f"ladder fit: {exc}") from None
        model = (fit.antenna_density - fit.load_density) / 10 ** (loss / 10) + fit.load_density
        ladder = {
            "steps": [
                {"loss_db": float(l), "capture": str(c.path), "density_dbfs_per_hz": float(db_from_power(di)),
                 "model_dbfs_per_hz": float(db_from_power(m)), "residual_db": float(db_from_power(di / m))}
                for (l, c), di, m in zip(points, d, model)
            ],
            "residual_rms_db": fit.residual_rms_db,
            "fitted_antenna_density_dbfs_per_hz": float(db_from_power(fit.antenna_density)),
            "fitted_load_density_dbfs_per_hz": float(db_from_power(fit.load_density)),
            "external_density_dbfs_per_hz": None,
            "internal_density_dbfs_per_hz": None,
            "max_step_db": float(loss.max()),
        }
        if trx_k is not None:
            if fit.external_density > 0:
                ladder["external_density_dbfs_per_hz"] = float(db_from_power(fit.external_density))
            else:
                warnings.append("the fitted external noise is not above zero: the ladder readings and "
                                "the noise figure disagree")
            ladder["internal_density_dbfs_per_hz"] = float(db_from_power(fit.internal_density))
        if fit.n_points > 2 and fit.residual_rms_db > MAX_RESIDUAL_RMS_DB:
            warnings.append(
                f"the ladder readings depart from the lossy-network model by {fit.residual_rms_db:.2f} dB "
                "RMS: check the attenuator steps, that the gain was fixed, and that the band noise was steady"
            )
        if fit.n_points == 2:
            warnings.append("two readings fit the model exactly: add ladder steps to check it")
        excess_db, u_excess_db = fit.excess_db, fit.u_excess_db
    else:
        excess_db, u_excess_db = measured_excess_db, u_measured_db
    result["ladder"] = ladder
    result["excess_db"] = excess_db
    result["u_excess_db"] = u_excess_db

    # What the excess means.
    result["antenna_temperature_k"] = result["fa_db"] = None
    if trx_k is not None:
        try:
            ta = env.antenna_temperature_from_excess(excess_db, trx_k)
        except ValueError:
            raise MeasurementError(
                f"an excess of {excess_db:.2f} dB with --rx-nf-db {args.rx_nf_db:g} implies a negative "
                "antenna temperature: the noise figure is too high for these captures, or the load "
                "capture is not a matched load"
            ) from None
        result["antenna_temperature_k"] = ta
        result["fa_db"] = env.fa_db_from_temperature(ta)
    if excess_db < LOW_EXCESS_DB:
        warnings.append(
            f"the antenna noise is only {excess_db:.2f} dB above the dongle's own: almost every dB of loss "
            "costs a dB of SNR here; a quieter receiver (or a preamplifier) would help more than less loss"
        )
    if u_excess_db is not None and math.isfinite(u_excess_db) and u_excess_db > 0.5:
        warnings.append(f"the excess is uncertain by {u_excess_db:.2f} dB (standard): capture longer")
    result["snr_cost"] = _cost_table(excess_db)
    result["loss_budget_db"] = _budget(excess_db)
    if ladder is not None:
        for key, loss_db in result["loss_budget_db"].items():
            if loss_db > ladder["max_step_db"]:
                warnings.append(
                    f"the loss for {key.replace('snr_cost_', '').replace('_db', '')} dB of SNR cost "
                    f"({loss_db:.1f} dB) lies beyond the ladder's largest step ({ladder['max_step_db']:g} dB): "
                    "it is extrapolated by the model"
                )
    p372 = None
    if centre is not None and env.VALID_RANGE_HZ[0] <= centre <= env.VALID_RANGE_HZ[1]:
        p372 = {name: env.man_made_fa_db(centre, name) for name in env.MAN_MADE_NOISE}
    result["p372_fa_db"] = p372
    result["caveats"] = list(CAVEATS)
    result["warnings"] = warnings

    emit(args, result, _human(result, args), warnings)
    return 0


def _human(r: dict, args) -> str:
    lines = []
    where = f" at {r['frequency_hz'] / 1e6:.3f} MHz" if r["frequency_hz"] is not None else ""
    if r["measured_excess_db"] is not None:
        lines.append(f"antenna noise over the 50-ohm load{where}: {fmt_db(r['measured_excess_db'])} dB "
                     f"(u = {fmt_db(r['u_measured_excess_db'])} dB)")
        lines.append(f"  antenna {fmt_db(r['antenna_density_dbfs_per_hz'])} dBFS/Hz, "
                     f"load {fmt_db(r['load_density_dbfs_per_hz'])} dBFS/Hz")
    lad = r["ladder"]
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
