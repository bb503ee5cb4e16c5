"""``rxbench inspect`` in-process: the JSON interface and the bad-input contract (one line, exit 2)."""

import json

import numpy as np
import pytest

from rxbench.cli import main
from rxbench.recordings import write_sigmf
from tests.conftest import tone_capture


@pytest.fixture
def capture(tmp_path, rng):
    raw = tone_capture(rng, tone_dbfs=-30.0, sample_rate_hz=250e3, duration_s=0.3, cu8=True)
    return write_sigmf(tmp_path / "thru", raw, sample_rate_hz=250e3, center_hz=28.2e6)


def test_json_has_the_public_keys(capture, capsys):
    assert main(["inspect", str(capture), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)  # exactly one JSON document
    t = out["tone"]
    for key in ("offset_hz", "frequency_hz", "power_dbfs", "cn0_dbhz", "snr_db", "snr_bandwidth_hz"):
        assert isinstance(t[key], float)
    assert t["frequency_hz"] == pytest.approx(28.2e6 + 12345.6, abs=5)
    assert t["power_dbfs"] == pytest.approx(-30.0, abs=0.1)
    assert isinstance(out["noise"]["density_dbfs_per_hz"], float)
    assert out["clip_fraction"] == 0.0 and out["warnings"] == []


def test_human_output(capture, capsys):
    assert main(["inspect", str(capture)]) == 0
    text = capsys.readouterr().out
    assert "dBFS" in text and "C/N0" in text and "dB-Hz" in text


def _one_clean_line(capsys):
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err
    return err


@pytest.mark.parametrize(
    "content, args, message",
    [
        (None, [], "no such file"),
        (b"", ["--format", "cu8", "--rate", "1e6"], "empty"),
        (b"\x80" * 4097, ["--format", "cu8", "--rate", "1e6"], "truncated"),
        (b"\x80" * 64, ["--format", "cu8"], "--rate"),
        (b"\x80" * 64, [], "unknown file type"),
        (b"\x80" * 64, ["--format", "cu8", "--rate", "1e6"], "shorter than one"),
        (np.full(20000, np.nan, np.float32).tobytes(), ["--format", "cf32", "--rate", "1e6"], "NaN"),
        (np.full(20000, 0.5, np.float32).tobytes(), ["--format", "cf32", "--rate", "1e6"], "all samples are equal"),
    ],
)
def test_bad_input_is_one_line_and_exit_2(tmp_path, capsys, content, args, message):
    p = tmp_path / "capture.bin"
    if content is not None:
        p.write_bytes(content)
    assert main(["inspect", str(p), *args]) == 2
    err = _one_clean_line(capsys)
    assert message in err and "capture.bin" in err


def test_bad_option_is_one_line_and_exit_2(capsys):
    assert main(["inspect"]) == 2
    _one_clean_line(capsys)
    assert main(["inspect", "x", "--format", "cu9"]) == 2
    _one_clean_line(capsys)


def test_warning_goes_to_stderr_and_json(tmp_path, rng, capsys):
    from tests.conftest import TEST_DONGLE

    raw = tone_capture(rng, tone_dbfs=2.0, sample_rate_hz=250e3, duration_s=0.3, cu8=True, dongle=TEST_DONGLE)
    meta = write_sigmf(tmp_path / "loud", raw, sample_rate_hz=250e3)
    assert main(["inspect", str(meta), "--json"]) == 0
    io = capsys.readouterr()
    out = json.loads(io.out)
    assert out["clip_fraction"] > 0 and any("clipping" in w for w in out["warnings"])
    assert "clipping" in io.err
