"""Signals at random moments: SIGINT, SIGTERM and SIGHUP sent to a real ``rxbench capture`` process on
the simulated bench, from start-up to the end of the run.

Each run must end with the signal's own exit status (130, 143, 129) and one last stderr line saying
so, or finish normally if the signal came too late; the session holds only valid recordings and
valid partials (marked incomplete), and no temporaries; running the same command again resumes it
and completes the plan. The default run sends each signal a few times; the slow variant 20 times each.
"""

from __future__ import annotations

import json
import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from rxbench.capture import verify_kept
from rxbench.plan import load_plan
from rxbench.recordings import open_capture

PLAN = """
[dongle]
sample_rate_hz = 250000
gain_db = 30
settle_s = 0

[generator]
level_dbm = -60

[defaults]
center_hz = 28e6
duration_s = 0.6

[[step]]
role = "thru"
name = "thru"
attenuation_db = 20

[[step]]
role = "dut"
name = "dut"
attenuation_db = 20
repeats = 3
"""

SIGNALS = [signal.SIGINT, signal.SIGTERM, signal.SIGHUP]
WORDS = {signal.SIGINT: "interrupted", signal.SIGTERM: "SIGTERM", signal.SIGHUP: "SIGHUP"}

pytestmark = pytest.mark.skipif(not Path("/proc/self/status").exists(), reason="needs Linux /proc")


def _catches_sigterm(pid: int) -> bool:
    """True once the process has installed rxbench's handlers (SIGTERM among its caught signals)."""
    try:
        for line in Path(f"/proc/{pid}/status").read_text().splitlines():
            if line.startswith("SigCgt:"):
                return bool(int(line.split()[1], 16) >> (signal.SIGTERM - 1) & 1)
    except (OSError, ValueError):
        pass
    return False


def _capture_cmd(plan: Path, out: Path) -> list[str]:
    return [sys.executable, "-m", "rxbench", "capture", str(plan), "--out", str(out), "--device", "simulated",
            "--yes", "--seed", "3", "--json"]


def _check_session(out: Path, plan_path: Path) -> tuple[int, int]:
    """Every recording in ``out`` is valid: complete ones as the plan asks, partials marked incomplete;
    no temporaries. Returns (complete, partial) counts."""
    if not out.exists():
        return 0, 0
    hidden = [p.name for p in out.iterdir() if p.name.startswith(".") and p.name != ".replaced"]
    assert hidden == [], f"temporaries left: {hidden}"
    plan = load_plan(plan_path)  # the session's copy may not be there yet: a signal can come first
    if (out / "plan.toml").exists():
        assert (out / "plan.toml").read_text() == plan_path.read_text()  # whole, never half-written
    by_name = {c.base_name: c for c in plan.expand()}
    complete = partial = 0
    for meta in sorted(out.glob("*.sigmf-meta")):
        rec = open_capture(meta)  # valid metadata, data file present and whole samples
        assert rec.n_samples > 0
        base = meta.name[: -len(".sigmf-meta")]
        if ".partial" in base:
            assert rec.extra.get("incomplete") is True
            partial += 1
        else:
            assert verify_kept(meta, by_name[base]) is None
            complete += 1
    datas = {p.name[: -len(".sigmf-data")] for p in out.glob("*.sigmf-data")}
    metas = {p.name[: -len(".sigmf-meta")] for p in out.glob("*.sigmf-meta")}
    assert datas == metas, "every data file has its metadata and back"
    return complete, partial


def _one_run(tmp_path: Path, signum: int, rng: random.Random, k: int) -> str:
    plan = tmp_path / "plan.toml"
    plan.write_text(PLAN)
    out = tmp_path / f"s{signum}-{k}"
    proc = subprocess.Popen(_capture_cmd(plan, out), stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            stdin=subprocess.DEVNULL)
    deadline = time.monotonic() + 60
    while not _catches_sigterm(proc.pid) and proc.poll() is None and time.monotonic() < deadline:
        time.sleep(0.002)
    time.sleep(rng.uniform(0.0, 1.5))  # start-up imports, opening, any capture, or after the end
    proc.send_signal(signum)
    stdout, stderr = proc.communicate(timeout=120)
    err = stderr.decode()
    assert "Traceback" not in err and "terminate called" not in err, err
    if proc.returncode == 0:  # the signal came after the run had finished
        json.loads(stdout)
        outcome = "finished"
    else:
        assert proc.returncode == 128 + signum, (proc.returncode, err)
        assert err.splitlines()[-1].startswith("rxbench") and WORDS[signum] in err.splitlines()[-1], err
        assert stdout == b""
        outcome = "stopped"
    complete, _ = _check_session(out, plan)
    # The rerun resumes: what was complete is kept, the rest captured; the plan is then whole.
    again = subprocess.run(_capture_cmd(plan, out), capture_output=True, stdin=subprocess.DEVNULL, timeout=120)
    assert again.returncode == 0, again.stderr.decode()
    doc = json.loads(again.stdout)
    assert len(doc["kept"]) == complete and doc["complete"] is True
    assert _check_session(out, plan)[0] == len(load_plan(plan).expand())
    return outcome


def _run_many(tmp_path, times: int, seed: int):
    rng = random.Random(seed)
    outcomes = {}
    for signum in SIGNALS:
        for k in range(times):
            outcomes.setdefault(signum, []).append(_one_run(tmp_path, signum, rng, k))
    return outcomes


def test_signals_at_random_moments_keep_valid_recordings(tmp_path):
    _run_many(tmp_path, 1, seed=14)


@pytest.mark.slow
def test_signals_at_random_moments_keep_valid_recordings_20_each(tmp_path):
    outcomes = _run_many(tmp_path, 20, seed=1414)
    # Most signals land while the run is still going (otherwise the test would prove little).
    assert sum(o == "stopped" for v in outcomes.values() for o in v) >= 30


def test_interrupt_during_start_up_is_one_line(tmp_path):
    """Ctrl-C while the command's modules (numpy, scipy) are still being imported."""
    rng = random.Random(7)
    for _ in range(4):
        proc = subprocess.Popen([sys.executable, "-m", "rxbench", "inspect", str(tmp_path / "none.wav")],
                                stdout=subprocess.PIPE, stderr=subprocess.PIPE, stdin=subprocess.DEVNULL)
        while not _catches_sigterm(proc.pid) and proc.poll() is None:
            time.sleep(0.001)
        time.sleep(rng.uniform(0.0, 0.05))
        proc.send_signal(signal.SIGINT)
        _, stderr = proc.communicate(timeout=60)
        err = stderr.decode()
        assert "Traceback" not in err, err
        assert err.count("\n") == 1, err
        assert proc.returncode in (130, 2), err  # interrupted, or it had already found the file missing


def test_a_signal_that_surfaced_as_another_exception_keeps_its_status(monkeypatch, capsys):
    """numpy turns an interrupt of its own import into an ImportError: the remembered signal wins."""
    from rxbench import cli, interrupts

    monkeypatch.setattr(interrupts, "install", lambda: None)
    monkeypatch.setattr(interrupts, "_received", [int(signal.SIGTERM)])
    monkeypatch.setattr(sys, "argv", ["rxbench", "inspect", "x.wav"])

    def failing_import(argv=None):
        raise ImportError("numpy failed to import")

    monkeypatch.setattr(cli, "build_parser", failing_import)
    with pytest.raises(SystemExit) as stop:
        cli.run_console()
    assert stop.value.code == 143
    assert capsys.readouterr().err == "rxbench: terminated (SIGTERM)\n"
    # Without a signal the same ImportError is a defect and keeps its traceback.
    monkeypatch.setattr(interrupts, "_received", [])
    with pytest.raises(ImportError):
        cli.run_console()


@pytest.mark.parametrize("signum, status", [(signal.SIGINT, 0), (signal.SIGTERM, 143), (signal.SIGHUP, 129)])
def test_level_readout_stops_on_ctrl_c_and_ends_on_sigterm_sighup(signum, status):
    """Ctrl-C is the readout's ordinary stop (exit 0); SIGTERM and SIGHUP end it with their status."""
    proc = subprocess.Popen([sys.executable, "-m", "rxbench", "level", "--device", "simulated", "--center", "28.4e6",
                             "--generator-dbm", "-40", "--attenuation-db", "50", "--interval", "0.05", "--json"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, stdin=subprocess.DEVNULL)
    while not _catches_sigterm(proc.pid) and proc.poll() is None:
        time.sleep(0.002)
    import select

    ready, _, _ = select.select([proc.stdout], [], [], 60)  # the first update is out: the readout runs
    assert ready and proc.stdout.readline()
    proc.send_signal(signum)
    _, stderr = proc.communicate(timeout=60)
    err = stderr.decode()
    assert proc.returncode == status, err
    assert "Traceback" not in err
    ending = {signal.SIGTERM: "rxbench level: terminated (SIGTERM)", signal.SIGHUP: "rxbench level: hung up (SIGHUP)"}
    if signum in ending:
        assert err.splitlines()[-1] == ending[signum]
