"""The distributions written out in dsp.distributions agree with scipy.stats (reference library)."""

import math
from statistics import NormalDist

import numpy as np
import pytest
from scipy import special, stats

from rxbench.dsp.distributions import beta_tails, chi2_isf, chi2_pdf, chi2_ppf, gamma_tails, normal_ppf, t_ppf, t_sf

#: Degrees of freedom rxbench meets: a few segments up to the Welch dof of a many-gigabyte capture.
CHI2_DOF = [0.5, 1.0, 2.0, 3.7, 7.5, 38.0, 441.6, 1e4, 1e5, 1e6, 1e7]
PROBABILITIES = [1e-12, 1e-7, 2.4e-7, 0.025, 0.3, 0.5, 0.7, 0.975, 1 - 1e-7]


@pytest.mark.parametrize("dof", CHI2_DOF)
def test_chi2_quantiles_against_scipy_stats(dof):
    for q in PROBABILITIES:
        if dof >= 1e7:
            continue  # scipy's tails are off here: see test_huge_dof
        assert chi2_ppf(q, dof) == pytest.approx(stats.chi2.ppf(q, dof), rel=1e-9), q
        assert chi2_isf(q, dof) == pytest.approx(stats.chi2.isf(q, dof), rel=1e-9), q
    x = stats.chi2.ppf([0.1, 0.5, 0.9], dof)
    assert np.allclose(chi2_pdf(x, dof), stats.chi2.pdf(x, dof), rtol=1e-9)


@pytest.mark.parametrize("a", [0.25, 1.0, 4.5, 220.8, 5e4, 5e6])
def test_incomplete_gamma_against_scipy_special(a):
    # Both tails to full relative precision where each is the smaller one.
    for x in (1e-3 * a, 0.5 * a, a - 1, a, a + 1, 1.2 * a + 3, 3 * a + 20):
        if x <= 0:
            continue
        p, q = gamma_tails(a, x)
        assert p == pytest.approx(special.gammainc(a, x), rel=1e-10, abs=1e-300)
        assert q == pytest.approx(special.gammaincc(a, x), rel=1e-10, abs=1e-300)


def test_huge_dof():
    # At 1e7 degrees of freedom scipy.special.gammainc misses the far tails by 1e-6 to 1e-3
    # (relative), so the reference there is the Wilson-Hilferty cube-root approximation (Wilson and
    # Hilferty 1931; Numerical Recipes 6.14), whose error is far below 1e-9 at this dof, and one
    # value summed with mpmath.
    nu, h = 1e7, 2 / 9e7
    for q in PROBABILITIES:
        z = NormalDist().inv_cdf(q)  # the standard library's, not ours
        assert chi2_ppf(q, nu) == pytest.approx(nu * (1 - h + z * math.sqrt(h)) ** 3, rel=1e-9), q
        assert chi2_isf(q, nu) == pytest.approx(nu * (1 - h - z * math.sqrt(h)) ** 3, rel=1e-9), q
    # P(5e6, x) at x = 9968573.147172954 / 2, summed with mpmath at 40 digits (the series
    # x**a e**-x / Gamma(a+1) * sum x**n / ((a+1)...(a+n))): 1.00000000000316e-12. scipy.special
    # gammainc gives 9.989e-13 there, so this one value is checked against mpmath instead.
    assert gamma_tails(5e6, 9968573.147172954 / 2)[0] == pytest.approx(1.00000000000316e-12, rel=1e-10)
    assert chi2_ppf(1e-12, 1e7) == pytest.approx(9968573.147172954, rel=1e-12)


@pytest.mark.parametrize("a, b", [(0.5, 0.5), (0.5, 7.5), (0.5, 5e5), (3.0, 2.0), (40.0, 0.5)])
def test_incomplete_beta_against_scipy_special(a, b):
    for x in (1e-6, 0.1, 0.5, 0.9, 1 - 1e-6):
        lower, upper = beta_tails(a, b, x, 1.0 - x)
        assert lower == pytest.approx(special.betainc(a, b, x), rel=1e-10, abs=1e-300)
        assert upper == pytest.approx(special.betaincc(a, b, x), rel=1e-9, abs=1e-300)


@pytest.mark.parametrize("dof", [1.0, 1.5, 2.0, 3.0, 7.3, 15.0, 31.0, 200.0, 1e4, 1e6, np.inf])
def test_t_against_scipy_stats(dof):
    for q in (1e-6, 0.025, 0.16, 0.6, 0.841, 0.975, 0.995, 0.9999):
        assert t_ppf(q, dof) == pytest.approx(stats.t.ppf(q, dof), rel=1e-9), q
    assert t_ppf(0.5, dof) == 0.0


def test_handbook_values():
    # Student t, two-sided 95 %: 12.706 (1 dof), 2.228 (10 dof), 1.960 (normal); chi-square 95th
    # percentile 3.841 (1 dof), 18.307 (10 dof). Standard statistical tables (from memory).
    assert t_ppf(0.975, 1) == pytest.approx(12.706, abs=5e-4)
    assert t_ppf(0.975, 10) == pytest.approx(2.228, abs=5e-4)
    assert t_ppf(0.975, math.inf) == pytest.approx(1.960, abs=5e-4)
    assert chi2_ppf(0.95, 1) == pytest.approx(3.841, abs=5e-4)
    assert chi2_ppf(0.95, 10) == pytest.approx(18.307, abs=5e-4)


def test_edges_and_arrays():
    assert chi2_ppf(0.0, 4) == 0.0 and chi2_isf(0.0, 4) == math.inf and chi2_ppf(1.0, 4) == math.inf
    assert math.isnan(chi2_ppf(0.5, 0.0)) and math.isnan(t_ppf(0.5, -1.0)) and math.isnan(chi2_isf(1.5, 3))
    assert t_ppf(0.0, 5) == -math.inf and t_ppf(1.0, 5) == math.inf
    got = t_ppf(np.array([0.025, 0.975]), np.array([[4.0], [9.0]]))
    assert got.shape == (2, 2)
    assert np.allclose(got, stats.t.ppf([0.025, 0.975], [[4.0], [9.0]]), rtol=1e-9)


def test_normal_quantile_against_scipy_stats():
    for q in (1e-300, 1e-20, 1e-7, 0.025, 0.3, 0.4999, 0.5, 0.6, 0.975, 1 - 1e-9, 1 - 2**-52):
        assert normal_ppf(q) == pytest.approx(stats.norm.ppf(q), rel=1e-12, abs=1e-15), q
    assert normal_ppf(0.0) == -math.inf and normal_ppf(1.0) == math.inf and math.isnan(normal_ppf(2.0))


@pytest.mark.parametrize("dof", [1.0, 2.5, 9.0, 40.0, 1e5, np.inf])
def test_t_tail_against_scipy_stats(dof):
    for t in (-30.0, -2.0, -0.1, 0.0, 0.7, 2.0, 6.0, 40.0):
        assert t_sf(t, dof) == pytest.approx(stats.t.sf(t, dof), rel=1e-9, abs=1e-300), t
