"""Worker threads for the streaming passes: one per core, results taken back in submission order.

numpy's array loops and the pocketfft core release the GIL, so plain threads keep every core busy
with no copies between processes. Results are always combined in the order the work was handed
out, whatever order the threads finish in, so a pass gives the same numbers, to the last bit, on
one core or many.
"""

from __future__ import annotations

import os
import queue
import threading
from collections import deque
from typing import Callable

_POOL = None


def cpu_threads() -> int:
    """Cores this process may run on."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


#: At most this many workers: a pass streams from one file, and each queued job holds a block
#: (4 MiB) or a scratch array (2 MiB), so memory stays bounded on machines with many cores.
MAX_WORKERS = 4


def workers() -> int:
    """Worker threads a pass uses: one per core, at most :data:`MAX_WORKERS`."""
    return min(cpu_threads(), MAX_WORKERS)


def worker_pool():
    """The process's worker threads, or None on a single core."""
    global _POOL
    if _POOL is None and workers() > 1:
        _POOL = _Workers(workers())
    return _POOL


def _forget_pool_in_child() -> None:
    """A forked child has none of its parent's threads: it starts its own pool when it needs one."""
    global _POOL
    _POOL = None


if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_forget_pool_in_child)


class _Workers:
    """Daemon threads serving one queue of jobs (lighter to start and to feed than
    ``concurrent.futures``, whose import alone is 4 ms of every command)."""

    def __init__(self, n: int) -> None:
        self._jobs = queue.SimpleQueue()
        for i in range(n):
            threading.Thread(target=self._serve, name=f"rxbench-worker-{i}", daemon=True).start()

    def _serve(self) -> None:
        while True:
            self._jobs.get().run()

    def submit(self, fn: Callable, *args) -> "_Job":
        job = _Job(fn, args)
        self._jobs.put(job)
        return job


class _Job:
    """One call on a worker; ``result()`` waits for it and re-raises what it raised."""

    __slots__ = ("_call", "_done", "_value", "_error")

    def __init__(self, fn: Callable, args: tuple) -> None:
        self._call = (fn, args)
        self._done = threading.Lock()
        self._done.acquire()  # released when the call has finished
        self._value = self._error = None

    def run(self) -> None:
        fn, args = self._call
        try:
            self._value = fn(*args)
        except BaseException as exc:  # handed to whoever takes the result
            self._error = exc
        finally:
            self._call = None
            self._done.release()

    def result(self):
        with self._done:
            pass
        if self._error is not None:
            raise self._error
        return self._value


class InOrder:
    """Compute ``fn(*args)`` on a worker thread and hand each result to its ``apply`` callback in
    the order the work was submitted. At most ``2 * workers()`` jobs wait at a time."""

    def __init__(self) -> None:
        self._pending: deque = deque()  # (apply, future or finished result)

    def submit(self, apply: Callable, fn: Callable, *args, inline: bool = False) -> None:
        """Queue ``apply(fn(*args))``; ``inline`` computes now (work too small to hand off)."""
        pool = None if inline else worker_pool()
        if pool is None:
            self._pending.append((apply, _Done(fn(*args))))
        else:
            self._pending.append((apply, pool.submit(fn, *args)))
        while len(self._pending) > 2 * workers():
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
