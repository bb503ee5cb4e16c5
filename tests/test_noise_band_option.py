"""``--noise-band LO HI`` names where every compared capture's noise floor is taken, on ``loss``,
``ladder`` and ``analyze`` as on ``inspect`` (README: "The floor from the right place in frequency").

The truth is closed-form: an invented band-limited front end (a filter passing 0-60 kHz of a complex
capture, about 40 dB down outside it) in front of a generator tone at +25 kHz. The tone's SNR in a
1 Hz bandwidth is its power over the noise density where the tone is, i.e. in the passband; a floor
taken from the empty stopband reads the noise about 40 dB too low and the SNR about 40 dB too high.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from rxbench.cli import main
from rxbench.dsp import synth
from rxbench.recordings import write_sigmf

FS = 250e3
N = int(FS * 0.2)
CENTER_HZ = 50.3e6
TONE_HZ = 25e3
NOISE_POWER = 1e-3  # of the passband's noise, FS^2 (before the filter)
PASS = (0.0, 60e3)


def _passband(x):
    """``x`` (complex) with everything outside PASS removed (an ideal filter, by FFT)."""
    spec = np.fft.fft(x)
    f = np.fft.fftfreq(x.size, 1.0 / FS)
    spec[(f < PASS[0]) | (f > PASS[1])] = 0.0
    return np.fft.ifft(spec)


def _capture(folder, name, rng, level_dbfs, *, role=None, second=0):
    noise = _passband(synth.white_noise(N, NOISE_POWER, rng))
    floor = synth.white_noise(N, NOISE_POWER * 1e-4, rng)  # the stopband's floor, 40 dB down
    x = noise + floor + synth.tone(N, FS, power_w=10 ** (level_dbfs / 10), offset_hz=TONE_HZ,
                                   phase_rad=rng.uniform(0, 2 * np.pi))
    extra = {"role": role} if role else None
    return str(write_sigmf(folder / name, x.astype(np.complex64), sample_rate_hz=FS, center_hz=CENTER_HZ,
                           datatype="cf32_le", extra=extra, datetime=f"2026-03-01T10:00:{second:02d}Z"))


def _truth_snr_db(level_dbfs: float) -> float:
    # noise density in the passband: total power over the whole band of FS (white before the filter),
    # plus the stopband floor (1e-4 of it); tone power over that density, in 1 Hz
    density = NOISE_POWER / FS * (1 + 1e-4)
    return level_dbfs - 10 * np.log10(density)


def _json(capsys, *argv):
    code = main([*argv, "--json"])
    out = capsys.readouterr()
    assert code == 0, out.err
    return json.loads(out.out)


def test_loss_reads_the_floor_where_it_is_told(tmp_path, capsys):
    rng = np.random.default_rng(1301)
    thru, dut = _capture(tmp_path, "thru", rng, -20.0), _capture(tmp_path, "dut", rng, -23.0)
    inband = _json(capsys, "loss", "--thru", thru, "--dut", dut, "--noise-band", "35e3", "55e3")
    stop = _json(capsys, "loss", "--thru", thru, "--dut", dut, "--noise-band", "-110e3", "-20e3")
    for out in (inband, stop):  # the loss itself does not depend on where the floor is taken
        assert out["insertion_loss_db"] == pytest.approx(3.0, abs=0.1)
    snr_in = inband["readings"]["thru"][0]["snr_db"] - 10 * np.log10(1.0 / 2500.0)  # back to 1 Hz from 2.5 kHz
    snr_stop = stop["readings"]["thru"][0]["snr_db"] - 10 * np.log10(1.0 / 2500.0)
    assert snr_in == pytest.approx(_truth_snr_db(-20.0), abs=0.5)
    assert snr_stop - snr_in == pytest.approx(40.0, abs=1.0)  # the filter's 40 dB: the stopband misleads


def test_ladder_and_bad_bands(tmp_path, capsys):
    rng = np.random.default_rng(1302)
    steps = [_capture(tmp_path, f"s{db}", rng, -20.0 - db) for db in (0, 10, 20)]
    argv = sum((["--step", f"{db}={p}"] for db, p in zip((0, 10, 20), steps)), [])
    out = _json(capsys, "ladder", *argv, "--noise-band", "35e3", "55e3")
    assert [s["nominal_db"] for s in out["steps"]] == [0, 10, 20]
    # a band holding no usable bins: one clear line, exit 2
    code = main(["loss", "--thru", steps[0], "--dut", steps[1], "--noise-band", "500e3", "600e3"])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "noise band" in err and "Traceback" not in err


def test_the_session_reads_every_capture_in_the_named_band(tmp_path, capsys):
    rng = np.random.default_rng(1303)
    _capture(tmp_path, "01-thru", rng, -20.0, role="thru", second=0)
    _capture(tmp_path, "02-dut", rng, -23.0, role="dut", second=10)
    out = _json(capsys, "analyze", str(tmp_path), "--noise-band", "35e3", "55e3")
    assert out["settings"]["noise_band_hz"] == [35e3, 55e3]
    for c in out["captures"]:
        assert c["noise"]["band_hz"] == [pytest.approx(35e3, abs=1e3), pytest.approx(55e3, abs=1e3)]
    (loss,) = out["losses"]
    assert loss["insertion_loss_db"] == pytest.approx(3.0, abs=0.1)


def test_the_gain_method_takes_its_noise_density_from_the_named_band(tmp_path, capsys):
    # NF = P_in - C/N0 - kT0 (gain method): with the floor from the empty stopband, N0 reads 40 dB low and
    # the NF 40 dB low with it; from the passband it is the truth's. The level is invented; only the
    # difference between the two bands is checked against the filter's 40 dB.
    rng = np.random.default_rng(1304)
    tone = _capture(tmp_path, "tone", rng, -20.0)
    inband = _json(capsys, "nf", "--tone", tone, "--level-dbm", "-60", "--noise-band", "35e3", "55e3")["gain_method"]
    stop = _json(capsys, "nf", "--tone", tone, "--level-dbm", "-60", "--noise-band", "-110e3", "-20e3")["gain_method"]
    assert inband["cn0_dbhz"] == pytest.approx(_truth_snr_db(-20.0), abs=0.5)
    assert inband["noise_figure_db"] - stop["noise_figure_db"] == pytest.approx(40.0, abs=1.0)
    code = main(["nf", "--hot", tone, "--cold", tone, "--enr-db", "15", "--noise-band", "1e3", "2e3"])
    assert code == 2 and "--noise-band applies to the gain method" in capsys.readouterr().err
