"""A second process for the report's drawing: a forked child that draws the spectra pages while
the parent draws the other figures (matplotlib draws on one core).

Started before the session is analysed (:func:`start_helper`), the child loads matplotlib and
builds the page figure meanwhile, then waits for the pages' data; started late (by
:func:`rxbench.report.write_report` itself), it inherits the parent's matplotlib instead. Only when
a second core is likely free (:func:`core_free`): on a busy machine a second process only competes
with the first. If the child fails, it answers None and the parent draws the pages itself, so an
error surfaces there with its usual message.
"""

from __future__ import annotations

import multiprocessing
import os
import signal
import sys
import threading
import time
from pathlib import Path

from rxbench import spectra_pages


#: Looks at the run queue, and the time between them: a task that runs for a moment (a kernel
#: worker, a shell command) is not a load, so the least of the counts seen is taken.
LOOKS = 3
LOOK_GAP_S = 0.002


def runnable_tasks(loadavg_text: str) -> int:
    """The tasks (processes and threads) running or ready to run, from the text of /proc/loadavg:
    the first number of its fourth field ("1/80"; proc(5))."""
    return int(loadavg_text.split()[3].split("/")[0])


def _others_running() -> int | None:
    """Tasks running or ready to run now besides this one, the least of :data:`LOOKS` looks
    (Linux); None where /proc/loadavg cannot be read."""
    seen = []
    try:
        for i in range(LOOKS):
            if i:
                time.sleep(LOOK_GAP_S)
            with open("/proc/loadavg", encoding="ascii") as f:
                seen.append(runnable_tasks(f.read()))
    except (OSError, ValueError, IndexError):
        return None
    return min(seen) - 1


def core_free() -> bool:
    """Whether a second core is likely free: two or more cores, and fewer other tasks running or
    ready to run right now than one less than their number (Linux's run queue); elsewhere, a load
    average (last minute) below that. The run queue, not the load average, where there is one:
    the average still counts processes that ended in the last minute (an earlier rxbench run), so
    back-to-back runs on an idle two-core machine never forked by it. On a busy machine a second
    process only adds its start-up and competes with the first (measured: 1.08x the wall time;
    DEVELOPERS.md, Speed)."""
    from rxbench._engine import cpu_threads

    cores = cpu_threads()
    if cores < 2:
        return False
    others = _others_running()
    if others is not None:
        return others < cores - 1
    try:
        load = os.getloadavg()[0]
    except (AttributeError, OSError):
        load = 0.0
    return load < cores - 1


def _child(conn, parent_end) -> None:
    """The child: ready a page figure, wait for the job, draw it, answer the file names (None on
    any failure). Ctrl-C is the parent's to handle (it stops the child); SIGTERM ends it at once."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    if hasattr(signal, "SIGHUP"):
        signal.signal(signal.SIGHUP, signal.SIG_DFL)
    parent_end.close()  # so that the parent's end closing (its exit, however) ends the wait below
    try:
        figures = spectra_pages.prepare()
    except Exception:  # noqa: BLE001 - the parent draws the pages and reports the error
        figures = None
    try:
        job = conn.recv()
    except (EOFError, OSError):  # the parent went away
        return
    names = None
    if job is not None and figures is not None:
        try:
            names = spectra_pages.draw_pages(job[1], job[0], figures)
        except Exception:  # noqa: BLE001 - as above
            names = None
    try:
        conn.send(names)
        conn.close()
    except OSError:  # the parent stopped listening: nothing to report
        pass


class Helper:
    """The forked child drawing the spectra pages: :meth:`draw` sends it the job, :meth:`pages`
    waits for the names, :meth:`close` ends it whatever state it is in."""

    def __init__(self):
        ctx = multiprocessing.get_context("fork")
        self._conn, child_end = ctx.Pipe(duplex=True)
        sys.stdout.flush()  # nothing buffered may be written twice, by the child too
        sys.stderr.flush()
        self._process = ctx.Process(target=_child, args=(child_end, self._conn), daemon=True)
        self._process.start()
        child_end.close()
        self._sender: threading.Thread | None = None

    def draw(self, pages: list[list[dict]], folder: Path) -> bool:
        """Hand ``pages`` (:func:`rxbench.spectra_pages.page_data`) to the child, to be drawn into
        ``folder``; False if it is gone. Sent from a thread: the data fill more than the pipe
        holds, and the child reads them only once its figure is ready, while the parent draws on."""
        if self._sender is not None:
            raise RuntimeError("the helper draws one job")
        if not self._process.is_alive():
            return False
        self._sender = threading.Thread(target=self._send, args=((Path(folder), pages),), daemon=True)
        self._sender.start()
        return True

    def _send(self, job) -> None:
        try:
            self._conn.send(job)
        except OSError:  # the child is gone: pages() then finds the pipe closed
            pass

    def pages(self) -> list[str] | None:
        """The names of the pages the child drew, once it has; None if it failed or is gone."""
        try:
            names = self._conn.recv()
        except (EOFError, OSError):
            names = None
        self._sender.join()
        self._process.join(timeout=5.0)  # it ends once it has answered
        return names

    def close(self) -> None:
        """End the child (at once if it is still at work: the report failed or was interrupted)."""
        if self._process.is_alive():
            self._process.terminate()
        self._process.join()
        if self._sender is not None:  # ends with the pipe: sent, or failed with the child gone
            self._sender.join()
        self._conn.close()


def start_helper() -> Helper | None:
    """A forked child to draw the spectra pages, when the platform forks and a second core is
    likely free; None otherwise (the parent then draws everything)."""
    if "fork" not in multiprocessing.get_all_start_methods() or not core_free():
        return None
    return Helper()
