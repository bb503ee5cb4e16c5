"""Reading a SigMF recording: the metadata checked against the SigMF schema exactly as the file
holds it (one validator per process), the capture segments located in the data file, and the
:class:`Capture` built from them.
"""

from __future__ import annotations

import functools
import json
from pathlib import Path

from rxbench import keys
from rxbench.errors import CaptureError
from rxbench.files import check_regular, note_input, read_text_input
from rxbench.quantities import QuantityError, check as check_quantity
from rxbench.recordings.encoding import ENCODINGS, Encoding
from rxbench.recordings.samples import Capture, file_reader, positive_rate, sigmf_paths

@functools.lru_cache(maxsize=1)
def _sigmf_validator():
    """A validator for the SigMF schema the sigmf library ships, built once per process (building one
    through ``jsonschema.validate`` checks the schema itself every time: about 140 ms of every read)."""
    import jsonschema
    from sigmf import schema

    ref = schema.get_schema()
    return jsonschema.validators.validator_for(ref)(ref)


def _check_schema(meta_path: Path, meta: dict) -> None:
    """Check the metadata exactly as the file holds it against the SigMF schema (no defaults filled in,
    no ``core:version`` rewritten, as the sigmf library's object does)."""
    from jsonschema.exceptions import best_match
    from sigmf import __specification__

    try:
        error = best_match(_sigmf_validator().iter_errors(meta))
    except RecursionError:
        raise CaptureError(meta_path, "metadata is nested too deeply to be SigMF") from None
    if error is None:
        return
    where = "/".join(str(p) for p in error.absolute_path)
    where = f" at {where}" if where else ""
    version = meta["global"].get(keys.VERSION)
    said = f" (it says {keys.VERSION} {version!r})" if version is not None else ""
    raise CaptureError(meta_path, f"metadata does not follow the SigMF schema ({__specification__}){where}: "
                                  f"{error.message}{said}")


def _count(meta_path: Path, where: str, value) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < 0:
        raise CaptureError(meta_path, f"{where} {value!r} must be a whole number >= 0")
    return value


def _segments(meta_path: Path, data_path: Path, meta: dict, enc: Encoding) -> tuple[list, int]:
    """The stretches of the data file that hold samples, one per capture segment, as (byte offset,
    samples), and the number of samples in all.

    Per the SigMF specification (core namespace, "Captures Array"): segments are sorted by
    ``core:sample_start``, the index of a segment's first sample counted in samples (headers not
    included); ``core:header_bytes`` of a segment is the number of non-sample bytes just before its
    samples; the global ``core:trailing_bytes`` are non-sample bytes at the end of the file. So the
    first sample of segment i lies at sum(header_bytes of segments 0..i) + sample_start_i * bytes per
    sample.
    """
    g = meta["global"]
    if keys.HEADER_BYTES in g:
        raise CaptureError(meta_path, f"{keys.HEADER_BYTES} is in 'global'; the SigMF standard puts it in a "
                                      "capture segment (the 'captures' array), before the samples it precedes")
    segments = meta.get("captures") or [{}]
    starts = [_count(meta_path, f"captures[{i}] {keys.SAMPLE_START}", c.get(keys.SAMPLE_START, 0))
              for i, c in enumerate(segments)]
    headers = [_count(meta_path, f"captures[{i}] {keys.HEADER_BYTES}", c.get(keys.HEADER_BYTES, 0))
               for i, c in enumerate(segments)]
    trailing = _count(meta_path, keys.TRAILING_BYTES, g.get(keys.TRAILING_BYTES, 0))
    for i in range(1, len(starts)):
        if starts[i] < starts[i - 1]:
            raise CaptureError(meta_path, f"capture segments are not in order of {keys.SAMPLE_START} "
                                          f"({starts[i - 1]}, then {starts[i]}): the standard requires ascending")
    tunings = sorted({float(c[keys.FREQUENCY]) for c in segments if c.get(keys.FREQUENCY) is not None})
    if len(tunings) > 1:
        listed = ", ".join(f"{f:.0f}" for f in tunings)
        raise CaptureError(meta_path, f"{len(segments)} capture segments at {len(tunings)} centre frequencies "
                                      f"({listed} Hz): rxbench reads one tuning per capture; split the "
                                      "recording into one per frequency")
    try:
        size = check_regular(data_path, "capture").st_size
    except CaptureError as exc:  # say which of the pair is at fault (a session lists the metadata)
        raise CaptureError(data_path, f"the recording's data file {exc.problem}") from None
    note_input(data_path)
    if size == 0:
        raise CaptureError(data_path, "the recording's data file is empty")
    bps = enc.bytes_per_sample
    sample_bytes = size - sum(headers) - trailing
    if sample_bytes <= 0:
        what = f" after {sum(headers) + trailing} header and trailing bytes" if sum(headers) + trailing else ""
        raise CaptureError(data_path, f"the file holds no samples{what}")
    if sample_bytes % bps:
        raise CaptureError(data_path, f"{sample_bytes} bytes of samples is not a whole number of {bps}-byte "
                                      "samples: truncated, wrong format, or wrong header_bytes?")
    n = sample_bytes // bps
    if starts[-1] >= n:
        raise CaptureError(meta_path, f"capture segment {len(starts) - 1} starts at sample {starts[-1]}, but the "
                                      f"data holds {n} samples")
    ends = starts[1:] + [n]
    chunks = [(sum(headers[: i + 1]) + starts[i] * bps, ends[i] - starts[i]) for i in range(len(starts))]
    return chunks, n - starts[0]


def open_sigmf(path: Path) -> Capture:
    """A SigMF recording: metadata checked against the SigMF schema as the file holds it; samples
    read from every capture segment (header bytes skipped) when they share one tuning."""
    meta_path, data_path = sigmf_paths(path)
    if not meta_path.exists() and not meta_path.is_symlink():
        raise CaptureError(meta_path, "no such file (a SigMF recording needs its .sigmf-meta)")
    text = read_text_input(meta_path, "SigMF metadata file")
    try:
        meta = json.loads(text)
    except json.JSONDecodeError as exc:
        raise CaptureError(meta_path, f"metadata is not valid JSON (line {exc.lineno}: {exc.msg})") from None
    except RecursionError:
        raise CaptureError(meta_path, "metadata is nested too deeply to be SigMF") from None
    if not isinstance(meta, dict) or not isinstance(meta.get("global"), dict):
        raise CaptureError(meta_path, "metadata has no 'global' object")
    _check_schema(meta_path, meta)
    g = meta["global"]
    datatype = str(g.get(keys.DATATYPE, ""))
    if datatype.endswith("_be"):
        raise CaptureError(meta_path, f"big-endian datatype {datatype!r} is not supported; convert to little-endian")
    if datatype not in ENCODINGS:
        known = ", ".join(ENCODINGS)
        raise CaptureError(meta_path, f"unsupported datatype {datatype!r}; rxbench reads {known}")
    channels = g.get(keys.NUM_CHANNELS, 1)
    if isinstance(channels, bool) or not isinstance(channels, (int, float)) or channels != 1:
        raise CaptureError(meta_path, f"{channels!r} channels: rxbench reads single-channel recordings")
    if keys.SAMPLE_RATE not in g:
        raise CaptureError(meta_path, f"metadata has no sample rate ({keys.SAMPLE_RATE})")
    rate = positive_rate(meta_path, g[keys.SAMPLE_RATE], keys.SAMPLE_RATE)
    dataset = g.get(keys.DATASET)
    if dataset is not None:  # a non-conforming dataset: the samples are in the file it names, beside the metadata
        if not isinstance(dataset, str) or not dataset or Path(dataset).name != dataset:
            raise CaptureError(meta_path, f"{keys.DATASET} {dataset!r} must name a file in the metadata's folder")
        data_path = meta_path.with_name(dataset)
    if not data_path.exists():
        raise CaptureError(data_path, "no such file (the recording's samples are missing)")
    enc = ENCODINGS[datatype]
    chunks, n = _segments(meta_path, data_path, meta, enc)
    first = (meta.get("captures") or [{}])[0]
    center = first.get(keys.FREQUENCY)
    if center is not None:
        try:
            center = check_quantity(center, "frequency", keys.FREQUENCY)
        except QuantityError as exc:
            raise CaptureError(meta_path, str(exc)) from None
    prefix = keys.NAMESPACE + ":"
    extra = {k[len(prefix):]: v for k, v in {**g, **first}.items() if k.startswith(prefix)}
    return Capture(meta_path, rate, float(center) if center is not None else None, n, enc.is_complex,
                   datatype, enc.clip_level, first.get(keys.DATETIME), extra,
                   file_reader(data_path, enc, chunks))
