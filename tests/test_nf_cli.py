"""``rxbench nf`` end to end on synthetic noise-source captures with known receiver noise figure,
ENR and DUT loss (invented data from dsp.synth; the truths are the synthesis parameters)."""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rxbench.cli import main
from rxbench.enr import EnrTableError, parse_enr_table
from rxbench.recordings import write_sigmf
from rxbench.dsp import synth
from rxbench.dsp.subbands import N_SUB_BANDS
from rxbench.dsp.units import T0_K, power_from_db, w_from_dbm

FS = 250e3
N = 125_000  # 0.5 s
CENTER = 100e6
RX = synth.Dongle(gain_db=90.0, noise_figure_db=6.0)


def _capture(tmp_path, name, x_w, rng, *, dongle=RX, center_hz=CENTER, role=None, rate=FS):
    raw = dongle.receive_cu8(x_w, rate, rng)
    extra = {"gain_db": dongle.gain_db, **({"role": role} if role else {})}
    return str(write_sigmf(tmp_path / name, raw, sample_rate_hz=rate, center_hz=center_hz, extra=extra))


def _pair(tmp_path, tag, rng, *, enr_db=15.0, loss_db=None, dongle=RX, center_hz=CENTER, n=N):
    paths = []
    for hot in (True, False):
        x = synth.noise_source(n, FS, enr_db, hot, rng)
        if loss_db is not None:
            x = synth.passive_loss(x, FS, loss_db, rng)
        paths.append(_capture(tmp_path, f"{tag}-{'hot' if hot else 'cold'}", x, rng, dongle=dongle,
                              center_hz=center_hz, role="hot" if hot else "cold"))
    return paths  # hot, cold


def _json(capsys, argv):
    code = main(argv + ["--json"])
    out, err = capsys.readouterr()
    assert code == 0, err
    return json.loads(out), err


def _fails(capsys, argv, expected_code=2):
    code = main(argv)
    out, err = capsys.readouterr()
    assert code == expected_code
    assert "Traceback" not in err
    assert len(err.strip().splitlines()) == 1
    return err


def test_noise_figure_within_0_15_db(tmp_path, capsys):
    # What must be shown: NF within 0.15 dB of the simulated receiver's (6.0 dB), ENR 15 dB.
    rng = np.random.default_rng(10)
    hot, cold = _pair(tmp_path, "ref", rng)
    res, err = _json(capsys, ["nf", "--hot", hot, "--cold", cold, "--enr-db", "15"])
    assert res["method"] == "y-factor"
    assert res["noise_figure_db"] == pytest.approx(6.0, abs=0.15)
    te = RX.noise_temperature_k
    assert res["noise_temperature_k"] == pytest.approx(te, rel=0.05)
    # Y from the temperatures (Y-factor definition, REFERENCES.md): (T_hot + Te)/(T0 + Te).
    y_true = 10 * np.log10((T0_K * (power_from_db(15.0) + 1) + te) / (T0_K + te))
    assert res["y_db"] == pytest.approx(y_true, abs=0.1)
    assert 0 < res["noise_figure_expanded_uncertainty_db"] < 0.15
    assert res["warnings"] == [] and err == ""
    assert len(res["curve"]) == N_SUB_BANDS  # the one default (dsp.subbands)
    assert all(abs(row["noise_figure_db"] - 6.0) < 0.15 + 2 * row["noise_figure_u_db"] * 2 for row in res["curve"])
    assert "insertion_loss_db" not in res


def test_repeated_pairs_at_one_centre_are_pooled(tmp_path, capsys):
    # Three short hot/cold pairs at one centre pool into one reading: NF within 0.15 dB of the
    # simulated receiver's, and an uncertainty close to 1/sqrt(3) of one pair's (averaging
    # independent readings, GUM 4.2.3).
    rng = np.random.default_rng(14)
    pairs = [_pair(tmp_path, f"r{k}", rng, n=40_000) for k in range(3)]
    one, _ = _json(capsys, ["nf", "--hot", pairs[0][0], "--cold", pairs[0][1], "--enr-db", "15"])
    argv = ["nf", "--enr-db", "15"]
    for hot, cold in pairs:
        argv += ["--hot", hot, "--cold", cold]
    pooled, err = _json(capsys, argv)
    assert pooled["noise_figure_db"] == pytest.approx(6.0, abs=0.15)
    (band,) = pooled["bands"]
    assert len(band["captures"]["hot"]) == 3 and len(band["captures"]["cold"]) == 3
    ratio = pooled["noise_figure_u_db"] / one["noise_figure_u_db"]
    assert 0.45 < ratio < 0.75  # 1/sqrt(3) = 0.58
    assert pooled["warnings"] == [] and err == ""


def test_a_centre_without_its_cold_capture_is_named(tmp_path, capsys):
    rng = np.random.default_rng(15)
    hot_a, cold_a = _pair(tmp_path, "a", rng, n=20_000)
    hot_b, _ = _pair(tmp_path, "b", rng, n=20_000, center_hz=CENTER + 200e3)
    err = _fails(capsys, ["nf", "--hot", hot_a, "--cold", cold_a, "--hot", hot_b, "--enr-db", "15"])
    assert "b-hot" in err and "no --cold capture at 1.002e+08 Hz" in err


def test_human_output_has_nf_and_uncertainty(tmp_path, capsys):
    rng = np.random.default_rng(11)
    hot, cold = _pair(tmp_path, "ref", rng, n=40_000)
    assert main(["nf", "--hot", hot, "--cold", cold, "--enr-db", "15"]) == 0
    out = capsys.readouterr().out
    assert "noise figure" in out and "±" in out and "(95 %)" in out
    assert "ENR's own uncertainty is not included" in out


def test_passive_dut_loss_within_0_15_db(tmp_path, capsys):
    # What must be shown: a passive DUT's loss within 0.15 dB (synthetic 3.5 dB pad at T0, whose
    # noise figure equals its loss: Bedrosian 1960 / REFERENCES.md).
    rng = np.random.default_rng(12)
    hot, cold = _pair(tmp_path, "ref", rng)
    hot_d, cold_d = _pair(tmp_path, "dut", rng, loss_db=3.5)
    res, _ = _json(capsys, ["nf", "--hot", hot, "--cold", cold, "--hot-dut", hot_d, "--cold-dut", cold_d,
                            "--enr-db", "15", "--enr-u-db", "0.1"])
    assert res["insertion_loss_db"] == pytest.approx(3.5, abs=0.15)
    assert res["dut_noise_figure_db"] == pytest.approx(3.5, abs=0.3)
    assert res["noise_figure_db"] == pytest.approx(6.0, abs=0.15)
    assert 0 < res["insertion_loss_expanded_uncertainty_db"] < 0.15
    for row in res["curve"]:
        assert row["insertion_loss_db"] == pytest.approx(3.5, abs=0.25)


def test_sloped_filter_recovered_across_the_band(tmp_path, capsys):
    # What must be shown: a filter whose loss runs from 1.5 to 8.5 dB across the capture, recovered
    # within 0.25 dB in every sub-band of the usable band.
    def loss(f_hz):
        return 5.0 + 3.5 * np.asarray(f_hz) / (FS / 2)

    rng = np.random.default_rng(13)
    hot, cold = _pair(tmp_path, "ref", rng, enr_db=20.0)
    hot_d, cold_d = _pair(tmp_path, "dut", rng, enr_db=20.0, loss_db=loss)
    res, _ = _json(capsys, ["nf", "--hot", hot, "--cold", cold, "--hot-dut", hot_d, "--cold-dut", cold_d,
                            "--enr-db", "20", "--sub-bands", "12"])
    offsets = np.array([row["frequency_hz"] - CENTER for row in res["curve"]])
    measured = np.array([row["insertion_loss_db"] for row in res["curve"]])
    truth = loss(offsets)
    assert truth.max() - truth.min() > 5.0
    assert np.max(np.abs(measured - truth)) < 0.25, measured - truth


def test_several_centre_frequencies_stitched_into_one_csv(tmp_path, capsys):
    # Two tunings 150 kHz apart with overlapping usable bands; a DUT whose loss slopes across both.
    def loss_abs(f_abs_hz):
        return 3.0 + 2.0 * (np.asarray(f_abs_hz) - 100.075e6) / 200e3

    rng = np.random.default_rng(14)
    argv = ["nf", "--enr-db", "18", "--sub-bands", "8"]
    for c in (100.0e6, 100.15e6):
        hot, cold = _pair(tmp_path, f"ref{c:.0f}", rng, enr_db=18.0, center_hz=c, n=80_000)
        hot_d, cold_d = _pair(tmp_path, f"dut{c:.0f}", rng, enr_db=18.0, center_hz=c, n=80_000,
                              loss_db=lambda f, c=c: loss_abs(c + f))
        argv += ["--hot", hot, "--cold", cold, "--hot-dut", hot_d, "--cold-dut", cold_d]
    csv_path = tmp_path / "curve.csv"
    res, _ = _json(capsys, argv + ["--csv", str(csv_path)])
    freqs = np.array([row["frequency_hz"] for row in res["curve"]])
    assert np.all(np.diff(freqs) > 0)  # overlap trimmed: no frequency twice, ascending
    assert {row["tuned_hz"] for row in res["curve"]} == {100.0e6, 100.15e6}
    # The curve spans both usable bands: 100 MHz - 112.5 kHz to 100.15 MHz + 112.5 kHz.
    assert min(row["low_hz"] for row in res["curve"]) == pytest.approx(99.8875e6, abs=1e3)
    assert max(row["high_hz"] for row in res["curve"]) == pytest.approx(100.2625e6, abs=1e3)
    # Rows from each tuning stay on its own side of the midpoint between the centres.
    for row in res["curve"]:
        assert (row["frequency_hz"] <= 100.075e6) == (row["tuned_hz"] == 100.0e6)
    measured = np.array([row["insertion_loss_db"] for row in res["curve"]])
    assert np.max(np.abs(measured - loss_abs(freqs))) < 0.25
    assert res["noise_figure_db"] == pytest.approx(6.0, abs=0.15)
    lines = csv_path.read_text().splitlines()
    assert lines[0].startswith("frequency_hz,low_hz,high_hz,tuned_hz,enr_db,y_db,noise_figure_db")
    assert len(lines) == len(res["curve"]) + 1
    # full precision in the CSV: the frequencies read back exactly as the JSON has them (at 100 MHz
    # six significant digits would lose everything below 100 Hz)
    import csv as _csv
    back = [float(r["frequency_hz"]) for r in _csv.DictReader(lines)]
    assert back == [row["frequency_hz"] for row in res["curve"]]
    # Never overwrite the CSV unless asked.
    before = csv_path.read_text()
    err = _fails(capsys, argv + ["--csv", str(csv_path)])
    assert "curve.csv" in err and "overwrit" in err
    assert csv_path.read_text() == before
    assert main(argv + ["--csv", str(csv_path), "--overwrite", "--json"]) == 0
    capsys.readouterr()


def test_enr_table_is_interpolated(tmp_path, capsys):
    # The table's points straddle the capture: 14 dB at 99.5 MHz, 16 dB at 100.5 MHz -> 15 dB at
    # 100 MHz, the synthetic source's true ENR (linear interpolation in dB, common practice).
    table = tmp_path / "enr.csv"
    table.write_text("# invented calibration points\nfrequency_hz,enr_db\n99.5e6,14.0\n100.5e6,16.0\n")
    rng = np.random.default_rng(15)
    hot, cold = _pair(tmp_path, "ref", rng)
    res, _ = _json(capsys, ["nf", "--hot", hot, "--cold", cold, "--enr-table", str(table)])
    assert res["noise_figure_db"] == pytest.approx(6.0, abs=0.15)
    for row in res["curve"]:
        expected = 14.0 + 2.0 * (row["frequency_hz"] - 99.5e6) / 1e6
        assert row["enr_db"] == pytest.approx(expected, abs=0.01)
    # A table that does not reach the capture's band gets a warning (ENR held at the end value).
    short = tmp_path / "short.csv"
    short.write_text("frequency_hz,enr_db\n50e6,15.0\n99e6,15.0\n")
    res, err = _json(capsys, ["nf", "--hot", hot, "--cold", cold, "--enr-table", str(short)])
    assert any("beyond the ENR table" in w for w in res["warnings"]) and "beyond the ENR table" in err


@pytest.mark.parametrize("text, line, what", [
    ("frequency_hz,enr_db\n10e6,15\n20e6,abc\n", 3, "not a number"),
    ("frequency_hz,enr_db\n20e6,15\n10e6,15\n", 3, "increase"),
    ("freq,enr\n10e6,15\n", 1, "header"),
    ("10e6,15,0.1\n", 1, "2 columns"),
    ("10e6,150\n", 1, "outside"),
])
def test_malformed_enr_table_names_file_and_line(tmp_path, capsys, text, line, what):
    table = tmp_path / "bad.csv"
    table.write_text(text)
    with pytest.raises(EnrTableError, match=f"line {line}: .*{what}"):
        parse_enr_table(text, table)
    rng = np.random.default_rng(16)
    hot, cold = _pair(tmp_path, "ref", rng, n=20_000)
    err = _fails(capsys, ["nf", "--hot", hot, "--cold", cold, "--enr-table", str(table)])
    assert "bad.csv" in err and f"line {line}" in err


def test_small_y_warns_with_the_uncertainty(tmp_path, capsys):
    # ENR 1 dB into a 6 dB receiver: Y about 1.2 dB, where NF errors are several times Y errors.
    rng = np.random.default_rng(17)
    hot, cold = _pair(tmp_path, "ref", rng, enr_db=1.0)
    res, err = _json(capsys, ["nf", "--hot", hot, "--cold", cold, "--enr-db", "1"])
    small = [w for w in res["warnings"] if "small for a trustworthy noise figure" in w]
    assert small and "±" in small[0] and "(95 %)" in small[0]
    assert "small for a trustworthy" in err
    assert res["noise_figure_db"] == pytest.approx(6.0, abs=0.3 + res["noise_figure_expanded_uncertainty_db"])


def test_hot_clipping_warns_and_a_gain_difference_is_refused(tmp_path, capsys):
    rng = np.random.default_rng(18)
    hot, cold = _pair(tmp_path, "loud", rng, enr_db=25.0, n=40_000)  # hot near -5 dBFS rms: clips
    res, _ = _json(capsys, ["nf", "--hot", hot, "--cold", cold, "--enr-db", "25"])
    assert any("(hot)" in w and "(clipping)" in w and "NF reads high" in w for w in res["warnings"])
    rng = np.random.default_rng(19)
    x = synth.noise_source(40_000, FS, 15.0, True, rng)
    hot2 = _capture(tmp_path, "hot-g", x, rng, dongle=synth.Dongle(gain_db=88.0, noise_figure_db=6.0))
    cold2 = _capture(tmp_path, "cold-g", synth.noise_source(40_000, FS, 15.0, False, rng), rng)
    # a gain step between hot and cold: Y compares two different receivers, so no number at all
    err = _fails(capsys, ["nf", "--hot", hot2, "--cold", cold2, "--enr-db", "15"])
    assert "different dongle gain (90 vs 88 dB)" in err and "hot-g" in err and "cold-g" in err


def test_sample_rate_mismatch_warns(tmp_path, capsys):
    rng = np.random.default_rng(20)
    hot = _capture(tmp_path, "hot", synth.noise_source(40_000, FS, 15.0, True, rng), rng)
    cold = _capture(tmp_path, "cold", synth.noise_source(40_000, 200e3, 15.0, False, rng), rng, rate=200e3)
    res, _ = _json(capsys, ["nf", "--hot", hot, "--cold", cold, "--enr-db", "15"])
    assert any("differ in sample rate" in w for w in res["warnings"])
    # Compared over the common band, the noise figure is still right (white noise, flat dongle).
    assert res["noise_figure_db"] == pytest.approx(6.0, abs=0.2)


def test_gain_method(tmp_path, capsys):
    # NF = P_in - C/N0 - kT0 (REFERENCES.md, gain method): a -100 dBm tone from a source at T0
    # into the simulated 6 dB receiver.
    rng = np.random.default_rng(21)
    x = synth.tone(N, FS, power_w=float(w_from_dbm(-100.0)), offset_hz=31e3) + synth.thermal_noise(N, FS, T0_K, rng)
    path = _capture(tmp_path, "tone", x, rng)
    res, _ = _json(capsys, ["nf", "--tone", path, "--level-dbm", "-100"])
    assert res["method"] == "gain"
    assert res["noise_figure_db"] == pytest.approx(6.0, abs=0.2)
    assert res["gain_method"]["cn0_dbhz"] == pytest.approx(-100.0 + 173.975 - 6.0, abs=0.2)
    assert res["y_db"] is None


def test_gain_method_refuses_a_keyed_tone(tmp_path, capsys):
    # The level given is the generator's while on; a tone on a quarter of the time reads its average
    # C/N0 6 dB low (NF 6 dB high): the method refuses, naming how much of the time it was present.
    rng = np.random.default_rng(22)
    gate = synth.keyed(N, FS, duty=0.25, period_s=0.1)
    x = gate * synth.tone(N, FS, power_w=float(w_from_dbm(-100.0)), offset_hz=31e3) + synth.thermal_noise(N, FS, T0_K, rng)
    path = _capture(tmp_path, "keyed", x, rng)
    code = main(["nf", "--tone", path, "--level-dbm", "-100"])
    err = capsys.readouterr().err
    assert code == 1 and "the gain method needs a steady tone" in err and "present in only" in err, err


def test_swapped_hot_and_cold_is_an_error(tmp_path, capsys):
    rng = np.random.default_rng(22)
    hot, cold = _pair(tmp_path, "ref", rng, n=20_000)
    # Valid captures that do not give a noise figure: exit 1 (README, "Exit codes").
    err = _fails(capsys, ["nf", "--hot", cold, "--cold", hot, "--enr-db", "15"], expected_code=1)
    assert "swapped" in err


@pytest.mark.parametrize("argv, what", [
    (["nf", "--hot", "h.sigmf-meta", "--enr-db", "15"], "--cold"),
    (["nf", "--tone", "t.sigmf-meta"], "--level-dbm"),
    (["nf", "--enr-db", "15"], "--hot"),
    (["nf", "--hot", "missing.sigmf-meta", "--cold", "missing2.sigmf-meta", "--enr-db", "15"], "missing.sigmf-meta"),
    (["nf", "--hot", "a", "--cold", "b", "--enr-db", "15", "--cold-k", "-3"], "--cold-k"),
])
def test_bad_usage_is_one_line_exit_2(capsys, argv, what):
    err = _fails(capsys, argv)
    assert what in err


def test_missing_enr_is_an_error(tmp_path, capsys):
    rng = np.random.default_rng(23)
    hot, cold = _pair(tmp_path, "ref", rng, n=20_000)
    err = _fails(capsys, ["nf", "--hot", hot, "--cold", cold])
    assert "--enr-db" in err


@settings(max_examples=50, deadline=None)
@given(st.lists(st.tuples(st.integers(1_000, 6_000_000_000), st.floats(-5.0, 40.0)), min_size=1, max_size=12,
                unique_by=lambda p: p[0]),
       st.booleans())
def test_enr_table_round_trip(points, header):
    # Round trip: a table written as CSV reads back point for point, and interpolation returns the
    # table's own values at its frequencies (np.interp as the reference library).
    points = sorted(points)
    text = ("frequency_hz,enr_db\n" if header else "") + "".join(f"{f!r},{e!r}\n" for f, e in points)
    table = parse_enr_table(text, "t.csv")
    f = np.array([p[0] for p in points], dtype=float)
    e = np.array([p[1] for p in points])
    assert np.array_equal(table.frequency_hz, f) and np.array_equal(table.enr_db, e)
    assert np.allclose(table.enr_db_at(f), e)
    assert table.enr_db_at(f[0] / 2) == e[0] and table.enr_db_at(f[-1] * 2) == e[-1]  # held at the ends
    assert np.allclose(table.enr_db_at((f[:-1] + f[1:]) / 2), (e[:-1] + e[1:]) / 2)
