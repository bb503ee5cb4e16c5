"""DFT windows and their figures: the window samples, coherent gain, ENBW and scalloping loss, the
PSD shape of a pure tone through a window (the kernel), and the degrees of freedom of a Welch
average with it.

References
----------
Harris, F. J., "On the use of windows for harmonic analysis with the discrete Fourier transform",
Proc. IEEE 66(1), 1978.
Welch, P. D., "The use of fast Fourier transform for the estimation of power spectra", IEEE Trans.
Audio Electroacoust. AU-15(2), 1967.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class WindowProperties:
    """Figures of merit of a DFT window (Harris 1978).

    ``coherent_gain`` = sum(w)/N; ``enbw_bins`` = N*sum(w**2)/sum(w)**2; ``scalloping_loss_db`` is
    the loss of a tone halfway between two bins, relative to one on a bin.
    """

    name: str
    n: int
    coherent_gain: float
    enbw_bins: float
    scalloping_loss_db: float


#: Generalised cosine windows, w[n] = sum_k (-1)**k a_k cos(2 pi k n / N) (Harris 1978), by name.
#: Other names go to scipy.signal.get_window (imported only then: it is slow to import).
COSINE_WINDOWS = {
    "boxcar": (1.0,),
    "rectangular": (1.0,),
    "hann": (0.5, 0.5),
    "hamming": (0.54, 0.46),
    "blackmanharris": (0.35875, 0.48829, 0.14128, 0.01168),
}


def get_window(window: str | tuple, nperseg: int) -> np.ndarray:
    """The periodic (DFT-even) window of ``nperseg`` points, float64."""
    if nperseg < 16:
        raise ValueError(f"{nperseg=} must be at least 16")
    if isinstance(window, str) and window in COSINE_WINDOWS:
        phase = 2.0 * np.pi * np.arange(nperseg) / nperseg
        return sum((-1) ** k * a * np.cos(k * phase) for k, a in enumerate(COSINE_WINDOWS[window]))
    import scipy.signal

    try:
        return scipy.signal.get_window(window, nperseg, fftbins=True).astype(np.float64)
    except ValueError as exc:
        raise ValueError(f"unknown window {window!r}: {exc}") from None


def window_properties(window: str | tuple, nperseg: int) -> WindowProperties:
    """Coherent gain, ENBW (bins) and scalloping loss (dB) of a periodic window.

    Examples
    --------
    >>> round(window_properties("hann", 4096).enbw_bins, 3)
    1.5
    """
    w = get_window(window, nperseg)
    n = np.arange(nperseg)
    half_bin = abs(np.sum(w * np.exp(-1j * np.pi * n / nperseg)))
    return WindowProperties(
        name=str(window),
        n=nperseg,
        coherent_gain=float(w.sum() / nperseg),
        enbw_bins=float(nperseg * np.sum(w**2) / w.sum() ** 2),
        scalloping_loss_db=float(-20.0 * np.log10(half_bin / w.sum())),
    )


def kernel(window: np.ndarray, offsets_bins: np.ndarray) -> np.ndarray:
    """|W(delta)|^2 / (N * sum(w**2)) at fractional bin offsets: the PSD shape of a pure tone.

    Normalised so that summing it over all N bins gives 1 (Parseval); so ``power * kernel / bin_width``
    is the expected density of a tone of ``power`` at that offset.

    Notes
    -----
    The DTFT of an N-point sequence is its DFT interpolated by the Dirichlet kernel,
    W(delta) = (1/N) sum_m W_m D(delta - m) with D(x) = sum_n exp(-2j pi x n / N). Cosine windows
    (Hann, Hamming, Blackman-Harris) have only a few non-zero W_m, so this costs a few terms per
    offset instead of N.
    """
    w = np.asarray(window, dtype=float)
    n_w = w.size
    d = np.atleast_1d(np.asarray(offsets_bins, dtype=float))
    m, coefficients = _dft_terms(w.tobytes())
    x = d[:, None] - m[None, :]
    phase = np.exp(-1j * np.pi * x * (n_w - 1) / n_w)
    den = np.sin(np.pi * x / n_w)
    at_pole = np.abs(den) < 1e-12  # x a multiple of N: the sum is N times the phase's sign
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where(at_pole, n_w * np.sign(phase.real), np.sin(np.pi * x) / den)
    dirichlet = phase * ratio
    value = dirichlet @ coefficients / n_w
    return np.abs(value) ** 2 / (n_w * np.sum(w**2))


@functools.lru_cache(maxsize=8)
def _dft_terms(window_bytes: bytes) -> tuple[np.ndarray, np.ndarray]:
    """A window's non-zero DFT terms: (signed bin numbers, values); kept for the few windows in use
    (a reading evaluates its window's kernel several times)."""
    w = np.frombuffer(window_bytes, dtype=float)
    spec = np.fft.fft(w)
    m = np.flatnonzero(np.abs(spec) > 1e-9 * np.abs(spec).max())
    values = spec[m]
    m = np.where(m > w.size // 2, m - w.size, m)
    m.setflags(write=False)
    values.setflags(write=False)
    return m, values


def welch_dof(n_segments: int, window: np.ndarray, step: int) -> float:
    """Equivalent degrees of freedom of a Welch average of complex (two-sided) periodograms.

    Notes
    -----
    nu = 2K / [1 + 2*sum_{m=1}^{K-1} (1 - m/K) * rho(m)**2], with rho(m) the correlation of the
    window with itself shifted by m*step (Welch 1967); for Hann at 50 % overlap,
    rho(1) = 1/6 and nu ~ 36K^2/(19K - 1) (Percival & Walden 1993).
    """
    if n_segments < 1:
        raise ValueError(f"{n_segments=} must be >= 1")
    w = np.asarray(window, dtype=float)
    norm = np.sum(w**2)
    total = 0.0
    for m in range(1, n_segments):
        shift = m * step
        if shift >= w.size:
            break
        rho = np.sum(w[shift:] * w[: w.size - shift]) / norm
        total += (1.0 - m / n_segments) * rho**2
    return 2.0 * n_segments / (1.0 + 2.0 * total)
