"""The exception tree of the shell.

The command line turns any :class:`RxbenchError` into one line on stderr and an exit code: 1 for a
:class:`MeasurementError` (the input is valid, but what the captures hold does not give the number),
2 for every other (bad input: options, files, metadata, plans, captures that do not go together).
"""

from __future__ import annotations

from pathlib import Path


class RxbenchError(Exception):
    """Root of every error the user can cause (bad file, bad option, bad plan)."""


class CaptureError(RxbenchError):
    """A capture cannot be read or written; the message names the file."""

    def __init__(self, path: str | Path, problem: str):
        self.path = Path(path)
        self.problem = problem
        super().__init__(f"{self.path}: {problem}")


class PlanError(RxbenchError):
    """A measurement plan is malformed; the message names the file, line and field."""


class UsageError(RxbenchError):
    """Options that make no sense together, or values outside what a method supports."""


class DeviceError(RxbenchError):
    """The dongle (or its library) is missing or refused a setting."""


class UnlikeCapturesError(UsageError):
    """Captures given together that were not taken alike (sample rate, tuning, gain) or do not hold
    the same signal: the wrong set of files, so bad input (exit 2)."""


class MeasurementError(RxbenchError):
    """Valid input whose captures do not give the requested number (no tone above the noise, the DUT
    outside the ladder, hot not above cold, no signal heard in both paths): exit 1."""


def _library_errors() -> tuple[type, ...]:
    """The audio and schema libraries' own exception classes, of those already imported (the
    command line never imports a library just to name its errors)."""
    import sys

    found: list[type] = []
    for module, names in (("soundfile", ("SoundFileError",)), ("sigmf.error", ("SigMFError",)),
                          ("jsonschema.exceptions", ("ValidationError", "SchemaError"))):
        mod = sys.modules.get(module)
        for name in names:
            cls = getattr(mod, name, None) if mod is not None else None
            if isinstance(cls, type) and issubclass(cls, BaseException):
                found.append(cls)
    return tuple(found)


def describe_foreign(exc: BaseException) -> str | None:
    """One line for an exception that is not an :class:`RxbenchError` but still the input's or the
    machine's fault (a number out of range, nesting too deep, memory, a library's refusal); None for
    anything else (a defect, which keeps its traceback)."""
    if isinstance(exc, RecursionError):
        return "the input is nested too deeply"
    if isinstance(exc, MemoryError):
        return "out of memory (is an input far larger than a capture, plan or table should be?)"
    if isinstance(exc, (OverflowError, FloatingPointError)):
        return f"a number is out of range ({exc or type(exc).__name__})"
    if isinstance(exc, _library_errors()):
        text = (getattr(exc, "message", None) or str(exc)).strip().splitlines()
        return f"{type(exc).__name__}: {text[0] if text else 'refused'}"
    return None
