"""Forward FFTs along the rows of a batch of segments.

The transform is scipy's pocketfft core, which vectorises across rows (about 3x faster than
``numpy.fft`` for a batch of complex64 rows, on one core). Importing it through ``scipy.fft`` also
imports scipy's array-API layer, which costs about 0.15 s on every run of a command; so the core
extension module is loaded on its own (under scipy's own module name, so that a later ``import
scipy.fft`` shares it), checked on an impulse, and ``scipy.fft`` is used only if that fails (a
scipy whose layout or private interface differs). Both routes give the same numbers: the tests
compare them with ``numpy.fft``.
"""

from __future__ import annotations

import importlib.machinery
import importlib.util
import os
import sys

import numpy as np

from rxbench.dsp.parallel import cpu_threads

_CORE_NAME = "scipy.fft._pocketfft.pypocketfft"
_core = None
_loaded = False


def _load_core():
    """scipy's pocketfft extension module, or None when it cannot be loaded on its own."""
    if _CORE_NAME in sys.modules:  # scipy.fft came first
        module = sys.modules[_CORE_NAME]
        return module if _answers_as_expected(module) else None
    try:
        scipy_spec = importlib.util.find_spec("scipy")
        folder = os.path.join(scipy_spec.submodule_search_locations[0], "fft", "_pocketfft")
        for suffix in importlib.machinery.EXTENSION_SUFFIXES:
            path = os.path.join(folder, "pypocketfft" + suffix)
            if os.path.isfile(path):
                loader = importlib.machinery.ExtensionFileLoader(_CORE_NAME, path)
                module = importlib.util.module_from_spec(importlib.util.spec_from_loader(_CORE_NAME, loader))
                loader.exec_module(module)
                if not _answers_as_expected(module):
                    return None
                # Registered under scipy's own name, so that a later ``import scipy.fft`` reuses it.
                sys.modules[_CORE_NAME] = module
                return module
    except Exception:  # any failure here just means: go through scipy.fft
        return None
    return None


def _answers_as_expected(module) -> bool:
    """The entry points exist with the call signature used here and transform an impulse right."""
    try:
        impulse = np.array([[1.0, 0.0, 0.0, 0.0]])
        c = module.c2c(impulse.astype(np.complex64), (1,), True, 0, None, 1)
        r = module.r2c(impulse, (1,), True, 0, None, 1)
    except Exception:  # another scipy's private interface: use scipy.fft instead
        return False
    return bool(np.allclose(c, 1.0) and c.dtype == np.complex64 and r.shape == (1, 3) and np.allclose(r, 1.0))


def core():
    """The pocketfft core in use (None: ``scipy.fft`` is used instead)."""
    global _core, _loaded
    if not _loaded:
        _core, _loaded = _load_core(), True
    return _core


def fft_rows(a: np.ndarray, overwrite: bool = False, threads: int | None = None) -> np.ndarray:
    """FFT along the last axis of complex ``a`` (single precision stays single); in place when
    ``overwrite`` and ``a`` is complex and writable. ``threads``: None for all cores."""
    threads = threads or cpu_threads()
    pocketfft = core()
    if pocketfft is None:
        import scipy.fft

        return scipy.fft.fft(a, axis=-1, workers=threads, overwrite_x=overwrite)
    out = a if overwrite and a.dtype.kind == "c" and a.flags.writeable else None
    return pocketfft.c2c(a, (a.ndim - 1,), True, 0, out, threads)


def rfft_rows(a: np.ndarray, threads: int | None = None) -> np.ndarray:
    """FFT along the last axis of real ``a``: the non-negative frequencies. ``threads``: None for
    all cores."""
    threads = threads or cpu_threads()
    pocketfft = core()
    if pocketfft is None:
        import scipy.fft

        return scipy.fft.rfft(a, axis=-1, workers=threads)
    return pocketfft.r2c(a, (a.ndim - 1,), True, 0, None, threads)
