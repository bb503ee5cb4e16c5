"""Per-band numerics (dsp.bands) and their use: loss and noise figure per amateur band, continuity across
retunes, the difference of two devices with only their own uncertainty, in sessions and `rxbench nf`."""

from __future__ import annotations

import json

import numpy as np
import pytest

from rxbench.capture import run_session
from rxbench.cli import main
from rxbench.plan import load_plan, parse_plan, EXAMPLES_DIR
from rxbench.recordings import write_sigmf
from rxbench.session import analyze_session, open_session
from rxbench.simulated import BenchTruth, SimulatedBench
from rxbench import sweep
from rxbench.dsp import bands, synth

BAND = [("40 m", 7.0e6, 7.3e6)]


def test_band_mean_is_the_overlap_weighted_average():
    f = np.array([6.95e6, 7.05e6, 7.15e6, 7.25e6, 7.35e6])
    w = np.full(5, 0.1e6)
    v = np.array([1.0, 2.0, 3.0, 4.0, 5.0])
    (b,) = bands.per_band(f, w, v, np.full(5, 0.1), bands=BAND)
    # overlaps with 7.0-7.3 MHz: 0, 0.1, 0.1, 0.1, 0 MHz... plus the edge sub-bands touch only at a point
    weights = np.array([0.0, 0.1, 0.1, 0.1, 0.0])
    assert b.mean_db == pytest.approx(np.average(v, weights=weights))  # numpy's weighted mean
    assert b.worst_db == 4.0 and b.worst_at_hz == 7.25e6
    assert b.coverage == pytest.approx(1.0)
    # independent sub-bands, equal weights: u/sqrt(n) (GUM, JCGM 100:2008, mean of independent inputs)
    assert b.u_mean_db == pytest.approx(0.1 / np.sqrt(3))


def test_shared_uncertainty_does_not_average_down():
    f = np.linspace(7.025e6, 7.275e6, 6)
    w = np.full(6, 0.05e6)
    (b,) = bands.per_band(f, w, np.zeros(6), np.full(6, 0.2), bands=BAND, shared_u_db=0.3)
    assert b.u_mean_db == pytest.approx(np.hypot(0.2 / np.sqrt(6), 0.3))
    assert b.u_worst_db == pytest.approx(np.hypot(0.2, 0.3))
    # Monte Carlo check of the same (numpy's generator): shared draw once, own draws per sub-band
    rng = np.random.default_rng(0)
    means = [np.mean(rng.normal(0, 0.2, 6) + rng.normal(0, 0.3)) for _ in range(20000)]
    assert np.std(means) == pytest.approx(b.u_mean_db, rel=0.03)


def test_partial_coverage_and_bands_not_touched():
    f, w = np.array([7.05e6, 7.15e6]), np.full(2, 0.1e6)
    out = bands.per_band(f, w, np.ones(2), np.full(2, 0.1))
    assert [b.band for b in out] == ["40 m"]
    assert out[0].coverage == pytest.approx(0.2e6 / 0.3e6)


def test_retune_steps_see_a_jump_and_not_noise():
    rng = np.random.default_rng(1)
    centres = [7.0e6, 7.8e6, 8.6e6]
    offs = np.linspace(-0.45e6, 0.45e6, 9)[:-1] + 0.05625e6
    freqs = [c + offs for c in centres]
    widths = [np.full(8, 0.1125e6)] * 3
    u = [np.full(8, 0.05)] * 3
    smooth = [1.0 + rng.normal(0, 0.05, 8) for _ in centres]
    steps = bands.retune_steps(centres, freqs, smooth, u, widths)
    assert len(steps) == 2 and not any(s.significant for s in steps)
    jumped = [smooth[0], smooth[1] + 1.0, smooth[2] + 1.0]
    steps = bands.retune_steps(centres, freqs, jumped, u, widths)
    assert steps[0].significant and steps[0].difference_db == pytest.approx(1.0, abs=0.2)
    assert not steps[1].significant


def test_difference_counts_only_each_devices_own_uncertainty():
    d, u = bands.difference_curve([1.3, 1.2], [0.03, 0.04], [1.0, 1.0], [0.04, 0.03])
    assert d == pytest.approx([0.3, 0.2]) and u == pytest.approx([0.05, 0.05])


def test_nf_json_has_a_per_band_list(tmp_path, capsys):
    fs, n, center = 250e3, 125_000, 28.4e6
    rx = synth.Dongle(gain_db=90.0, noise_figure_db=6.0)
    rng = np.random.default_rng(12)
    paths = {}
    for tag, loss in (("ref", None), ("dut", 3.5)):
        for hot in (True, False):
            x = synth.noise_source(n, fs, 15.0, hot, rng)
            if loss is not None:
                x = synth.passive_loss(x, fs, loss, rng)
            paths[tag, hot] = str(write_sigmf(tmp_path / f"{tag}-{hot}", rx.receive_cu8(x, fs, rng),
                                              sample_rate_hz=fs, center_hz=center))
    code = main(["nf", "--hot", paths["ref", True], "--cold", paths["ref", False], "--hot-dut", paths["dut", True],
                 "--cold-dut", paths["dut", False], "--enr-db", "15", "--enr-u-db", "0.1", "--json"])
    out, err = capsys.readouterr()
    assert code == 0, err
    res = json.loads(out)
    (row,) = res["per_band"]
    assert row["band"] == "10 m" and row["low_hz"] == 28.0e6 and row["high_hz"] == 29.7e6
    # a 3.5 dB pad (the synthesis parameter): the band's mean and worst within their U
    assert abs(row["mean_loss_db"] - 3.5) <= row["expanded_uncertainty_mean_db"] + 0.02
    assert row["worst_loss_db"] >= row["mean_loss_db"]
    assert row["coverage"] < 1  # 250 kHz of the 1.7 MHz band
    (nf_row,) = res["per_band_noise_figure"]
    assert abs(nf_row["mean_noise_figure_db"] - 6.0) <= nf_row["expanded_uncertainty_mean_db"]


def _flat(v):
    return ((1e6, v), (60e6, v))


DEVICES_PLAN = """
[dongle]
sample_rate_hz = 1024000
gain_db = 30
direct_sampling = "q"
settle_s = 0.01
[noise_source]
enr_db = 35
[defaults]
duration_s = 0.2
[[sweep]]
name = "a"
roles = ["cold", "hot"]
start_hz = 6.9e6
stop_hz = 7.4e6
with_dut = [false, true]
device = "variant-a"
[[sweep]]
name = "b"
roles = ["cold", "hot"]
start_hz = 6.9e6
stop_hz = 7.4e6
with_dut = true
device = "variant-b"
"""


def _two_devices(tmp_path, loss_b, seed):
    truth = BenchTruth(settle_s=0.0, if_ripple_db=0.6, if_rolloff_db=3.0,
                       device_loss_tables=(("variant-a", _flat(1.0)), ("variant-b", _flat(loss_b))))
    run_session(parse_plan(DEVICES_PLAN), tmp_path / "s", SimulatedBench(truth, seed=seed), yes=True)
    return analyze_session(open_session(tmp_path / "s"))


def test_devices_0_3_db_apart_are_told_apart(tmp_path):
    a = _two_devices(tmp_path, 1.3, seed=21)
    (d,) = a.device_differences
    assert d["band"] == "40 m" and d["device"] == "variant-b" and d["reference_device"] == "variant-a"
    assert d["expanded_uncertainty_db"] < 0.15  # well under 0.3 dB
    assert abs(d["difference_db"] - 0.3) <= d["expanded_uncertainty_db"]
    assert d["significant"]
    # the shared reference captures are not counted twice: the difference's U is below the root-sum-
    # square of the two devices' own Us
    ua, ub = (r["expanded_uncertainty_mean_db"] for r in a.per_band)
    assert d["expanded_uncertainty_db"] < np.hypot(ua, ub)
    for r, truth in zip(a.per_band, (1.0, 1.3)):
        assert abs(r["mean_loss_db"] - truth) <= r["expanded_uncertainty_mean_db"]
    assert set(a.devices) == {"variant-a", "variant-b"}


def test_identical_devices_are_not_told_apart(tmp_path):
    a = _two_devices(tmp_path, 1.0, seed=22)
    (d,) = a.device_differences
    assert not d["significant"] and abs(d["difference_db"]) <= d["expanded_uncertainty_db"]


def test_report_has_per_band_tables_csv_and_plot(tmp_path):
    from rxbench.report import write_report

    a = _two_devices(tmp_path, 1.3, seed=23)
    folder = write_report(a)
    md = (folder / "report.md").read_text()
    assert "## Loss per band" in md and "### Differences between devices" in md and "| 40 m |" in md
    assert "bands.png" in md and (folder / "bands.png").stat().st_size > 10000
    csv = (folder / "per-band.csv").read_text().splitlines()
    assert csv[0].startswith("quantity,device,band") and any(line.startswith("loss_difference") for line in csv)
    doc = json.loads((folder / "results.json").read_text())
    assert doc["per_band"] and doc["device_differences"]


def test_example_sweep_dry_run(capsys):
    path = EXAMPLES_DIR / "hf-transformer-sweep.toml"
    plan = load_plan(path)
    assert main(["capture", str(path), "--dry-run", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    states = {json.dumps(sweep.state(plan, s, plan.tone_offset_hz), sort_keys=True) for s in plan.steps}
    # no larger than the number of distinct physical changes: each distinct state entered once
    assert d["operator_actions"] <= len(states) - 1
    assert d["step_count"] == len(plan.steps) > 50
    assert {s["device"] for s in d["steps"]} == {"", "variant-a", "variant-b"}
    assert min(s["center_hz"] for s in d["steps"]) < 4e6 and max(s["center_hz"] for s in d["steps"]) > 29e6
