"""``rxbench predict``: the SNR a loss costs, from the ITU-R P.372 external-noise model or a
measured antenna-noise excess."""

from __future__ import annotations

import argparse

from rxbench.errors import UsageError
from rxbench.methods.snr_cost import snr_cost
from rxbench.output import add_json_option, emit, fmt_db
from rxbench.style import band_of
from rxbench.dsp import environment as env
from rxbench.dsp.units import noise_temperature_from_nf_db
from rxbench.quantities import arg as quantity_arg

#: The usual HF amateur bands, at their lower edges (Hz), for the table printed without --frequency.
HF_BANDS = (
    ("160 m", 1.8e6),
    ("80 m", 3.5e6),
    ("60 m", 5.3e6),
    ("40 m", 7.0e6),
    ("30 m", 10.1e6),
    ("20 m", 14.0e6),
    ("17 m", 18.068e6),
    ("15 m", 21.0e6),
    ("12 m", 24.89e6),
    ("10 m", 28.0e6),
)

#: SNR costs (dB) for which the affordable loss is reported.
BUDGET_COSTS_DB = (0.5, 1.0)

CAVEAT_MEDIANS = (
    "Fa values are ITU-R P.372 medians: at a given site and hour the man-made noise commonly differs "
    "from them by several dB, so treat the cost as an estimate (measure your own antenna with "
    "`rxbench excess`)."
)
CAVEAT_ATMOSPHERIC = (
    "Atmospheric noise (distant lightning) is not modelled; on the low bands at night it often sits "
    "above the man-made level, which makes a loss cheaper there than shown."
)
CAVEAT_GALACTIC_ON = (
    "Galactic noise is added as asked, but it reaches the ground only above the ionosphere's critical "
    "frequency (which moves with time of day, season and solar activity); below it the galactic term "
    "does not apply and Fa is overstated."
)
CAVEAT_GALACTIC_OFF = (
    "Galactic noise is not included (add --galactic); it matters in quiet places on the higher bands, "
    "above the ionosphere's critical frequency."
)
CAVEAT_LOSS = "The loss is taken as matched and at 290 K; the receiver noise figure is taken as given."
CAVEAT_EXCESS = (
    "Fa comes from the measured antenna-noise excess at one time and frequency; band noise changes "
    "through the day. The SNR cost depends on the excess alone; the noise figure is used only to "
    "turn the excess into Ta and Fa."
)


def add_parser(subparsers) -> None:
    p = subparsers.add_parser(
        "predict",
        help="SNR cost of a loss from the band's external noise (ITU-R P.372) or a measured excess",
        description=(
            "How much SNR a loss in front of the receiver costs, given the band's external noise. "
            "Without --frequency, prints a table for the usual HF bands."
        ),
    )
    p.add_argument("--loss-db", type=quantity_arg("loss_db"), required=True, metavar="DB",
                   help="loss between antenna and receiver, dB (>= 0)")
    p.add_argument("--frequency", type=quantity_arg("frequency"), action="append", metavar="HZ",
                   help="frequency in Hz, 0.3-250 MHz (repeat for several)")
    p.add_argument("--environment", choices=tuple(env.MAN_MADE_NOISE), default=None,
                   help="ITU-R P.372 man-made noise category (default residential)")
    p.add_argument("--rx-nf-db", type=quantity_arg("noise_figure_db"), required=True, metavar="DB",
                   help="receiver noise figure, dB")
    p.add_argument("--galactic", action="store_true", help="power-add the P.372 galactic noise")
    p.add_argument("--antenna-excess-db", type=quantity_arg("excess_db"), default=None, metavar="DB",
                   help="measured excess of antenna noise over a 50-ohm load (rxbench excess); "
                        "replaces the model")
    p.add_argument("--loss-u-db", type=quantity_arg("tolerance_db"), default=0.0, metavar="DB",
                   help="standard uncertainty of --loss-db, dB (with --antenna-excess-db; default 0)")
    p.add_argument("--antenna-excess-u-db", type=quantity_arg("tolerance_db"), default=0.0, metavar="DB",
                   help="standard uncertainty of --antenna-excess-db, dB (default 0)")
    add_json_option(p)
    p.set_defaults(func=run)


def _check_args(args) -> None:
    if not (args.loss_db >= 0) or args.loss_db == float("inf"):
        raise UsageError(f"--loss-db must be a finite number >= 0 dB, got {args.loss_db}")
    if not (args.rx_nf_db >= 0) or args.rx_nf_db == float("inf"):
        raise UsageError(f"--rx-nf-db must be a finite number >= 0 dB, got {args.rx_nf_db}")
    lo, hi = env.VALID_RANGE_HZ
    for f in args.frequency or ():
        if not (lo <= f <= hi):
            raise UsageError(
                f"--frequency {f:g} Hz ({f / 1e6:g} MHz) is outside the 0.3-250 MHz range of the "
                "ITU-R P.372 noise lines"
            )
    if args.antenna_excess_db is not None:
        if args.environment is not None or args.galactic:
            raise UsageError("--antenna-excess-db replaces the model: drop --environment/--galactic")
        if len(args.frequency or ()) > 1:
            raise UsageError("--antenna-excess-db applies to the one frequency it was measured at: "
                             "give at most one --frequency")
        if args.antenna_excess_db != args.antenna_excess_db or abs(args.antenna_excess_db) == float("inf"):
            raise UsageError(f"--antenna-excess-db must be a finite number, got {args.antenna_excess_db}")


def _row(ta_k: float, trx_k: float, loss_db: float) -> dict:
    """The numbers common to both modes, from Ta and Trx."""
    budget = env.loss_for_snr_degradation_db(BUDGET_COSTS_DB, ta_k, trx_k)
    return {
        "antenna_temperature_k": ta_k,
        "receiver_temperature_k": trx_k,
        "loss_db": loss_db,
        "snr_degradation_db": env.snr_degradation_db(loss_db, ta_k, trx_k),
        "predicted_excess_db": env.excess_db_from_temperature(ta_k, trx_k),
        "loss_budget_db": {f"snr_cost_{c:g}_db": float(b) for c, b in zip(BUDGET_COSTS_DB, budget)},
    }


def predict_model(frequency_hz: float, environment: str, galactic: bool, rx_nf_db: float,
                  loss_db: float) -> dict:
    """One result object from the P.372 model (frequency already validated)."""
    fam_db = env.man_made_fa_db(frequency_hz, environment)
    fa_db = env.external_fa_db(frequency_hz, environment, galactic=galactic)
    trx_k = noise_temperature_from_nf_db(rx_nf_db)
    out = {
        "frequency_hz": frequency_hz,
        "source": "model",
        "environment": environment,
        "galactic": galactic,
        "fa_db": fa_db,
        "fa_man_made_db": fam_db,
        "fa_galactic_db": env.galactic_fa_db(frequency_hz) if galactic else None,
        "rx_nf_db": rx_nf_db,
    }
    out.update(_row(env.temperature_from_fa_db(fa_db), trx_k, loss_db))
    return out


def _caveats(args) -> list[str]:
    if args.antenna_excess_db is not None:
        return [CAVEAT_EXCESS, CAVEAT_ATMOSPHERIC, CAVEAT_LOSS]
    return [CAVEAT_MEDIANS, CAVEAT_ATMOSPHERIC,
            CAVEAT_GALACTIC_ON if args.galactic else CAVEAT_GALACTIC_OFF, CAVEAT_LOSS]


def _human(rows: list[dict], args, caveats: list[str]) -> str:
    head = f"SNR cost of {args.loss_db:g} dB of loss ahead of a receiver with NF {args.rx_nf_db:g} dB"
    if args.antenna_excess_db is not None:
        head += f", antenna noise {args.antenna_excess_db:g} dB above a 50-ohm load (measured)"
    else:
        head += f", ITU-R P.372 {rows[0]['environment']} man-made noise"
        head += " + galactic" if args.galactic else ""
    lines = [head, ""]
    lines.append(f"{'band':>6} {'MHz':>8} {'Fa dB':>7} {'Ta K':>10} {'cost dB':>8} "
                 f"{'loss for 0.5 dB':>16} {'loss for 1 dB':>14}")
    for r in rows:
        mhz = "-" if r["frequency_hz"] is None else f"{r['frequency_hz'] / 1e6:g}"
        b = r["loss_budget_db"]
        lines.append(
            f"{r.get('band') or '':>6} {mhz:>8} {fmt_db(r['fa_db'], 1):>7} "
            f"{r['antenna_temperature_k']:>10.3g} {fmt_db(r['snr_degradation_db']):>8} "
            f"{fmt_db(b['snr_cost_0.5_db'], 1):>16} {fmt_db(b['snr_cost_1_db'], 1):>14}"
        )
    lines.append("")
    lines.extend(f"Note: {c}" for c in caveats)
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    _check_args(args)
    caveats = _caveats(args)
    trx_k = noise_temperature_from_nf_db(args.rx_nf_db)
    warnings: list[str] = []
    if args.antenna_excess_db is not None:
        try:
            ta_k = env.antenna_temperature_from_excess(args.antenna_excess_db, trx_k)
        except ValueError:
            raise UsageError(
                f"--antenna-excess-db {args.antenna_excess_db:g} with --rx-nf-db {args.rx_nf_db:g} "
                "implies a negative antenna temperature: one of the two is wrong"
            ) from None
        if args.antenna_excess_db < 1.0:
            warnings.append(
                f"the antenna noise is only {args.antenna_excess_db:g} dB above the receiver's own: "
                "Ta and Fa hang on the noise figure and are rough"
            )
        row = {
            "frequency_hz": (args.frequency or [None])[0],
            "source": "measured excess",
            "antenna_excess_db": args.antenna_excess_db,
            "fa_db": env.fa_db_from_temperature(ta_k),
            "rx_nf_db": args.rx_nf_db,
        }
        row.update(_row(ta_k, trx_k, args.loss_db))
        # The cost and its uncertainty from the method a session's measured loss and excess go through.
        cost = snr_cost(args.loss_db, args.antenna_excess_db, u_loss_db=args.loss_u_db,
                        u_excess_db=args.antenna_excess_u_db, frequency_hz=row["frequency_hz"],
                        rx_nf_db=args.rx_nf_db, provenance={"loss_source": "--loss-db"})
        row.update(cost.to_dict())
        warnings += cost.warnings
        rows = [row]
    else:
        environment = args.environment or "residential"
        if args.frequency:
            rows = [{"band": band_of(f) or "",
                     **predict_model(f, environment, args.galactic, args.rx_nf_db, args.loss_db)}
                    for f in args.frequency]
        else:
            rows = []
            for band, f in HF_BANDS:
                row = {"band": band}
                row.update(predict_model(f, environment, args.galactic, args.rx_nf_db, args.loss_db))
                rows.append(row)
    if args.antenna_excess_db is not None and rows[0]["frequency_hz"] is not None:
        rows[0]["band"] = band_of(rows[0]["frequency_hz"]) or ""
    for r in rows:
        r["caveats"] = caveats
        r["warnings"] = warnings
    # One shape whatever the number of frequencies: an object with the rows and the warnings; for a
    # single frequency the row's own keys stay at the top level too (as before the rows list).
    result = {**(rows[0] if len(rows) == 1 else {}), "rows": rows, "warnings": warnings, "caveats": caveats}
    emit(args, result, _human(rows, args, caveats), warnings)
    return 0
