"""Opening a session folder: which captures it holds and what their metadata says about them."""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from rxbench import keys
from rxbench.reading import capture_start_s
from rxbench.errors import CaptureError, UsageError
from rxbench.quantities import check as check_quantity
from rxbench.recordings import META_SUFFIX, Capture, open_capture


#: Roles whose captures carry a generator tone.
TONE_ROLES = ("thru", "dut", "step")
#: Roles whose captures are read for their noise only.
NOISE_ROLES = ("hot", "cold", "antenna", "load")
#: Folder names the report writer uses; captures inside them are not part of the session.
REPORT_DIR_PREFIX = "report"
#: Folder where a re-run keeps the recordings it replaced; they are not part of the session.
REPLACED_DIR = "replaced"


@dataclass(frozen=True, eq=False)
class Entry:
    """One usable capture of a session and what its metadata says about it."""

    capture: Capture
    role: str
    step: str
    attenuation_db: float | None
    gain_db: float | None
    through_dut: bool
    time_s: float | None
    enr_db: float | None
    n_devices: int
    attenuator_tolerance_db: float | None
    tone_offset_hz: float | None = None
    dropped_samples: int = 0
    u_enr_db: float | None = None
    swr: tuple[tuple[str, float], ...] = ()  # source_swr, load_swr, dut_swr recorded from the plan
    device: str = ""  # which device is in the path (the plan step's label), when named
    generator_dbm: float | None = None  # the generator's nominal level (tone roles), dBm

    @property
    def name(self) -> str:
        return self.capture.name

    @property
    def center_hz(self) -> float | None:
        return self.capture.center_hz

    @property
    def attenuation_or_zero(self) -> float:
        return 0.0 if self.attenuation_db is None else self.attenuation_db


@dataclass(frozen=True)
class Session:
    """The captures of a session folder.

    Attributes
    ----------
    folder : Path
    entries : tuple of Entry
        Usable captures, in time order (then by name).
    incomplete : tuple of Path
        Captures marked incomplete (an interrupted capture, ``.partial``): listed, not analysed.
    skipped : tuple of (Path, str)
        Captures left out and why (unreadable, no role, bad metadata).
    plan_path, log_path : Path or None
        The copy of the plan and the log, when the folder has them.
    """

    folder: Path
    entries: tuple
    incomplete: tuple
    skipped: tuple
    plan_path: Path | None = None
    log_path: Path | None = None

    @property
    def warnings(self) -> list[str]:
        out = [f"{p.name}: incomplete capture (interrupted); skipped" for p in self.incomplete]
        out += [f"{p.name}: {why}; skipped" for p, why in self.skipped]
        return out


def _is_report_dir(name: str) -> bool:
    if name == REPORT_DIR_PREFIX:
        return True
    head, sep, tail = name.partition("-")
    return head == REPORT_DIR_PREFIX and sep == "-" and tail.isdigit()


def _session_files(folder: Path) -> list[Path]:
    found = []
    for p in sorted(folder.rglob("*" + META_SUFFIX)):
        parts = p.relative_to(folder).parts
        if any(part.startswith(".") for part in parts):
            continue  # temporary files of a capture being written
        if any(_is_report_dir(part) or part == REPLACED_DIR for part in parts[:-1]):
            continue
        found.append(p)
    return found


#: The quantity of each numeric rxbench metadata key (bench.quantities: the range every source of
#: that quantity shares).
_KEY_QUANTITIES = {keys.ATTENUATION_DB: "attenuation_db", keys.ENR_DB: "enr_db", keys.U_ENR_DB: "tolerance_db",
                   keys.ATTENUATOR_TOLERANCE_DB: "tolerance_db", keys.GAIN_DB: "gain_db",
                   keys.TONE_OFFSET_HZ: "offset", keys.GENERATOR_DBM: "level_dbm", **{k: "swr" for k in keys.SWRS}}


def _number(extra, key) -> float | None:
    value = extra.get(key)
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise ValueError(f"rxbench:{key} is {value!r}, not a finite number")
    if key in _KEY_QUANTITIES:
        check_quantity(value, _KEY_QUANTITIES[key], f"rxbench:{key}")  # QuantityError is a ValueError
    return float(value)


def _entry(cap: Capture) -> Entry:
    """An Entry from a capture's metadata; ValueError names what is wrong."""
    x = cap.extra
    role = x.get(keys.ROLE)
    if role is None:
        raise ValueError("no rxbench:role in its metadata (which part of the measurement is it?)")
    if role not in keys.ROLES:
        raise ValueError(f"rxbench:role {role!r} is not one of {', '.join(keys.ROLES)}")
    att = _number(x, keys.ATTENUATION_DB)
    enr = _number(x, keys.ENR_DB)
    tol = _number(x, keys.ATTENUATOR_TOLERANCE_DB)
    devices = x.get(keys.DEVICES, 1)
    if isinstance(devices, bool) or not isinstance(devices, int) or devices < 1:
        raise ValueError(f"rxbench:devices is {devices!r}, not a whole number >= 1")
    through = x.get(keys.WITH_DUT) is True or role == "dut"
    swr = []
    for key in keys.SWRS:
        value = _number(x, key)
        if value is not None:
            swr.append((key, value))
    return Entry(
        capture=cap, role=role, step=str(x.get(keys.STEP, "")), attenuation_db=att,
        gain_db=_number(x, keys.GAIN_DB), through_dut=through,
        time_s=capture_start_s(cap), enr_db=enr, n_devices=devices, attenuator_tolerance_db=tol,
        tone_offset_hz=_number(x, keys.TONE_OFFSET_HZ) if role in TONE_ROLES else None,
        dropped_samples=int(_number(x, keys.DROPPED_SAMPLES) or 0),
        u_enr_db=_number(x, keys.U_ENR_DB),
        swr=tuple(swr),
        device=str(x.get(keys.DEVICE, "")) if through else "",
        generator_dbm=_number(x, keys.GENERATOR_DBM) if role in TONE_ROLES else None,
    )


def open_session(folder) -> Session:
    """Find the captures of a session folder.

    Raises
    ------
    UsageError
        The folder does not exist, is a file, or holds no usable capture.
    """
    folder = Path(folder)
    if not folder.exists():
        raise UsageError(f"{folder}: no such session folder")
    if not folder.is_dir():
        raise UsageError(f"{folder}: is a file; give the session folder that holds the captures")
    entries, incomplete, skipped = [], [], []
    for meta in _session_files(folder):
        if ".partial" in meta.name:
            incomplete.append(meta)
            continue
        try:
            cap = open_capture(meta)
        except CaptureError as exc:
            skipped.append((meta, exc.problem))
            continue
        if cap.extra.get(keys.INCOMPLETE):
            incomplete.append(meta)
            continue
        try:
            entries.append(_entry(cap))
        except ValueError as exc:
            skipped.append((meta, str(exc)))
    if not entries:
        what = []
        if incomplete:
            what.append(f"{len(incomplete)} incomplete")
        if skipped:
            what.append(f"{len(skipped)} unusable ({skipped[0][0].name}: {skipped[0][1]})")
        detail = f" ({'; '.join(what)})" if what else ""
        raise UsageError(f"{folder}: no usable capture (SigMF recording with an rxbench role) found{detail}")
    entries.sort(key=lambda e: (e.time_s if e.time_s is not None else math.inf, e.name))
    plans = sorted(folder.glob("*.toml"))
    logs = sorted(folder.glob("log.txt")) + sorted(folder.glob("*.log"))
    return Session(folder, tuple(entries), tuple(incomplete), tuple(skipped),
                   plans[0] if plans else None, logs[0] if logs else None)
