"""The bad-input matrix: every command, every kind of bad input -> one line on stderr naming the file
or option and the problem, exit code 2, no traceback, nothing on stdout; or, where a number can still
be given, the number with a warning."""

from __future__ import annotations

import json

import numpy as np
import pytest

from rxbench.cli import main
from rxbench.recordings import write_sigmf
from tests.conftest import tone_capture

FS = 250e3


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("bad")
    rng = np.random.default_rng(5)

    def cap(name, tone_dbfs=-30.0, rate=FS, center=28.2e6, **kw):
        raw = tone_capture(rng, tone_dbfs=tone_dbfs, sample_rate_hz=rate, duration_s=0.2, cu8=True, **kw)
        return str(write_sigmf(d / name, raw, sample_rate_hz=rate, center_hz=center, extra={"gain_db": 30.0}))

    f = {
        "thru": cap("thru"),
        "dut": cap("dut", tone_dbfs=-33.0),
        "other_rate": cap("other_rate", rate=2 * FS),
        "other_centre": cap("other_centre", center=14.1e6),
        "no_tone": cap("no_tone", tone_dbfs=-200.0),
        "deep": cap("deep", tone_dbfs=-60.0),
        "missing": str(d / "missing.sigmf-meta"),
    }
    raw = {
        "empty": b"",
        "odd": b"\x80" * 5001,
        "short": b"\x80" * 40,
        "constant": np.full(40000, 0.25, np.float32).tobytes(),
        "nan": np.concatenate([np.zeros(40000, np.float32), [np.nan, 0]]).astype(np.float32).tobytes(),
        "inf": np.concatenate([np.zeros(40000, np.float32), [np.inf, 0]]).astype(np.float32).tobytes(),
    }
    for name, content in raw.items():
        (d / f"{name}.bin").write_bytes(content)
        f[name] = str(d / f"{name}.bin")
    meta_cases = {
        "bad_json": "{",
        "no_rate": {"global": {"core:datatype": "cu8", "core:version": "1.2.0"}},
        "unknown_type": {"global": {"core:datatype": "cu12_le", "core:sample_rate": 1e6, "core:version": "1.2.0"}},
        "big_endian": {"global": {"core:datatype": "ci16_be", "core:sample_rate": 1e6, "core:version": "1.2.0"}},
        "multichannel": {"global": {"core:datatype": "cu8", "core:sample_rate": 1e6, "core:version": "1.2.0",
                                    "core:num_channels": 2}},
        "schema": {"global": {"core:datatype": "cu8", "core:sample_rate": "fast", "core:version": "1.2.0"}},
    }
    for name, meta in meta_cases.items():
        (d / f"{name}.sigmf-data").write_bytes(b"\x80" * 64)
        text = meta if isinstance(meta, str) else json.dumps({**meta, "captures": [], "annotations": []})
        (d / f"{name}.sigmf-meta").write_text(text)
        f[name] = str(d / f"{name}.sigmf-meta")
    (d / "enr_bad.csv").write_text("frequency_hz,enr_db\n1e6,15\n2e6,abc\n")
    f["enr_bad"] = str(d / "enr_bad.csv")
    (d / "plan_bad.toml").write_text('[dongle]\nsample_rate_hz = 2.4e6\ngain_db = 30\n\n[[step]]\nrole = "thru"\n'
                                     'name = "a"\ncenter_hz = 28e6\nduration_s = -1\n')
    f["plan_bad"] = str(d / "plan_bad.toml")
    f["dir"] = str(d)
    return f


RAW = ["--format", "cf32", "--rate", "1e6"]
U8 = ["--format", "cu8", "--rate", "1e6"]

# (id, argv template, what the error line must contain). {name} is replaced by the fixture's path.
ERRORS = [
    ("missing file", ["inspect", "{missing}"], "no such file"),
    ("empty file", ["inspect", "{empty}", *U8], "empty"),
    ("odd byte count", ["inspect", "{odd}", *U8], "truncated"),
    ("shorter than one segment", ["inspect", "{short}", *U8], "shorter than one"),
    ("all constant", ["inspect", "{constant}", *RAW], "all samples are equal"),
    ("NaN samples", ["inspect", "{nan}", *RAW], "NaN"),
    ("Inf samples", ["inspect", "{inf}", *RAW], "NaN or infinite"),
    ("unreadable metadata", ["inspect", "{bad_json}"], "not valid JSON"),
    ("no sample rate", ["inspect", "{no_rate}"], "no sample rate"),
    ("unknown datatype", ["inspect", "{unknown_type}"], "datatype"),
    ("big-endian datatype", ["inspect", "{big_endian}"], "big-endian"),
    ("multi-channel", ["inspect", "{multichannel}"], "channels"),
    ("schema-invalid metadata", ["inspect", "{schema}"], "SigMF schema"),
    ("raw without rate", ["inspect", "{odd}", "--format", "cu8"], "--rate"),
    ("loss: rates differ", ["loss", "--thru", "{thru}", "--dut", "{other_rate}"], "sample rate"),
    ("loss: centres differ", ["loss", "--thru", "{thru}", "--dut", "{other_centre}"], "centre frequency"),
    ("loss: missing DUT file", ["loss", "--thru", "{thru}", "--dut", "{missing}"], "no such file"),
    ("loss: tone absent", ["loss", "--thru", "{no_tone}", "--dut", "{dut}"], "tone"),
    ("loss: duplicated ladder step", ["loss", "--step", "0={thru}", "--step", "0={dut}", "--dut", "{dut}"], "once"),
    ("loss: non-monotonic ladder", ["loss", "--step", "0={dut}", "--step", "3={thru}", "--dut", "{dut}"], "fall"),
    ("loss: DUT outside the ladder", ["loss", "--step", "0={thru}", "--step", "3={dut}", "--dut", "{deep}"],
     "ladder"),
    ("ladder: too few steps", ["ladder", "--step", "0={thru}"], "at least"),
    ("nf: malformed ENR table", ["nf", "--hot", "{thru}", "--cold", "{dut}", "--enr-table", "{enr_bad}"], "line 3"),
    ("nf: no ENR", ["nf", "--hot", "{thru}", "--cold", "{dut}"], "ENR"),
    ("excess: centres differ", ["excess", "--antenna", "{thru}", "--load", "{other_centre}"], "centre frequency"),
    ("compare: rates differ", ["compare", "--a", "{thru}", "--b", "{other_rate}"], "sample rate"),
    ("predict: outside P.372", ["predict", "--loss-db", "3", "--frequency", "1e9", "--environment", "city",
                                "--rx-nf-db", "8"], "0.3-250 MHz"),
    ("predict: negative loss", ["predict", "--loss-db", "-1", "--frequency", "14e6", "--rx-nf-db", "8"], "loss"),
    ("swr: below 1", ["swr", "--measured", "0.9", "--loss-db", "1"], "SWR"),
    ("swr: loss larger than the reading allows", ["swr", "--measured", "3", "--loss-db", "10"], "loss"),
    ("capture: malformed plan", ["capture", "{plan_bad}", "--out", "{dir}/s", "--device", "simulated", "--yes"],
     "line"),
    ("analyze: not a session", ["analyze", "{missing}"], "no such"),
    ("synth: FLAC at dongle rate", ["synth", "{dir}/x.flac", "--rate", "2.4e6"], "FLAC"),
    ("unknown option", ["inspect", "{thru}", "--frobnicate"], "unrecognized"),
]


@pytest.mark.parametrize("argv, needle", [pytest.param(a, n, id=i) for i, a, n in ERRORS])
def test_bad_input_is_one_line_and_exit_2(files, capsys, argv, needle):
    code = main([a.format(**files) for a in argv])
    io = capsys.readouterr()
    assert code == 2, io.err
    assert io.out == ""
    assert io.err.count("\n") == 1 and "Traceback" not in io.err
    assert needle in io.err


# Where a number can still be given: the number, with a warning.
WARNINGS = [
    ("clipped capture", ["inspect", "{loud}"], "clipping"),
    ("tone near the noise", ["inspect", "{weak}"], "above the noise"),
    ("swr through heavy loss", ["swr", "--measured", "1.2", "--loss-db", "8"], "measure at the load"),
]


@pytest.fixture(scope="module")
def warn_files(files, tmp_path_factory):
    from tests.conftest import TEST_DONGLE, noise_density_truth

    d = tmp_path_factory.mktemp("warn")
    rng = np.random.default_rng(9)
    out = dict(files)
    loud = tone_capture(rng, tone_dbfs=2.0, sample_rate_hz=FS, duration_s=0.2, cu8=True)
    out["loud"] = str(write_sigmf(d / "loud", loud, sample_rate_hz=FS))
    weak_dbfs = 10 * np.log10(noise_density_truth(TEST_DONGLE, FS) * FS / 256) + 3  # ~3 dB over one bin
    weak = tone_capture(rng, tone_dbfs=weak_dbfs, sample_rate_hz=FS, duration_s=0.2, cu8=True)
    out["weak"] = str(write_sigmf(d / "weak", weak, sample_rate_hz=FS))
    return out


@pytest.mark.parametrize("argv, needle", [pytest.param(a, n, id=i) for i, a, n in WARNINGS])
def test_questionable_numbers_carry_a_warning(warn_files, capsys, argv, needle):
    code = main([a.format(**warn_files) for a in argv] + ["--json"])
    io = capsys.readouterr()
    assert code == 0, io.err
    doc = json.loads(io.out)
    assert any(needle in w for w in doc["warnings"]), doc["warnings"]
    assert needle in io.err
