"""Reading and writing captures.

Every capture, whatever its file type, is delivered as blocks of complex64 samples at +/-1 full
scale per rail (float32 for one-channel audio), so memory stays flat however long it is:

- SigMF recordings (``.sigmf-meta`` or ``.sigmf-data``): metadata through the ``sigmf`` library,
  samples read in blocks and converted here (cu8 as (u - 127.5)/127.5, the convention the dongle's
  Python binding uses; the sigmf library's own autoscaling would leave a DC term).
- Raw interleaved IQ (``--format cu8|cs8|cs16|cf32 --rate HZ [--center HZ]``), read in blocks.
- WAV/RF64/FLAC through soundfile: two channels are I and Q, one channel is real audio.

Writing is atomic: data and metadata go to temporary names in the destination folder and are
linked into place only when complete; an existing recording is never replaced unless asked; an
interrupted recording is kept under a ``.partial`` name, marked incomplete.
"""

from __future__ import annotations

import argparse
import contextlib
import datetime as _dt
import functools
import json
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterator, Mapping

import numpy as np

from rxbench import keys
from rxbench.errors import CaptureError, UsageError
from rxbench.files import check_output, check_regular, note_input, read_text_input
from rxbench.quantities import QuantityError, arg as quantity_arg, check as check_quantity

#: Samples per block handed to the estimators (2**19 complex64 = 4 MiB: numpy backs arrays this
#: large with huge pages, which saves most of the page faults of a fresh block).
BLOCK_SAMPLES = 1 << 19

META_SUFFIX = ".sigmf-meta"
DATA_SUFFIX = ".sigmf-data"
AUDIO_SUFFIXES = (".wav", ".flac", ".rf64", ".w64")


@dataclass(frozen=True)
class Encoding:
    """How one sample type maps to full scale: value = (code - offset) / scale."""

    component: str  # numpy dtype of one rail
    is_complex: bool
    offset: float
    scale: float
    clip_level: float  # per-rail magnitude (full-scale units) at which a sample sits on a rail

    @property
    def bytes_per_sample(self) -> int:
        return np.dtype(self.component).itemsize * (2 if self.is_complex else 1)


#: SigMF datatypes rxbench reads (little-endian only).
ENCODINGS: dict[str, Encoding] = {
    "cu8": Encoding("u1", True, 127.5, 127.5, 1.0),
    "ci8": Encoding("i1", True, 0.0, 128.0, 127 / 128),
    "ci16_le": Encoding("<i2", True, 0.0, 32768.0, 32767 / 32768),
    "cf32_le": Encoding("<f4", True, 0.0, 1.0, 1.0),
    "ru8": Encoding("u1", False, 127.5, 127.5, 1.0),
    "ri8": Encoding("i1", False, 0.0, 128.0, 127 / 128),
    "ri16_le": Encoding("<i2", False, 0.0, 32768.0, 32767 / 32768),
    "rf32_le": Encoding("<f4", False, 0.0, 1.0, 1.0),
}
#: Datatypes whose samples are floats (``audio-float``: a WAV/FLAC of float samples).
FLOAT_DATATYPES = ("cf32_le", "rf32_le", "audio-float")
#: Raw-file ``--format`` names and the SigMF datatype each stands for.
RAW_FORMATS = {"cu8": "cu8", "cs8": "ci8", "cs16": "ci16_le", "cf32": "cf32_le"}

def decode(raw: np.ndarray, encoding: Encoding) -> np.ndarray:
    """Codes (one rail per element) -> complex64 (or float32 for real) at +/-1 full scale, always in a
    new array (readers reuse their buffer of codes)."""
    if encoding.offset:
        x = np.subtract(raw, np.float32(encoding.offset), dtype=np.float32)
    else:
        x = raw.astype(np.float32)
    if encoding.scale != 1.0:
        x *= np.float32(1.0 / encoding.scale)
    return x.view(np.complex64) if encoding.is_complex else x


def encode(samples: np.ndarray, encoding: Encoding) -> np.ndarray:
    """Full-scale samples -> codes of ``encoding`` (rounded and clipped to the rails)."""
    x = np.asarray(samples)
    rails = np.empty(x.size * (2 if encoding.is_complex else 1), dtype=np.float64)
    if encoding.is_complex:
        rails[0::2], rails[1::2] = x.real, x.imag
    else:
        rails[:] = np.real(x)
    dt = np.dtype(encoding.component)
    if dt.kind == "f":
        return rails.astype(dt)
    info = np.iinfo(dt)
    return np.clip(np.rint(rails * encoding.scale + encoding.offset), info.min, info.max).astype(dt)


@dataclass(frozen=True)
class Capture:
    """One recording and its metadata, read lazily in blocks.

    Attributes
    ----------
    path : Path
        The file named by the user (or ``<memory>``).
    sample_rate_hz : float
    center_hz : float or None
        Centre (tuned) frequency, when known.
    n_samples : int
    is_complex : bool
    datatype : str
        The SigMF datatype of the stored samples (``cu8``, ``ci16_le``, ...; ``audio`` for soundfile,
        ``audio-float`` for float audio files).
    clip_level : float
        Per-rail magnitude at which a sample sits on a rail.
    datetime : str or None
        ISO 8601 start time, when the metadata gives one.
    extra : Mapping
        rxbench's own metadata (``rxbench:role``, ``rxbench:attenuation_db``, ...), keys without the
        namespace prefix.
    """

    path: Path
    sample_rate_hz: float
    center_hz: float | None
    n_samples: int
    is_complex: bool
    datatype: str
    clip_level: float
    datetime: str | None = None
    extra: Mapping = field(default_factory=dict)
    _reader: Callable[[int], Iterator[np.ndarray]] | None = field(default=None, repr=False, compare=False)

    @property
    def float_samples(self) -> bool:
        """Stored as floats: no rails of their own, and possibly not normalised to +/-1."""
        return self.datatype in FLOAT_DATATYPES

    @property
    def duration_s(self) -> float:
        return self.n_samples / self.sample_rate_hz

    @property
    def name(self) -> str:
        n = self.path.name
        for suffix in (META_SUFFIX, DATA_SUFFIX):
            if n.endswith(suffix):
                return n[: -len(suffix)]
        return n

    def blocks(self, block_samples: int = BLOCK_SAMPLES) -> Iterator[np.ndarray]:
        """Yield the samples in blocks of ``block_samples`` (the last may be shorter)."""
        if block_samples < 1:
            raise ValueError(f"{block_samples=} must be >= 1")
        return self._reader(block_samples)

    def read(self) -> np.ndarray:
        """All samples at once (for short captures and tests; prefer :meth:`blocks`)."""
        parts = list(self.blocks())
        if not parts:
            return np.zeros(0, np.complex64 if self.is_complex else np.float32)
        return np.concatenate(parts)


def memory_capture(
    samples,
    sample_rate_hz: float,
    *,
    center_hz: float | None = None,
    extra: Mapping | None = None,
    datetime: str | None = None,
    clip_level: float = 1.0,
    name: str = "<memory>",
) -> Capture:
    """Wrap an in-memory array as a Capture (simulated bench and tests)."""
    x = np.asarray(samples)
    x = x.astype(np.complex64 if np.iscomplexobj(x) else np.float32, copy=False)

    def reader(block):
        for i in range(0, x.size, block):
            yield x[i : i + block]

    return Capture(Path(name), float(sample_rate_hz), center_hz, int(x.size), bool(np.iscomplexobj(x)),
                   "cf32_le" if np.iscomplexobj(x) else "rf32_le", clip_level, datetime, dict(extra or {}), reader)


def _file_reader(path: Path, encoding: Encoding, chunks):
    """Blocks read with plain file reads (not a memory map, whose pages would count as resident
    memory and grow with the capture).

    ``chunks`` is a sequence of (byte offset, samples): the stretches of the file that hold samples, in
    order (one for a plain file; one per SigMF capture segment, whose headers lie between them).
    Blocks are full across chunk boundaries, the last one excepted.
    """
    rails = 2 if encoding.is_complex else 1
    chunks = [(int(o), int(n)) for o, n in chunks if n > 0]
    n_samples = sum(n for _, n in chunks)

    def reader(block):
        # One read buffer for the whole pass (decode always returns a new array): a fresh one per
        # block would cost a page fault per 4 kB.
        buf = np.empty(min(block, n_samples) * rails, dtype=encoding.component)
        pending = iter(chunks)
        left = 0
        try:
            with open(path, "rb") as f:
                for i in range(0, n_samples, block):
                    count = min(block, n_samples - i)
                    raw = buf[: count * rails]
                    filled = 0
                    while filled < count:
                        if not left:
                            offset, left = next(pending)
                            f.seek(offset)
                        take = min(left, count - filled)
                        part = raw[filled * rails : (filled + take) * rails]
                        if f.readinto(memoryview(part).cast("B")) != part.nbytes:
                            raise CaptureError(path, f"file shrank while being read (at sample {i + filled})")
                        filled += take
                        left -= take
                    yield decode(raw, encoding)
        except OSError as exc:  # unreadable, or the disk failed: a capture error naming the file
            raise CaptureError(path, f"cannot read: {exc.strerror or exc}") from None

    return reader

def _check_size(path: Path, encoding: Encoding) -> int:
    size = check_regular(path, "capture").st_size
    note_input(path)
    if size <= 0:
        raise CaptureError(path, "the file is empty")
    bps = encoding.bytes_per_sample
    if size % bps:
        raise CaptureError(
            path, f"{size} bytes is not a whole number of {bps}-byte samples: truncated or wrong format?"
        )
    return size // bps


def _positive_rate(path, rate, name: str = "sample rate") -> float:
    try:
        return check_quantity(rate, "sample_rate", name)
    except QuantityError as exc:
        raise CaptureError(path, str(exc)) from None


def open_raw(path: Path, fmt: str, rate_hz, center_hz: float | None = None) -> Capture:
    """A raw interleaved IQ file of format ``cu8|cs8|cs16|cf32``."""
    if fmt not in RAW_FORMATS:
        raise CaptureError(path, f"unknown raw format {fmt!r}; use one of {', '.join(RAW_FORMATS)}")
    if rate_hz is None:
        raise CaptureError(path, "a raw IQ file carries no sample rate: give --rate HZ")
    datatype = RAW_FORMATS[fmt]
    enc = ENCODINGS[datatype]
    n = _check_size(path, enc)
    return Capture(path, _positive_rate(path, rate_hz), center_hz, n, True, datatype, enc.clip_level,
                   None, {}, _file_reader(path, enc, [(0, n)]))


def sigmf_paths(path: Path) -> tuple[Path, Path]:
    """(meta, data) paths of a recording named by either file or by its base name."""
    s = str(path)
    for suffix in (META_SUFFIX, DATA_SUFFIX):
        if s.endswith(suffix):
            s = s[: -len(suffix)]
    return Path(s + META_SUFFIX), Path(s + DATA_SUFFIX)


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
    rate = _positive_rate(meta_path, g[keys.SAMPLE_RATE], keys.SAMPLE_RATE)
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
                   _file_reader(data_path, enc, chunks))


def open_audio(path: Path, center_hz: float | None = None) -> Capture:
    """A WAV/RF64/FLAC file: two channels are I and Q, one is real audio."""
    import soundfile as sf

    check_regular(path, "capture")
    note_input(path)
    try:
        info = sf.info(str(path))
    except (RuntimeError, sf.LibsndfileError) as exc:
        raise CaptureError(path, f"not a readable audio file: {exc}") from None
    if info.channels not in (1, 2):
        raise CaptureError(path, f"{info.channels} channels: expected 2 (I and Q) or 1 (real audio)")
    if info.frames <= 0:
        raise CaptureError(path, "the file holds no samples")
    bits = {"PCM_S8": 8, "PCM_U8": 8, "PCM_16": 16, "PCM_24": 24, "PCM_32": 32}.get(info.subtype)
    clip = 1.0 if bits is None else (2 ** (bits - 1) - 1) / 2 ** (bits - 1)
    is_complex = info.channels == 2

    def reader(block):
        with sf.SoundFile(str(path)) as f:
            while True:
                data = f.read(block, dtype="float32", always_2d=True)
                if not data.size:
                    return
                if is_complex:
                    yield np.ascontiguousarray(data).view(np.complex64).ravel()
                else:
                    yield data[:, 0].copy()

    datatype = "audio-float" if info.subtype in ("FLOAT", "DOUBLE") else "audio"
    return Capture(path, float(info.samplerate), center_hz, int(info.frames), is_complex,
                   datatype, clip, None, {}, reader)


def open_capture(path, *, fmt: str | None = None, rate_hz: float | None = None,
                 center_hz: float | None = None) -> Capture:
    """Open any capture rxbench reads; bad input raises :class:`CaptureError` naming the file.

    ``fmt``/``rate_hz`` are needed for raw IQ (a ``.cu8``, ``.cs8``, ``.cs16`` or ``.cf32`` suffix
    stands for ``fmt``); ``center_hz`` supplies a centre frequency where the file has none.
    """
    path = Path(path)
    name = path.name.lower()
    if name.endswith((META_SUFFIX, DATA_SUFFIX)):
        if fmt is not None:
            raise CaptureError(path, "--format applies to raw IQ files, not to SigMF recordings")
        cap = open_sigmf(path)
        if center_hz is not None and cap.center_hz is None:
            cap = _replace(cap, center_hz=center_hz)
        return cap
    check_regular(path, "capture")
    if name.endswith(AUDIO_SUFFIXES) and fmt is None:
        return open_audio(path, center_hz)
    if fmt is None:
        fmt = path.suffix.lower().lstrip(".")
        if fmt not in RAW_FORMATS:
            raise CaptureError(path, "unknown file type: for raw IQ give --format cu8|cs8|cs16|cf32 and --rate HZ")
    return open_raw(path, fmt, rate_hz, center_hz)


def _replace(cap: Capture, **changes) -> Capture:
    from dataclasses import replace

    return replace(cap, **changes)


def add_capture_options(parser: argparse.ArgumentParser) -> None:
    """``--format``, ``--rate`` and ``--center`` for raw IQ (and audio) captures."""
    g = parser.add_argument_group("raw IQ captures")
    g.add_argument("--format", choices=sorted(RAW_FORMATS), help="sample format of raw IQ files")
    g.add_argument("--rate", type=quantity_arg("sample_rate"), metavar="HZ", help="sample rate of raw IQ files, Hz")
    g.add_argument("--center", type=quantity_arg("frequency"), metavar="HZ", help="centre frequency where the file gives none, Hz")


def capture_from_args(path, args: argparse.Namespace) -> Capture:
    """Open ``path`` with the raw-IQ options of ``args`` (see :func:`add_capture_options`)."""
    return open_capture(path, fmt=getattr(args, "format", None), rate_hz=getattr(args, "rate", None),
                        center_hz=getattr(args, "center", None))


def step_capture_from_args(text: str, args: argparse.Namespace, option: str = "--step"):
    """``DB=CAPTURE`` (or ``CAPTURE`` whose metadata gives ``rxbench:attenuation_db``) -> (dB, Capture)."""
    db = None
    path = text
    if "=" in text:
        head, tail = text.split("=", 1)
        try:
            db = float(head)
            path = tail
        except ValueError:
            pass
    cap = capture_from_args(path, args)
    meta_db = cap.extra.get(keys.ATTENUATION_DB)
    if db is None:
        if meta_db is None:
            raise UsageError(f"{option} {text}: give the attenuator setting as DB=CAPTURE "
                             "(the capture's metadata has no attenuation)")
        try:
            db = check_quantity(meta_db, "attenuation_db", f"{keys.NAMESPACE}:{keys.ATTENUATION_DB}")
        except QuantityError as exc:
            raise UsageError(f"{cap.path}: {exc}") from None
    else:
        try:
            db = check_quantity(db, "attenuation_db", f"{option} {text}")
        except QuantityError as exc:
            raise UsageError(str(exc)) from None
    return db, cap




# --------------------------------------------------------------------------------------------
# Writing


def utc_now_iso() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="microseconds").replace("+00:00", "Z")


def _link_into_place(tmp: Path, final: Path, overwrite: bool) -> None:
    """Move ``tmp`` to ``final`` atomically; without ``overwrite`` an existing ``final`` is an error."""
    if overwrite:
        os.replace(tmp, final)
        return
    try:
        os.link(tmp, final)  # fails if final exists: no race with another writer
    except FileExistsError:
        raise CaptureError(final, "already exists; not overwriting it") from None
    except OSError:  # file systems without hard links
        if final.exists():
            raise CaptureError(final, "already exists; not overwriting it") from None
        os.rename(tmp, final)
        return
    os.unlink(tmp)


@contextlib.contextmanager
def atomic_path(final, overwrite: bool = False):
    """Yield a temporary path in ``final``'s folder; on success move it to ``final`` (refusing to
    replace an existing file unless ``overwrite``); on failure remove it."""
    final = Path(final)
    if not final.parent.is_dir():
        raise CaptureError(final.parent, "no such folder")
    check_output(final, overwrite=overwrite)
    tmp = final.parent / f".{final.name}.{os.urandom(4).hex()}.tmp{final.suffix}"
    try:
        yield tmp
        _link_into_place(tmp, final, overwrite)
    finally:
        if tmp.exists():
            tmp.unlink()


class SigmfWriter:
    """Write one SigMF recording atomically.

    Samples go to a hidden temporary file in the destination folder. :meth:`commit` writes the
    metadata and links both files into place; nothing appears under the final name before that.
    :meth:`abandon` (called on any exception inside a ``with`` block, Ctrl-C included) keeps what
    was written as ``<base>.partial.sigmf-data/-meta`` with ``rxbench:incomplete`` set.

    Parameters
    ----------
    base_path : path
        Recording name without suffix (a ``.sigmf-meta``/``.sigmf-data`` suffix is stripped).
    sample_rate_hz : float
    datatype : str
        One of :data:`ENCODINGS`; ``write`` takes raw codes of that type or full-scale samples.
    center_hz, datetime, description : optional
    extra : Mapping
        rxbench metadata, keys without the ``rxbench:`` prefix.
    overwrite : bool
        Replace an existing recording of the same name.
    durable : bool
        Flush both files to the disk (fsync) before they are linked into place; False only for
        recordings that can be made again at will (the simulated bench: 83 fsyncs were 1.3 s of the
        demo's wall time).
    """

    def __init__(self, base_path, *, sample_rate_hz: float, datatype: str = "cu8",
                 center_hz: float | None = None, datetime: str | None = None,
                 description: str | None = None, extra: Mapping | None = None, overwrite: bool = False,
                 durable: bool = True):
        if datatype not in ENCODINGS:
            raise CaptureError(Path(base_path), f"cannot write datatype {datatype!r}")
        self.meta_path, self.data_path = sigmf_paths(Path(base_path))
        self.folder = self.meta_path.parent
        if not self.folder.is_dir():
            raise CaptureError(self.folder, "no such folder")
        for p in (self.meta_path, self.data_path):
            check_output(p, overwrite=overwrite)
        self.encoding = ENCODINGS[datatype]
        self.datatype = datatype
        self.sample_rate_hz = float(sample_rate_hz)
        self.center_hz = center_hz
        self.datetime = datetime or utc_now_iso()
        self.description = description
        self.extra = dict(extra or {})
        self.overwrite = overwrite
        self.durable = durable
        token = os.urandom(4).hex()
        base = self.meta_path.name[: -len(META_SUFFIX)]
        self._tmp_data = self.folder / f".{base}.{token}.tmp{DATA_SUFFIX}"
        self._tmp_meta = self.folder / f".{base}.{token}.tmp{META_SUFFIX}"
        # The metadata of a partial is written first, while there is room: an interrupted or
        # failed capture (a full disk included) is then kept as a complete pair by renames alone.
        self._tmp_partial = self.folder / f".{base}.{token}.tmp.partial{META_SUFFIX}"
        self.n_samples = 0
        self.done = False
        try:
            with open(self._tmp_partial, "x", encoding="utf-8") as f:
                json.dump(self._metadata(True, None), f, indent=2, allow_nan=False)
                f.write("\n")
            self._file = open(self._tmp_data, "xb")
        except BaseException:
            self._tmp_partial.unlink(missing_ok=True)
            raise

    def write(self, data) -> None:
        """Append raw codes (an integer/float array of the datatype's rail type, or bytes) or
        full-scale samples (complex or float arrays, encoded and rounded)."""
        if isinstance(data, (bytes, bytearray, memoryview)):
            raw = np.frombuffer(data, dtype=self.encoding.component)
        else:
            arr = np.asarray(data)
            if arr.dtype == np.dtype(self.encoding.component) and not np.iscomplexobj(arr):
                raw = arr
            else:
                raw = encode(arr, self.encoding)
        rails = 2 if self.encoding.is_complex else 1
        if raw.size % rails:
            raise CaptureError(self.data_path, "odd number of I/Q values written")
        try:
            self._file.write(raw.tobytes())
        except OSError as exc:  # a full disk: name the recording, not its hidden temporary
            raise CaptureError(self.data_path, f"cannot write: {exc.strerror or exc}") from None
        self.n_samples += raw.size // rails

    def _metadata(self, incomplete: bool, extra_updates: Mapping | None) -> dict:
        from sigmf import __specification__

        g = {
            keys.DATATYPE: self.datatype,
            keys.SAMPLE_RATE: self.sample_rate_hz,
            keys.VERSION: __specification__,
            keys.RECORDER: "rxbench",
            keys.EXTENSIONS: [{"name": keys.NAMESPACE, "version": keys.NAMESPACE_VERSION, "optional": True}],
        }
        if self.description:
            g[keys.DESCRIPTION] = self.description
        extra = {**self.extra, **(extra_updates or {})}
        if incomplete:
            extra[keys.INCOMPLETE] = True
        for k, v in extra.items():
            g[f"{keys.NAMESPACE}:{k}"] = v
        cap = {keys.SAMPLE_START: 0, keys.DATETIME: self.datetime}
        if self.center_hz is not None:
            cap[keys.FREQUENCY] = float(self.center_hz)
        return {"global": g, "captures": [cap], "annotations": []}

    def _finish_files(self, meta: dict) -> None:
        self._file.flush()
        if self.durable:
            os.fsync(self._file.fileno())
        self._file.close()
        with open(self._tmp_meta, "x", encoding="utf-8") as f:
            json.dump(meta, f, indent=2, allow_nan=False)
            f.write("\n")
            f.flush()
            if self.durable:
                os.fsync(f.fileno())

    def commit(self, extra_updates: Mapping | None = None) -> Path:
        """Finish: metadata written, both files linked into place. Returns the metadata path.

        If finishing fails (disk full, a recording of the same name appeared meanwhile), nothing is
        left under the final name and the samples are kept as a ``.partial`` recording.
        """
        if self.done:
            raise RuntimeError("recording already finished")
        data_linked = False
        try:
            self._finish_files(self._metadata(False, extra_updates))
            _link_into_place(self._tmp_data, self.data_path, self.overwrite)
            data_linked = True
            _link_into_place(self._tmp_meta, self.meta_path, self.overwrite)
            self._tmp_partial.unlink(missing_ok=True)
        except BaseException:
            if data_linked:  # move the samples back so the partial keeps them
                os.rename(self.data_path, self._tmp_data)
            if self._tmp_meta.exists():
                self._tmp_meta.unlink()
            self.abandon(keep_partial=True)
            raise
        self.done = True
        return self.meta_path

    def abandon(self, keep_partial: bool = True) -> Path | None:
        """Stop writing. With samples written and ``keep_partial``, keep them as a ``.partial``
        recording marked incomplete and return its metadata path; otherwise remove the temporaries.

        Works on a full disk too: the samples already on disk and the partial's metadata (written
        when the recording began) are only renamed, which needs no space.
        """
        if self.done:
            return None
        self.done = True
        try:
            self._file.close()
        except OSError:
            pass  # a failed flush of the last buffer (disk full): what reached the disk is kept
        kept = None
        try:
            size = self._tmp_data.stat().st_size if self._tmp_data.exists() else 0
            self.n_samples = size // (self.encoding.bytes_per_sample)
            if keep_partial and self.n_samples:
                if size % self.encoding.bytes_per_sample:
                    with open(self._tmp_data, "r+b") as f:  # drop a half-written last sample
                        f.truncate(self.n_samples * self.encoding.bytes_per_sample)
                meta, data = _free_partial_name(self.folder, self.meta_path.name[: -len(META_SUFFIX)])
                os.rename(self._tmp_data, data)
                kept = data
                os.rename(self._tmp_partial, meta)
                kept = meta
        except OSError:
            pass  # the samples stay under the .partial data name even if the metadata cannot be moved
        finally:
            for p in (self._tmp_data, self._tmp_meta, self._tmp_partial):
                if p.exists():
                    p.unlink()
        return kept

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is None:
            if not self.done:
                self.commit()
        else:
            self.abandon(keep_partial=True)
        return False


def _free_partial_name(folder: Path, base: str) -> tuple[Path, Path]:
    """(meta, data) paths of the first free ``<base>.partial[N]`` recording name in ``folder``."""
    for i in range(1000):
        stem = f"{base}.partial" + (f"{i}" if i else "")
        meta, data = folder / (stem + META_SUFFIX), folder / (stem + DATA_SUFFIX)
        if not meta.exists() and not data.exists():
            return meta, data
    raise CaptureError(folder / base, "a thousand partial recordings of this name already")


#: Hidden temporaries of an interrupted writer: ``.<name>.<8 hex>.tmp...`` (SigmfWriter, atomic_path).
_TEMP_RE = re.compile(r"^\.(?P<base>.+)\.(?P<token>[0-9a-f]{8})\.tmp(?P<rest>.*)$")


def salvage_temporaries(folder) -> tuple[list[Path], list[Path]]:
    """Tidy what a writer killed outright (SIGKILL, power loss) left in ``folder``: samples whose
    partial metadata is beside them become a ``.partial`` recording; every other temporary is
    removed. Returns (partials kept, temporaries removed). Call only while no writer is at work in
    ``folder``."""
    folder = Path(folder)
    kept: list[Path] = []
    removed: list[Path] = []
    temps = sorted(p for p in folder.iterdir() if p.name.startswith(".") and _TEMP_RE.match(p.name)
                   and not p.is_dir())
    temps.sort(key=lambda p: not p.name.endswith(".tmp" + DATA_SUFFIX))  # samples first: they keep their metadata
    for p in temps:
        if not p.exists():
            continue
        m = _TEMP_RE.match(p.name)
        partial_meta = folder / f".{m['base']}.{m['token']}.tmp.partial{META_SUFFIX}"
        if m["rest"] == DATA_SUFFIX and partial_meta.exists() and p.stat().st_size:
            meta, data = _free_partial_name(folder, m["base"])
            enc = None
            try:
                enc = ENCODINGS.get(json.loads(partial_meta.read_text(encoding="utf-8"))["global"][keys.DATATYPE])
            except (OSError, ValueError, KeyError, TypeError, RecursionError):
                pass
            if enc is not None:
                size = p.stat().st_size
                if size % enc.bytes_per_sample:  # drop a half-written last sample
                    with open(p, "r+b") as f:
                        f.truncate(size - size % enc.bytes_per_sample)
                if p.stat().st_size:
                    os.rename(p, data)
                    os.rename(partial_meta, meta)
                    kept.append(meta)
                    continue
        p.unlink()
        removed.append(p)
    return kept, removed


def write_sigmf(base_path, samples, *, sample_rate_hz: float, center_hz: float | None = None,
                datatype: str = "cu8", extra: Mapping | None = None, datetime: str | None = None,
                description: str | None = None, overwrite: bool = False) -> Path:
    """Write a whole recording atomically; ``samples`` are raw codes or full-scale samples.
    Returns the metadata path."""
    with SigmfWriter(base_path, sample_rate_hz=sample_rate_hz, datatype=datatype, center_hz=center_hz,
                     datetime=datetime, description=description, extra=extra, overwrite=overwrite) as w:
        w.write(samples)
    return w.meta_path
