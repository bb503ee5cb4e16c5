"""``rxbench swr``: the SWR at the load from one read through a loss, and the reverse."""

from __future__ import annotations

import argparse
import math

from rxbench.errors import UsageError
from rxbench.output import add_json_option, emit, fmt_db
from rxbench.dsp import mismatch
from rxbench.quantities import arg as quantity_arg

#: Meter error (in SWR) used to show how sensitive the load figure is to the reading.
METER_ERROR_SWR = 0.05

CAVEAT_MATCHED = (
    "RL at the load = RL at the meter - 2 x one-way loss assumes the loss is that of a matched line or "
    "device; with a badly mismatched load a feeder's standing waves add some loss of their own."
)
CAUTION = (
    "SWR is read with a transmitter on the line: feed points of high-impedance antennas carry high "
    "voltage, RF-exposure limits apply, and transmitter power must never reach the dongle. Defer to "
    "local codes and licensed practice."
)


def _swr(text: str) -> float:
    """Parse an SWR written as ``1.5`` or ``1.5:1``."""
    t = text.strip()
    if t.endswith(":1"):
        t = t[:-2]
    try:
        return float(t)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not an SWR: {text!r} (write e.g. 1.5 or 1.5:1)") from None


def add_parser(subparsers) -> None:
    p = subparsers.add_parser(
        "swr",
        help="SWR at the load from a reading taken through a loss (and the reverse)",
        description=(
            "A loss between the SWR meter and the load makes the load look better matched than it "
            "is: the return loss read at the meter is the load's plus twice the one-way loss."
        ),
    )
    which = p.add_mutually_exclusive_group(required=True)
    which.add_argument("--measured", type=_swr, metavar="SWR", help="SWR read at the meter (e.g. 1.5 or 1.5:1)")
    which.add_argument("--at-load", type=_swr, metavar="SWR", help="SWR at the load; gives what the meter reads")
    p.add_argument("--loss-db", type=quantity_arg("loss_db"), required=True, metavar="DB",
                   help="one-way loss between the meter and the load, dB (>= 0)")
    add_json_option(p)
    p.set_defaults(func=run)


def _side(swr: float) -> dict:
    gamma = mismatch.gamma_from_swr(swr)
    return {
        "swr": swr,
        "return_loss_db": mismatch.return_loss_db_from_gamma(gamma),
        "gamma": gamma,
        "mismatch_loss_db": mismatch.mismatch_loss_db(gamma),
    }


def _load_from_meter(swr_measured: float, loss_db: float) -> float:
    rl = mismatch.return_loss_db_from_gamma(mismatch.gamma_from_swr(swr_measured))
    rl_load = mismatch.return_loss_at_load_db(rl, loss_db)
    return mismatch.swr_from_gamma(mismatch.gamma_from_return_loss_db(rl_load))


def run(args: argparse.Namespace) -> int:
    loss_db = args.loss_db
    if not (0 <= loss_db < math.inf):
        raise UsageError(f"--loss-db must be a finite number >= 0 dB, got {loss_db}")
    option = "--measured" if args.measured is not None else "--at-load"
    given = args.measured if args.measured is not None else args.at_load
    if not (1.0 <= given < math.inf):
        raise UsageError(f"{option}: an SWR must be a finite number >= 1, got {given}")
    warnings: list[str] = []
    if args.measured is not None:
        try:
            swr_load = _load_from_meter(given, loss_db)
        except ValueError:
            rl = mismatch.return_loss_db_from_gamma(mismatch.gamma_from_swr(given))
            raise UsageError(
                f"--measured {given:g} (return loss {rl:.2f} dB) cannot be read through "
                f"--loss-db {loss_db:g} (which alone gives at least {2 * loss_db:.2f} dB): "
                "the loss or the reading is wrong"
            ) from None
        meter, load = _side(given), _side(swr_load)
        lo, hi = max(1.0, given - METER_ERROR_SWR), given + METER_ERROR_SWR
        try:
            hi_load = _load_from_meter(hi, loss_db)
        except ValueError:
            hi_load = math.inf
        span = [_load_from_meter(lo, loss_db), hi_load]
        sensitivity = {"meter_error_swr": METER_ERROR_SWR, "swr_at_load_range": span}
        if not math.isfinite(hi_load) or hi_load - span[0] > 0.5:
            warnings.append(
                f"with {2 * loss_db:g} dB of round-trip loss a meter reading off by "
                f"{METER_ERROR_SWR:g} moves the load SWR between {span[0]:.2f} and "
                f"{'beyond any bound' if not math.isfinite(hi_load) else f'{hi_load:.2f}'}: "
                "measure at the load instead"
            )
    else:
        rl_load = mismatch.return_loss_db_from_gamma(mismatch.gamma_from_swr(given))
        rl_meter = mismatch.return_loss_through_loss_db(rl_load, loss_db)
        swr_meter = mismatch.swr_from_gamma(mismatch.gamma_from_return_loss_db(rl_meter))
        meter, load = _side(swr_meter), _side(given)
        sensitivity = None
    result = {
        "loss_db": loss_db,
        "direction": "meter to load" if args.measured is not None else "load to meter",
        "swr_measured": meter["swr"],
        "swr_at_load": load["swr"],
        "return_loss_measured_db": meter["return_loss_db"],
        "return_loss_at_load_db": load["return_loss_db"],
        "gamma_measured": meter["gamma"],
        "gamma_at_load": load["gamma"],
        "mismatch_loss_measured_db": meter["mismatch_loss_db"],
        "mismatch_loss_at_load_db": load["mismatch_loss_db"],
        "sensitivity": sensitivity,
        "caveats": [CAVEAT_MATCHED],
        "cautions": [CAUTION],
        "warnings": warnings,
    }
    rows = [
        f"{'':18} {'at the meter':>13} {'at the load':>12}",
        f"{'SWR':18} {meter['swr']:>11.3f}:1 {load['swr']:>10.3f}:1",
        f"{'return loss, dB':18} {fmt_db(meter['return_loss_db']):>13} {fmt_db(load['return_loss_db']):>12}",
        f"{'|Gamma|':18} {meter['gamma']:>13.4f} {load['gamma']:>12.4f}",
        f"{'mismatch loss, dB':18} {fmt_db(meter['mismatch_loss_db'], 3):>13} "
        f"{fmt_db(load['mismatch_loss_db'], 3):>12}",
    ]
    human = f"Through {loss_db:g} dB of one-way loss (return loss changes by {2 * loss_db:g} dB):\n"
    human += "\n".join(rows) + "\n\n"
    if sensitivity is not None:
        lo_s, hi_s = sensitivity["swr_at_load_range"]
        hi_txt = f"{hi_s:.2f}" if math.isfinite(hi_s) else "unbounded"
        human += (f"A meter reading off by {METER_ERROR_SWR:g} would put the load between "
                  f"{lo_s:.2f} and {hi_txt}.\n")
    human += f"Note: {CAVEAT_MATCHED}\nCaution: {CAUTION}"
    emit(args, result, human, warnings)
    return 0
