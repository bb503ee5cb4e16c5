"""One number style for what people read: frequencies in Hz/kHz/MHz with sensible digits, "±",
amateur band names. Full precision stays in CSV and JSON; only human text goes through here."""

from __future__ import annotations

import math

#: The sign between a value and its uncertainty, everywhere.
PM = "±"

#: Amateur bands by their widest regional limits, Hz (common practice: IARU band plans).
AMATEUR_BANDS = (
    ("160 m", 1.8e6, 2.0e6),
    ("80 m", 3.5e6, 4.0e6),
    ("60 m", 5.25e6, 5.45e6),
    ("40 m", 7.0e6, 7.3e6),
    ("30 m", 10.1e6, 10.15e6),
    ("20 m", 14.0e6, 14.35e6),
    ("17 m", 18.068e6, 18.168e6),
    ("15 m", 21.0e6, 21.45e6),
    ("12 m", 24.89e6, 24.99e6),
    ("10 m", 28.0e6, 29.7e6),
    ("6 m", 50.0e6, 54.0e6),
    ("2 m", 144.0e6, 148.0e6),
)


def band_of(frequency_hz: float | None) -> str | None:
    """The amateur band holding ``frequency_hz`` ("10 m"), or None."""
    if frequency_hz is None or not math.isfinite(frequency_hz):
        return None
    for name, low, high in AMATEUR_BANDS:
        if low <= frequency_hz <= high:
            return name
    return None


def fmt_hz(frequency_hz: float | None, resolution_hz: float | None = None) -> str:
    """``28.42 MHz``, ``20 kHz``, ``2.4 MHz``, ``512 Hz``: the unit that suits the value, trailing
    zeros dropped, digits down to ``resolution_hz`` (default: 1 kHz above 1 MHz, 1 Hz above 1 kHz,
    three significant digits below)."""
    if frequency_hz is None or not math.isfinite(frequency_hz):
        return "n/a"
    f = float(frequency_hz)
    size = abs(f)
    if size >= 1e6:
        unit, scale, res = "MHz", 1e6, 1e3
    elif size >= 1e3:
        unit, scale, res = "kHz", 1e3, 1.0
    else:
        return f"{f:.3g} Hz"
    if resolution_hz is not None:
        res = resolution_hz
    decimals = max(0, min(6, math.ceil(-math.log10(res / scale) - 1e-9)))
    text = f"{f / scale:.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return f"{text} {unit}"


def fmt_hz_band(frequency_hz: float | None, resolution_hz: float | None = None) -> str:
    """``28.42 MHz (10 m)``: the frequency with its band, when it falls in one."""
    band = band_of(frequency_hz)
    text = fmt_hz(frequency_hz, resolution_hz)
    return f"{text} ({band})" if band else text
