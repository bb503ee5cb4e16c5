"""The one number style: frequencies with sensible digits and band names (band edges: IARU band
plans, common practice)."""

import pytest

from rxbench.style import band_of, fmt_hz, fmt_hz_band


@pytest.mark.parametrize("f, text", [
    (28.42e6, "28.42 MHz"), (28.4e6, "28.4 MHz"), (2.4e6, "2.4 MHz"), (144.39e6, "144.39 MHz"),
    (28_420_123.0, "28.42 MHz"), (20e3, "20 kHz"), (2500.0, "2.5 kHz"), (10_042.7, "10.043 kHz"),
    (512.0, "512 Hz"), (-20e3, "-20 kHz"), (None, "n/a"), (float("nan"), "n/a"),
])
def test_fmt_hz(f, text):
    assert fmt_hz(f) == text


def test_resolution():
    assert fmt_hz(28_420_123.0, resolution_hz=1.0) == "28.420123 MHz"
    assert fmt_hz(28.4e6, resolution_hz=1e5) == "28.4 MHz"


def test_bands():
    assert band_of(28.4e6) == "10 m" and band_of(29.7e6) == "10 m"
    assert band_of(27.0e6) is None and band_of(None) is None
    assert fmt_hz_band(14.2e6) == "14.2 MHz (20 m)" and fmt_hz_band(27.0e6) == "27 MHz"
