"""Worker threads change nothing but the time: a pass gives the same numbers on one core or many."""

import numpy as np
import pytest

import rxbench.dsp.parallel as parallel
from rxbench.dsp.health import HealthAccumulator
from rxbench.dsp.parallel import InOrder
from rxbench.dsp.spectrum import PsdAccumulator


def _pass(x):
    acc, health = PsdAccumulator(2.4e6, nperseg=1024), HealthAccumulator()
    for i in range(0, x.size, 200_000):
        acc.update(x[i : i + 200_000])
        health.update(x[i : i + 200_000])
    return acc.result(), health.result()


@pytest.mark.skipif(parallel.workers() < 2, reason="needs two cores to use worker threads")
def test_same_numbers_to_the_last_bit_with_and_without_workers(monkeypatch):
    assert parallel.worker_pool() is not None
    rng = np.random.default_rng(5)
    x = (0.1 * (rng.standard_normal(1_500_000) + 1j * rng.standard_normal(1_500_000))).astype(np.complex64)
    x[::977] = 1.0  # some samples at the rails
    threaded_psd, threaded_health = _pass(x)
    monkeypatch.setattr(parallel, "worker_pool", lambda: None)
    single_psd, single_health = _pass(x)
    assert np.array_equal(threaded_psd.density, single_psd.density)
    assert np.array_equal(threaded_psd.batch_density, single_psd.batch_density)
    assert threaded_health == single_health
    assert threaded_health.clip_fraction > 0


def test_results_are_applied_in_submission_order():
    seen = []
    work = InOrder()
    for k in range(50):
        work.submit(seen.append, lambda k=k: k, inline=k % 3 == 0)
    work.drain()
    assert seen == list(range(50))


@pytest.mark.skipif(parallel.workers() < 2, reason="needs two cores to use worker threads")
def test_an_error_on_a_worker_reaches_the_caller():
    def fails():
        raise ValueError("bad block")

    work = InOrder()
    work.submit(lambda _: None, fails)
    with pytest.raises(ValueError, match="bad block"):
        work.drain()
    job = parallel.worker_pool().submit(lambda a, b: a + b, 2, 3)
    assert job.result() == 5


def test_worker_count_is_capped_on_many_cores(monkeypatch):
    # Each queued job holds a block or a scratch array: the cap keeps memory bounded (issue target:
    # peak memory <= 200 MB whatever the capture; 2 * 4 queued blocks of 4 MiB at most).
    monkeypatch.setattr(parallel, "cpu_threads", lambda: 64)
    assert parallel.workers() == parallel.MAX_WORKERS == 4


@pytest.mark.skipif(not hasattr(__import__("os"), "fork"), reason="needs fork")
def test_a_forked_child_starts_its_own_workers():
    # The child inherits no threads: a pass there must still run (not wait on the parent's workers).
    import multiprocessing

    parallel.worker_pool()
    ctx = multiprocessing.get_context("fork")
    with ctx.Pool(1) as pool:
        density = pool.apply_async(_child_pass).get(timeout=60)  # a wait on absent threads fails here
    assert density > 0


def _child_pass() -> float:
    x = np.random.default_rng(1).standard_normal(600_000).astype(np.float32).view(np.complex64)
    acc = PsdAccumulator(1e6, nperseg=1024)
    acc.update(x)
    return float(acc.result().density.mean())
