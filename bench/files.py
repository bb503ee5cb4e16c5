"""Guards on the files a run reads and writes.

Inputs are regular files only (a FIFO would block forever, a device such as ``/dev/zero`` would
fill memory), and text inputs (metadata, plans, ENR tables) are read with a size limit. Every input
a run opens is remembered, so that no output of the same run, ``--overwrite`` or not, can replace
it; an output never replaces a recording (a SigMF file, raw IQ or audio capture) at all, except a
SigMF recording marked ``rxbench:simulated`` (a synthetic file ``rxbench synth --overwrite`` may
write again).

Free space: :func:`check_free_space` refuses work whose output would not fit on the disk.
"""

from __future__ import annotations

import json
import os
import shutil
import stat
from pathlib import Path

from rxbench.errors import CaptureError, UsageError

#: Largest text input read (metadata, plan, ENR table), bytes. A SigMF metadata file of a long
#: recording with many annotations is a few MB at most; a plan or an ENR table a few kB.
TEXT_LIMIT_BYTES = 16 * 1024 * 1024
#: Suffixes of files that hold samples (raw IQ, audio, SigMF).
RECORDING_SUFFIXES = (".sigmf-meta", ".sigmf-data", ".cu8", ".cs8", ".cs16", ".cf32", ".wav", ".flac",
                      ".rf64", ".w64")
#: Space left free beyond what a run writes (log lines, metadata, the file system's own needs), bytes.
FREE_SPACE_MARGIN_BYTES = 64 * 1024 * 1024

_inputs: list[Path] = []
_run = [False]


def begin_run() -> None:
    """A command starts: inputs are remembered from now until :func:`end_run` (the command line
    brackets each command; used as a library, only the recording rule applies)."""
    _inputs.clear()
    _run[0] = True


def end_run() -> None:
    _inputs.clear()
    _run[0] = False


def note_input(path) -> None:
    """Remember ``path`` as an input of this run: no output of the run may replace it."""
    if _run[0]:
        _inputs.append(Path(path))


def check_regular(path, what: str = "file") -> os.stat_result:
    """Stat ``path`` and refuse anything but an existing regular file (FIFO, device, folder)."""
    path = Path(path)
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise CaptureError(path, f"no such {what if what.endswith('file') else 'file'}") from None
    except OSError as exc:
        raise CaptureError(path, f"cannot read: {exc.strerror or exc}") from None
    if stat.S_ISDIR(st.st_mode):
        raise CaptureError(path, f"is a folder, not a {what}")
    if not stat.S_ISREG(st.st_mode):
        raise CaptureError(path, "is not a regular file (a pipe or a device?): give a file on disk")
    if not os.access(path, os.R_OK):
        raise CaptureError(path, "cannot read: permission denied")
    return st


def read_text_input(path, what: str, *, encoding: str = "utf-8", limit: int = TEXT_LIMIT_BYTES) -> str:
    """The text of a regular file of at most ``limit`` bytes; remembered as an input of the run.

    Raises :class:`CaptureError` naming the file for a missing, special, oversized, unreadable or
    undecodable file.
    """
    path = Path(path)
    st = check_regular(path, what)
    if st.st_size > limit:
        raise CaptureError(path, f"{st.st_size} bytes is too large for a {what} (at most {limit} bytes)")
    note_input(path)
    try:
        with open(path, "rb") as f:
            data = f.read(limit + 1)
    except OSError as exc:
        raise CaptureError(path, f"cannot read: {exc.strerror or exc}") from None
    if len(data) > limit:
        raise CaptureError(path, f"grew beyond {limit} bytes while being read: not a {what}")
    try:
        return data.decode(encoding)
    except UnicodeDecodeError:
        raise CaptureError(path, f"is not a text file (a {what} is text)") from None


def is_recording(path) -> bool:
    """True for a file that holds or describes samples (by its suffix)."""
    return str(path).lower().endswith(RECORDING_SUFFIXES)


def _simulated_sigmf(path: Path) -> bool:
    """True when ``path`` belongs to a SigMF recording whose metadata says it is synthetic."""
    s = str(path)
    for suffix in (".sigmf-meta", ".sigmf-data"):
        if s.endswith(suffix):
            s = s[: -len(suffix)]
    meta = Path(s + ".sigmf-meta")
    try:
        if meta.stat().st_size > TEXT_LIMIT_BYTES:
            return False
        g = json.loads(meta.read_text(encoding="utf-8")).get("global", {})
    except (OSError, ValueError, RecursionError, AttributeError):
        return False
    return isinstance(g, dict) and g.get("rxbench:simulated") is True


def check_output(final, *, overwrite: bool = False) -> None:
    """Refuse to write ``final`` over an input of this run, over any recording, or (without
    ``overwrite``) over any existing file. Called by every writer before it starts."""
    final = Path(final)
    try:
        exists = final.exists() or final.is_symlink()
    except OSError:
        exists = False
    if not exists:
        return
    for p in _inputs:
        try:
            same = os.path.samefile(p, final)
        except OSError:
            same = False
        if same:
            raise CaptureError(final, "is an input of this run; an output never replaces it (choose another name)")
    if not final.is_file() and not final.is_dir():
        raise CaptureError(final, "exists and is not a regular file; not replacing it")
    if not overwrite:
        raise CaptureError(final, "already exists; not overwriting it (give --overwrite to replace it)")
    if is_recording(final) and not _simulated_sigmf(final):
        raise CaptureError(final, "is a recording; --overwrite never replaces one (choose another name)")


def check_free_space(folder, needed_bytes: float, *, what: str, force: bool = False) -> str | None:
    """Refuse (UsageError) when ``needed_bytes`` plus a margin would not fit in ``folder``'s file
    system, unless ``force`` (then the message comes back as a warning). None when it fits."""
    folder = Path(folder)
    probe = folder
    while not probe.exists() and probe != probe.parent:
        probe = probe.parent
    try:
        free = shutil.disk_usage(probe).free
    except OSError:
        return None  # no figure to go by
    if needed_bytes + FREE_SPACE_MARGIN_BYTES <= free:
        return None
    msg = (f"{what} needs about {needed_bytes / 1e6:.6g} MB but {probe} has {free / 1e6:.6g} MB free")
    if not force:
        raise UsageError(msg + ": free some space, shorten it, or give --force")
    return msg + " (forced)"


__all__ = ["check_regular", "read_text_input", "note_input", "begin_run", "end_run", "check_output",
           "check_free_space", "is_recording", "TEXT_LIMIT_BYTES"]
