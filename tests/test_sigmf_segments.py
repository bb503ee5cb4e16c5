"""SigMF as the standard writes it: capture segments, core:header_bytes and core:sample_start where the
standard puts them, the schema checked on what the file says, and one validator per process.

Source: the SigMF specification, v1.2 (core namespace; from memory): the "captures" array holds capture
segments sorted by ``core:sample_start``, the index of the segment's first sample counted in samples;
``core:header_bytes`` (a capture-segment field) is the number of non-sample bytes just before that
segment's samples; ``core:trailing_bytes`` (global) the non-sample bytes at the end of the dataset file;
``core:version`` is required and has the form X.Y.Z. The data below is invented, with known samples.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from rxbench.recordings import sigmf_reading
from rxbench.cli import main
from rxbench.errors import CaptureError
from rxbench.recordings import open_capture

GLOBAL = {"core:datatype": "ci16_le", "core:sample_rate": 250e3, "core:version": "1.2.0"}


def _codes(rng, n):
    return rng.integers(-3000, 3000, size=2 * n, dtype=np.int16)


def _write(tmp_path, name, data: bytes, captures, glob=None):
    (tmp_path / f"{name}.sigmf-data").write_bytes(data)
    meta = {"global": {**GLOBAL, **(glob or {})}, "captures": captures, "annotations": []}
    (tmp_path / f"{name}.sigmf-meta").write_text(json.dumps(meta))
    return tmp_path / f"{name}.sigmf-meta"


def _truth(codes):
    return (codes.astype(np.float32) / 32768).view(np.complex64)


def test_header_bytes_of_the_capture_segment_are_skipped(tmp_path, rng):
    codes = _codes(rng, 5000)
    header = b"H" * 64  # e.g. a recorder's own file header, declared in the segment
    path = _write(tmp_path, "h", header + codes.tobytes(),
                  [{"core:sample_start": 0, "core:header_bytes": 64, "core:frequency": 7.1e6}])
    cap = open_capture(path)
    assert cap.n_samples == 5000 and cap.center_hz == 7.1e6
    np.testing.assert_array_equal(cap.read(), _truth(codes))


def test_several_segments_at_one_tuning_are_read_in_order_headers_skipped(tmp_path, rng):
    a, b, c = _codes(rng, 3000), _codes(rng, 1234), _codes(rng, 2000)
    data = b"A" * 16 + a.tobytes() + b"B" * 8 + b.tobytes() + c.tobytes() + b"T" * 12
    segs = [{"core:sample_start": 0, "core:header_bytes": 16, "core:frequency": 14.1e6},
            {"core:sample_start": 3000, "core:header_bytes": 8, "core:frequency": 14.1e6},
            {"core:sample_start": 4234}]
    cap = open_capture(_write(tmp_path, "s", data, segs, {"core:trailing_bytes": 12}))
    truth = _truth(np.concatenate([a, b, c]))
    assert cap.n_samples == truth.size
    # blocks are full across the segment boundaries (all but the last)
    blocks = list(cap.blocks(1000))
    assert [x.size for x in blocks] == [1000] * 6 + [234]
    np.testing.assert_array_equal(np.concatenate(blocks), truth)


def test_the_specifications_own_non_conforming_example(tmp_path, rng):
    # The worked example of the SigMF specification (v1.2, core:header_bytes; also in the schema the sigmf
    # library ships): cu8 samples in two segments with 4-byte headers, in a file named by core:dataset; "a
    # reader application would map the 500 samples (1000 bytes) in the first Segment, starting at a file
    # offset of 4 bytes, and then the remainder of the file through EOF starting at a file offset of 1008
    # bytes".
    first, rest = rng.integers(0, 256, 1000, dtype=np.uint8), rng.integers(0, 256, 600, dtype=np.uint8)
    data = b"HDR1" + first.tobytes() + b"HDR2" + rest.tobytes()
    assert data[4:1004] == first.tobytes() and data[1008:] == rest.tobytes()
    (tmp_path / "non-conforming-dataset-01.dat").write_bytes(data)
    meta = {"global": {"core:datatype": "cu8", "core:version": "1.2.0", "core:sample_rate": 1e6,
                       "core:dataset": "non-conforming-dataset-01.dat"},
            "captures": [{"core:sample_start": 0, "core:header_bytes": 4},
                         {"core:sample_start": 500, "core:header_bytes": 4}],
            "annotations": []}
    (tmp_path / "ncd.sigmf-meta").write_text(json.dumps(meta))
    cap = open_capture(tmp_path / "ncd.sigmf-meta")
    assert cap.n_samples == 800
    codes = np.concatenate([first, rest]).astype(np.float32)
    np.testing.assert_allclose(cap.read(), ((codes - 127.5) / 127.5).view(np.complex64), rtol=0, atol=1e-7)


def test_a_first_segment_starting_later_leaves_the_samples_before_it_out(tmp_path, rng):
    codes = _codes(rng, 3000)
    cap = open_capture(_write(tmp_path, "late", codes.tobytes(), [{"core:sample_start": 1000}]))
    assert cap.n_samples == 2000
    np.testing.assert_array_equal(cap.read(), _truth(codes)[1000:])


@pytest.mark.parametrize("glob, segs, message", [
    ({}, [{"core:sample_start": 0, "core:frequency": 14.1e6}, {"core:sample_start": 500, "core:frequency": 14.2e6}],
     r"2 capture segments at 2 centre frequencies \(14100000, 14200000 Hz\): rxbench reads one tuning"),
    ({"core:header_bytes": 16}, [{"core:sample_start": 0}], "core:header_bytes is in 'global'"),
    ({}, [{"core:sample_start": 500}, {"core:sample_start": 100}], "not in order of core:sample_start"),
    ({}, [{"core:sample_start": 0}, {"core:sample_start": 9000}], "starts at sample 9000, but the data holds 1000"),
    ({}, [{"core:sample_start": 0, "core:header_bytes": 3}], "wrong header_bytes"),
    ({"core:version": "banana"}, [{"core:sample_start": 0}], r"SigMF schema .*core:version 'banana'"),
])
def test_segments_refused_clearly(tmp_path, rng, capsys, glob, segs, message):
    path = _write(tmp_path, "bad", _codes(rng, 1000).tobytes(), segs, glob)
    with pytest.raises(CaptureError, match=message):
        open_capture(path)
    assert main(["inspect", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err


def test_the_schema_sees_what_the_file_says(tmp_path, rng):
    # The sigmf library's object sets core:version to its own and fills in defaults before validating,
    # so a file without a version (required by the standard) or with a malformed one passed. Now it does
    # not.
    glob = {k: v for k, v in GLOBAL.items() if k != "core:version"}
    (tmp_path / "nov.sigmf-data").write_bytes(_codes(rng, 100).tobytes())
    (tmp_path / "nov.sigmf-meta").write_text(json.dumps({"global": glob, "captures": [], "annotations": []}))
    with pytest.raises(CaptureError, match="'core:version' is a required property"):
        open_capture(tmp_path / "nov.sigmf-meta")
    # the file on disk is left as it was
    assert "core:version" not in json.loads((tmp_path / "nov.sigmf-meta").read_text())["global"]


def test_the_validator_is_built_once(tmp_path, rng):
    sigmf_reading._sigmf_validator.cache_clear()
    for i in range(3):
        open_capture(_write(tmp_path, f"v{i}", _codes(rng, 100).tobytes(), [{"core:sample_start": 0}]))
    info = sigmf_reading._sigmf_validator.cache_info()
    assert info.misses == 1 and info.hits == 2
