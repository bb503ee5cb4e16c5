"""Writing captures atomically: data and metadata go to hidden temporary names in the destination
folder and are linked into place only when complete; an existing recording is never replaced
unless asked; an interrupted recording is kept under a ``.partial`` name, marked incomplete; what a
writer killed outright left behind is salvaged.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import json
import os
import re
from pathlib import Path
from typing import Mapping

import numpy as np

from rxbench import keys
from rxbench.errors import CaptureError
from rxbench.files import check_output
from rxbench.recordings.encoding import ENCODINGS, encode
from rxbench.recordings.samples import DATA_SUFFIX, META_SUFFIX, sigmf_paths

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
