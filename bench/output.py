"""Output conventions shared by every command.

With ``--json`` stdout carries exactly one JSON document; otherwise human text goes to stdout.
Warnings always go to stderr (and into the JSON ``warnings`` list).
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from typing import Any, TextIO


#: The cautions every command that touches hardware carries (README "Cautions").
CAUTIONS = (
    "Never connect a transmitter's output to the dongle without attenuation rated for the power: its "
    "input is damaged at a few milliwatts. Feed points of high-impedance antennas carry high voltage "
    "while transmitting. Observe RF-exposure limits and the licence conditions where you operate. "
    "Defer to local codes and licensed practice."
)


def add_json_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print exactly one JSON document on stdout")


def json_safe(value: Any) -> Any:
    """Make a result JSON-safe: numpy scalars to Python, non-finite floats to null."""
    if isinstance(value, dict):
        return {str(k): json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_safe(v) for v in value]
    if hasattr(value, "tolist"):  # numpy scalar or array
        return json_safe(value.tolist())
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def warn(message: str, command: str = "") -> None:
    prefix = f"rxbench {command}: " if command else "rxbench: "
    print(f"{prefix}warning: {message}", file=sys.stderr)


def emit(args: argparse.Namespace, result: dict, human: str, warnings: list[str] | None = None) -> None:
    """Print ``result`` as JSON (``--json``) or ``human`` as text; warnings to stderr either way."""
    for w in warnings or ():
        warn(w, getattr(args, "command", ""))
    if getattr(args, "json", False):
        json.dump(json_safe(result), sys.stdout, indent=2, allow_nan=False)
        sys.stdout.write("\n")
    else:
        sys.stdout.write(human.rstrip("\n") + "\n")


def fmt_db(value: float, digits: int = 2) -> str:
    """A dB value for humans: fixed decimals; -inf/inf/nan spelled out."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "n/a"
    if math.isinf(value):
        return "-inf" if value < 0 else "inf"
    return f"{value:.{digits}f}"


class Progress:
    """Progress of long work on a stream (stderr): an updating line on a terminal, plain lines
    otherwise (``line``/``finish`` only, so logs and pipes are not flooded)."""

    def __init__(self, stream: TextIO | None = None):
        self.stream = stream
        self.tty = bool(stream is not None and hasattr(stream, "isatty") and stream.isatty())

    def line(self, text: str) -> None:
        if self.stream is not None:
            self.stream.write(text + "\n")
            self.stream.flush()

    def update(self, label: str, done: float, total: float, note: str = "") -> None:
        """Show ``done`` of ``total`` as a percentage, then ``note`` (terminals only)."""
        if self.tty and total:
            tail = f"  {note}" if note else ""
            self.stream.write(f"\r{label}: {100 * done / total:5.1f} %{tail}\x1b[K")
            self.stream.flush()

    def clear(self) -> None:
        """Remove the updating line (terminals only)."""
        if self.tty:
            self.stream.write("\r\x1b[K")
            self.stream.flush()

    def finish(self, label: str, text: str) -> None:
        self.clear()
        self.line(f"{label}: {text}")
