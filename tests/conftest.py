"""Shared fixtures: synthetic captures with known truth (invented data, see dsp/synth.py)."""

from __future__ import annotations

import numpy as np
import pytest

from rxbench.dsp import synth
from rxbench.dsp.units import power_from_db, w_from_dbm

#: A realistic dongle for tests: the thermal floor sits well above 8-bit quantisation.
TEST_DONGLE = synth.Dongle(gain_db=80.0, noise_figure_db=6.0, dc_offset=0.01 + 0.005j)


def noise_density_truth(dongle: synth.Dongle, sample_rate_hz: float, source_k: float = 290.0) -> float:
    """Expected output noise density, FS**2/Hz: thermal (source + dongle) plus 8-bit quantisation."""
    return power_from_db(dongle.noise_density_dbfs_per_hz(source_k)) + synth.CU8_QUANTISATION_POWER / sample_rate_hz


def tone_capture(
    rng,
    *,
    tone_dbfs: float,
    sample_rate_hz: float = 250e3,
    duration_s: float = 0.5,
    offset_hz: float = 12345.6,
    drift_hz: float = 0.0,
    dongle: synth.Dongle = TEST_DONGLE,
    cu8: bool = False,
):
    """A tone at ``tone_dbfs`` (as it would read without impairments) through ``dongle``."""
    n = int(sample_rate_hz * duration_s)
    x = synth.tone(n, sample_rate_hz, power_w=w_from_dbm(tone_dbfs - dongle.gain_db), offset_hz=offset_hz,
                   drift_hz=drift_hz, phase_rad=rng.uniform(0, 2 * np.pi))
    x = x + synth.thermal_noise(n, sample_rate_hz, 290.0, rng)
    return dongle.receive_cu8(x, sample_rate_hz, rng) if cu8 else dongle.receive(x, sample_rate_hz, rng)


@pytest.fixture
def rng():
    return np.random.default_rng(20261202)
