"""Robust noise density: the median bias for chi-square bins, tones and the DC spike excluded."""

import numpy as np
import pytest
from scipy import stats

from rxbench.dsp.floor import _median, chi2_density, detection_threshold, median_bias, noise_floor
from rxbench.dsp.spectrum import psd


@pytest.mark.parametrize(
    "k, bias_db",
    # Median/mean of chi2 with 2K DOF over 2K: REFERENCES.md [calc]; K = 1 is ln 2 (-1.592 dB).
    [(1, -1.592), (2, -0.761), (5, -0.296), (10, -0.146), (20, -0.073), (100, -0.0145)],
)
def test_median_bias_of_averaged_periodograms(k, bias_db):
    assert 10 * np.log10(median_bias(2 * k)) == pytest.approx(bias_db, abs=6e-4)


def test_median_bias_one_periodogram_is_ln2():
    # One periodogram bin of Gaussian noise is exponential: median = ln 2 x mean.
    assert median_bias(2.0) == pytest.approx(np.log(2), rel=1e-12)


@pytest.mark.parametrize(
    "dof, false_alarm, quantile",
    # Upper percentage points of the chi-square distribution, as printed in the usual tables
    # (from memory): 5 %: 3.841 (1), 5.991 (2), 18.307 (10); 1 %: 6.635 (1), 23.209 (10);
    # 0.1 %: 10.828 (1).
    [(1, 0.05, 3.841), (2, 0.05, 5.991), (10, 0.05, 18.307), (1, 0.01, 6.635), (10, 0.01, 23.209),
     (1, 0.001, 10.828)],
)
def test_detection_threshold_is_the_chi_square_table_point(dof, false_alarm, quantile):
    # One bin searched: the threshold (in units of the mean density) is chi2_isf(p, dof) / dof.
    assert detection_threshold(dof, 1, false_alarm) * dof == pytest.approx(quantile, abs=5e-4)
    # n bins: the per-bin probability is false_alarm / n (Bonferroni).
    assert detection_threshold(dof, 10, 10 * false_alarm) * dof == pytest.approx(quantile, abs=5e-4)


def test_detection_threshold_at_many_degrees_of_freedom():
    # Reference: the Wilson-Hilferty cube-root approximation (Wilson and Hilferty 1931), whose
    # error at a million degrees of freedom is far below 1e-8 relative; z from the standard library.
    from statistics import NormalDist

    nu, p = 1e6, 1e-9
    z, h = NormalDist().inv_cdf(1 - p), 2 / (9 * nu)
    assert detection_threshold(nu, 1, p) == pytest.approx((1 - h + z * np.sqrt(h)) ** 3, rel=1e-8)


def test_chi_square_density():
    # Closed forms: 2 dof is exp(-x/2)/2; 1 dof is exp(-x/2)/sqrt(2 pi x) (textbook densities).
    assert chi2_density(1.0, 2.0) == pytest.approx(0.5 * np.exp(-0.5), rel=1e-12)
    assert chi2_density(3.0, 1.0) == pytest.approx(np.exp(-1.5) / np.sqrt(6 * np.pi), rel=1e-12)
    # Reference library at the dofs of long captures.
    for nu in (38.0, 441.6, 1e5, 1e7):
        x = stats.chi2.ppf(0.5, nu)
        assert chi2_density(x, nu) == pytest.approx(stats.chi2.pdf(x, nu), rel=1e-7)


def _noise(rng, n, power):
    return np.sqrt(power / 2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))


def test_floor_unbiased_with_tones_dc_spike_and_edge_rolloff(rng):
    fs, n, n0 = 1e6, 1 << 18, 1e-9
    x = _noise(rng, n, n0 * fs)
    t = np.arange(n) / fs
    for f, p in ((-123e3, 1e-2), (211e3, 1e-4), (50e3, 1e-6)):
        x = x + np.sqrt(p) * np.exp(2j * np.pi * f * t)
    x = x + 0.05  # DC spike
    s = psd(x, fs, nperseg=1024)
    # anti-alias roll-off: the outer 5 % of each half-band 20 dB down
    edge = np.abs(s.frequency_hz) > 0.95 * fs / 2
    s = type(s)(**{**s.__dict__, "density": np.where(edge, s.density * 0.01, s.density)})
    fl = noise_floor(s)
    assert 10 * np.log10(fl.density / n0) == pytest.approx(0.0, abs=0.03)
    # The tones and DC were excluded from the bins used.
    for f in (-123e3, 211e3, 50e3, 0.0):
        assert not fl.mask[s.index_of(f)]


def test_floor_uncertainty_matches_its_scatter():
    fs, n = 1e5, 1 << 15
    est, us = [], []
    for seed in range(60):
        s = psd(_noise(np.random.default_rng(seed), n, 1.0), fs, nperseg=256)
        fl = noise_floor(s)
        est.append(fl.density)
        us.append(fl.u_density)
    # Stated standard uncertainty agrees with the observed spread within the sampling error of a
    # standard deviation from 60 trials (chi-square, about +/-25 % at 95 %; scipy.stats).
    ratio = np.std(est, ddof=1) / np.mean(us)
    lo, hi = np.sqrt(stats.chi2.ppf([0.01, 0.99], 59) / 59)
    assert lo * 0.8 < ratio < hi * 1.2


def test_no_bins_left_is_an_error():
    s = psd(np.ones(4096, np.complex64) * 1e-3, 1e3, nperseg=16)
    with pytest.raises(ValueError, match="bins"):
        noise_floor(s, edge_fraction=0.45)


def test_partial_sort_median_equals_numpy_median():
    # numpy.median is the reference (general-purpose library); odd and even lengths, ties included.
    rng = np.random.default_rng(3)
    for n in (1, 2, 3, 8, 9, 1000, 1001):
        x = rng.exponential(size=n)
        assert _median(x) == np.median(x)
    assert _median(np.array([2.0, 2.0, 1.0, 5.0])) == np.median([2.0, 2.0, 1.0, 5.0])
