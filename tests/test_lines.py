"""Narrow lines in a noise spectrum (dsp/lines.py): found where they are, at the excess they have, and
never in noise alone, on a slope or on a slow ripple.

Truths are closed-form: a complex exponential of amplitude A on a bin centre adds A**2 / ENBW to that
bin's density (Welch, Hann window: ENBW = 1.5 bins; Harris, Proc. IEEE 66 (1978), table 1), so its
excess over a noise density N0 is 10*log10(1 + A**2 / (N0 * ENBW)). The false-alarm rate of the
chi-square threshold is checked against its design value (scipy.special.chdtri gives the tail).
"""

from __future__ import annotations

import numpy as np
import pytest

from rxbench.dsp.lines import find_lines, in_intervals, merge_intervals
from rxbench.dsp.spectrum import psd

FS = 1.0
NPERSEG = 1024
N = 1 << 17


def _noise(rng, n=N):
    return (rng.standard_normal(n) + 1j * rng.standard_normal(n)) / np.sqrt(2)  # N0 = 1 at FS = 1


def test_a_line_is_found_at_its_frequency_with_its_excess():
    rng = np.random.default_rng(1401)
    f0 = 102 / NPERSEG  # on a bin centre
    a = 0.08
    x = _noise(rng) + a * np.exp(2j * np.pi * f0 * np.arange(N))
    lines = find_lines(psd(x, FS, nperseg=NPERSEG))
    assert len(lines) == 1
    assert lines.peak_hz[0] == pytest.approx(f0, abs=1e-9)
    truth = 10 * np.log10(1 + a**2 / (1.0 * 1.5 / NPERSEG))  # Hann ENBW 1.5 bins (Harris 1978)
    assert lines.excess_db[0] == pytest.approx(truth, abs=0.4)
    lo, hi = lines.intervals_hz[0]
    assert lo < f0 < hi and (hi - lo) * NPERSEG <= 2 * 2 + 9  # the guard either side of a narrow run


def test_noise_alone_shows_lines_at_about_the_design_rate():
    # 40 spectra of noise at a false alarm of 0.05 per spectrum: the count is binomial(40, 0.05),
    # mean 2; more than 8 has probability below 1e-4 (scipy.stats.binom.sf(8, 40, 0.05) = 5e-5).
    rng = np.random.default_rng(1402)
    hits = sum(len(find_lines(psd(_noise(rng, 1 << 15), FS, nperseg=256), false_alarm=0.05)) > 0
               for _ in range(40))
    assert hits <= 8


def test_a_slope_and_a_slow_ripple_are_not_lines():
    rng = np.random.default_rng(1403)
    spec = np.fft.fft(_noise(rng))
    f = np.fft.fftfreq(N, 1 / FS)
    shape_db = np.where(f > 0.2, -25.0, 0.0) + 1.0 * np.sin(2 * np.pi * f / 0.3)  # a filter edge, a 1 dB ripple
    x = np.fft.ifft(spec * 10 ** (shape_db / 20))
    assert len(find_lines(psd(x, FS, nperseg=NPERSEG))) == 0


def test_the_mask_limits_where_lines_are_looked_for():
    rng = np.random.default_rng(1404)
    x = _noise(rng) + 0.1 * np.exp(2j * np.pi * (300 / NPERSEG) * np.arange(N))
    s = psd(x, FS, nperseg=NPERSEG)
    assert len(find_lines(s)) == 1
    assert len(find_lines(s, s.frequency_hz < 0.2)) == 0


def test_interval_helpers():
    merged = merge_intervals(np.array([[5.0, 6.0], [1.0, 3.0]]), np.array([[2.5, 4.0]]))
    assert merged.tolist() == [[1.0, 4.0], [5.0, 6.0]]
    assert merge_intervals().shape == (0, 2)
    assert in_intervals([0.5, 1.0, 4.0, 4.5, 5.5], merged).tolist() == [False, True, True, False, True]
