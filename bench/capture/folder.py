"""The session folder as a run writes it: its plan copy (one plan per session), its log (appended,
never rewritten), recordings captured again moved aside (never deleted), the space the plan's
captures still need, and the check that a recording found there is the complete capture.
"""

from __future__ import annotations

import datetime as _dt
import math
import os
from pathlib import Path
from typing import Sequence

from rxbench import keys
from rxbench.errors import CaptureError, RxbenchError, UsageError
from rxbench.files import read_text_input
from rxbench.plan import PLAN_LIMIT_BYTES, Plan, PlannedCapture
from rxbench.recordings import META_SUFFIX, open_capture, sigmf_paths

PLAN_NAME = "plan.toml"
LOG_NAME = "log.txt"
#: Earlier recordings of steps captured again; a dot folder, so session readers pass it by.
REPLACED_DIR = ".replaced"


def round_up_512(n: float) -> int:
    """``n`` bytes rounded up to whole 512-byte reads (what the dongle delivers in)."""
    return int(math.ceil(n / 512.0)) * 512


class SessionLog:
    """The session's ``log.txt``: one UTC-stamped line per call, appended."""

    def __init__(self, path: Path):
        self.path = path

    def __call__(self, message: str) -> None:
        stamp = _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds").replace("+00:00", "Z")
        with open(self.path, "a", encoding="utf-8") as f:
            f.write(f"{stamp} {message}\n")


def _write_new(path: Path, text: str) -> None:
    """Write ``text`` to a new file atomically; never replaces an existing one."""
    tmp = path.parent / f".{path.name}.{os.urandom(4).hex()}.tmp"
    try:
        with open(tmp, "x", encoding="utf-8") as f:
            f.write(text)
            f.flush()
            os.fsync(f.fileno())
        os.link(tmp, path)
    except FileExistsError:
        raise CaptureError(path, "already exists; not overwriting it") from None
    finally:
        tmp.unlink(missing_ok=True)  # on every path: a full disk leaves no empty temporary


def _same_plan_data(text_a: str, text_b: str) -> bool:
    """True when two plan texts hold the same data (they differ only in comments or layout)."""
    import tomllib

    try:
        return tomllib.loads(text_a) == tomllib.loads(text_b)
    except (tomllib.TOMLDecodeError, RecursionError):
        return False


def prepare_session(plan: Plan, session_dir) -> Path:
    """Create the session folder or check that an existing one holds this plan (the same data; comments
    and layout may differ, and the session keeps its own copy); returns its path."""
    session = Path(session_dir)
    if session.exists() and not session.is_dir():
        raise UsageError(f"{session}: exists and is not a folder")
    session.mkdir(parents=True, exist_ok=True)
    plan_copy = session / PLAN_NAME
    if plan_copy.exists():
        try:
            old = read_text_input(plan_copy, "plan file", limit=PLAN_LIMIT_BYTES)
        except CaptureError as exc:
            raise UsageError(f"cannot read the session's plan: {exc}") from None
        if old != plan.text and not _same_plan_data(old, plan.text):
            raise UsageError(f"{plan_copy}: the session was made with a different plan than {plan.source}; "
                             "a session holds one plan: choose a new --out folder")
    else:
        if any(session.glob("*" + META_SUFFIX)):
            raise UsageError(f"{session}: holds recordings but no {PLAN_NAME}: not an rxbench session; "
                             "choose a new --out folder")
        _write_new(plan_copy, plan.text)
    return session


def move_aside(session: Path, meta: Path) -> list[Path]:
    """Move a recording into ``replaced/`` under a new name (never deleting anything)."""
    folder = session / REPLACED_DIR
    folder.mkdir(exist_ok=True)
    meta_path, data_path = sigmf_paths(meta)
    base = meta_path.name[: -len(META_SUFFIX)]
    stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    for i in range(1000):
        stem = f"{base}.{stamp}" + (f"-{i}" if i else "")
        targets = [folder / (stem + p.name[len(base):]) for p in (meta_path, data_path)]
        if not any(t.exists() for t in targets):
            break
    moved = []
    for src, dst in zip((meta_path, data_path), targets):
        if src.exists():
            os.rename(src, dst)
            moved.append(dst)
    return moved


def plan_bytes(plan: Plan, session_dir, redo: Sequence[str] = ()) -> int:
    """Bytes the plan's captures still to be made will take in ``session_dir`` (cu8: 2 a sample)."""
    session = Path(session_dir)
    rate = plan.dongle.sample_rate_hz
    total = 0
    for cap in plan.expand():
        if cap.step.name not in redo and (session / (cap.base_name + META_SUFFIX)).exists():
            continue
        total += round_up_512(math.ceil(cap.duration_s * rate) * 2)
    return total


def verify_kept(meta: Path, cap: PlannedCapture) -> str | None:
    """Why a recording found in the session is not the complete capture ``cap`` (None when it is):
    both files there, the metadata readable and of this step, the length the plan asks for."""
    meta_path, data_path = sigmf_paths(meta)
    if not meta_path.exists():
        return "its data has no metadata beside it"
    if not data_path.exists():
        return "its data file is missing"
    try:
        rec = open_capture(meta_path)
    except RxbenchError as exc:
        return str(exc.problem if isinstance(exc, CaptureError) else exc)
    if rec.extra.get(keys.INCOMPLETE):
        return "it is marked incomplete"
    if rec.extra.get(keys.STEP) not in (None, cap.step.name):
        return f"it is of step {rec.extra.get(keys.STEP)!r}, not {cap.step.name!r}"
    expected = round_up_512(math.ceil(cap.duration_s * rec.sample_rate_hz) * 2) // 2
    if rec.n_samples != expected:
        return f"it holds {rec.n_samples} samples, the plan's capture {expected}"
    return None
