"""What a headline must say about itself: the caveats that belong on a result's own summary line.

A number printed alone reads as if it could be trusted as printed. These tags go beside it:

- ``[clipped]`` when any capture it rests on clipped (compressed readings);
- ``[outside the linear range]`` for a direct loss the ladder check did not find linear over;
- ``readings only: mismatch not assessed`` (and the other budget lines left at zero, e.g. drift)
  when the uncertainty leaves out terms nobody assessed, so the ± is the readings' alone.

The inputs are the JSON-ready result dicts the session builds (``budget`` lines with their
``note``, ``captures`` by role) and the readings by capture name.
"""

from __future__ import annotations

from typing import Iterable, Mapping

from rxbench.reading import CLIP_NOTE_BELOW

NOT_ASSESSED = "not assessed"


def not_assessed(budget: Iterable[Mapping] | None) -> list[str]:
    """Names of the budget lines nobody assessed (zero lines whose note says so), in budget order."""
    out = []
    for line in budget or ():
        if str(line.get("note") or "").startswith(NOT_ASSESSED) and line.get("name") not in out:
            out.append(str(line["name"]))
    return out


def capture_names(captures) -> list[str]:
    """Every capture name in a result's ``captures`` (nested dicts/lists of names)."""
    if isinstance(captures, str):
        return [captures]
    if isinstance(captures, Mapping):
        return [n for v in captures.values() for n in capture_names(v)]
    if isinstance(captures, (list, tuple)):
        return [n for v in captures for n in capture_names(v)]
    return []


def clipped_names(names: Iterable[str], clip_by_name: Mapping[str, float]) -> list[str]:
    """The captures among ``names`` that clipped (as ``analyze`` calls clipping)."""
    return [n for n in names if clip_by_name.get(n, 0.0) >= CLIP_NOTE_BELOW]


def headline_tags(result: Mapping, clip_by_name: Mapping[str, float], *, linear: bool | None = None) -> str:
    """The caveats of one result, as a suffix for its summary line ('' when there are none)."""
    tags = []
    if clipped_names(capture_names(result.get("captures")), clip_by_name):
        tags.append("[clipped]")
    if linear is False:
        tags.append("[outside the linear range]")
    missing = not_assessed(result.get("budget"))
    if missing:
        tags.append("readings only: " + ", ".join(missing) + " not assessed")
    return ("  " + " ".join(t if t.startswith("[") else f"({t})" for t in tags)) if tags else ""


def clip_fractions(analysis) -> dict[str, float]:
    """Clip fraction of every capture read in a session analysis, by capture name."""
    return {e.name: r.clip_fraction for e, r in analysis.readings.items()}


__all__ = ["not_assessed", "capture_names", "clipped_names", "headline_tags", "clip_fractions"]
