"""Readers and writers: every format round-trips, every bad file gives one clean error."""

import json
import os

import numpy as np
import pytest
import soundfile as sf
from hypothesis import HealthCheck, given, settings, strategies as st

from rxbench.errors import CaptureError
from rxbench.recordings import (
    ENCODINGS,
    SigmfWriter,
    decode,
    encode,
    open_capture,
    write_sigmf,
)

pytestmark = pytest.mark.filterwarnings("ignore::DeprecationWarning")


def test_cu8_uses_the_half_code_midpoint():
    # cu8 -> (u - 127.5)/127.5 (the dongle binding's convention; common practice): codes 0 and 255
    # are the rails, and a symmetric code distribution has no DC term.
    raw = np.array([0, 255, 127, 128], dtype=np.uint8)
    x = decode(raw, ENCODINGS["cu8"])
    assert x.dtype == np.complex64
    assert x[0] == complex(-1.0, 1.0)
    assert x[1].real == pytest.approx(-0.5 / 127.5) and x[1].imag == pytest.approx(0.5 / 127.5)
    assert abs(np.mean(decode(np.repeat(np.arange(256, dtype=np.uint8), 2), ENCODINGS["cu8"]))) < 1e-6


@pytest.mark.parametrize("datatype", ["cu8", "ci8", "ci16_le", "cf32_le"])
def test_sigmf_round_trip(tmp_path, datatype, rng):
    x = (0.4 * (rng.standard_normal(5000) + 1j * rng.standard_normal(5000))).astype(np.complex64)
    x = np.clip(x.real, -0.99, 0.99) + 1j * np.clip(x.imag, -0.99, 0.99)
    meta = write_sigmf(tmp_path / "rec", x, sample_rate_hz=2.4e6, center_hz=28.2e6, datatype=datatype,
                       extra={"role": "thru", "attenuation_db": 10.0})
    for name in (meta, meta.with_name("rec.sigmf-data")):
        cap = open_capture(name)
        assert (cap.sample_rate_hz, cap.center_hz, cap.n_samples) == (2.4e6, 28.2e6, 5000)
        assert cap.extra == {"role": "thru", "attenuation_db": 10.0}
        step = 1 / ENCODINGS[datatype].scale
        assert np.max(np.abs(cap.read() - x)) <= step  # within one code
    # The metadata declares our extension namespace and passes the SigMF schema (sigmf library).
    from sigmf import SigMFFile

    m = json.loads(meta.read_text())
    SigMFFile(metadata=m).validate()
    assert m["global"]["core:extensions"][0]["name"] == "rxbench"


def test_blocks_cover_the_capture_once(tmp_path, rng):
    x = (rng.standard_normal(10_000) * 0.1).astype(np.float32).view(np.complex64)
    meta = write_sigmf(tmp_path / "b", x, sample_rate_hz=1e5, datatype="cf32_le")
    sizes = [b.size for b in open_capture(meta).blocks(777)]
    assert sum(sizes) == 5000 and max(sizes) == 777


@pytest.mark.parametrize("fmt, dtype, scale", [("cu8", np.uint8, None), ("cs8", np.int8, 128.0),
                                              ("cs16", np.int16, 32768.0), ("cf32", np.float32, 1.0)])
def test_raw_formats(tmp_path, fmt, dtype, scale):
    codes = np.array([0, 1, 2, 3, 4, 5], dtype=dtype)
    p = tmp_path / "x.bin"
    codes.tofile(p)
    cap = open_capture(p, fmt=fmt, rate_hz=1e6)
    x = cap.read()
    assert cap.n_samples == 3
    expect = (codes.astype(float) - 127.5) / 127.5 if scale is None else codes.astype(float) / scale
    assert np.allclose(x.view(np.float32), expect)


def test_raw_suffix_implies_format_but_not_rate(tmp_path):
    p = tmp_path / "x.cu8"
    np.zeros(8, np.uint8).tofile(p)
    with pytest.raises(CaptureError, match="--rate"):
        open_capture(p)
    assert open_capture(p, rate_hz=1e6).n_samples == 4


def test_wav_iq_and_real_audio(tmp_path, rng):
    iq = (rng.standard_normal((4000, 2)) * 0.2).astype(np.float32)
    sf.write(tmp_path / "iq.wav", iq, 48000, subtype="FLOAT")
    cap = open_capture(tmp_path / "iq.wav")
    assert cap.is_complex and cap.sample_rate_hz == 48000
    assert np.allclose(cap.read(), iq[:, 0] + 1j * iq[:, 1])
    sf.write(tmp_path / "a.flac", iq[:, 0], 8000, subtype="PCM_16")
    cap = open_capture(tmp_path / "a.flac")
    assert not cap.is_complex and cap.clip_level == pytest.approx(32767 / 32768)
    assert np.allclose(cap.read(), iq[:, 0], atol=1 / 32768)


def _meta(tmp_path, glob, data=b"\x80" * 64):
    (tmp_path / "m.sigmf-data").write_bytes(data)
    (tmp_path / "m.sigmf-meta").write_text(json.dumps({"global": glob, "captures": [], "annotations": []}))
    return tmp_path / "m.sigmf-meta"


GOOD = {"core:datatype": "cu8", "core:sample_rate": 1e6, "core:version": "1.2.0"}


@pytest.mark.parametrize(
    "glob, data, message",
    [
        ({**GOOD, "core:datatype": "cu16_le"}, b"\0" * 64, "unsupported datatype"),
        ({**GOOD, "core:datatype": "ci16_be"}, b"\0" * 64, "big-endian"),
        ({k: v for k, v in GOOD.items() if k != "core:sample_rate"}, b"\0" * 64, "no sample rate"),
        ({**GOOD, "core:num_channels": 2}, b"\0" * 64, "channels"),
        ({**GOOD, "core:sample_rate": -5}, b"\0" * 64, "core:sample_rate"),
        (GOOD, b"\0" * 63, "truncated"),
        (GOOD, b"", "empty"),
        ({**GOOD, "core:datatype": 7}, b"\0" * 64, "schema|datatype"),
    ],
)
def test_bad_sigmf_gives_one_clear_error(tmp_path, glob, data, message):
    with pytest.raises(CaptureError, match=message):
        open_capture(_meta(tmp_path, glob, data))


def test_unreadable_metadata_and_missing_files(tmp_path):
    (tmp_path / "j.sigmf-meta").write_text("{not json")
    with pytest.raises(CaptureError, match="not valid JSON"):
        open_capture(tmp_path / "j.sigmf-meta")
    with pytest.raises(CaptureError, match="no such file"):
        open_capture(tmp_path / "nothing.sigmf-meta")
    meta = _meta(tmp_path, GOOD)
    os.unlink(tmp_path / "m.sigmf-data")
    with pytest.raises(CaptureError, match="samples are missing"):
        open_capture(meta)
    with pytest.raises(CaptureError, match="unknown file type"):
        (tmp_path / "x.dat").write_bytes(b"\0" * 8)
        open_capture(tmp_path / "x.dat")
    with pytest.raises(CaptureError, match="not a readable audio"):
        (tmp_path / "bad.wav").write_bytes(b"RIFF0000WAVEjunk")
        open_capture(tmp_path / "bad.wav")


def test_writer_never_overwrites_and_leaves_nothing_half_done(tmp_path):
    write_sigmf(tmp_path / "r", np.zeros(100, np.uint8), sample_rate_hz=1e6, extra={"simulated": True})
    with pytest.raises(CaptureError, match="already exists"):
        write_sigmf(tmp_path / "r", np.zeros(10, np.uint8), sample_rate_hz=1e6)
    assert open_capture(tmp_path / "r.sigmf-meta").n_samples == 50
    write_sigmf(tmp_path / "r", np.zeros(10, np.uint8), sample_rate_hz=1e6, overwrite=True)  # synthetic: may go
    assert open_capture(tmp_path / "r.sigmf-meta").n_samples == 5
    # A recording not marked synthetic is never replaced, overwrite or not.
    write_sigmf(tmp_path / "real", np.zeros(100, np.uint8), sample_rate_hz=1e6)
    with pytest.raises(CaptureError, match="is a recording"):
        write_sigmf(tmp_path / "real", np.zeros(10, np.uint8), sample_rate_hz=1e6, overwrite=True)
    assert open_capture(tmp_path / "real.sigmf-meta").n_samples == 50
    # Nothing under the final name until commit; temporaries are hidden and cleaned up.
    w = SigmfWriter(tmp_path / "s", sample_rate_hz=1e6)
    w.write(np.zeros(20, np.uint8))
    assert not (tmp_path / "s.sigmf-data").exists() and not (tmp_path / "s.sigmf-meta").exists()
    w.commit()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.sigmf-data", "r.sigmf-meta", "real.sigmf-data",
                                                          "real.sigmf-meta", "s.sigmf-data", "s.sigmf-meta"]


def test_interrupted_recording_is_kept_as_partial(tmp_path):
    with pytest.raises(KeyboardInterrupt):
        with SigmfWriter(tmp_path / "cap", sample_rate_hz=1e6, extra={"role": "dut"}) as w:
            w.write(np.full(64, 128, np.uint8))
            raise KeyboardInterrupt
    assert not (tmp_path / "cap.sigmf-meta").exists()
    part = open_capture(tmp_path / "cap.partial.sigmf-meta")
    assert part.n_samples == 32 and part.extra["incomplete"] is True and part.extra["role"] == "dut"
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    datatype=st.sampled_from(["cu8", "ci8", "ci16_le", "cf32_le"]),
    n=st.integers(min_value=1, max_value=300),
    seed=st.integers(min_value=0, max_value=2**32 - 1),
)
def test_any_valid_file_round_trips(tmp_path_factory, datatype, n, seed):
    d = tmp_path_factory.mktemp("rt")
    x = np.random.default_rng(seed).uniform(-0.999, 0.999, 2 * n).astype(np.float32).view(np.complex64)
    meta = write_sigmf(d / "x", x, sample_rate_hz=1e6, datatype=datatype)
    back = open_capture(meta).read()
    assert np.array_equal(encode(back, ENCODINGS[datatype]), encode(x, ENCODINGS[datatype]))


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(datatype=st.sampled_from(["ci8", "ci16_le", "cf32_le"]), cut=st.integers(min_value=1, max_value=7))
def test_any_truncation_gives_the_clean_error(tmp_path_factory, datatype, cut):
    d = tmp_path_factory.mktemp("tr")
    meta = write_sigmf(d / "x", np.zeros(50, np.complex64), sample_rate_hz=1e6, datatype=datatype)
    data = d / "x.sigmf-data"
    size = data.stat().st_size
    bps = ENCODINGS[datatype].bytes_per_sample
    with open(data, "r+b") as f:
        f.truncate(size - cut)
    if cut % bps:
        with pytest.raises(CaptureError, match="truncated"):
            open_capture(meta)
    else:
        assert open_capture(meta).n_samples == 50 - cut // bps


class _FullDisk:
    """A file object that accepts ``limit`` bytes, then fails like a full disk (ENOSPC)."""

    def __init__(self, real, limit):
        self.real, self.limit = real, limit

    def write(self, b):
        import errno

        if self.real.tell() + len(b) > self.limit:
            room = max(self.limit - self.real.tell(), 0)
            self.real.write(b[:room])
            raise OSError(errno.ENOSPC, "No space left on device")
        return self.real.write(b)

    def __getattr__(self, name):
        return getattr(self.real, name)


def test_full_disk_mid_capture_keeps_a_partial_and_no_final_file(tmp_path):
    w = SigmfWriter(tmp_path / "cap", sample_rate_hz=1e6, extra={"role": "thru"})
    w._file = _FullDisk(w._file, limit=1001)  # fails mid-block, mid-sample
    with pytest.raises(CaptureError, match="cap.sigmf-data: cannot write: No space left"):  # names the recording
        with w:
            for _ in range(10):
                w.write(np.full(400, 128, np.uint8))
    assert not (tmp_path / "cap.sigmf-meta").exists() and not (tmp_path / "cap.sigmf-data").exists()
    part = open_capture(tmp_path / "cap.partial.sigmf-meta")
    assert part.n_samples == 500 and part.extra["incomplete"] is True  # whole samples only
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


def test_failed_commit_keeps_the_samples(tmp_path, monkeypatch):

    w = SigmfWriter(tmp_path / "cap", sample_rate_hz=1e6)
    w.write(np.full(64, 128, np.uint8))
    # Another writer takes the name between our check and our commit: we must not replace it.
    write_sigmf(tmp_path / "cap", np.zeros(8, np.uint8), sample_rate_hz=1e6)
    with pytest.raises(CaptureError, match="already exists"):
        w.commit()
    assert open_capture(tmp_path / "cap.sigmf-meta").n_samples == 4  # the other recording intact
    assert open_capture(tmp_path / "cap.partial.sigmf-meta").n_samples == 32


def test_write_error_is_one_line_in_the_cli(tmp_path, capsys, monkeypatch):
    import errno

    from rxbench.cli import main

    def full(self, data):
        raise OSError(errno.ENOSPC, "No space left on device", str(self.data_path))

    monkeypatch.setattr(SigmfWriter, "write", full)
    assert main(["synth", str(tmp_path / "x"), "--duration", "0.01"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "No space left" in err and "Traceback" not in err
    assert list(tmp_path.iterdir()) == []  # nothing half-written, no temporaries
