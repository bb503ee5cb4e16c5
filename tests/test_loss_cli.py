"""rxbench loss / rxbench ladder end to end on synthetic 8-bit captures (invented bench, known truth).

The truths are planted with dsp.synth (a tone through a passive loss into a simulated dongle); the
checks are that the commands recover them within the stated limits, and that the k = 2 interval
covers the truth about 95 % of the time (JCGM 100:2008 6.3.3: k = 2 gives about 95 %).
"""

import json
import math

import numpy as np
import pytest

from rxbench.reading import read_capture
from rxbench.cli import main
from rxbench.recordings import memory_capture, write_sigmf
from rxbench.dsp import synth
from rxbench.dsp.loss import direct_loss, substitution_loss
from rxbench.dsp.units import w_from_dbm

FS = 250e3
DURATION_S = 0.2
OFFSET_HZ = 25_000.0
CENTER_HZ = 14.1e6
#: Invented dongle: 8-bit, thermal floor about one LSB, I/Q imbalance and a DC offset.
DONGLE = synth.Dongle(gain_db=74.0, noise_figure_db=6.0, iq_gain_db=0.5, iq_phase_deg=3.0,
                      dc_offset=0.01 + 0.004j, center_hz=CENTER_HZ)


def _source(rng, level_dbfs, n, dongle=DONGLE, offset_hz=OFFSET_HZ):
    """Generator output (sqrt(W)) that a linear dongle would read at ``level_dbfs``, with T0 noise."""
    x = synth.tone(n, FS, power_w=w_from_dbm(level_dbfs - dongle.gain_db), offset_hz=offset_hz,
                   phase_rad=rng.uniform(0, 2 * np.pi))
    return x + synth.thermal_noise(n, FS, 290.0, rng)


def _write(tmp_path, name, x_w, rng, *, dongle=DONGLE, rate=FS, center=CENTER_HZ, **kw):
    raw = dongle.receive_cu8(x_w, rate, rng)
    return str(write_sigmf(tmp_path / name, raw, sample_rate_hz=rate, center_hz=center, datatype="cu8", **kw))


def _capture(tmp_path, name, rng, level_dbfs, loss_db=0.0, *, dongle=DONGLE, rate=FS, **kw):
    x = _source(rng, level_dbfs, int(rate * DURATION_S), dongle)
    if loss_db:
        x = synth.passive_loss(x, rate, loss_db, rng)
    return _write(tmp_path, name, x, rng, dongle=dongle, rate=rate, **kw)


def _run(capsys, *argv):
    code = main(list(argv))
    out = capsys.readouterr()
    return code, out.out, out.err


def _json(capsys, *argv):
    code, out, err = _run(capsys, *argv, "--json")
    assert code == 0, err
    return json.loads(out), err


# --------------------------------------------------------------------------------------------
# What must be shown


def test_direct_loss_with_iq_imbalance_within_0_05_db(tmp_path, capsys):
    rng = np.random.default_rng(31)
    thru = _capture(tmp_path, "thru", rng, -20.0)
    dut = _capture(tmp_path, "dut", rng, -20.0, loss_db=3.0)
    r, err = _json(capsys, "loss", "--thru", thru, "--dut", dut)
    assert r["method"] == "direct"
    assert r["insertion_loss_db"] == pytest.approx(3.0, abs=0.05)
    assert r["per_device_db"] == r["insertion_loss_db"]
    assert 0 < r["expanded_uncertainty_db"] < 0.05
    assert r["expanded_uncertainty_db"] == pytest.approx(2 * r["standard_uncertainty_db"])
    assert "linear" in err  # the direct method's assumption is stated
    for key in ("insertion_loss_db", "expanded_uncertainty_db", "method", "per_device_db", "budget",
                "warnings"):
        assert key in r


def _compressed_bench(tmp_path, rng):
    """A 1 dB ladder 0..10 dB into a dongle compressed ~0.5 dB at the top; DUT truly 3.00 dB at step 0."""
    dongle = synth.Dongle(gain_db=74.0, noise_figure_db=6.0, iq_gain_db=0.3, iq_phase_deg=2.0,
                          compression_dbfs=-7.07, rapp_p=2.0, center_hz=CENTER_HZ)
    steps = [_capture(tmp_path, f"step{db:02d}", rng, -10.0 - db, dongle=dongle) for db in range(11)]
    dut = _capture(tmp_path, "dut", rng, -10.0, loss_db=3.0, dongle=dongle)
    return steps, dut


def test_substitution_through_compression_where_direct_fails(tmp_path, capsys):
    rng = np.random.default_rng(32)
    steps, dut = _compressed_bench(tmp_path, rng)
    args = []
    for db, path in enumerate(steps):
        args += ["--step", f"{db}={path}"]
    sub, _ = _json(capsys, "loss", *args, "--dut", dut, "--atten-tolerance-db", "0.05")
    direct, _ = _json(capsys, "loss", "--thru", steps[0], "--dut", dut)
    assert sub["method"] == "substitution"
    assert sub["insertion_loss_db"] == pytest.approx(3.0, abs=0.1)
    assert sub["bracket_db"] == [2.0, 3.0] or sub["bracket_db"] == [3.0, 4.0]
    # the direct method reads the compressed thru against a nearly linear DUT: visibly wrong
    assert abs(direct["insertion_loss_db"] - 3.0) > 0.3
    assert abs(direct["insertion_loss_db"] - 3.0) > direct["expanded_uncertainty_db"]
    # and the ladder check puts the blame on the dongle, not the attenuator
    lad, err = _json(capsys, "ladder", *args)
    assert lad["steps"][0]["region"] == "compressed"
    assert lad["compression_db"] == pytest.approx(0.5, abs=0.1)
    assert lad["top_limited_by"] == "compression"
    assert not any(s["flagged"] for s in lad["steps"])
    assert "compresses" in err


def test_ladder_with_one_bad_step(tmp_path, capsys):
    rng = np.random.default_rng(33)
    nominal = [0, 6, 12, 18, 24, 30, 60]
    truth = {18: 18.6}  # the 18 dB setting is really 18.6 dB
    args = []
    for db in nominal:
        path = _capture(tmp_path, f"s{db}", rng, -5.0 - truth.get(db, db))
        args += ["--step", f"{db}={path}"]
    r, err = _json(capsys, "ladder", *args)
    by_db = {s["nominal_db"]: s for s in r["steps"]}
    assert [s["nominal_db"] for s in r["steps"]] == nominal
    assert by_db[18]["flagged"]
    assert by_db[18]["error_db"] == pytest.approx(0.6, abs=0.1)
    assert not any(s["flagged"] for s in r["steps"] if s["nominal_db"] != 18)
    for s in r["steps"]:
        assert set(s) >= {"nominal_db", "measured_db", "error_db", "flagged"}
    # 60 dB down the tone is lost in the noise: the dongle's floor, not the attenuator
    assert by_db[60]["region"] == "noise-limited" and not by_db[60]["flagged"]
    assert r["bottom_limited_by"] == "noise"
    assert r["usable_range_db"] == 30.0
    assert "noise" in err
    code, out, _ = _run(capsys, "ladder", *args)
    assert code == 0 and "FLAGGED" in out and "usable linear range" in out


def _direct_trial(seed, n, level_dbfs, loss_db):
    rng = np.random.default_rng(seed)
    thru = DONGLE.receive(_source(rng, level_dbfs, n), FS, rng)
    dut = DONGLE.receive(synth.passive_loss(_source(rng, level_dbfs, n), FS, loss_db, rng), FS, rng)
    rt = read_capture(memory_capture(thru, FS))
    rd = read_capture(memory_capture(dut, FS), near_hz=rt.tone.offset_hz)
    t, d = rt.tone, rd.tone
    return direct_loss(t.power_dbfs, t.u_power_db, d.power_dbfs, d.u_power_db, dof=(t.dof_u, d.dof_u, math.inf))


def _coverage(trials, n, seed0=1000):
    # tone about 20 dB above the noise in 2.5 kHz: the uncertainty is dominated by the reading
    inside = 0
    for s in range(trials):
        loss = _direct_trial(seed0 + s, n, -40.0, 3.0)
        inside += abs(loss.loss_db - 3.0) <= loss.expanded_uncertainty_db
    return inside / trials


def test_coverage_of_the_k2_interval():
    # JCGM 100:2008 6.3.3: U = 2*u_c covers about 95 %; 400 trials (binomial s.d. 1.1 %)
    assert 0.93 <= _coverage(400, 12_500) <= 0.97


@pytest.mark.slow
def test_coverage_of_the_k2_interval_long():
    assert 0.94 <= _coverage(3000, 25_000, seed0=50_000) <= 0.96


@pytest.mark.slow
def test_coverage_of_substitution():
    rng0 = 70_000
    inside = 0
    trials = 600
    for s in range(trials):
        rng = np.random.default_rng(rng0 + s)
        n = 12_500
        steps = [2.0, 3.0, 4.0, 5.0]
        rs = [read_capture(memory_capture(DONGLE.receive(_source(rng, -40.0 - a, n), FS, rng), FS),
                           near_hz=OFFSET_HZ).tone for a in steps]
        dut = read_capture(memory_capture(DONGLE.receive(
            synth.passive_loss(_source(rng, -40.0, n), FS, 3.5, rng), FS, rng), FS), near_hz=OFFSET_HZ).tone
        loss = substitution_loss(steps, [t.power_dbfs for t in rs], [t.u_power_db for t in rs],
                                 dut.power_dbfs, dut.u_power_db)
        inside += abs(loss.loss_db - 3.5) <= loss.expanded_uncertainty_db
    assert 0.93 <= inside / trials <= 0.985


# --------------------------------------------------------------------------------------------
# Drift, pairs, budget


def test_thru_after_removes_linear_drift(tmp_path, capsys):
    # the generator sinks 0.3 dB over the session; timestamps in the metadata
    rng = np.random.default_rng(34)
    thru = _capture(tmp_path, "thru", rng, -20.0, datetime="2026-05-01T10:00:00Z")
    dut = _capture(tmp_path, "dut", rng, -20.15, loss_db=2.0, datetime="2026-05-01T10:01:00Z")
    after = _capture(tmp_path, "after", rng, -20.3, datetime="2026-05-01T10:02:00Z")
    r, err = _json(capsys, "loss", "--thru", thru, "--dut", dut, "--thru-after", after)
    assert r["insertion_loss_db"] == pytest.approx(2.0, abs=0.05)
    assert r["drift_db"] == pytest.approx(-0.3, abs=0.05)
    assert r["times_from"] == "metadata"
    assert "moved" in err
    plain, _ = _json(capsys, "loss", "--thru", thru, "--dut", dut)
    assert plain["insertion_loss_db"] == pytest.approx(2.15, abs=0.05)


def test_pair_budget_and_repeats(tmp_path, capsys):
    rng = np.random.default_rng(35)
    thrus = [_capture(tmp_path, f"thru{i}", rng, -20.0) for i in range(2)]
    duts = [_capture(tmp_path, f"pair{i}", rng, -20.0, loss_db=1.2) for i in range(2)]
    argv = ["loss", "--thru", thrus[0], "--thru", thrus[1], "--dut", duts[0], "--dut", duts[1], "--pair",
            "--source-swr", "1.2", "--load-swr", "1.5", "--dut-swr", "1.3", "--linearity-db", "0.02"]
    r, err = _json(capsys, *argv)
    assert r["pair"] is True
    assert r["per_device_db"] == pytest.approx(r["insertion_loss_db"] / 2)
    assert r["per_device_db"] == pytest.approx(0.6, abs=0.04)
    assert r["per_device_expanded_uncertainty_db"] == pytest.approx(r["expanded_uncertainty_db"] / 2)
    names = [b["name"] for b in r["budget"]]
    assert sum(b["distribution"] == "U-shaped" for b in r["budget"]) == 4
    assert "dongle linearity" in names and "linear" not in err
    # U = 2*sqrt(sum contributions^2) (JCGM 100:2008 5.1.2, 6.2.1)
    assert r["expanded_uncertainty_db"] == pytest.approx(
        2 * math.sqrt(sum(b["contribution_db"] ** 2 for b in r["budget"])))
    code, out, _ = _run(capsys, *argv, "--budget")
    assert code == 0
    assert "uncertainty budget" in out and "expanded uncertainty U (k = 2)" in out
    assert "mismatch source-load" in out and "per device" in out


# --------------------------------------------------------------------------------------------
# Guards


def test_guards_rates_centres_outside_ladder(tmp_path, capsys):
    rng = np.random.default_rng(36)
    thru = _capture(tmp_path, "thru", rng, -20.0)
    slow = _capture(tmp_path, "slow", rng, -20.0, loss_db=1.0, rate=240e3)
    code, out, err = _run(capsys, "loss", "--thru", thru, "--dut", slow)
    assert code == 2 and out == "" and "sample rate" in err and err.count("\n") == 1
    other = _capture(tmp_path, "other", rng, -20.0, loss_db=1.0, center=14.2e6)
    code, _, err = _run(capsys, "loss", "--thru", thru, "--dut", other)
    assert code == 2 and "centre frequency" in err and err.count("\n") == 1
    steps = [_capture(tmp_path, f"s{db}", rng, -20.0 - db) for db in (0, 1, 2)]
    dut = _capture(tmp_path, "dut", rng, -20.0, loss_db=6.0)
    code, out, err = _run(capsys, "loss", *sum((["--step", f"{db}={p}"] for db, p in zip((0, 1, 2), steps)), []),
                          "--dut", dut)
    # Valid captures whose DUT reading lies outside the ladder: exit 1 (README, "Exit codes").
    assert code == 1 and out == "" and "outside the ladder" in err and err.count("\n") == 1
    assert "Traceback" not in err


def test_warnings_for_clipping_and_low_snr(tmp_path, capsys):
    rng = np.random.default_rng(37)
    hot = _capture(tmp_path, "hot", rng, 2.0)  # a tone above full scale: clips the 8-bit rails
    dut = _capture(tmp_path, "dut", rng, 2.0, loss_db=3.0)
    r, err = _json(capsys, "loss", "--thru", hot, "--dut", dut)
    assert any("clipping" in w for w in r["warnings"]) and "clipping" in err
    faint = _capture(tmp_path, "faint", rng, -60.0)
    fainter = _capture(tmp_path, "fainter", rng, -60.0, loss_db=10.0)
    r, err = _json(capsys, "loss", "--thru", faint, "--dut", fainter)
    assert any("fainter" in w and "above the noise" in w for w in r["warnings"])
    assert "fainter" in err
    # the uncertainty says how little the number is worth
    assert r["expanded_uncertainty_db"] > 1.0


def test_usage_errors(tmp_path, capsys):
    rng = np.random.default_rng(38)
    thru = _capture(tmp_path, "thru", rng, -20.0)
    cases = [
        (["loss", "--thru", thru], "--dut"),
        (["loss", "--thru", thru, "--dut", thru, "--step", f"0={thru}"], "not both"),
        (["loss", "--thru", thru, "--dut", thru, "--dut-step", "3"], "--dut-step"),
        (["loss", "--thru", thru, "--dut", str(tmp_path / "missing.sigmf-meta")], "missing.sigmf-meta"),
        (["loss", "--thru", thru, "--dut", thru, "--source-swr", "0.5", "--load-swr", "1.2"], "--source-swr"),
        (["loss", "--step", thru, "--dut", thru], "DB=CAPTURE"),
        (["ladder", "--step", f"0={thru}", "--step", f"1={thru}"], "at least 3"),
    ]
    for argv, needle in cases:
        code, out, err = _run(capsys, *argv)
        assert code == 2, argv
        assert out == "" and needle in err and err.count("\n") == 1, (argv, err)


def test_human_output_is_a_small_table(tmp_path, capsys):
    rng = np.random.default_rng(39)
    thru = _capture(tmp_path, "thru", rng, -20.0)
    dut = _capture(tmp_path, "dut", rng, -20.0, loss_db=0.5)
    code, out, _ = _run(capsys, "loss", "--thru", thru, "--dut", dut)
    assert code == 0
    lines = out.splitlines()
    assert lines[0] == "insertion loss, direct method"
    assert any(line.strip().startswith("loss") and "±" in line and "U, k = 2" in line for line in lines)
    assert "uncertainty budget" not in out
    assert len(lines) <= 6


def test_few_degrees_of_freedom_are_called_out(tmp_path, capsys):
    # two thru captures that disagree by far more than their estimators allow (a reconnection):
    # the scatter (1 dof) then sets u, and k = 2 would cover well under 95 % (GUM G.3, Table G.2)
    rng = np.random.default_rng(40)
    thrus = [_capture(tmp_path, "thru_a", rng, -20.0), _capture(tmp_path, "thru_b", rng, -20.4)]
    dut = _capture(tmp_path, "dut", rng, -20.0, loss_db=1.0)
    r, err = _json(capsys, "loss", "--thru", thrus[0], "--thru", thrus[1], "--dut", dut)
    assert r["insertion_loss_db"] == pytest.approx(0.8, abs=0.05)
    assert r["effective_dof"] < 10 and "degrees of freedom" in err
