"""Worker threads for the streaming passes: one per core, results taken back in submission order.

numpy's array loops and the pocketfft core release the GIL, so plain threads keep every core busy
with no copies between processes. Results are always combined in the order the work was handed
out, whatever order the threads finish in, so a pass gives the same numbers, to the last bit, on
one core or many.
"""

from __future__ import annotations

import os
from collections import deque
from typing import Callable

_POOL = None


def cpu_threads() -> int:
    """Cores this process may run on."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def worker_pool():
    """The process's worker threads (one per core), or None on a single core."""
    global _POOL
    if _POOL is None and cpu_threads() > 1:
        from concurrent.futures import ThreadPoolExecutor

        _POOL = ThreadPoolExecutor(max_workers=cpu_threads(), thread_name_prefix="rxbench-worker")
    return _POOL


class InOrder:
    """Compute ``fn(*args)`` on a worker thread and hand each result to its ``apply`` callback in
    the order the work was submitted. At most ``2 * workers`` results wait at a time."""

    def __init__(self) -> None:
        self._pending: deque = deque()  # (apply, future or finished result)

    def submit(self, apply: Callable, fn: Callable, *args, inline: bool = False) -> None:
        """Queue ``apply(fn(*args))``; ``inline`` computes now (work too small to hand off)."""
        pool = None if inline else worker_pool()
        if pool is None:
            self._pending.append((apply, _Done(fn(*args))))
        else:
            self._pending.append((apply, pool.submit(fn, *args)))
        while len(self._pending) > 2 * cpu_threads():
            self._take_oldest()

    def drain(self) -> None:
        """Wait for every queued result and apply it."""
        while self._pending:
            self._take_oldest()

    def _take_oldest(self) -> None:
        apply, future = self._pending.popleft()
        apply(future.result())


class _Done:
    """A result computed at once, queued behind the unfinished ones so the order holds."""

    __slots__ = ("value",)

    def __init__(self, value) -> None:
        self.value = value

    def result(self):
        return self.value
