"""The capture pass's process-wide machinery (private): one pool of worker threads from
``concurrent.futures``, and the in-order runner that hands it the pass's work.

numpy's array loops and scipy's FFT release the GIL, so threads keep every core busy with no
copies between processes. The accumulators in :mod:`rxbench.dsp` take a runner (anything with
``submit(apply, fn, *args, inline=False)`` and ``drain()``); :class:`InOrder` computes on the pool
and applies each result in the order the work was handed out, so a pass gives the same numbers,
to the last bit, on one core or many. The pool is shut down at exit and, by :func:`cancel` in
the pass, on an interrupt: no worker is left inside a compiled routine while the interpreter
finalises.
"""

from __future__ import annotations

import atexit
import os
import threading
from collections import deque
from concurrent.futures import ThreadPoolExecutor
from typing import Callable

#: At most this many workers: a pass streams from one file, and each queued job holds a block
#: (4 MiB) or a scratch array (2 MiB), so memory stays bounded on machines with many cores.
MAX_WORKERS = 4

_POOL: ThreadPoolExecutor | None = None
_WORKERS: int | None = None
_LOCK = threading.Lock()


def cpu_threads() -> int:
    """Cores this process may run on."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def workers() -> int:
    """Worker threads a pass uses: one per core, at most :data:`MAX_WORKERS` (the cores counted
    when the process's pool starts: a system call per job was a tenth of the main thread's work)."""
    global _WORKERS
    if _WORKERS is None:
        _WORKERS = min(cpu_threads(), MAX_WORKERS)
    return _WORKERS


def pool() -> ThreadPoolExecutor | None:
    """The process's worker pool (started on first use), or None on a single core."""
    global _POOL
    with _LOCK:
        if _POOL is None and workers() > 1:
            _POOL = ThreadPoolExecutor(workers(), thread_name_prefix="rxbench-worker")
        return _POOL


def shutdown() -> None:
    """Stop the pool: queued work is cancelled, running work finishes; the next pass starts anew."""
    global _POOL, _WORKERS
    with _LOCK:
        p, _POOL, _WORKERS = _POOL, None, None
    if p is not None:
        p.shutdown(wait=True, cancel_futures=True)


def _forget_pool_in_child() -> None:
    """A forked child has none of its parent's threads: it starts its own pool when it needs one."""
    global _POOL, _LOCK, _WORKERS
    _POOL, _LOCK, _WORKERS = None, threading.Lock(), None


atexit.register(shutdown)
if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_forget_pool_in_child)


class InOrder:
    """Compute ``fn(*args)`` on the pool and hand each result to its ``apply`` callback in the
    order the work was submitted. At most ``2 * workers()`` jobs wait at a time."""

    def __init__(self, executor: ThreadPoolExecutor | None = None) -> None:
        self._executor = executor
        self._pending: deque = deque()  # (apply, future or finished result)

    def submit(self, apply: Callable, fn: Callable, *args, inline: bool = False) -> None:
        """Queue ``apply(fn(*args))``; ``inline`` computes now (work too small to hand off)."""
        executor = None if inline else (self._executor or pool())
        if executor is None:
            self._pending.append((apply, _Done(fn(*args))))
        else:
            self._pending.append((apply, executor.submit(fn, *args)))
        while len(self._pending) > 2 * workers():
            self._take_oldest()

    def drain(self) -> None:
        """Wait for every queued result and apply it."""
        while self._pending:
            self._take_oldest()

    def cancel(self) -> None:
        """Drop the queued work (an interrupted pass): cancel what has not started, wait for what
        has, apply nothing."""
        pending, self._pending = self._pending, deque()
        for _, future in pending:
            future.cancel()
        for _, future in pending:
            if not future.cancelled():
                try:
                    future.result()
                except BaseException:  # the pass is being abandoned; its errors with it
                    pass

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

    def cancel(self) -> bool:
        return False

    def cancelled(self) -> bool:
        return False
