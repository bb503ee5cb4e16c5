"""The reading's honesty on signals that are not a steady tone in white noise: keyed bursts, two-line
keying, a floor step, a band-limited recording, a broad hump, zero runs and a level ramp. Every
generator is in dsp/synth.py with its truth in closed form; each warning and JSON key is checked.
"""

import json

import numpy as np
import pytest

from rxbench.reading import noise_dict, read_capture, tone_dict
from rxbench.cli import main
from rxbench.dsp import synth
from rxbench.dsp.units import db_from_power
from rxbench.recordings import memory_capture, write_sigmf

FS = 1e6
N = 1 << 19  # 0.52 s
N0 = 1e-9  # noise density, FS**2/Hz: -90 dBFS/Hz
TONE = 1e-2  # -20 dBFS
F_TONE = 100e3


def _noise(rng, n=N):
    return synth.white_noise(n, N0 * FS, rng)


def _tone(n=N, power=TONE):
    return synth.tone(n, FS, power_w=power, offset_hz=F_TONE)


def _read(x, fs=FS, **kw):
    return read_capture(memory_capture(x, fs), **kw)


def _said(reading, text):
    return any(text in w for w in reading.warnings)


def test_steady_tone_reads_on_all_the_time_and_warns_nothing(rng):
    r = _read(_noise(rng) + _tone())
    t = r.tone
    assert t.on_fraction >= 0.95  # issue 12: a steady tone reads on_fraction >= 0.95
    assert t.on_power_dbfs == pytest.approx(t.power_dbfs, abs=0.05)
    assert t.timeline.level_change_db == 0.0
    assert r.floor.time_range_db < 0.5 and r.floor.band_range_db < 1.0 and r.floor.steady_fraction == 1.0
    assert r.psd.zero_fraction == 0.0
    assert r.warnings == []
    assert t.timeline.slot_s <= 0.005  # 5 ms or finer where the capture allows


def test_pure_line_reads_the_windows_own_width(rng):
    # A line on a bin centre: Hann's |W|**2 is 1/4 (-6.02 dB) one bin either side (Harris 1978,
    # the 6-dB bandwidth of 2.00 bins), so the half-power points interpolated linearly between the
    # peak and those bins lie 2/3 bin out: 4/3 bin wide.
    bin_hz = FS / 2048
    x = _noise(rng) + synth.tone(N, FS, power_w=TONE, offset_hz=200 * bin_hz)
    t = _read(x, nperseg=2048).tone
    assert t.line_width_hz == pytest.approx(4 / 3 * bin_hz, rel=1e-3)
    assert t.width_hz == pytest.approx(t.line_width_hz, rel=0.05)
    assert not t.is_broad


@pytest.mark.parametrize("duty", [0.1, 0.25])
def test_keyed_bursts_read_their_on_fraction_and_power_while_on(rng, duty):
    gate = synth.keyed(N, FS, duty=duty, period_s=N / FS / 5)  # five whole periods
    r = _read(_noise(rng) + _tone() * gate)
    t = r.tone
    assert t.on_fraction == pytest.approx(duty, abs=0.02)
    assert t.on_power_dbfs == pytest.approx(-20.0, abs=0.2)
    assert t.power_dbfs == pytest.approx(-20.0 + 10 * np.log10(duty), abs=0.2)  # the whole-capture average
    assert _said(r, f"intermittent: present in {100 * t.on_fraction:.0f} % of the capture")
    assert not _said(r, "not distinguishable")  # the tone is far above the noise while on
    assert t.on_cn0_dbhz == pytest.approx(-20.0 - db_from_power(N0), abs=0.3)


@pytest.mark.parametrize("burst_slots", [3, 5])
def test_short_bursts_of_a_few_slots_read_their_on_fraction(rng, burst_slots):
    # Bursts only a few time slots long (the track's slots here: 2048 samples, 2.05 ms): most
    # on-slots hold a burst's edge and are on for part of their time only; the slots inside the
    # bursts still give the tone's steadiness, so the on-fraction and the power while on are read.
    slot_s = 2048 / FS
    duty = 0.12
    gate = synth.keyed(N, FS, duty=duty, period_s=burst_slots * slot_s / duty)
    r = _read(_noise(rng) + _tone() * gate)
    t = r.tone
    true_duty = float(gate.mean())  # (whole periods or not)
    assert t.on_fraction == pytest.approx(true_duty, abs=0.03)
    assert t.on_power_dbfs == pytest.approx(-20.0, abs=0.3)
    assert _said(r, f"intermittent: present in {100 * t.on_fraction:.0f} % of the capture")


def test_pulses_shorter_than_a_slot_are_said_not_read_as_steady(rng):
    # 1 ms pulses every 10 ms against 2.05 ms slots: every on-slot holds part of a pulse, so no
    # on-fraction can be read; the tone stands 70 dB above the slot noise, so "too weak" is not
    # the story either: the reading says its level jumps from slot to slot and that power_dbfs is
    # the capture's average (here the duty cycle's -10 dB: -30 dBFS).
    gate = synth.keyed(N, FS, duty=0.1, period_s=10e-3)
    r = _read(_noise(rng) + _tone() * gate)
    t = r.tone
    assert t.on_fraction is None and t.timeline.varies_within_slots
    assert t.power_dbfs == pytest.approx(-20.0 + 10 * np.log10(gate.mean()), abs=0.5)
    assert _said(r, "the tone's level jumps from one 2.05 ms time slot to the next")
    assert not _said(r, "not distinguishable") and not _said(r, "intermittent")
    assert tone_dict(t, None)["varies_within_slots"] is True
    steady = _read(_noise(rng) + _tone()).tone
    assert not steady.timeline.varies_within_slots and tone_dict(steady, None)["varies_within_slots"] is False


def test_inspect_says_a_tone_keyed_faster_than_the_slots_is_an_average(tmp_path, rng, capsys):
    gate = synth.keyed(N, FS, duty=0.1, period_s=10e-3)
    meta = write_sigmf(tmp_path / "pulsed", (_noise(rng) + _tone() * gate).astype(np.complex64), sample_rate_hz=FS,
                       center_hz=28e6, datatype="cf32_le")
    assert main(["inspect", str(meta)]) == 0
    text = capsys.readouterr().out
    assert "averaged over the whole capture" in text and "not resolved: keyed faster than the 2.05 ms time slots" in text
    assert main(["inspect", str(meta), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["tone"]["varies_within_slots"] is True


def test_two_line_keying_names_both_lines_and_near_chooses(rng):
    offsets = (100e3, 104e3)
    x = _noise(rng) + synth.two_line_keying(N, FS, power=TONE, offsets_hz=offsets, period_s=N / FS / 8)
    r = _read(x)
    t = r.tone
    other = offsets[0] if abs(t.offset_hz - offsets[1]) < 100 else offsets[1]
    assert t.second_offset_hz == pytest.approx(other, abs=FS / 2048)
    assert abs(t.second_db) < 1.0
    assert _said(r, "a second line at") and _said(r, "give --near HZ to choose")
    assert t.on_fraction == pytest.approx(0.5, abs=0.03)
    for f in offsets:
        chosen = _read(x, near_hz=f)
        assert chosen.tone.offset_hz == pytest.approx(f, abs=5)
        assert chosen.tone.second_offset_hz is None


def test_two_lines_inside_the_integration_band_are_named_and_a_longer_fft_separates_them(rng):
    # Frequency-shift keying 1 kHz apart at 4096 points (244 Hz bins): the second line lies 4.1 bins
    # from the first, inside the tone's +/-4-bin integration band, so part of its power is counted
    # (the reading is between one line's -23 dBFS average and both lines' -20): the reading names it
    # and says so. At 16384 points (61 Hz bins) the lines stand 16 bins apart: each reads its own
    # average, -20 dBFS for half the time = -23.0 dBFS.
    offsets = (100e3, 101e3)
    x = _noise(rng) + synth.two_line_keying(N, FS, power=TONE, offsets_hz=offsets, period_s=0.02)
    r = _read(x)
    t = r.tone
    assert t.second_offset_hz is not None and abs(t.second_db) < 1.0
    assert -23.0 < t.power_dbfs < -20.0
    assert _said(r, "it lies within the tone's integration band") and _said(r, "a longer FFT (--nperseg)")
    fine = _read(x, nperseg=16384)
    assert fine.tone.power_dbfs == pytest.approx(-23.0, abs=0.2)
    assert fine.tone.second_offset_hz is not None and _said(fine, "give --near HZ to choose")


def test_floor_step_is_warned_and_the_floor_taken_from_the_steady_time(rng):
    x = synth.floor_step(N, power=N0 * FS, step_db=7.5, at=0.3, rng=rng) + _tone()
    r = _read(x)
    assert r.floor.time_range_db == pytest.approx(7.5, abs=0.5)
    assert db_from_power(r.floor.density) == pytest.approx(-90.0, abs=0.15)  # the quiet 30 %
    assert r.floor.steady_fraction == pytest.approx(0.3, abs=0.08)
    assert _said(r, f"the noise floor moves by {r.floor.time_range_db:.1f} dB")
    d = noise_dict(r)
    assert d["time_range_db"] == r.floor.time_range_db


def test_floor_moving_within_its_scatter_is_not_warned(rng):
    x = synth.floor_step(N, power=N0 * FS, step_db=0.5, at=0.5, rng=rng) + _tone()
    r = _read(x)
    assert r.floor.time_range_db < 1.0 and r.floor.steady_fraction == 1.0
    assert not _said(r, "moves")


def _audio(rng, fs=48000.0, seconds=4.0):
    n = int(fs * seconds)
    passband = synth.band_limited(synth.white_noise(n, 1e-4, rng, real=True), fs, 200.0, 3000.0)
    sine = np.sqrt(2e-3) * np.sin(2 * np.pi * 1000.0 * np.arange(n) / fs)  # 1e-3 FS**2
    return passband + sine + 1e-7 * rng.standard_normal(n), fs


def test_band_limited_recording_takes_its_floor_where_the_signals_are(rng):
    x, fs = _audio(rng)
    r = _read(x, fs)
    # Truth: 1e-4 FS**2 of white noise over 0 .. fs/2 before the band-pass: 1e-4/(fs/2) per Hz.
    assert db_from_power(r.floor.density) == pytest.approx(db_from_power(1e-4 / (fs / 2)), abs=0.3)
    lo, hi = r.floor.band_hz
    assert 0 <= lo and 2000 < hi <= 3000
    assert r.floor.band_range_db > 40
    assert _said(r, "taken where the signals are")
    assert r.tone.snr_db < 40  # not the 100 dB an empty stopband would give


def test_named_noise_band_is_used(rng):
    x, fs = _audio(rng)
    r = _read(x, fs, noise_band_hz=(1500.0, 2500.0))
    assert r.floor.band_hz == (1500.0, 2500.0) and not r.floor.band_limited
    f = r.psd.frequency_hz[r.floor.mask]
    assert f.min() >= 1500 and f.max() <= 2500
    assert db_from_power(r.floor.density) == pytest.approx(db_from_power(1e-4 / (fs / 2)), abs=0.3)
    with pytest.raises(Exception, match="noise band"):
        _read(x, fs, noise_band_hz=(1500.0, 1501.0))


def test_broad_hump_is_not_called_a_tone(rng):
    x = _noise(rng) + synth.broad_hump(N, FS, power=TONE, center_hz=F_TONE, width_hz=8e3, rng=rng)
    r = _read(x)
    # The hump's -3 dB width (8 kHz) broadened by the window's own (about 0.5 kHz).
    assert r.tone.width_hz == pytest.approx(8e3, rel=0.2)
    assert r.tone.is_broad and _said(r, "a broad signal, not a tone: power reads as a band power") is False
    assert _said(r, "a broad signal, not a tone") and _said(r, "power reads as a band power")
    assert r.tone.second_offset_hz is None  # bumps inside the hump are not second lines
    assert r.floor.band_range_db < 2.0
    assert db_from_power(r.floor.density) == pytest.approx(-90.0, abs=0.1)


def test_zero_runs_are_reported_and_left_out(rng):
    x = synth.zero_runs(_noise(rng) + _tone(), fraction=2 / 3, runs=3)
    r = _read(x)
    # Segments in or across a run are left out: the runs' share and about one segment more each.
    assert 2 / 3 - 0.005 <= r.psd.zero_fraction <= 2 / 3 + 3 * 1.5 * r.psd.nperseg / N
    assert db_from_power(r.floor.density) == pytest.approx(-90.0, abs=0.2)
    assert r.tone.power_dbfs == pytest.approx(-20.0, abs=0.2)
    assert _said(r, "exactly zero") and _said(r, "left out")
    assert not _said(r, "intermittent")
    assert noise_dict(r)["zero_fraction"] == r.psd.zero_fraction


def test_level_ramp_is_warned_as_a_drift_in_db_per_second(rng):
    start, end = -46.0, -20.0
    x = _noise(rng) + synth.level_ramp(N, FS, start_dbfs=start, end_dbfs=end, offset_hz=F_TONE)
    r = _read(x)
    tl = r.tone.timeline
    duration = N / FS
    # Block means over 16 equal blocks span 15/16 of the ramp.
    assert tl.level_change_db == pytest.approx((end - start) * 15 / 16, abs=1.0)
    assert tl.drift_db_per_s == pytest.approx((end - start) / duration, rel=0.05)
    assert _said(r, "level changes by") and _said(r, "dB/s")
    assert not _said(r, "not distinguishable")


@pytest.mark.parametrize("seed", [0, 1, 2, 6, 11, 21])
def test_steady_tone_in_a_noisy_passband_reads_no_level_change(seed):
    # A filter in front of the dongle: noise 20 dB above the dongle's own within +/-100 kHz, a
    # steady tone in it whose sub-band holds more noise than tone, in a short capture: the track
    # merges its slots until the tone stands clear, leaving few slots per level block. Their
    # scatter, pooled, says the blocks agree; each block's own few slots alone had given a change
    # "in steps" of 1-2 dB for 6 of seeds 0-29 (1, 6, 11 and 21 among them) for a steady tone.
    fs, n = 2.4e6, 1 << 21  # 0.87 s
    x = _passband(seed, fs, n) + synth.tone(n, fs, power_w=1e-4, offset_hz=50e3)
    r = _read(x, fs)
    assert r.tone.power_dbfs == pytest.approx(-40.0, abs=0.3)
    assert r.tone.timeline.level_change_db == 0.0
    assert not _said(r, "level changes")


def _passband(seed, fs=2.4e6, n=1 << 21):
    """The dongle's own floor (-100 dBFS/Hz) and, within +/-100 kHz, noise 20 dB above it (a filter
    in front of the dongle)."""
    rng = np.random.default_rng(seed)
    own = synth.white_noise(n, 1e-10 * fs, rng)
    return own + synth.band_limited_complex(synth.white_noise(n, 1e-8 * fs, rng), fs, -100e3, 100e3)


@pytest.mark.parametrize("seed", [0, 1])
def test_a_line_outside_a_noise_passband_is_read_with_the_floor_around_it(seed):
    # The passband's bins (-80 dBFS/Hz: -52 dBFS per 586 Hz bin) outshine a -60 dBFS line at
    # +400 kHz, 40 dB above the floor around it; the band-limited floor is first taken in the
    # passband, where no line stands (seed 1) or only the passband itself reads as a broad signal
    # (seed 0): the line is then read with the floor around it.
    fs, n = 2.4e6, 1 << 21
    r = _read(_passband(seed) + synth.tone(n, fs, power_w=1e-6, offset_hz=400e3), fs)
    assert r.tone.offset_hz == pytest.approx(400e3, abs=fs / 4096)
    assert r.tone.power_dbfs == pytest.approx(-60.0, abs=0.3)
    assert db_from_power(r.floor.density) == pytest.approx(-100.0, abs=0.3)
    assert _said(r, "the strongest bins are a band of noise, not a line: the line at +400")


@pytest.mark.parametrize("seed", [1, 2, 4])
def test_a_noise_passband_alone_gives_no_line(seed):
    r = _read(_passband(seed), 2.4e6)
    assert r.tone is None and _said(r, "no tone stands above the noise")


def test_level_step_is_warned_as_steps(rng):
    x = _noise(rng) + _tone() * np.where(np.arange(N) < N // 2, 1.0, np.sqrt(10 ** (-6 / 10)))
    r = _read(x)
    assert r.tone.timeline.level_change_db == pytest.approx(6.0, abs=0.3)
    assert r.tone.timeline.drift_db_per_s is None
    assert _said(r, "in steps")


def test_weak_steady_tone_is_never_called_intermittent(rng):
    for power in (3e-7, 1e-6, 1e-5):  # peak 1 .. 10 dB over the floor in one bin
        r = _read(_noise(rng) + _tone(power=power))
        if r.tone is None:
            continue
        assert r.tone.on_fraction is None or r.tone.on_fraction >= 0.95
        assert not _said(r, "intermittent") and not _said(r, "level changes")


def test_splitting_a_steady_capture_in_time_gives_the_same_readings(rng):
    # Property (issue 12): each part of a steady capture reads the same tone power and floor within
    # their stated uncertainties.
    x = _noise(rng) + _tone(power=1e-6)
    parts = [_read(p) for p in np.split(x, 4)]
    for a in parts:
        for b in parts:
            ta, tb = a.tone, b.tone
            assert abs(ta.power_dbfs - tb.power_dbfs) < 4 * np.hypot(ta.u_power_db, tb.u_power_db)
            ua = a.floor.u_density / a.floor.density
            ub = b.floor.u_density / b.floor.density
            assert abs(np.log(a.floor.density / b.floor.density)) < 4 * np.hypot(ua, ub)
            assert ta.on_fraction is None or ta.on_fraction >= 0.95


def test_inspect_json_carries_the_new_keys(tmp_path, rng, capsys):
    gate = synth.keyed(N, FS, duty=0.2, period_s=N / FS / 5)
    x = (_noise(rng) + _tone() * gate).astype(np.complex64)
    meta = write_sigmf(tmp_path / "keyed", x, sample_rate_hz=FS, center_hz=28e6, datatype="cf32_le")
    assert main(["inspect", str(meta), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    t, nz = out["tone"], out["noise"]
    assert t["on_fraction"] == pytest.approx(0.2, abs=0.02)
    assert t["on_power_dbfs"] == pytest.approx(-20.0, abs=0.2)
    assert isinstance(t["width_hz"], float) and t["second_offset_hz"] is None
    for key in ("time_range_db", "band_range_db", "zero_fraction"):
        assert isinstance(nz[key], float)
    assert any("intermittent" in w for w in out["warnings"])
    assert main(["inspect", str(meta)]) == 0
    text = capsys.readouterr().out
    assert "averaged over the whole capture" in text and "while on" in text
    assert main(["inspect", str(meta), "--noise-band", "200000", "300000", "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["noise"]["band_hz"] == [200000.0, 300000.0]


def test_tone_dict_without_a_tone_has_every_key():
    assert set(tone_dict(None, None)) >= {"on_fraction", "on_power_dbfs", "width_hz", "second_offset_hz"}
