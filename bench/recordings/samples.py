"""The :class:`Capture` (one recording and its metadata, read lazily in blocks), the block reader of
sample files, and the readers of raw interleaved IQ and of WAV/RF64/FLAC (through soundfile).

Memory stays flat however long a capture is: samples are read in blocks into one reused buffer,
with plain file reads (not a memory map).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterator, Mapping

import numpy as np

from rxbench.errors import CaptureError
from rxbench.files import check_regular, note_input
from rxbench.quantities import QuantityError, check as check_quantity
from rxbench.recordings.encoding import ENCODINGS, FLOAT_DATATYPES, RAW_FORMATS, Encoding, decode

#: Samples per block handed to the estimators (2**19 complex64 = 4 MiB: numpy backs arrays this
#: large with huge pages, which saves most of the page faults of a fresh block).
BLOCK_SAMPLES = 1 << 19

META_SUFFIX = ".sigmf-meta"
DATA_SUFFIX = ".sigmf-data"
AUDIO_SUFFIXES = (".wav", ".flac", ".rf64", ".w64")


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


def file_reader(path: Path, encoding: Encoding, chunks):
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


def positive_rate(path, rate, name: str = "sample rate") -> float:
    """``rate`` through the one number check of a sample rate; a CaptureError naming ``path`` if not."""
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
    return Capture(path, positive_rate(path, rate_hz), center_hz, n, True, datatype, enc.clip_level,
                   None, {}, file_reader(path, enc, [(0, n)]))


def sigmf_paths(path: Path) -> tuple[Path, Path]:
    """(meta, data) paths of a recording named by either file or by its base name."""
    s = str(path)
    for suffix in (META_SUFFIX, DATA_SUFFIX):
        if s.endswith(suffix):
            s = s[: -len(suffix)]
    return Path(s + META_SUFFIX), Path(s + DATA_SUFFIX)


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
