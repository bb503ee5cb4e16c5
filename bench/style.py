"""One number style for what people read: frequencies in Hz/kHz/MHz with sensible digits, "±",
amateur band names. Full precision stays in CSV and JSON; only human text goes through here."""

from __future__ import annotations

import math


def band_of(frequency_hz) -> str | None:
    """:func:`rxbench.dsp.bands.band_of`, the one band lookup (imported on first use: the band
    module's dataclasses are 5 ms of a start that names no band)."""
    from rxbench.dsp.bands import band_of as lookup

    return lookup(frequency_hz)


#: The sign between a value and its uncertainty, everywhere.
PM = "±"


def band_name(frequency_hz: float | None) -> str:
    """The amateur band holding ``frequency_hz`` ("10 m", :func:`rxbench.dsp.bands.band_of`), or the
    frequency in MHz ("27.000 MHz"; "unknown frequency" without one): a label for every result."""
    if frequency_hz is None:
        return "unknown frequency"
    return band_of(frequency_hz) or f"{frequency_hz / 1e6:.3f} MHz"


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
