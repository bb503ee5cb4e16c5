"""The Y-factor on captures as they really arrive: a carrier (or a dongle's spur) inside the band,
and a noise source that switched during its capture (bench/methods/noise_source.py).

Synthetic captures with known truth (dsp.synth; invented receiver NF 6.0 dB, ENR 15 dB). A carrier of
power P adds P to the hot and the cold band powers alike, so counted it pulls Y down and the NF up:
with the cold noise N_c and hot noise N_h over the band, Y reads (N_h + P)/(N_c + P) instead of
N_h/N_c (the Y-factor definition, REFERENCES.md); left out, the NF is the receiver's.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from rxbench.cli import main
from rxbench.dsp import synth
from rxbench.dsp.units import w_from_dbm
from rxbench.recordings import write_sigmf

FS = 250e3
N = 125_000  # 0.5 s
CENTER = 100e6
RX = synth.Dongle(gain_db=90.0, noise_figure_db=6.0)
CARRIER_HZ = 41_000.0
CARRIER_DBM = -120.0  # about 28 dB above the cold noise in one bin of 61 Hz (invented)


def _write(tmp_path, name, x_w, rng, role):
    raw = RX.receive_cu8(x_w, FS, rng)
    return str(write_sigmf(tmp_path / name, raw, sample_rate_hz=FS, center_hz=CENTER,
                           extra={"gain_db": RX.gain_db, "role": role}))


def _carrier(rng, n=N):
    return synth.tone(n, FS, power_w=w_from_dbm(CARRIER_DBM), offset_hz=CARRIER_HZ,
                      phase_rad=rng.uniform(0, 2 * np.pi))


def _nf(capsys, hot, cold):
    code = main(["nf", "--hot", hot, "--cold", cold, "--enr-db", "15", "--json"])
    out, err = capsys.readouterr()
    assert code == 0, err
    return json.loads(out), err


def test_a_carrier_in_the_band_is_left_out_and_named(tmp_path, capsys):
    rng = np.random.default_rng(1501)
    hot = _write(tmp_path, "hot", synth.noise_source(N, FS, 15.0, True, rng) + _carrier(rng), rng, "hot")
    cold = _write(tmp_path, "cold", synth.noise_source(N, FS, 15.0, False, rng) + _carrier(rng), rng, "cold")
    res, err = _nf(capsys, hot, cold)
    assert res["noise_figure_db"] == pytest.approx(6.0, abs=0.15)
    (band,) = res["bands"]
    (line,) = band["lines_left_out"]
    assert line["offset_hz"] == pytest.approx(CARRIER_HZ, abs=FS / 4096)
    assert line["excess_db"] > 20
    assert any("1 narrow line(s) left out" in w and "+41.0 kHz" in w for w in res["warnings"])
    assert "narrow line" in err

    # What leaving it out is worth: the same spectra with the carrier counted read the NF high by more
    # than the result's own U (so the exclusion is what makes the number right).
    from rxbench.dsp.noise_source import noise_source_analysis
    from rxbench.dsp.units import db_from_power
    from rxbench.reading import read_capture
    from rxbench.recordings import open_capture
    from pathlib import Path

    spectra = [read_capture(open_capture(Path(p)), want_tone=False).psd for p in (cold, hot)]
    counted = noise_source_analysis([spectra[0]], [spectra[1]], enr_db=15.0, dc_halfwidth_hz=None)
    nf_counted = float(db_from_power(counted.receiver.noise_factor[-1]))
    assert nf_counted - res["noise_figure_db"] > band["expanded_uncertainty_db"]


def test_a_source_that_switched_during_its_capture_is_warned(tmp_path, capsys):
    rng = np.random.default_rng(1502)
    half = N // 2
    switched = np.concatenate([synth.noise_source(half, FS, 15.0, False, rng),
                               synth.noise_source(N - half, FS, 15.0, True, rng)])  # on half-way through
    hot = _write(tmp_path, "hot", switched, rng, "hot")
    cold = _write(tmp_path, "cold", synth.noise_source(N, FS, 15.0, False, rng), rng, "cold")
    res, _ = _nf(capsys, hot, cold)
    moved = [w for w in res["warnings"] if "hot.sigmf-meta (hot): its noise level moved by" in w]
    assert len(moved) == 1
    # half the sub-averages at the cold level, half at the hot: the spread is Y itself,
    # 10*log10((T0*(ENR + 1) + Te) / (T0 + Te)) (Y-factor definition, REFERENCES.md)
    te = RX.noise_temperature_k
    y_db = 10 * np.log10((290.0 * (10 ** 1.5 + 1) + te) / (290.0 + te))
    spread = float(moved[0].split("moved by ")[1].split(" dB")[0])
    assert spread == pytest.approx(y_db, abs=0.5)
    assert not any("cold.sigmf-meta (cold): its noise level moved" in w for w in res["warnings"])


def test_steady_captures_without_lines_warn_neither(tmp_path, capsys):
    rng = np.random.default_rng(1503)
    hot = _write(tmp_path, "hot", synth.noise_source(N, FS, 15.0, True, rng), rng, "hot")
    cold = _write(tmp_path, "cold", synth.noise_source(N, FS, 15.0, False, rng), rng, "cold")
    res, _ = _nf(capsys, hot, cold)
    assert res["bands"][0]["lines_left_out"] == []
    assert not any("narrow line" in w or "moved by" in w for w in res["warnings"])
    assert res["noise_figure_db"] == pytest.approx(6.0, abs=0.15)
