"""Compared captures must be the same signal: tone frequencies that agree within 3 bins plus 1 ppm of the
centre frequency, no tone on the DC spike, none absent (dsp/same_signal.py and its use in loss, ladder and
nf --tone).

The synthetic captures are invented (dsp/synth.py); each case has a known truth: two generators at
different offsets, a DUT with no generator at all (its only peak is the dongle's DC offset), a generator
tuned onto the centre frequency.
"""

from __future__ import annotations

import json
import re

import numpy as np
import pytest

from rxbench.reading import choose_nperseg
from rxbench.cli import main
from rxbench.recordings import write_sigmf
from rxbench.dsp import synth
from rxbench.dsp.same_signal import DC_GUARD_BINS, on_dc, same_signal, tolerance_hz
from rxbench.dsp.units import w_from_dbm

FS = 250e3
N = int(FS * 0.1)
CENTER_HZ = 144.3e6
#: Invented dongle with a DC offset (the spike at 0 Hz every direct-conversion dongle shows).
DONGLE = synth.Dongle(gain_db=74.0, noise_figure_db=6.0, dc_offset=0.02 + 0.01j, center_hz=CENTER_HZ)
#: Bin width of these captures' spectra (the FFT length rxbench chooses for N samples).
BIN_HZ = FS / choose_nperseg(N)


def _capture(tmp_path, name, rng, *, offset_hz=25e3, level_dbfs=-25.0, tone=True, center=CENTER_HZ):
    x = synth.thermal_noise(N, FS, 290.0, rng)
    if tone:
        x = x + synth.tone(N, FS, power_w=w_from_dbm(level_dbfs - DONGLE.gain_db), offset_hz=offset_hz,
                           phase_rad=rng.uniform(0, 2 * np.pi))
    raw = DONGLE.receive_cu8(x, FS, rng)
    return str(write_sigmf(tmp_path / name, raw, sample_rate_hz=FS, center_hz=center, datatype="cu8"))


def _run(capsys, *argv):
    code = main(list(argv))
    out = capsys.readouterr()
    return code, out.out, out.err


# --------------------------------------------------------------------------------------------
# The numerics


def test_tolerance_is_three_bins_plus_one_ppm():
    # 1 ppm of 100 MHz is 100 Hz (arithmetic); 3 bins of 2.4 MHz / 4096.
    assert tolerance_hz(2.4e6 / 4096, 100e6) == pytest.approx(3 * 585.9375 + 100.0)
    assert tolerance_hz(10.0, None) == 30.0
    assert tolerance_hz(10.0, 1e9, bins=0, ppm=5) == pytest.approx(5000.0)
    with pytest.raises(ValueError, match="ppm"):
        tolerance_hz(10.0, 1e6, ppm=-1)


def test_two_transmitters_disagree_and_the_odd_one_is_named():
    bin_hz = 2.4e6 / 4096
    r = same_signal([39.7e3, 41.8e3], bin_hz, 100e6)
    assert not r.ok and r.reference == 0 and r.disagree == ((1, pytest.approx(2100.0)),)
    # a ladder of five with one capture on another signal: the majority is the reference, even when the
    # odd one is first
    r = same_signal([41.8e3, 39.7e3, 39.71e3, 39.69e3, 39.7e3], bin_hz, 100e6)
    assert r.reference == 1 and r.rejected == (0,)
    # within 3 bins + 1 ppm: the same signal (the oscillator moved, the tone is the same)
    r = same_signal([39.7e3, 39.7e3 + 1800.0], bin_hz, 100e6)
    assert r.ok
    assert not same_signal([39.7e3, 39.7e3 + 1900.0], bin_hz, 100e6).ok
    assert same_signal([39.7e3, 39.7e3 + 1900.0], bin_hz, 100e6, ppm=2).ok


def test_absent_and_dc_tones():
    r = same_signal([25e3, None, float("nan"), 10.0], 61.0)
    assert r.absent == (1, 2) and r.on_dc == (3,) and r.reference == 0 and r.rejected == (1, 2, 3)
    assert on_dc(DC_GUARD_BINS * 61.0, 61.0) and not on_dc(DC_GUARD_BINS * 61.0 + 1, 61.0)
    assert on_dc(300.0, 61.0, dc_halfwidth_hz=244.0) and not on_dc(-600.0, 61.0, dc_halfwidth_hz=244.0)
    r = same_signal([None, 5.0], 61.0)
    assert r.reference is None and r.rejected == (0, 1)


def test_tones_present_unlike_in_time_are_named():
    # On-fractions beyond 0.1 apart (a tone on for half of one capture, all of the other), or one
    # capture keyed faster than the time track resolves, are not compared; captures keyed alike are.
    r = same_signal([25e3] * 3, 61.0, on_fractions=[1.0, 0.5, 0.95])
    assert r.unlike_in_time == (1,) and r.rejected == (1,) and not r.ok
    assert same_signal([25e3] * 2, 61.0, on_fractions=[0.25, 0.3]).ok
    assert same_signal([25e3] * 2, 61.0, on_fractions=[None, 0.5]).ok  # unknown: not judged
    assert same_signal([25e3] * 2, 61.0, on_fractions=[1.0, None], keyed_fast=[False, True]).unlike_in_time == (1,)
    r = same_signal([25e3, 30e3], 61.0, on_fractions=[1.0, 0.5])  # named once, for its frequency
    assert r.disagree and r.unlike_in_time == ()


def test_loss_refuses_a_dut_present_half_the_time(tmp_path, capsys):
    # An intermittent connector on the DUT: its tone is on half the time, the thru's all the time;
    # the averages' difference (3 dB of keying plus the loss) measures no device: exit 2, naming both.
    rng = np.random.default_rng(1209)
    n = int(0.8 * FS)

    def capture(name, gate, level_dbfs):
        x = synth.thermal_noise(n, FS, 290.0, rng) + gate * synth.tone(
            n, FS, power_w=w_from_dbm(level_dbfs - DONGLE.gain_db), offset_hz=25e3)
        raw = DONGLE.receive_cu8(x, FS, rng)
        return str(write_sigmf(tmp_path / name, raw, sample_rate_hz=FS, center_hz=CENTER_HZ, datatype="cu8"))

    thru = capture("thru", 1.0, -25.0)
    dut = capture("dut", synth.keyed(n, FS, duty=0.5, period_s=0.2), -28.0)
    code, out, err = _run(capsys, "loss", "--thru", thru, "--dut", dut)
    assert code == 2 and out == "" and err.count("\n") == 1
    m = re.search(r"dut.sigmf-meta: tone present (\d+) % of the time, thru.sigmf-meta: tone present (\d+) % of "
                  r"the time: not present alike in time", err)
    assert m, err
    assert float(m[1]) == pytest.approx(50, abs=8) and float(m[2]) >= 95
    assert "--drift-ppm" not in err  # (a frequency hint would mislead here)
    keyed_thru = capture("thru_keyed", synth.keyed(n, FS, duty=0.5, period_s=0.2), -25.0)
    code, out, err = _run(capsys, "loss", "--thru", keyed_thru, "--dut", dut, "--json")
    assert code == 0, err  # keyed alike: their averages share the duty cycle
    assert json.loads(out)["insertion_loss_db"] == pytest.approx(3.0, abs=0.4)


# --------------------------------------------------------------------------------------------
# The commands refuse, with exit 2, naming both captures and their offsets


def test_loss_refuses_two_different_tones(tmp_path, capsys):
    rng = np.random.default_rng(1201)
    thru = _capture(tmp_path, "thru", rng, offset_hz=25e3)
    bin_hz = BIN_HZ
    apart = 3 * bin_hz + 1e-6 * CENTER_HZ + 0.6 * bin_hz  # just beyond the tolerance
    dut = _capture(tmp_path, "dut", rng, offset_hz=25e3 + apart, level_dbfs=-28.0)
    code, out, err = _run(capsys, "loss", "--thru", thru, "--dut", dut)
    assert code == 2 and out == "" and err.count("\n") == 1 and "Traceback" not in err
    assert "dut.sigmf-meta" in err and "thru.sigmf-meta" in err
    m = re.search(r"dut.sigmf-meta: tone at ([-+]\d+) Hz is not the signal of thru.sigmf-meta at ([-+]\d+) Hz "
                  r"\((\d+) Hz apart; tolerance (\d+) Hz", err)
    assert m, err
    assert float(m[1]) == pytest.approx(25e3 + apart, abs=2) and float(m[2]) == pytest.approx(25e3, abs=2)
    assert float(m[4]) == pytest.approx(3 * bin_hz + 1e-6 * CENTER_HZ, abs=1)
    assert "same signal" in err and "--drift-ppm" in err
    # a dongle warming up: widening the ppm term admits it (5 ppm of 144.3 MHz = 722 Hz, above 1 ppm + 0.6 bin)
    code, out, err = _run(capsys, "loss", "--thru", thru, "--dut", dut, "--drift-ppm", "5", "--json")
    assert code == 0, err
    assert json.loads(out)["insertion_loss_db"] == pytest.approx(3.0, abs=0.3)
    code, _, err = _run(capsys, "loss", "--thru", thru, "--dut", dut, "--drift-ppm", "-1")
    assert code == 2 and "--drift-ppm" in err


def test_loss_accepts_a_tone_moved_within_the_tolerance(tmp_path, capsys):
    rng = np.random.default_rng(1202)
    thru = _capture(tmp_path, "thru", rng, offset_hz=25e3)
    bin_hz = BIN_HZ
    dut = _capture(tmp_path, "dut", rng, offset_hz=25e3 + 2 * bin_hz, level_dbfs=-27.0)
    code, out, err = _run(capsys, "loss", "--thru", thru, "--dut", dut, "--json")
    assert code == 0, err
    assert json.loads(out)["insertion_loss_db"] == pytest.approx(2.0, abs=0.3)


def test_loss_refuses_a_dut_whose_only_peak_is_the_dc_spike(tmp_path, capsys):
    rng = np.random.default_rng(1203)
    # A tone 10 bins from the centre, clear of the DC region (4 bins) and its guard (4 more); the search
    # for the DUT's tone (10 bins either side) then reaches 0 Hz.
    offset = 10 * BIN_HZ
    thru = _capture(tmp_path, "thru", rng, offset_hz=offset)
    dut = _capture(tmp_path, "dut", rng, tone=False)  # no generator: the strongest peak near it is DC
    code, out, err = _run(capsys, "loss", "--thru", thru, "--dut", dut)
    assert code == 2 and out == "" and err.count("\n") == 1
    assert "dut.sigmf-meta" in err and "DC spike" in err and f"thru.sigmf-meta at {offset:+.0f} Hz" in err


def test_loss_refuses_a_dut_with_no_tone_and_names_its_own_peak(tmp_path, capsys):
    rng = np.random.default_rng(1204)
    thru = _capture(tmp_path, "thru", rng, offset_hz=25e3)
    dut = _capture(tmp_path, "dut", rng, offset_hz=-60e3)  # another signal, far outside the search
    code, out, err = _run(capsys, "loss", "--thru", thru, "--dut", dut)
    assert code == 2 and out == "" and err.count("\n") == 1
    assert "dut.sigmf-meta: no tone near +25000 Hz" in err and "strongest peak is at -60000 Hz" in err


def test_ladder_names_the_odd_step(tmp_path, capsys):
    rng = np.random.default_rng(1205)
    steps = [_capture(tmp_path, f"s{db}", rng, level_dbfs=-20.0 - db) for db in (0, 10, 20)]
    odd = _capture(tmp_path, "s30", rng, offset_hz=25e3 + 4000.0, level_dbfs=-50.0)
    argv = sum((["--step", f"{db}={p}"] for db, p in zip((0, 10, 20, 30), steps + [odd])), [])
    code, out, err = _run(capsys, "ladder", *argv)
    assert code == 2 and out == "" and err.count("\n") == 1
    assert re.search(r"s30.sigmf-meta: tone at \+(2900[01]|2899\d) Hz is not the signal of s0.sigmf-meta at "
                     r"\+(2500[01]|2499\d) Hz", err), err


def test_gain_method_refuses_a_tone_on_the_dc_spike(tmp_path, capsys):
    # A generator tuned (nearly) onto the centre frequency cannot be told from the dongle's DC offset.
    rng = np.random.default_rng(1206)
    # 6 bins from the centre: outside the 4 bins the floor leaves out, inside the DC guard of 4 more.
    path = _capture(tmp_path, "tone", rng, offset_hz=6 * BIN_HZ, level_dbfs=-30.0)
    code, out, err = _run(capsys, "nf", "--tone", path, "--level-dbm", "-100")
    assert code == 2 and out == "" and err.count("\n") == 1
    assert "tone.sigmf-meta" in err and "DC spike" in err


# --------------------------------------------------------------------------------------------
# The session leaves the odd capture out, with a warning, and measures with the rest


def _session_capture(folder, name, rng, *, role, offset_hz, level_dbfs, time_s):
    x = synth.thermal_noise(N, FS, 290.0, rng) + synth.tone(
        N, FS, power_w=w_from_dbm(level_dbfs - DONGLE.gain_db), offset_hz=offset_hz,
        phase_rad=rng.uniform(0, 2 * np.pi))
    when = f"2026-03-01T10:00:{time_s:02d}Z"
    write_sigmf(folder / name, DONGLE.receive_cu8(x, FS, rng), sample_rate_hz=FS, center_hz=CENTER_HZ,
                datatype="cu8", extra={"role": role}, datetime=when)


def test_session_leaves_out_a_capture_of_another_signal(tmp_path, capsys):
    from rxbench import session as sess

    rng = np.random.default_rng(1207)
    _session_capture(tmp_path, "01-thru", rng, role="thru", offset_hz=25e3, level_dbfs=-25.0, time_s=0)
    _session_capture(tmp_path, "02-dut", rng, role="dut", offset_hz=25e3, level_dbfs=-28.0, time_s=10)
    _session_capture(tmp_path, "03-thru", rng, role="thru", offset_hz=31e3, level_dbfs=-25.0, time_s=20)
    a = sess.analyze_session(sess.open_session(tmp_path))
    left_out = [w for w in a.warnings if "left out 03-thru.sigmf-meta: tone at +31000 Hz is not the signal" in w]
    assert len(left_out) == 1 and "01-thru.sigmf-meta at +25000 Hz" in left_out[0]
    (loss,) = [x.to_dict() for x in a.losses]
    assert loss["captures"]["thru"] == ["01-thru"] and not loss["captures"].get("thru_after")
    assert loss["insertion_loss_db"] == pytest.approx(3.0, abs=0.3)
    # widening the ppm term far enough (6 kHz of 144.3 MHz is 42 ppm) takes the capture back in
    a = sess.analyze_session(sess.open_session(tmp_path), drift_ppm=50.0)
    assert not any("not the signal" in w for w in a.warnings)
    code = main(["analyze", str(tmp_path), "--drift-ppm", "-3"])
    assert code == 2 and "--drift-ppm" in capsys.readouterr().err


# --------------------------------------------------------------------------------------------
# The methods themselves refuse: no view (command, session, Python API) can compare two signals


def test_the_loss_and_ladder_methods_refuse_readings_of_two_signals(tmp_path):
    from rxbench.errors import UnlikeCapturesError
    from rxbench.methods.common import pool
    from rxbench.methods.ladder import ladder_check
    from rxbench.methods.loss import direct_loss, substitution_loss
    from rxbench.recordings import open_capture

    rng = np.random.default_rng(1208)
    apart = 3 * BIN_HZ + 1e-6 * CENTER_HZ + BIN_HZ  # one bin beyond the tolerance

    def reading(name, offset_hz, level_dbfs):
        # each read on its own, as a notebook user would (no read_tones, so no check before the method)
        from rxbench.reading import read_capture

        return read_capture(open_capture(__import__("pathlib").Path(_capture(
            tmp_path, name, rng, offset_hz=offset_hz, level_dbfs=level_dbfs))), near_hz=offset_hz)

    thru = pool([reading("thru", 25e3, -25.0)])
    other = pool([reading("other", 25e3 + apart, -28.0)])
    dut = pool([reading("dut", 25e3, -28.0)])
    with pytest.raises(UnlikeCapturesError, match=r"other.sigmf-meta: tone at .* is not the signal of thru"):
        direct_loss(thru, other)
    assert direct_loss(thru, dut).insertion_loss_db == pytest.approx(3.0, abs=0.3)
    assert direct_loss(thru, dut).settings["drift_ppm"] == 1.0
    # widened by the caller, as --drift-ppm does (the 1-bin excess is 244 Hz = 1.7 ppm of 144.3 MHz)
    assert direct_loss(thru, other, drift_ppm=5.0).insertion_loss_db == pytest.approx(3.0, abs=0.3)
    steps = {0.0: thru, 10.0: pool([reading("s10", 25e3, -35.0)]), 20.0: pool([reading("s20", 25e3, -45.0)])}
    with pytest.raises(UnlikeCapturesError, match="other.sigmf-meta"):
        substitution_loss({**steps, 10.0: other}, dut)
    with pytest.raises(UnlikeCapturesError, match="other.sigmf-meta"):
        ladder_check({**steps, 30.0: other})
    assert ladder_check(steps).settings["drift_ppm"] == 1.0


def test_the_methods_refuse_readings_not_taken_alike(tmp_path):
    # A thru at one tuning and a DUT 1 kHz of tuning away read "the same" offset but are not one set-up
    # (and a notebook user reading them one by one would not be told by the command's read_tones).
    from pathlib import Path

    from rxbench.errors import UnlikeCapturesError
    from rxbench.methods.common import pool
    from rxbench.methods.loss import direct_loss
    from rxbench.reading import read_capture
    from rxbench.recordings import open_capture

    rng = np.random.default_rng(1209)
    thru = pool([read_capture(open_capture(Path(_capture(tmp_path, "thru", rng))))])
    dut = pool([read_capture(open_capture(Path(_capture(tmp_path, "dut", rng, level_dbfs=-28.0,
                                                             center=CENTER_HZ + 1e3))))])
    with pytest.raises(UnlikeCapturesError, match="centre frequency .* of dut.sigmf-meta differs"):
        direct_loss(thru, dut)
