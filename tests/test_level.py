"""``rxbench level``, the live level readout, on the simulated bench: a few updates and a clean stop,
JSON lines that parse and read what the bench holds, Ctrl-C as an ordinary stop, the input-level guard.

The simulated dongle reaches full scale at -80 dBm at 30 dB gain (bench/simulated.py).
"""

from __future__ import annotations

import json

import pytest

from rxbench.cli import main
from rxbench.commands.level import bar
from rxbench.simulated import SimulatedBench

BASE = ["level", "--device", "simulated", "--seed", "4", "--center", "28.4e6", "--generator-dbm", "-40",
        "--attenuation-db", "50", "--full-scale-dbm", "-80", "--tone-offset", "10000", "--interval", "0.1"]


def test_json_lines_one_per_update(capsys):
    assert main(BASE + ["--updates", "3", "--json"]) == 0
    out, err = capsys.readouterr()
    docs = [json.loads(line) for line in out.splitlines()]
    assert [d["update"] for d in docs] == [1, 2, 3]
    for d in docs:
        # generator -40 dBm through 50 dB (the simulated attenuator reads 50.2 dB there)
        assert d["tone_dbm"] == pytest.approx(-90.2, abs=0.5)
        assert d["tone_dbfs"] == pytest.approx(d["tone_dbm"] + 80.0)
        assert d["expected_input_dbm"] == -90.0
        assert d["snr_db"] > 30 and d["clip_fraction"] == 0.0 and not d["clipped"]
        assert d["tone_offset_hz"] == pytest.approx(10000, abs=50)  # the 1.5 ppm dongle error moves it
    assert docs[0]["time_s"] <= docs[1]["time_s"] <= docs[2]["time_s"]
    assert "stopped after 3 update(s)" in err


def test_text_updates_with_a_bar_and_clipping_flag(capsys):
    assert main(BASE[:-4] + ["--attenuation-db", "20", "--interval", "0.1", "--updates", "2"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert len(lines) == 2  # not a terminal: one line per update
    assert all(line.startswith("[") and "CLIPPING" in line for line in lines)


def test_ctrl_c_is_a_clean_stop(monkeypatch, capsys):
    calls = {"n": 0}
    real = SimulatedBench.read_bytes

    def interrupted(self, n):
        calls["n"] += 1
        if calls["n"] == 4:  # settling read, then two updates, then Ctrl-C
            raise KeyboardInterrupt
        return real(self, n)

    monkeypatch.setattr(SimulatedBench, "read_bytes", interrupted)
    assert main(BASE + ["--json"]) == 0
    out, err = capsys.readouterr()
    assert len([json.loads(line) for line in out.splitlines()]) == 2
    assert "stopped after 2 update(s)" in err


def test_the_input_level_guard_applies(capsys):
    args = ["level", "--device", "simulated", "--center", "28.4e6", "--generator-dbm", "10", "--updates", "1"]
    assert main(args) == 2
    err = capsys.readouterr().err
    assert "would reach the dongle's input" in err and "Traceback" not in err


def test_bar_spans_full_scale():
    assert bar(0.0) == "[" + "#" * 30 + "]"
    assert bar(-200.0) == "[" + "." * 29 + "|]"
    assert bar(None).strip("[] ") == ""
