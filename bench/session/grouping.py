"""Which captures of a session may be compared, and grouping them by tuning."""

from __future__ import annotations

from rxbench.compared import CENTER_TOLERANCE_HZ, setup_difference, signal_differences
from rxbench.session.folder import Entry


def not_alike(a: Entry, b: Entry) -> str | None:
    """Why two captures cannot be compared, or None when they were taken alike."""
    return setup_difference(a.capture, b.capture)


def _compatible(entries: list[Entry], ref: Entry, what: str, warnings: list[str]) -> list[Entry]:
    keep = []
    for e in entries:
        why = not_alike(e, ref)
        if why is None:
            keep.append(e)
        else:
            warnings.append(f"{what}: left out {e.name}: {why}")
    return keep


def _same_signal(entries: list[Entry], readings, where: str, warnings: list[str], drift_ppm: float) -> list[Entry]:
    """Leave out, with a warning, the entries whose tone is not the signal the others hold
    (:func:`rxbench.compared.signal_differences`); entries without a tone are left to the caller."""
    toned = [e for e in entries if readings[e].tone is not None]
    if not toned:
        return entries
    check, problems = signal_differences([readings[e] for e in toned], drift_ppm=drift_ppm)
    warnings.extend(f"{where}: left out {p}" for p in problems)
    out = {toned[i] for i in check.rejected}
    return [e for e in entries if e not in out]


def _center_key(center_hz: float | None):
    return None if center_hz is None else round(center_hz / CENTER_TOLERANCE_HZ) * CENTER_TOLERANCE_HZ


def _groups(entries, roles) -> dict:
    out: dict = {}
    for e in entries:
        if e.role in roles:
            out.setdefault(_center_key(e.center_hz), []).append(e)
    return out


def _mhz(center_hz) -> str:
    return "unknown frequency" if center_hz is None else f"{center_hz / 1e6:.3f} MHz"
