"""The bad-input matrix: every command, every kind of bad input -> one line on stderr naming the file
or option and the problem, exit code 2, no traceback, nothing on stdout; valid input whose captures
do not give the number -> the same, with exit code 1; --debug shows the traceback; an interrupt is
exit code 130; or, where a number can still be given, the number with a warning."""

from __future__ import annotations

import hashlib
import json
import os
from pathlib import Path

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
    _hostile_files(d, f)
    return f


PLAN_HEAD = '[dongle]\nsample_rate_hz = 2.4e6\ngain_db = 30\n\n'
STEP = '[[step]]\nrole = "thru"\nname = "a"\ncenter_hz = 28e6\nduration_s = 0.1\n'


def _hostile_files(d: Path, f: dict) -> None:
    """Files a hostile user (or a bad day) hands over: pipes, devices, huge or deeply nested text,
    absurd numbers in metadata and plans."""
    for key, name in (("fifo_wav", "fifo.wav"), ("fifo_toml", "fifo.toml"), ("fifo_csv", "fifo.csv"),
                      ("fifo_meta", "fifo_meta.sigmf-meta")):
        os.mkfifo(d / name)
        f[key] = str(d / name)
    (d / "fifo_meta.sigmf-data").write_bytes(b"\x80" * 64)
    (d / "zero.sigmf-meta").symlink_to("/dev/zero")
    (d / "zero.sigmf-data").write_bytes(b"\x80" * 64)
    f["zero_meta"] = str(d / "zero.sigmf-meta")
    (d / "big.toml").write_text(PLAN_HEAD + STEP + ("# padding\n" * 200_000))
    f["big_toml"] = str(d / "big.toml")
    (d / "nested.sigmf-meta").write_text('{"global": ' + "[" * 100_000 + "]" * 100_000 + "}")
    (d / "nested.sigmf-data").write_bytes(b"\x80" * 64)
    f["deep_meta"] = str(d / "nested.sigmf-meta")
    (d / "nested.toml").write_text("a = " + "[" * 100_000 + "]" * 100_000 + "\n")
    f["deep_toml"] = str(d / "nested.toml")
    good = json.loads(Path(f["thru"]).read_text())
    for name, change in {
        "tiny_rate": lambda m: m["global"].__setitem__("core:sample_rate", 1e-300),
        "neg_header": lambda m: m["global"].__setitem__("core:header_bytes", -4),
        "str_header": lambda m: m["global"].__setitem__("core:header_bytes", "abc"),
        "huge_centre": lambda m: m["captures"][0].__setitem__("core:frequency", 1e300),
        "null_channels": lambda m: m["global"].__setitem__("core:num_channels", None),
    }.items():
        meta = json.loads(json.dumps(good))
        change(meta)
        (d / f"{name}.sigmf-meta").write_text(json.dumps(meta))
        (d / f"{name}.sigmf-data").write_bytes(Path(f["thru"][: -len("meta")] + "data").read_bytes())
        f[name] = str(d / f"{name}.sigmf-meta")
    plans = {
        "plan_huge": PLAN_HEAD.replace("2.4e6", "3.2e6") + "".join(
            f'[[step]]\nrole = "thru"\nname = "s{i}"\ncenter_hz = 28e6\nduration_s = 3600\nrepeats = 100\n\n'
            for i in range(10)),
        "plan_enr_huge": PLAN_HEAD + '[noise_source]\nenr_table = [[1e6, 15.0], [1e300, 15.0]]\n\n' + STEP,
        "plan_enr_neg": PLAN_HEAD + '[noise_source]\nenr_table = [[-1e6, 15.0], [1e6, 15.0]]\n\n' + STEP,
        "plan_name_nl": PLAN_HEAD + STEP.replace('name = "a"', 'name = "a\\n"'),
    }
    for name, text in plans.items():
        (d / f"{name}.toml").write_text(text)
        f[name] = str(d / f"{name}.toml")
    (d / "enr_huge.csv").write_text("frequency_hz,enr_db\n1e6,15\n1e300,15\n")
    f["enr_huge"] = str(d / "enr_huge.csv")
    (d / "enr_ok.csv").write_text("frequency_hz,enr_db\n1e6,15\n1e9,15\n")
    f["enr_ok"] = str(d / "enr_ok.csv")
    f["thru_data"] = f["thru"][: -len("meta")] + "data"
    f["thru_base"] = f["thru"][: -len(".sigmf-meta")]
    assert main(["synth", str(d / "hot"), "--no-tone", "--enr-db", "15", "--rate", "250e3", "--duration", "0.2"]) == 0
    assert main(["synth", str(d / "cold"), "--no-tone", "--rate", "250e3", "--duration", "0.2", "--seed", "2"]) == 0
    f["hot"], f["cold"] = str(d / "hot.sigmf-meta"), str(d / "cold.sigmf-meta")
    f["hot_data"] = str(d / "hot.sigmf-data")


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
    ("loss: duplicated ladder step", ["loss", "--step", "0={thru}", "--step", "0={dut}", "--dut", "{dut}"], "once"),
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
    # Not a regular file: a FIFO would block for ever, a device fill memory.
    ("inspect: WAV a FIFO", ["inspect", "{fifo_wav}"], "not a regular file"),
    ("inspect: metadata a FIFO", ["inspect", "{fifo_meta}"], "not a regular file"),
    ("inspect: metadata a device", ["inspect", "{zero_meta}"], "not a regular file"),
    ("capture: plan a FIFO", ["capture", "{fifo_toml}", "--out", "{dir}/s", "--device", "simulated", "--yes"],
     "not a regular file"),
    ("capture: plan a device", ["capture", "/dev/zero", "--out", "{dir}/s", "--device", "simulated", "--yes"],
     "not a regular file"),
    ("nf: ENR table a FIFO", ["nf", "--hot", "{hot}", "--cold", "{cold}", "--enr-table", "{fifo_csv}"],
     "not a regular file"),
    ("nf: ENR table a device", ["nf", "--hot", "{hot}", "--cold", "{cold}", "--enr-table", "/dev/zero"],
     "not a regular file"),
    ("analyze: a device", ["analyze", "/dev/zero"], "is a file"),
    # Size and nesting of text inputs.
    ("capture: plan too large", ["capture", "{big_toml}", "--out", "{dir}/s", "--device", "simulated", "--yes"],
     "too large"),
    ("inspect: metadata nested too deeply", ["inspect", "{deep_meta}"], "nested too deeply"),
    ("loss: metadata nested too deeply", ["loss", "--thru", "{deep_meta}", "--dut", "{dut}"], "nested too deeply"),
    ("capture: plan nested too deeply", ["capture", "{deep_toml}", "--out", "{dir}/s", "--device", "simulated",
                                         "--yes"], "nested too deeply"),
    # Numbers that overflow or make no physical sense, from flags.
    ("nf: level 3500 dBm", ["nf", "--tone", "{thru}", "--level-dbm", "3500"], "--level-dbm"),
    ("inspect: NaN centre", ["inspect", "{thru}", "--center", "nan"], "--center"),
    ("inspect: infinite SNR bandwidth", ["inspect", "{thru}", "--snr-bandwidth", "inf"], "--snr-bandwidth"),
    ("inspect: tone near 1e300 Hz", ["inspect", "{thru}", "--near", "1e300"], "--near"),
    ("inspect: raw rate 1e-300", ["inspect", "{odd}", "--format", "cu8", "--rate", "1e-300"], "--rate"),
    ("loss: NaN near", ["loss", "--thru", "{thru}", "--dut", "{dut}", "--near", "nan"], "--near"),
    ("compare: zero SNR bandwidth", ["compare", "--a", "{thru}", "--b", "{dut}", "--snr-bandwidth", "0"],
     "--snr-bandwidth"),
    ("predict: infinite frequency", ["predict", "--loss-db", "1", "--frequency", "inf", "--rx-nf-db", "8"],
     "--frequency"),
    ("synth: infinite rate", ["synth", "{dir}/o", "--rate", "inf"], "--rate"),
    ("synth: rate 1e300", ["synth", "{dir}/o", "--rate", "1e300"], "--rate"),
    ("synth: duration 1e9 s", ["synth", "{dir}/o", "--duration", "1e9"], "--duration"),
    ("synth: NaN attenuation", ["synth", "{dir}/o", "--attenuation-db", "nan"], "--attenuation-db"),
    ("synth: ENR 1e300", ["synth", "{dir}/o", "--enr-db", "1e300"], "--enr-db"),
    ("synth: infinite gain", ["synth", "{dir}/o", "--gain-db", "-inf"], "--gain-db"),
    ("synth: zero samples", ["synth", "{dir}/o", "--rate", "1", "--duration", "0.1", "--offset", "0"], "one sample"),
    ("synth: empty name", ["synth", ""], "give the output a name"),
    ("synth: hidden name", ["synth", "{dir}/.sigmf-meta"], "give the output a name"),
    ("synth: unknown role", ["synth", "{dir}/o", "--role", "boss"], "--role"),
    ("synth: larger than the disk", ["synth", "{dir}/o", "--rate", "1e9", "--duration", "86400"], "free"),
    # ... from metadata.
    ("inspect: metadata rate 1e-300", ["inspect", "{tiny_rate}"], "core:sample_rate"),
    ("inspect: negative header_bytes", ["inspect", "{neg_header}"], "header_bytes"),
    ("inspect: header_bytes not a number", ["inspect", "{str_header}"], "header_bytes"),
    ("inspect: centre 1e300 Hz in metadata", ["inspect", "{huge_centre}"], "core:frequency"),
    ("inspect: channel count null in metadata", ["inspect", "{null_channels}"], "channels"),
    # ... from plans and ENR tables.
    ("capture: plan larger than the disk", ["capture", "{plan_huge}", "--out", "{dir}/s", "--device", "simulated",
                                            "--yes"], "free"),
    ("capture: ENR table to 1e300 Hz", ["capture", "{plan_enr_huge}", "--out", "{dir}/s", "--device", "simulated",
                                        "--yes"], "enr_table"),
    ("capture: ENR table at a negative frequency", ["capture", "{plan_enr_neg}", "--out", "{dir}/s", "--device",
                                                    "simulated", "--yes"], "enr_table"),
    ("capture: step name ending in a newline", ["capture", "{plan_name_nl}", "--out", "{dir}/s", "--device",
                                                "simulated", "--yes"], "name"),
    ("nf: ENR table to 1e300 Hz", ["nf", "--hot", "{hot}", "--cold", "{cold}", "--enr-table", "{enr_huge}"],
     "frequency_hz"),
    ("excess: the same antenna step twice", ["excess", "--antenna-step", "10={thru}", "--antenna-step", "10={dut}"],
     "more than once"),
    # Outputs never replace an input of the run or a recording, --overwrite or not.
    ("nf: --csv onto a recording, --overwrite", ["nf", "--hot", "{hot}", "--cold", "{cold}", "--enr-db", "15",
                                                 "--csv", "{thru_data}", "--overwrite"], "never replaces"),
    ("nf: --csv onto its own input, --overwrite", ["nf", "--hot", "{hot}", "--cold", "{cold}", "--enr-db", "15",
                                                   "--csv", "{hot_data}", "--overwrite"], "never replaces"),
    ("nf: --csv onto its ENR table, --overwrite", ["nf", "--hot", "{hot}", "--cold", "{cold}", "--enr-table",
                                                   "{enr_ok}", "--csv", "{enr_ok}", "--overwrite"], "input of this run"),
    ("synth: --overwrite onto a recording", ["synth", "{thru_base}", "--overwrite"], "is a recording"),
]


def _hashes(folder: Path) -> dict[str, str]:
    """SHA-256 of every regular file under ``folder`` (pipes and device links are not read)."""
    out = {}
    for p in sorted(folder.rglob("*")):
        if p.is_file() and not p.is_symlink():
            out[str(p)] = hashlib.sha256(p.read_bytes()).hexdigest()
        elif p.is_symlink() or not p.is_dir():
            out[str(p)] = "special"
    return out


@pytest.mark.parametrize("argv, needle", [pytest.param(a, n, id=i) for i, a, n in ERRORS])
def test_bad_input_is_one_line_and_exit_2(files, capsys, argv, needle):
    before = _hashes(Path(files["dir"]))
    code = main([a.format(**files) for a in argv])
    io = capsys.readouterr()
    assert _hashes(Path(files["dir"])) == before  # nothing changed, nothing added or left behind
    assert code == 2, io.err
    assert io.out == ""
    assert io.err.count("\n") == 1 and "Traceback" not in io.err
    assert needle in io.err


# Valid input whose captures do not give the number: one line, exit code 1 (README, "Exit codes").
UNMEASURABLE = [
    ("loss: tone absent", ["loss", "--thru", "{no_tone}", "--dut", "{dut}"], "tone"),
    ("loss: non-monotonic ladder", ["loss", "--step", "0={dut}", "--step", "3={thru}", "--dut", "{dut}"], "fall"),
    ("loss: DUT outside the ladder", ["loss", "--step", "0={thru}", "--step", "3={dut}", "--dut", "{deep}"],
     "ladder"),
]


@pytest.mark.parametrize("argv, needle", [pytest.param(a, n, id=i) for i, a, n in UNMEASURABLE])
def test_unmeasurable_is_one_line_and_exit_1(files, capsys, argv, needle):
    code = main([a.format(**files) for a in argv])
    io = capsys.readouterr()
    assert code == 1, io.err
    assert io.out == ""
    assert io.err.count("\n") == 1 and "Traceback" not in io.err
    assert needle in io.err


def test_debug_shows_the_traceback(files, capsys, monkeypatch):
    monkeypatch.delenv("RXBENCH_DEBUG", raising=False)
    for argv in (["--debug", "loss", "--thru", files["no_tone"], "--dut", files["dut"]],
                 ["loss", "--thru", files["no_tone"], "--dut", files["dut"], "--debug"]):
        assert main(argv) == 1
        err = capsys.readouterr().err
        assert err.startswith("Traceback (most recent call last):") and "MeasurementError" in err
        assert err.rstrip("\n").splitlines()[-1].startswith("rxbench loss: error:")  # the one line, last
    monkeypatch.setenv("RXBENCH_DEBUG", "1")
    assert main(["inspect", files["missing"]]) == 2
    assert "Traceback" in capsys.readouterr().err
    monkeypatch.setenv("RXBENCH_DEBUG", "0")
    assert main(["inspect", files["missing"]]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and err.count("\n") == 1


def test_interrupt_is_one_line_and_exit_130(files, capsys, monkeypatch):
    import rxbench.commands.inspect as inspect_command

    def interrupted(args):
        raise KeyboardInterrupt

    monkeypatch.setattr(inspect_command, "run", interrupted)
    monkeypatch.delenv("RXBENCH_DEBUG", raising=False)
    assert main(["inspect", files["thru"]]) == 130
    io = capsys.readouterr()
    assert io.err.count("\n") == 1 and io.err.startswith("rxbench inspect: ") and io.out == ""
    assert "Traceback" not in io.err


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


def test_the_audio_library_failing_mid_write_is_one_line_and_leaves_nothing(tmp_path, monkeypatch, capsys):
    """soundfile's own error (a full disk while writing WAV): one line, exit 2, no temporary left."""
    import soundfile as sf

    def failing_write(self, data):
        raise sf.LibsndfileError(0x7, "Error writing: ")

    monkeypatch.setattr(sf.SoundFile, "write", failing_write)
    code = main(["synth", str(tmp_path / "x.wav"), "--rate", "48000", "--duration", "0.1", "--offset", "1000"])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "Traceback" not in err and "LibsndfileError" in err
    assert list(tmp_path.iterdir()) == []


def test_deep_recursion_and_memory_are_one_line(monkeypatch, capsys, files):
    """RecursionError and MemoryError from anywhere in a command: one line, exit 2."""
    import rxbench.commands.inspect as inspect_cmd

    for exc, words in ((RecursionError(), "nested too deeply"), (MemoryError(), "out of memory"),
                       (OverflowError("math range error"), "out of range")):
        def boom(args, exc=exc):
            raise exc
        monkeypatch.setattr(inspect_cmd, "run", boom)
        code = main(["inspect", files["thru"]])
        err = capsys.readouterr().err
        assert code == 2 and err.count("\n") == 1 and words in err, err
