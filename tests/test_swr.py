"""rxbench swr: the SWR at the load from one read through a loss, and the reverse."""

import json
import math

import pytest

from rxbench.cli import main
from rxbench.dsp import mismatch


def _run_json(capsys, *argv):
    code = main(["swr", *argv, "--json"])
    out = capsys.readouterr().out
    assert code == 0
    return json.loads(out)


def test_swr_1_5_return_loss(capsys):
    # REFERENCES.md mismatch [calc]: SWR 1.5 -> |Gamma| 0.2, RL 13.98 dB, mismatch loss 0.177 dB.
    r = _run_json(capsys, "--at-load", "1.5", "--loss-db", "0")
    assert r["return_loss_at_load_db"] == pytest.approx(13.98, abs=0.005)
    assert r["gamma_at_load"] == pytest.approx(0.2, abs=1e-9)
    assert r["mismatch_loss_at_load_db"] == pytest.approx(0.177, abs=0.0005)
    assert r["swr_measured"] == pytest.approx(1.5, abs=1e-9)


def test_three_db_at_load_through_six_db_reads_fifteen():
    # REFERENCES.md (common practice; amateur licence study notes): RL_in = RL_load + 2*A;
    # 3 dB at the load through 6 dB of feeder -> 15 dB (SWR 1.43) [calc].
    assert mismatch.return_loss_through_loss_db(3.0, 6.0) == pytest.approx(15.0, abs=1e-12)
    assert mismatch.return_loss_at_load_db(15.0, 6.0) == pytest.approx(3.0, abs=1e-12)


def test_three_db_at_load_through_six_db_cli(capsys):
    gamma_load = 10 ** (-3 / 20)  # RL 3 dB
    swr_load = (1 + gamma_load) / (1 - gamma_load)
    r = _run_json(capsys, "--at-load", f"{swr_load:.12f}", "--loss-db", "6")
    assert r["return_loss_measured_db"] == pytest.approx(15.0, abs=1e-6)
    assert r["swr_measured"] == pytest.approx(1.43, abs=0.005)  # REFERENCES.md [calc]
    back = _run_json(capsys, "--measured", f"{r['swr_measured']:.12f}", "--loss-db", "6")
    assert back["swr_at_load"] == pytest.approx(swr_load, rel=1e-6)
    assert back["return_loss_at_load_db"] == pytest.approx(3.0, abs=1e-6)


def test_swr_3_behind_2_db(capsys):
    # REFERENCES.md [calc]: SWR 3 behind 2 dB -> RL 10.02 dB, SWR 1.92.
    r = _run_json(capsys, "--at-load", "3", "--loss-db", "2")
    assert r["return_loss_measured_db"] == pytest.approx(10.02, abs=0.005)
    assert r["swr_measured"] == pytest.approx(1.92, abs=0.005)


def test_one_point_eight_db_makes_1_5_read_about_1_3(capsys):
    # Common practice: with 1.8 dB of one-way loss a 1.5:1 load reads about 1.3:1 at the meter.
    r = _run_json(capsys, "--at-load", "1.5:1", "--loss-db", "1.8")
    assert r["swr_measured"] == pytest.approx(1.3, abs=0.02)
    # And the reverse: a 1.3:1 reading through 1.8 dB is about 1.5:1 at the load.
    r = _run_json(capsys, "--measured", "1.3:1", "--loss-db", "1.8")
    assert r["swr_at_load"] == pytest.approx(1.5, abs=0.03)


def test_output_carries_caution_and_sensitivity(capsys):
    r = _run_json(capsys, "--measured", "1.2", "--loss-db", "5")
    assert any("high voltage" in c for c in r["cautions"])
    lo, hi = r["sensitivity"]["swr_at_load_range"]
    assert lo < r["swr_at_load"] < hi
    # 10 dB round trip: the load figure is fragile, and a warning says so.
    assert len(r["warnings"]) == 1 and "meter reading off by" in r["warnings"][0]
    # A short, matched run does not warn.
    assert _run_json(capsys, "--measured", "1.2", "--loss-db", "0.5")["warnings"] == []


def test_human_output(capsys):
    assert main(["swr", "--measured", "1.5", "--loss-db", "3"]) == 0
    out = capsys.readouterr().out
    assert "at the load" in out and "Caution:" in out


def test_perfect_reading_through_loss(capsys):
    r = _run_json(capsys, "--measured", "1", "--loss-db", "3")
    assert r["swr_at_load"] == pytest.approx(1.0)
    assert r["return_loss_at_load_db"] is None  # infinite: JSON null, never a made-up number


@pytest.mark.parametrize(
    "argv, needle",
    [
        (["--measured", "0.9", "--loss-db", "1"], "--measured"),
        (["--at-load", "0.5", "--loss-db", "1"], "--at-load"),
        (["--measured", "1.5", "--loss-db", "-1"], "--loss-db"),
        # SWR 1.5 is RL 13.98 dB: 7 dB one-way (14 dB round trip) is more than the reading allows.
        (["--measured", "1.5", "--loss-db", "7"], "cannot be read through"),
        (["--measured", "nan", "--loss-db", "1"], "--measured"),
        (["--measured", "abc", "--loss-db", "1"], "not an SWR"),
    ],
)
def test_impossible_inputs_are_refused(capsys, argv, needle):
    assert main(["swr", *argv]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    err = captured.err.strip().splitlines()
    assert len(err) == 1 and needle in err[0]
    assert "Traceback" not in captured.err


def test_meter_and_load_both_required_one(capsys):
    assert main(["swr", "--loss-db", "1"]) == 2
    assert main(["swr", "--measured", "1.2", "--at-load", "1.3", "--loss-db", "1"]) == 2
    capsys.readouterr()


def test_round_trip_any_load(capsys):
    for swr_load in (1.05, 1.5, 2.0, 4.0, 10.0):
        for loss_db in (0.0, 0.5, 2.0, 6.0):
            m = _run_json(capsys, "--at-load", str(swr_load), "--loss-db", str(loss_db))
            b = _run_json(capsys, "--measured", repr(m["swr_measured"]), "--loss-db", str(loss_db))
            assert b["swr_at_load"] == pytest.approx(swr_load, rel=1e-6)
            assert m["return_loss_measured_db"] - m["return_loss_at_load_db"] == pytest.approx(2 * loss_db)
            assert not math.isnan(b["mismatch_loss_at_load_db"])
