"""Running plans into session folders on the simulated bench: what is written, resuming, never
overwriting, the input-level guard, settling, operator prompts, interruption."""

from __future__ import annotations

import dataclasses
import hashlib
import io
import json

import numpy as np
import pytest

from rxbench.reading import read_capture
from rxbench.capture import LOG_NAME, PLAN_NAME, REPLACED_DIR, run_session, stdin_prompt
from rxbench.cli import main
from rxbench.errors import CaptureError, DeviceError, UsageError
from rxbench.plan import parse_plan
from rxbench.recordings import open_capture
from rxbench.simulated import BenchTruth, SimulatedBench
from rxbench.dsp.units import KT0_DBM_PER_HZ, T0_K, db_from_power, noise_temperature_from_nf_db, power_from_db

HEAD = """\
title = "simulated session"

[dongle]
sample_rate_hz = 250000
gain_db = 30.0
settle_s = 0.05

[generator]
level_dbm = -40.0
offset_hz = 20000

[noise_source]
enr_db = 15.0

[defaults]
center_hz = 28.4e6
duration_s = 0.2
"""

STEPS = """
[[step]]
name = "thru"
role = "thru"
attenuation_db = 50

[[step]]
name = "dut"
role = "dut"
attenuation_db = 50

[[step]]
name = "step-60"
role = "step"
attenuation_db = 60

[[step]]
name = "cold"
role = "cold"

[[step]]
name = "hot"
role = "hot"

[[step]]
name = "load"
role = "load"

[[step]]
name = "antenna"
role = "antenna"
"""

TRUTH = BenchTruth(drift_hz_per_s=0.0)


def plan(text=HEAD + STEPS):
    return parse_plan(text, "sim.toml")


def digest(path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def session_files(session):
    return {p.name: digest(p) for p in session.iterdir() if p.is_file() and p.name != LOG_NAME}


@pytest.fixture(scope="module")
def recorded(tmp_path_factory):
    session = tmp_path_factory.mktemp("sim") / "session"
    metas = run_session(plan(), session, SimulatedBench(truth=TRUTH, seed=7), yes=True).written
    return session, metas


def reading(session, name, tone=True):
    cap = open_capture(session / f"{name}.sigmf-meta")
    return cap, read_capture(cap, near_hz=cap.extra.get("tone_offset_hz"), want_tone=tone)


def test_session_layout_and_metadata(recorded):
    session, metas = recorded
    assert [m.name for m in metas] == [f"{n}.sigmf-meta" for n in
                                       ("01-thru", "02-dut", "03-step-60", "04-cold", "05-hot", "06-load", "07-antenna")]
    assert (session / PLAN_NAME).read_text() == HEAD + STEPS
    log = (session / LOG_NAME).read_text()
    assert log.count("written") == 7 and "run finished" in log
    cap = open_capture(metas[1])
    x = cap.extra
    assert (x["role"], x["step"], x["attenuation_db"], x["gain_db"], x["generator_dbm"], x["with_dut"]) == \
        ("dut", "dut", 50.0, 30.0, -40.0, True)
    assert x["tone_offset_hz"] == 20000.0 and x["dropped_samples"] == 0 and x["simulated"] is True
    assert cap.datatype == "cu8" and cap.sample_rate_hz == 250000 and cap.center_hz == 28.4e6
    assert cap.datetime and cap.n_samples >= 0.2 * 250000
    hot = open_capture(metas[4]).extra
    assert hot["role"] == "hot" and hot["enr_db"] == 15.0 and "generator_dbm" not in hot
    assert not any(p.name.startswith(".") for p in session.iterdir())  # no temporaries left


def test_tone_levels_follow_the_bench(recorded):
    session, _ = recorded
    gain = TRUTH.conversion_gain_db(30.0)
    _, thru = reading(session, "01-thru")
    expected = -40.0 - TRUTH.attenuation_db(50) + gain  # dBFS = dBm at the input + conversion gain
    assert thru.tone.power_dbfs == pytest.approx(expected, abs=3 * thru.tone.u_power_db + 0.03)
    _, step = reading(session, "03-step-60")
    assert thru.tone.power_dbfs - step.tone.power_dbfs == pytest.approx(
        TRUTH.attenuation_db(60) - TRUTH.attenuation_db(50), abs=0.05)
    _, dut = reading(session, "02-dut")
    tone_hz = 28.4e6 + 20000 + TRUTH.freq_offset_ppm * 28.4  # the dongle's frequency error moves it
    assert thru.tone.power_dbfs - dut.tone.power_dbfs == pytest.approx(TRUTH.dut_loss_db(tone_hz), abs=0.05)


def test_noise_levels_follow_physics(recorded):
    session, _ = recorded
    gain = TRUTH.conversion_gain_db(30.0)
    te_k = noise_temperature_from_nf_db(TRUTH.dongle_nf_db)
    _, load = reading(session, "06-load", tone=False)
    # a matched load at T0 gives kT0 (-173.98 dBm/Hz, k from CODATA via scipy.constants) plus the NF
    assert db_from_power(load.floor.density) == pytest.approx(KT0_DBM_PER_HZ + TRUTH.dongle_nf_db + gain, abs=0.15)
    _, cold = reading(session, "04-cold", tone=False)
    _, hot = reading(session, "05-hot", tone=False)
    y = hot.floor.density / cold.floor.density
    # Y-factor method: F = ENR / (Y - 1) with a cold source at T0 (Agilent AN 57-1, eq. 3-4, from memory)
    nf_db = 10 * np.log10(power_from_db(15.0) / (y - 1))
    assert nf_db == pytest.approx(TRUTH.dongle_nf_db, abs=0.2)
    _, ant = reading(session, "07-antenna", tone=False)
    ta_k = T0_K * power_from_db(TRUTH.fa_db(28.4e6))  # Ta = T0 * 10**(Fa/10) (ITU-R P.372)
    excess = db_from_power(ant.floor.density / load.floor.density)
    assert excess == pytest.approx(10 * np.log10((ta_k + te_k) / (T0_K + te_k)), abs=0.2)


def test_resume_keeps_and_skips(recorded, tmp_path):
    session, _ = recorded
    before = session_files(session)
    assert run_session(plan(), session, SimulatedBench(truth=TRUTH, seed=8), yes=True).written == []
    assert session_files(session) == before
    # a copy of the session missing one capture gets just that one back
    copy = tmp_path / "copy"
    copy.mkdir()
    for p in session.iterdir():
        if p.is_file() and not p.name.startswith("05-hot"):
            (copy / p.name).write_bytes(p.read_bytes())
    metas = run_session(plan(), copy, SimulatedBench(truth=TRUTH, seed=9), yes=True).written
    assert [m.name for m in metas] == ["05-hot.sigmf-meta"]
    assert {k: v for k, v in session_files(copy).items() if not k.startswith("05-hot")} == \
        {k: v for k, v in before.items() if not k.startswith("05-hot")}


def test_redo_moves_the_earlier_recording_aside(tmp_path):
    text = HEAD + STEPS.split("[[step]]\nname = \"dut\"")[0]  # the thru step alone
    session = tmp_path / "s"
    run_session(plan(text), session, SimulatedBench(seed=1), yes=True)
    old = digest(session / "01-thru.sigmf-data")
    metas = run_session(plan(text), session, SimulatedBench(seed=2), yes=True, redo=["thru"]).written
    assert [m.name for m in metas] == ["01-thru.sigmf-meta"]
    aside = sorted((session / REPLACED_DIR).iterdir())
    assert [p.suffix for p in aside] == [".sigmf-data", ".sigmf-meta"]
    assert digest(aside[0]) == old != digest(session / "01-thru.sigmf-data")
    with pytest.raises(Exception, match="no step named 'nope'"):
        run_session(plan(text), session, SimulatedBench(seed=2), yes=True, redo=["nope"])


def test_never_overwrites_or_mixes_sessions(tmp_path):
    one = HEAD + STEPS.split("[[step]]\nname = \"dut\"")[0]
    session = tmp_path / "s"
    run_session(plan(one), session, SimulatedBench(seed=1), yes=True)
    before = session_files(session)
    # the same plan with a comment added resumes (the session keeps its own copy)
    commented = "# checked on the bench\n" + one
    assert run_session(plan(commented), session, SimulatedBench(seed=1), yes=True).written == []
    assert session_files(session) == before
    other = one.replace("attenuation_db = 50", "attenuation_db = 55")
    with pytest.raises(UsageError, match="different plan"):
        run_session(plan(other), session, SimulatedBench(seed=1), yes=True)
    assert session_files(session) == before
    # a folder of someone else's recordings is not taken for a session
    foreign = tmp_path / "foreign"
    foreign.mkdir()
    (foreign / "x.sigmf-meta").write_text("{}")
    with pytest.raises(UsageError, match="not an rxbench session"):
        run_session(plan(one), foreign, SimulatedBench(seed=1), yes=True)
    assert sorted(p.name for p in foreign.iterdir()) == ["x.sigmf-meta"]
    # samples without metadata under a capture's name are named, kept aside unchanged, captured again
    stray = tmp_path / "stray"
    stray.mkdir()
    (stray / PLAN_NAME).write_text(one)
    (stray / "01-thru.sigmf-data").write_bytes(b"\x01" * 512)
    run = run_session(plan(one), stray, SimulatedBench(seed=1), yes=True)
    assert any("01-thru: not kept (its data has no metadata beside it)" in w for w in run.warnings)
    [aside] = (stray / ".replaced").iterdir()
    assert aside.read_bytes() == b"\x01" * 512
    assert [p.name for p in run.written] == ["01-thru.sigmf-meta"]


def test_settling_discard_removes_the_retune_transient(tmp_path):
    truth = dataclasses.replace(TRUTH, settle_s=0.02, settle_error_db=6.0)
    two_thrus = HEAD + """
[[step]]
name = "first"
role = "thru"
attenuation_db = 50

[[step]]
name = "second"
role = "thru"
attenuation_db = 50
"""
    levels = {}
    for settle in (0.05, 0.0):
        text = two_thrus.replace("settle_s = 0.05", f"settle_s = {settle}")
        session = tmp_path / f"settle-{settle}"
        run_session(plan(text), session, SimulatedBench(truth=truth, seed=3), yes=True)
        levels[settle] = [reading(session, n)[1].tone.power_dbfs for n in ("01-first", "02-second")]
    kept = levels[0.05]
    assert kept[0] == pytest.approx(kept[1], abs=0.03)
    # without the discard the first capture after tuning holds 0.02 s of a +6 dB transient in 0.2 s:
    # 10*log10(0.1*10**0.6 + 0.9) = +1.13 dB if every sample weighed the same; Welch's first Hann
    # segment weighs the opening samples less, so somewhat less shows
    uniform_db = 10 * np.log10(0.1 * 10**0.6 + 0.9)
    assert 0.5 < levels[0.0][0] - levels[0.0][1] <= uniform_db + 0.05


def test_input_level_guard(tmp_path, capsys):
    hot = HEAD.replace("level_dbm = -40.0", "level_dbm = 10.0") + """
[[step]]
name = "loud"
role = "thru"
attenuation_db = 6
"""
    session = tmp_path / "s"
    with pytest.raises(UsageError, match=r"'loud'.*\+4\.0 dBm.*--force"):
        run_session(plan(hot), session, SimulatedBench(seed=1), yes=True)
    assert not session.exists()
    run = run_session(plan(hot), session, SimulatedBench(seed=1), yes=True, force=True)
    assert len(run.written) == 1 and any("forced" in w for w in run.warnings)
    near = HEAD.replace("[dongle]", "[dongle]\nfull_scale_dbm = -80.0") + """
[[step]]
name = "near"
role = "thru"
attenuation_db = 40
"""
    run = run_session(plan(near), tmp_path / "t", SimulatedBench(seed=1), yes=True)
    assert any("'near'" in w and "clip" in w for w in run.warnings)


def test_operator_prompts(tmp_path):
    answers = iter(["", "s", "q"])
    asked = []

    def prompt(message):
        asked.append(message)
        return next(answers)

    run = run_session(plan(), tmp_path / "s", SimulatedBench(seed=1), prompt=prompt)
    assert [m.name for m in run.written] == ["01-thru.sigmf-meta"]
    assert run.skipped == ["dut"] and run.stopped
    assert "Step 1/7 'thru'" in asked[0] and "-90.0 dBm at the dongle" in asked[0]
    assert "Insert the device under test" in asked[1]
    log = (tmp_path / "s" / LOG_NAME).read_text()
    assert "operator skipped step dut" in log and "operator stopped before 03-step-60" in log


def test_closed_stdin_asks_for_yes(monkeypatch):
    monkeypatch.setattr("sys.stdin", io.StringIO(""))
    with pytest.raises(UsageError, match="--yes"):
        stdin_prompt("go? ")


class _Tty(io.StringIO):
    def isatty(self):
        return True


def test_progress_plain_when_not_a_terminal(tmp_path):
    plain, tty = io.StringIO(), _Tty()
    one = plan(HEAD + STEPS.split("[[step]]\nname = \"dut\"")[0])
    run_session(one, tmp_path / "a", SimulatedBench(seed=1), yes=True, progress=plain)
    run_session(one, tmp_path / "b", SimulatedBench(seed=1), yes=True, progress=tty)
    assert "\r" not in plain.getvalue() and "written 01-thru.sigmf-meta" in plain.getvalue()
    assert "\r" in tty.getvalue() and "%" in tty.getvalue()


class _FailingBench(SimulatedBench):
    """The dongle goes away during the second capture (after two reads), or Ctrl-C arrives."""

    def __init__(self, exc, **kw):
        super().__init__(**kw)
        self.exc, self.n_captures, self.n_reads = exc, 0, 0

    def arrange(self, capture):
        super().arrange(capture)
        self.n_captures += 1
        self.n_reads = 0

    def read_bytes(self, n):
        self.n_reads += 1
        if self.n_captures == 2 and self.n_reads == 3:
            raise self.exc
        return super().read_bytes(n)


@pytest.mark.parametrize("exc", [KeyboardInterrupt(), DeviceError("the dongle was disconnected")])
def test_interrupted_capture_is_kept_as_partial(tmp_path, exc):
    session = tmp_path / "s"
    with pytest.raises(type(exc)):
        run_session(plan(), session, _FailingBench(exc, seed=1), yes=True)
    assert (session / "01-thru.sigmf-meta").exists() and not (session / "02-dut.sigmf-meta").exists()
    partial = open_capture(session / "02-dut.partial.sigmf-meta")
    assert partial.extra["incomplete"] is True and partial.n_samples > 0
    log = (session / LOG_NAME).read_text()
    assert "02-dut" in log and "partial kept as 02-dut.partial.sigmf-meta" in log


class _DroppingBench(SimulatedBench):
    def read_bytes(self, n):
        self.dropped_bytes += 1024
        return super().read_bytes(n)


def test_dropped_samples_are_recorded_and_warned(tmp_path):
    one = plan(HEAD + STEPS.split("[[step]]\nname = \"dut\"")[0])
    run = run_session(one, tmp_path / "s", _DroppingBench(seed=1), yes=True)
    dropped = open_capture(run.written[0]).extra["dropped_samples"]
    assert dropped > 0 and dropped % 512 == 0
    assert any("dropped" in w for w in run.warnings)


def test_cli_json_and_cautions(tmp_path, capsys):
    path = tmp_path / "p.toml"
    path.write_text(HEAD + STEPS.split("[[step]]\nname = \"dut\"")[0])
    code = main(["capture", str(path), "--out", str(tmp_path / "s"), "--device", "simulated", "--seed", "4",
                 "--yes", "--json"])
    out, err = capsys.readouterr()
    assert code == 0
    doc = json.loads(out)
    assert doc["complete"] and len(doc["written"]) == 1 and "licensed practice" in doc["cautions"]
    assert "transmitter" in err and "Step 1/1" in err
    code = main(["capture", str(path), "--out", str(tmp_path / "s"), "--device", "simulated", "--yes"])
    out, _ = capsys.readouterr()
    assert code == 0 and "0 capture(s) written, 1 kept" in out and "Defer to local codes" in out


def test_a_full_disk_mid_capture_keeps_a_valid_partial_pair(tmp_path, monkeypatch, capsys):
    """The disk fills during the second capture: one line naming the problem (the last on stderr),
    exit 2, the partial a valid recording marked incomplete, no temporaries left."""
    import errno

    from rxbench.recordings import SigmfWriter

    writes = {"n": 0}

    class FillingFile:  # the recording's file on a disk that fills up at the 10th write
        def __init__(self, f):
            self.f = f

        def write(self, data):
            writes["n"] += 1
            if writes["n"] == 10:  # the first capture takes 7 writes of the simulated bench's chunks
                raise OSError(errno.ENOSPC, "No space left on device")
            return self.f.write(data)

        def __getattr__(self, name):
            return getattr(self.f, name)

    real_init = SigmfWriter.__init__

    def init(self, *a, **kw):
        real_init(self, *a, **kw)
        self._file = FillingFile(self._file)

    monkeypatch.setattr(SigmfWriter, "__init__", init)
    path = tmp_path / "p.toml"
    path.write_text(HEAD.replace("duration_s = 0.2", "duration_s = 0.8") + STEPS.split('[[step]]\nname = "step-60"')[0])
    session = tmp_path / "s"
    code = main(["capture", str(path), "--out", str(session), "--device", "simulated", "--seed", "2", "--yes"])
    err = capsys.readouterr().err
    assert code == 2
    last = err.splitlines()[-1]
    assert last == f"rxbench capture: error: {session / '02-dut.sigmf-data'}: cannot write: No space left on device"
    assert "Traceback" not in err
    assert open_capture(session / "01-thru.sigmf-meta").extra.get("incomplete") is None
    partial = open_capture(session / "02-dut.partial.sigmf-meta")
    assert partial.extra["incomplete"] is True and partial.n_samples > 0 and partial.extra["role"] == "dut"
    assert [p.name for p in session.iterdir() if p.name.startswith(".")] == []


def test_resume_verifies_what_it_keeps(tmp_path):
    """Garbage metadata, a deleted data file, a short data file and stale temporaries: each named,
    the recordings moved aside (never deleted) and captured again; a killed writer's samples kept."""
    from rxbench.recordings import SigmfWriter

    three = plan(HEAD + STEPS.split('[[step]]\nname = "cold"')[0])
    session = tmp_path / "s"
    first = run_session(three, session, SimulatedBench(seed=1), yes=True)
    assert len(first.written) == 3
    (session / "01-thru.sigmf-meta").write_text("garbage")
    (session / "02-dut.sigmf-data").unlink()
    with open(session / "03-step-60.sigmf-data", "r+b") as f:
        f.truncate(1024)
    (session / ".plan.toml.0123abcd.tmp").write_text("")  # an empty temporary of a plan copy
    killed = SigmfWriter(session / "09-x", sample_rate_hz=250e3, extra={"role": "thru"})
    killed.write(np.full(4096, 128, np.uint8))
    killed._file.flush()  # the writer is killed here: nothing of it runs again
    run = run_session(three, session, SimulatedBench(seed=2), yes=True)
    text = "\n".join(run.warnings)
    assert "01-thru: not kept (metadata is not valid JSON" in text
    assert "02-dut: not kept (its data file is missing)" in text
    assert "03-step-60: not kept (it holds 512 samples, the plan's capture 50176)" in text
    assert "removed 1 temporary file(s)" in text and ".plan.toml.0123abcd.tmp" in text
    assert "09-x.partial.sigmf-meta: kept what a capture that was killed" in text
    assert open_capture(session / "09-x.partial.sigmf-meta").n_samples == 2048
    assert [p.name for p in run.written] == ["01-thru.sigmf-meta", "02-dut.sigmf-meta", "03-step-60.sigmf-meta"]
    aside = sorted(p.name for p in (session / REPLACED_DIR).iterdir())
    assert len(aside) == 5 and sum(n.startswith("01-thru") for n in aside) == 2  # both files of 01, 02's meta, 03's pair
    assert [p.name for p in session.iterdir() if p.name.startswith(".") and p.name != REPLACED_DIR] == []
