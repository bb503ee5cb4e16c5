"""The exception tree of the shell.

The command line turns any :class:`RxbenchError` into one line on stderr and exit code 2.
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


class MeasurementError(RxbenchError):
    """The captures do not support the requested measurement (e.g. DUT outside the ladder)."""
