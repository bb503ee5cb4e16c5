"""The check after a capture says at once when the capture is not the steady signal a measurement
needs: a keyed tone, a tone whose level moves, a broad signal, a tone at another frequency than the
run's earlier captures, a floor that moves (bench/check.py).

Each capture is synthetic with a known truth (dsp.synth generators, invented levels): the plan's
generator gives -40 dBm at +20 kHz, the thru step has 50 dB of attenuation, and the dongle's full
scale is -80 dBm, so a steady tone reads -10 dBFS (-90 dBm) and passes.
"""

from __future__ import annotations

import numpy as np
import pytest

from rxbench.check import Checker
from rxbench.dsp import synth
from rxbench.dsp.units import amplitude_from_db
from rxbench.recordings import open_capture, write_sigmf

from test_check import STEPS, make_plan

FS = 250e3
N = int(0.4 * FS)
OFFSET = 20e3
NOISE = 10 ** (-55 / 10)  # -55 dBFS of noise over the band (invented)


def _tone(offset_hz=OFFSET, dbfs=-10.0):
    return amplitude_from_db(dbfs) * np.exp(2j * np.pi * offset_hz * np.arange(N) / FS)


def _check(tmp_path, signals, *, rng, noise=None, which=0):
    """Check each of ``signals`` as the plan's captures in order; returns the checks."""
    plan = make_plan(steps=STEPS)
    caps = plan.expand() if hasattr(plan, "expand") else plan.captures
    checker = Checker(full_scale_dbm=-80.0)
    out = []
    for cap, x in zip(caps, signals):
        floor = synth.white_noise(N, NOISE, rng) if noise is None else noise
        path = write_sigmf(tmp_path / cap.base_name, (x + floor).astype(np.complex64), sample_rate_hz=FS,
                           center_hz=cap.center_hz, datatype="cf32_le")
        out.append(checker.check(cap, open_capture(path)))
    return out


def test_a_steady_tone_passes(tmp_path):
    (c,) = _check(tmp_path, [_tone()], rng=np.random.default_rng(1601))
    assert c.passed, c.line()


def test_a_keyed_tone_fails_with_its_on_fraction(tmp_path):
    gate = synth.keyed(N, FS, duty=0.25, period_s=0.2)  # on 50 ms of every 200 ms
    (c,) = _check(tmp_path, [_tone() * gate], rng=np.random.default_rng(1602))
    assert not c.passed
    (p,) = [p for p in c.problems if "present in only" in p]
    # the time track cannot resolve less than one FFT segment (4096 samples, 16 ms here): a burst is seen
    # in the slots it touches, about (50 + 16) / 200 = 33 % of the time (arithmetic)
    assert float(p.split("only ")[1].split(" %")[0]) == pytest.approx(33, abs=8)


def test_a_tone_pulsed_faster_than_the_slots_fails(tmp_path):
    gate = synth.keyed(N, FS, duty=0.1, period_s=0.025)  # 2.5 ms pulses every 25 ms: shorter than a slot
    (c,) = _check(tmp_path, [_tone() * gate], rng=np.random.default_rng(1607))
    assert not c.passed
    assert any("level jumps from one time slot to the next" in p for p in c.problems), c.line()


def test_a_moving_level_fails(tmp_path):
    x = synth.level_ramp(N, FS, start_dbfs=-13.0, end_dbfs=-7.0, offset_hz=OFFSET)  # 6 dB over the capture
    (c,) = _check(tmp_path, [x], rng=np.random.default_rng(1603))
    assert any("level changed by" in p for p in c.problems), c.line()


def test_a_broad_signal_fails(tmp_path):
    rng = np.random.default_rng(1604)
    x = synth.broad_hump(N, FS, power=0.1, center_hz=OFFSET, width_hz=8e3, rng=rng)
    (c,) = _check(tmp_path, [x], rng=rng)
    assert any("a broad signal, not a tone" in p for p in c.problems), c.line()


def test_a_tone_elsewhere_than_the_run_read_it_fails(tmp_path):
    # the second capture (the 60 dB step, 10 dB weaker) holds a signal 400 Hz off the first one's: beyond
    # 3 bins (183 Hz) + 1 ppm of 28.4 MHz (28 Hz), inside the search around the planned offset
    signals = [_tone(), _tone(OFFSET + 400.0, -20.0)]
    first, second = _check(tmp_path, signals, rng=np.random.default_rng(1605))
    assert first.passed
    assert any("but 01-thru read it at" in p and "another signal" in p for p in second.problems), second.line()


def test_a_moving_floor_fails(tmp_path):
    rng = np.random.default_rng(1606)
    noise = synth.floor_step(N, power=NOISE, step_db=8.0, at=0.5, rng=rng)  # a gain step half-way
    (c,) = _check(tmp_path, [_tone()], rng=rng, noise=noise)
    assert any("noise floor moved by" in p for p in c.problems), c.line()
