"""The one check of a number given by the user: from a flag, a plan or a recording's metadata.

Each quantity has the range a bench measurement can physically hold (wide, so no real value is
refused, and narrow enough that an overflow, a typo of a dozen zeros or an infinity never reaches
the numerics). The message names where the number came from (an option, a plan field, a
metadata key) and the value.

- :func:`check` returns the value as a float or raises :class:`QuantityError` (a ``ValueError``
  and an :class:`RxbenchError`: one line and exit 2 on the command line);
- :func:`arg` is an argparse ``type=``: the error comes out as ``argument --rate: ...``.
"""

from __future__ import annotations

import argparse
import math
from dataclasses import dataclass

from rxbench.errors import RxbenchError


class QuantityError(RxbenchError, ValueError):
    """A number outside what its quantity can be."""


@dataclass(frozen=True)
class Quantity:
    what: str  # words for the message
    unit: str
    low: float
    high: float
    low_open: bool = False  # the low end itself is excluded
    high_open: bool = False


#: The quantities, with their ranges (ends from common practice: a dongle samples at up to a few
#: MS/s, SDRs in general below 1 GS/s; receive-path frequencies below 100 GHz; levels from far
#: below any noise floor to 1 kW; passive losses and attenuators to 200 dB).
QUANTITIES: dict[str, Quantity] = {
    "sample_rate": Quantity("sample rate", "Hz", 1.0, 1e9),
    "frequency": Quantity("frequency", "Hz", 0.0, 1e11),
    "positive_frequency": Quantity("frequency", "Hz", 0.0, 1e11, low_open=True),
    "offset": Quantity("frequency offset", "Hz", -1e9, 1e9),
    "bandwidth": Quantity("bandwidth", "Hz", 0.0, 1e9, low_open=True),
    "level_dbm": Quantity("level", "dBm", -250.0, 60.0),
    "loss_db": Quantity("loss", "dB", 0.0, 200.0),
    "attenuation_db": Quantity("attenuator setting", "dB", 0.0, 200.0),
    "tolerance_db": Quantity("tolerance", "dB", 0.0, 100.0),
    "enr_db": Quantity("ENR", "dB", -10.0, 60.0),
    "noise_figure_db": Quantity("noise figure", "dB", 0.0, 100.0),
    "excess_db": Quantity("noise excess", "dB", -100.0, 200.0),
    "gain_db": Quantity("gain", "dB", -100.0, 300.0),
    "dbfs": Quantity("level", "dBFS", -300.0, 20.0),
    "full_scale": Quantity("level", "of full scale", -1.0, 1.0),
    "temperature_k": Quantity("temperature", "K", 0.0, 1e7, low_open=True),
    "swr": Quantity("SWR", "", 1.0, 100.0),
    "probability": Quantity("probability", "", 0.0, 1.0, low_open=True, high_open=True),
    "duration_s": Quantity("duration", "s", 0.0, 86400.0, low_open=True),
}


def _range_text(q: Quantity) -> str:
    unit = f" {q.unit}" if q.unit else ""
    lo = f"{'>' if q.low_open else '>='} {q.low:g}{unit}"
    hi = f"{'<' if q.high_open else '<='} {q.high:g}{unit}"
    return f"{lo} and {hi}"


def _article(words: str) -> str:
    return ("an " if words[:1].lower() in "aeiou" or words.startswith(("SWR", "ENR")) else "a ") + words


def check(value, quantity: str, name: str) -> float:
    """``value`` as a float if it is a finite number within ``quantity``'s range, else
    :class:`QuantityError` naming ``name`` (e.g. ``--rate`` or ``plan.toml, line 3: center_hz``)."""
    q = QUANTITIES[quantity]
    if isinstance(value, bool):
        raise QuantityError(f"{name}: {_article(q.what)} must be a number, got {value!r}")
    try:
        x = float(value)
    except (TypeError, ValueError, OverflowError):
        raise QuantityError(f"{name}: {_article(q.what)} must be a number, got {value!r}") from None
    if not math.isfinite(x):
        raise QuantityError(f"{name}: {_article(q.what)} must be a finite number, got {value!r}")
    below = x <= q.low if q.low_open else x < q.low
    above = x >= q.high if q.high_open else x > q.high
    if below or above:
        raise QuantityError(f"{name}: {_article(q.what)} must be {_range_text(q)}, got {x:g}")
    return x


def arg(quantity: str):
    """An argparse ``type=`` that applies :func:`check` (the message then reads
    ``argument --rate: ...``)."""

    def parse(text: str) -> float:
        try:
            return check(text, quantity, repr(text))
        except QuantityError as exc:
            raise argparse.ArgumentTypeError(str(exc).split(": ", 1)[1]) from None

    parse.__name__ = QUANTITIES[quantity].what  # argparse names the type in its own messages
    return parse


__all__ = ["check", "arg", "QuantityError", "QUANTITIES"]
