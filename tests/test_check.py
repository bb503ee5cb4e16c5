"""The check after every capture and the capture flow around it, on the simulated bench: generator
off, a wrong attenuator setting and a clipping dongle are each caught while the set-up is still there;
capturing again, stopping on a failed check, the drift partners of --redo, the bias-tee guard and the
logged interrupt.

The simulated dongle reaches full scale at -80 dBm at 30 dB gain (bench/simulated.py); the plans
below say so in ``full_scale_dbm`` where the dBm reading is tested.
"""

from __future__ import annotations

import json
import re

import pytest

from rxbench.capture import LOG_NAME, REPLACED_DIR, drift_partners, run_session
from rxbench.cli import main
from rxbench.errors import UsageError
from rxbench.plan import parse_plan
from rxbench.simulated import BenchTruth, SimulatedBench

HEAD = """\
[dongle]
sample_rate_hz = 250000
gain_db = 30.0
settle_s = 0.02
{full_scale}

[generator]
level_dbm = -40.0
offset_hz = 20000

[defaults]
center_hz = 28.4e6
duration_s = 0.08
{check}
"""

STEPS = """
[[step]]
name = "thru"
role = "thru"
attenuation_db = 50

[[step]]
name = "step-60"
role = "step"
attenuation_db = 60

[[step]]
name = "step-45"
role = "step"
attenuation_db = 45
"""


def make_plan(*, full_scale: bool = True, check: str = "", steps: str = STEPS):
    fs = "full_scale_dbm = -80.0" if full_scale else ""
    return parse_plan(HEAD.format(full_scale=fs, check=check) + steps, "check-plan.toml")


def run(tmp_path, truth=None, **kw):
    return run_session(kw.pop("plan", None) or make_plan(), tmp_path / "s", SimulatedBench(truth, seed=3),
                       yes=kw.pop("yes", True), **kw)


def by_name(result):
    return {c.name: c for c in result.checks}


def test_a_good_bench_passes_and_reads_the_expected_dbm(tmp_path):
    result = run(tmp_path)
    checks = by_name(result)
    assert set(checks) == {"01-thru", "02-step-60", "03-step-45"}
    assert all(c.passed for c in checks.values()), [c.line() for c in checks.values()]
    # generator -40 dBm minus the attenuator; the simulated attenuator is within 0.35 dB of nominal
    for name, expected in (("01-thru", -90.0), ("02-step-60", -100.0), ("03-step-45", -85.0)):
        c = checks[name]
        assert c.expected_dbm == expected
        assert c.level.tone_dbm == pytest.approx(expected, abs=0.6)
        assert c.level.tone_dbfs == pytest.approx(expected + 80.0, abs=0.6)
    line = checks["01-thru"].line()
    assert re.search(r"expected about -90\.0 dBm at the dongle, read -(89|90)\.\d -- OK$", line), line
    log = (tmp_path / "s" / LOG_NAME).read_text()
    assert "check 01-thru:" in log and "check 03-step-45:" in log


def test_generator_off_is_caught(tmp_path):
    # a generator switched off: nothing but the thermal noise reaches the dongle (-250 dBm is no tone)
    result = run(tmp_path, BenchTruth(generator_dbm=-250.0))
    for c in result.checks:
        assert not c.passed
        assert "no tone" in c.line() and "generator on" in c.line()
    assert sum("CHECK FAILED" in w for w in result.warnings) == 3


@pytest.mark.parametrize("full_scale", [True, False])
def test_wrong_attenuator_setting_is_caught(tmp_path, full_scale):
    # the operator left the attenuator 10 dB higher than the plan's 60 dB step asks
    truth = BenchTruth(attenuator_errors_db=((60.0, 10.0),))
    result = run(tmp_path, truth, plan=make_plan(full_scale=full_scale))
    checks = by_name(result)
    assert checks["01-thru"].passed and checks["03-step-45"].passed
    bad = checks["02-step-60"]
    assert not bad.passed
    assert "weaker" in bad.line() and "attenuator" in bad.line()
    # without full_scale_dbm the thru capture fixed the conversion; the miss is still about 10 dB
    assert "-10." in bad.problems[0] or "-9." in bad.problems[0]


def test_clipping_is_caught(tmp_path):
    # the generator really puts out 30 dB more than the plan says: the 45 dB step reaches +25 dBFS
    result = run(tmp_path, BenchTruth(generator_dbm=-10.0))
    c = by_name(result)["03-step-45"]
    assert not c.passed and c.level.clipped
    assert "clip" in c.line() and "add attenuation" in c.line()


def test_operator_captures_again_after_a_failed_check(tmp_path):
    answers = iter(["", "r", "", ""])  # capture thru; its check fails: again; keep the second one
    result = run(tmp_path, BenchTruth(generator_dbm=-250.0), plan=make_plan(steps=STEPS.split("[[step]]\nname = \"step-60\"")[0]),
                 yes=False, prompt=lambda msg: next(answers))
    assert [p.name for p in result.written] == ["01-thru.sigmf-meta"]
    assert len(result.checks) == 2
    moved = sorted(p.name for p in (tmp_path / "s" / REPLACED_DIR).iterdir())
    assert len(moved) == 2 and moved[0].startswith("01-thru.")
    assert "captures 01-thru again after the failed check" in (tmp_path / "s" / LOG_NAME).read_text()
    assert any("kept by the operator" in w for w in result.warnings)


def test_stop_on_failure_stops_an_unattended_run(tmp_path):
    truth = BenchTruth(attenuator_errors_db=((60.0, 10.0),))
    result = run(tmp_path, truth, plan=make_plan(check="[check]\nstop_on_failure = true\nlevel_tolerance_db = 2"))
    assert result.stopped
    assert [p.name for p in result.written] == ["01-thru.sigmf-meta", "02-step-60.sigmf-meta"]
    assert "stop_on_failure" in (tmp_path / "s" / LOG_NAME).read_text()


def test_the_check_line_in_yes_runs_and_json(tmp_path, capsys):
    plan_file = tmp_path / "p.toml"
    plan_file.write_text(HEAD.format(full_scale="full_scale_dbm = -80.0", check="") + STEPS)
    code = main(["capture", str(plan_file), "--out", str(tmp_path / "s"), "--device", "simulated", "--seed", "1",
                 "--yes", "--json"])
    out, err = capsys.readouterr()
    assert code == 0
    doc = json.loads(out)
    assert doc["checks_failed"] == 0 and len(doc["checks"]) == 3
    assert doc["checks"][0]["tone_dbm"] == pytest.approx(-90.0, abs=0.6)
    assert err.count("check 0") == 3


DRIFT_STEPS = """
[[step]]
name = "ladder-10"
role = "step"
attenuation_db = 50

[[step]]
name = "dut"
role = "dut"
attenuation_db = 50

[[step]]
name = "ladder-10-after"
role = "step"
attenuation_db = 50
"""


def test_redo_of_a_drift_step_warns_and_offers_its_partner(tmp_path):
    plan = make_plan(steps=DRIFT_STEPS)
    assert drift_partners(plan) == {"dut": ["ladder-10-after"], "ladder-10": ["ladder-10-after"]}
    run(tmp_path, plan=plan)
    unattended = run(tmp_path, plan=plan, redo=("dut",))
    assert any("--redo ladder-10-after" in w for w in unattended.warnings)
    assert [p.name for p in unattended.written] == ["02-dut.sigmf-meta"]
    asked = []

    def prompt(msg):
        asked.append(msg)
        return ""  # yes to the partner, then Enter at each step

    attended = run(tmp_path, plan=plan, redo=("dut",), yes=False, prompt=prompt)
    assert "Capture 'ladder-10-after' again too?" in asked[0]
    assert [p.name for p in attended.written] == ["02-dut.sigmf-meta", "03-ladder-10-after.sigmf-meta"]


def test_bias_tee_with_a_generator_is_refused_unless_forced(tmp_path):
    text = HEAD.format(full_scale="bias_tee = true", check="") + STEPS
    with pytest.raises(UsageError, match="bias tee ON.*thru"):
        run(tmp_path, plan=parse_plan(text, "bt.toml"))
    result = run(tmp_path, plan=parse_plan(text, "bt.toml"), force=True)
    assert any("DC block" in w for w in result.warnings)


def test_interrupt_is_logged_and_the_resume_command_printed(tmp_path, monkeypatch, capsys):
    plan_file = tmp_path / "p.toml"
    plan_file.write_text(HEAD.format(full_scale="", check="") + STEPS)
    calls = {"n": 0}
    real = SimulatedBench.read_bytes

    def read_then_interrupt(self, n):
        calls["n"] += 1
        if calls["n"] > 3:
            raise KeyboardInterrupt
        return real(self, n)

    monkeypatch.setattr(SimulatedBench, "read_bytes", read_then_interrupt)
    code = main(["capture", str(plan_file), "--out", str(tmp_path / "s"), "--device", "simulated", "--yes"])
    assert code == 130
    err = capsys.readouterr().err
    assert f"rxbench capture {plan_file} --out {tmp_path / 's'} --device simulated --yes" in err
    assert "interrupted by the operator" in (tmp_path / "s" / LOG_NAME).read_text()


NOISE_STEPS = """
[[step]]
name = "cold"
role = "cold"

[[step]]
name = "hot"
role = "hot"
"""


@pytest.mark.parametrize("enr_db, passed", [(15.0, True), (-60.0, False)])
def test_noise_source_left_off_is_caught(tmp_path, enr_db, passed):
    # Y = (ENR + F) / F (linear; the Y-factor method, Pozar, Microwave Engineering, from memory): with the
    # simulated 6.5 dB-NF dongle a 15 dB ENR gives about 9 dB; a source left off gives 0 dB.
    plan = parse_plan(HEAD.format(full_scale="", check="") + "[noise_source]\nenr_db = 15.0\n" + NOISE_STEPS,
                      "noise.toml")
    result = run(tmp_path, BenchTruth(enr_db=enr_db), plan=plan)
    hot = by_name(result)["02-hot"]
    assert hot.passed is passed
    assert "no tone" not in hot.line()
    if not passed:
        assert "noise source powered" in hot.line()
