"""Signals that end a run: Ctrl-C (SIGINT), SIGTERM (a service manager, ``kill``) and SIGHUP (a
dropped terminal or SSH link).

Each raises :class:`Signalled` (a ``KeyboardInterrupt``, so every ``finally`` and every handler of
an interrupt runs: a capture keeps its partial, temporaries are removed). The first signal is
remembered: one arriving while a library is being imported may come out as another exception
(numpy turns an interrupt of its own import into an ``ImportError``), and the command line still
reports the interruption, with the signal's own exit status (130, 143, 129). Further signals while
the run cleans up are noted but not raised, so the clean-up is not cut short; the third one ends
the process at once.
"""

from __future__ import annotations

import os
import signal

#: The signals handled, with the word the command line prints.
NAMES = {signal.SIGINT: "interrupted", signal.SIGTERM: "terminated (SIGTERM)"}
if hasattr(signal, "SIGHUP"):
    NAMES[signal.SIGHUP] = "hung up (SIGHUP)"

_received: list[int] = []


class Signalled(KeyboardInterrupt):
    """Raised by the handler of a signal that ends the run."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = signum


def _handler(signum, frame):
    _received.append(signum)
    if len(_received) == 1:
        raise Signalled(signum)
    if len(_received) >= 3:  # the operator insists: end now, as the signal would without us
        signal.signal(signum, signal.SIG_DFL)
        os.kill(os.getpid(), signum)


def install() -> None:
    """Handle SIGINT, SIGTERM and SIGHUP as described above (main thread only)."""
    for signum in NAMES:
        signal.signal(signum, _handler)


def finished() -> None:
    """The run's work is done: a signal from now on is ignored, so one that lands while the
    interpreter shuts down (after Python has put the default handlers back) cannot turn a complete
    run into a killed one."""
    for signum in NAMES:
        signal.signal(signum, signal.SIG_IGN)


def received() -> int | None:
    """The first signal that arrived, or None."""
    return _received[0] if _received else None


def describe(exc: BaseException | None = None) -> tuple[str, int]:
    """(word, exit status) for an interruption: the remembered signal, else SIGINT's."""
    signum = received()
    if signum is None and isinstance(exc, Signalled):
        signum = exc.signum
    if signum is None:
        signum = int(signal.SIGINT)
    return NAMES.get(signum, "interrupted"), 128 + int(signum)


__all__ = ["Signalled", "install", "finished", "received", "describe"]
