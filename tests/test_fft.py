"""The batched FFT agrees with numpy.fft (reference library), by either route."""

import subprocess
import sys

import numpy as np
import pytest

import rxbench.dsp.fft as fft


@pytest.fixture(params=["core", "scipy.fft"])
def route(request, monkeypatch):
    if request.param == "scipy.fft":
        monkeypatch.setattr(fft, "_core", None)
        monkeypatch.setattr(fft, "_loaded", True)
    return request.param


def test_complex_rows_match_numpy(route):
    rng = np.random.default_rng(1)
    x = (rng.standard_normal((37, 512)) + 1j * rng.standard_normal((37, 512))).astype(np.complex64)
    want = np.fft.fft(x.astype(np.complex128), axis=-1)
    got = fft.fft_rows(x.copy())
    assert got.dtype == np.complex64
    assert np.allclose(got, want, rtol=0, atol=1e-4 * np.abs(want).max())
    y = x.copy()
    same = fft.fft_rows(y, overwrite=True)
    assert np.allclose(same, want, rtol=0, atol=1e-4 * np.abs(want).max())
    assert np.allclose(fft.fft_rows(x.astype(np.complex128)), want, rtol=1e-12, atol=1e-9)


def test_real_rows_match_numpy(route):
    x = np.random.default_rng(2).standard_normal((5, 1000))
    assert np.allclose(fft.rfft_rows(x), np.fft.rfft(x, axis=-1), rtol=1e-12, atol=1e-9)


def test_core_loaded_first_is_reused_by_a_later_scipy_fft():
    # In a fresh process: load the core on its own, then import scipy.fft, which must take the same
    # module and still agree with numpy.fft.
    code = (
        "import sys, numpy as np, rxbench.dsp.fft as f\n"
        "core = f.core(); assert core is not None and 'scipy.fft' not in sys.modules\n"
        "import scipy.fft\n"
        "assert sys.modules[f._CORE_NAME] is core\n"
        "x = np.arange(16.0) + 1j\n"
        "assert np.allclose(scipy.fft.fft(x), np.fft.fft(x))\n"
    )
    subprocess.run([sys.executable, "-c", code], check=True)


def test_core_loads_here_and_is_scipys_own():
    # On the supported scipy the core loads without scipy.fft; scipy.fft then reuses the same module.
    core = fft.core()
    assert core is not None
    import scipy.fft

    assert sys.modules[fft._CORE_NAME] is core
    x = np.ones((2, 8), np.complex64)
    assert np.allclose(scipy.fft.fft(x), fft.fft_rows(x))


def test_a_core_with_another_interface_is_refused():
    class Changed:
        @staticmethod
        def c2c(a, axes, forward, norm):  # a different signature than the one dsp.fft calls
            return a

        r2c = c2c

    assert not fft._answers_as_expected(Changed)
    assert fft._answers_as_expected(fft.core())
