"""ENR tables: a noise source's excess noise ratio against frequency, read from a small CSV file.

The file has two columns, ``frequency_hz`` and ``enr_db``, one point a line, frequencies strictly
increasing. A header line naming the two columns is optional; blank lines and lines starting with
``#`` are skipped. Example::

    # noise source, calibration points
    frequency_hz,enr_db
    10e6,15.42
    100e6,15.18
    1000e6,14.87

Between points the ENR is interpolated linearly in dB against frequency (common practice for
calibration tables). Outside the table it is held at the nearest point, and :meth:`EnrTable.covers`
tells the caller so it can warn.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from rxbench.errors import CaptureError, RxbenchError
from rxbench.files import read_text_input
from rxbench.quantities import QuantityError, check as check_quantity

COLUMNS = ("frequency_hz", "enr_db")
#: ENR outside this range (dB) is taken for a typing error rather than a noise source.
ENR_RANGE_DB = (-10.0, 50.0)
#: Largest ENR table read, bytes (a calibration table of a thousand points is about 20 kB).
ENR_LIMIT_BYTES = 1024 * 1024


class EnrTableError(RxbenchError):
    """An ENR table cannot be read; the message names the file and the line."""

    def __init__(self, path, line: int | None, problem: str):
        self.path = Path(path)
        self.line = line
        where = f"{self.path}" if line is None else f"{self.path}, line {line}"
        super().__init__(f"{where}: {problem}")


@dataclass(frozen=True)
class EnrTable:
    """A noise source's ENR (dB) at increasing frequencies (Hz)."""

    path: Path
    frequency_hz: np.ndarray
    enr_db: np.ndarray

    def enr_db_at(self, frequency_hz):
        """ENR in dB at ``frequency_hz`` (absolute, Hz): linear in dB between points, held at the ends."""
        f = np.asarray(frequency_hz, dtype=float)
        out = np.interp(f, self.frequency_hz, self.enr_db)
        return float(out) if out.ndim == 0 else out

    def covers(self, low_hz: float, high_hz: float) -> bool:
        """True when [low_hz, high_hz] lies within the table (no extrapolation needed)."""
        return bool(self.frequency_hz[0] <= low_hz and high_hz <= self.frequency_hz[-1])

    @property
    def range_text(self) -> str:
        return f"{self.frequency_hz[0] / 1e6:g}-{self.frequency_hz[-1] / 1e6:g} MHz"


def _number(path, line_no: int, text: str, column: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise EnrTableError(path, line_no, f"{column} {text.strip()!r} is not a number") from None
    if not math.isfinite(value):
        raise EnrTableError(path, line_no, f"{column} {text.strip()!r} is not a finite number")
    return value


def parse_enr_table(text: str, path: str | Path = "<text>") -> EnrTable:
    """Parse the CSV text of an ENR table; errors name ``path`` and the line number."""
    freqs: list[float] = []
    enrs: list[float] = []
    header_seen = False
    for line_no, row in enumerate(csv.reader(text.splitlines()), start=1):
        cells = [c.strip() for c in row]
        if not cells or all(not c for c in cells) or cells[0].startswith("#"):
            continue
        if len(cells) != 2:
            raise EnrTableError(path, line_no, f"expected 2 columns ({', '.join(COLUMNS)}), got {len(cells)}")
        if not freqs and not header_seen and not _looks_numeric(cells[0]):
            if tuple(c.lower() for c in cells) != COLUMNS:
                raise EnrTableError(path, line_no,
                                    f"header must be {','.join(COLUMNS)}, got {','.join(cells)}")
            header_seen = True
            continue
        f = _number(path, line_no, cells[0], "frequency_hz")
        e = _number(path, line_no, cells[1], "enr_db")
        try:
            check_quantity(f, "positive_frequency", "frequency_hz")
        except QuantityError as exc:
            raise EnrTableError(path, line_no, str(exc)) from None
        if not ENR_RANGE_DB[0] <= e <= ENR_RANGE_DB[1]:
            raise EnrTableError(path, line_no,
                                f"enr_db {cells[1]} is outside {ENR_RANGE_DB[0]:g}..{ENR_RANGE_DB[1]:g} dB")
        if freqs and f <= freqs[-1]:
            raise EnrTableError(path, line_no,
                                f"frequency_hz must increase from line to line ({cells[0]} after {freqs[-1]:g})")
        freqs.append(f)
        enrs.append(e)
    if not freqs:
        raise EnrTableError(path, None, "no ENR points found (expected lines of frequency_hz,enr_db)")
    return EnrTable(Path(path), np.array(freqs), np.array(enrs))


def _looks_numeric(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def read_enr_table(path: str | Path) -> EnrTable:
    """Read an ENR table CSV file (see the module docstring for the format)."""
    path = Path(path)
    try:
        text = read_text_input(path, "ENR table", encoding="utf-8-sig", limit=ENR_LIMIT_BYTES)
    except CaptureError as exc:
        raise EnrTableError(path, None, exc.problem) from None
    return parse_enr_table(text, path)
