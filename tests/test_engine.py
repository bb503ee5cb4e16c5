"""Worker threads change nothing but the time: a pass gives the same numbers on one core or many;
the pool is shut down cleanly at exit and on an interrupt."""

import os
import signal
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest

from rxbench import _engine
from rxbench._engine import InOrder
from rxbench.dsp.health import HealthAccumulator
from rxbench.dsp.spectrum import PsdAccumulator


def _pass(x, runner):
    acc = PsdAccumulator(2.4e6, nperseg=1024, runner=runner)
    health = HealthAccumulator(runner=runner)
    for i in range(0, x.size, 200_000):
        health.update(x[i : i + 200_000])
        acc.update(x[i : i + 200_000])
    return acc.result(), health.result()


@pytest.mark.skipif(_engine.workers() < 2, reason="needs two cores to use worker threads")
def test_same_numbers_to_the_last_bit_with_and_without_workers():
    assert _engine.pool() is not None
    rng = np.random.default_rng(5)
    x = (0.1 * (rng.standard_normal(1_500_000) + 1j * rng.standard_normal(1_500_000))).astype(np.complex64)
    x[::977] = 1.0  # some samples at the rails
    x[300_000:400_000] = 0  # a dropped transfer
    threaded_psd, threaded_health = _pass(x, InOrder())
    single_psd, single_health = _pass(x, None)  # dsp's own inline runner
    assert np.array_equal(threaded_psd.density, single_psd.density)
    assert np.array_equal(threaded_psd.batch_density, single_psd.batch_density)
    assert np.array_equal(threaded_psd.track, single_psd.track)
    assert threaded_psd.zero_fraction == single_psd.zero_fraction > 0
    assert threaded_health == single_health
    assert threaded_health.clip_fraction > 0


def test_results_are_applied_in_submission_order():
    seen = []
    work = InOrder()
    for k in range(50):
        work.submit(seen.append, lambda k=k: k, inline=k % 3 == 0)
    work.drain()
    assert seen == list(range(50))


@pytest.mark.skipif(_engine.workers() < 2, reason="needs two cores to use worker threads")
def test_an_error_on_a_worker_reaches_the_caller():
    def fails():
        raise ValueError("bad block")

    work = InOrder()
    work.submit(lambda _: None, fails)
    with pytest.raises(ValueError, match="bad block"):
        work.drain()


def test_cancel_applies_nothing_and_leaves_nothing_running():
    seen = []
    work = InOrder()
    for k in range(2 * _engine.workers()):  # no more than may wait: none applied while submitting
        work.submit(seen.append, time.sleep, 0.01)
    work.cancel()
    work.drain()
    assert seen == []


def test_worker_count_is_capped_on_many_cores(monkeypatch):
    # Each queued job holds a block or a scratch array: the cap keeps memory bounded (peak memory
    # flat in the capture length; 2 * 4 queued blocks of 4 MiB at most).
    monkeypatch.setattr(_engine, "cpu_threads", lambda: 64)
    monkeypatch.setattr(_engine, "_WORKERS", None)  # counted afresh
    assert _engine.workers() == _engine.MAX_WORKERS == 4


def test_shutdown_then_a_new_pass_starts_a_new_pool():
    _engine.pool()
    _engine.shutdown()
    x = np.random.default_rng(2).standard_normal(400_000).astype(np.float32).view(np.complex64)
    psd, _ = _pass(x, InOrder())
    assert psd.density.mean() > 0


@pytest.mark.skipif(not hasattr(os, "fork"), reason="needs fork")
def test_a_forked_child_starts_its_own_workers():
    # The child inherits no threads: a pass there must still run (not wait on the parent's workers).
    import multiprocessing

    _engine.pool()
    ctx = multiprocessing.get_context("fork")
    with ctx.Pool(1) as pool:
        density = pool.apply_async(_child_pass).get(timeout=60)  # a wait on absent threads fails here
    assert density > 0


def _child_pass() -> float:
    x = np.random.default_rng(1).standard_normal(600_000).astype(np.float32).view(np.complex64)
    psd, _ = _pass(x, InOrder())
    return float(psd.density.mean())


CHILD = textwrap.dedent("""
    import sys, numpy as np
    from rxbench.reading import accumulate
    from rxbench.recordings import memory_capture
    x = np.random.default_rng(0).standard_normal(2 * 8_000_000).astype(np.float32).view(np.complex64)
    print("ready", flush=True)
    while True:
        accumulate(memory_capture(x, 2.4e6))
""")


@pytest.mark.skipif(_engine.workers() < 2 or not hasattr(signal, "SIGINT"), reason="needs two cores")
def test_an_interrupt_mid_pass_exits_cleanly():
    # An interrupt while the workers are inside the FFT must end the process with Python's
    # KeyboardInterrupt, never a C++ runtime abort ("terminate called ...", signal 6).
    for delay in (0.05, 0.2, 0.45):
        proc = subprocess.Popen([sys.executable, "-c", CHILD], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
        assert proc.stdout.readline().strip() == b"ready"
        time.sleep(delay)
        proc.send_signal(signal.SIGINT)
        _, err = proc.communicate(timeout=60)
        # An uncaught KeyboardInterrupt: Python ends by SIGINT (-2); a C++ abort would be SIGABRT (-6).
        assert proc.returncode == -signal.SIGINT, err.decode()[-300:]
        assert b"KeyboardInterrupt" in err and b"terminate called" not in err
