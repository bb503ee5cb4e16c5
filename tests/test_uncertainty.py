"""GUM combination: Type A, rectangular, U-shaped, combination, expansion, Welch-Satterthwaite."""

import math

import numpy as np
import pytest
from scipy import stats

from rxbench.dsp.uncertainty import (
    Budget,
    Component,
    combine,
    coverage_factor,
    type_a,
    u_rectangular,
    u_u_shaped,
    welch_satterthwaite,
)


def test_rectangular_and_u_shaped_divisors():
    # JCGM 100:2008 4.3.7 (rectangular a/sqrt(3)); REFERENCES.md: +/-0.2 dB -> 0.1155 dB
    assert u_rectangular(0.2) == pytest.approx(0.1155, abs=5e-5)
    # JCGM 101:2008 6.4.6 (arcsine a/sqrt(2)) [from memory]; REFERENCES.md: 0.58 dB -> 0.41 dB
    assert u_u_shaped(0.58) == pytest.approx(0.41, abs=5e-3)
    with pytest.raises(ValueError, match="half_width"):
        u_rectangular(-0.1)


def test_divisors_match_sampled_distributions():
    # The standard deviation of the distributions themselves, sampled with numpy (physical
    # invariant): uniform on [-a, a] and a*cos(uniform phase).
    rng = np.random.default_rng(1)
    a = 0.3
    assert np.std(rng.uniform(-a, a, 400_000)) == pytest.approx(u_rectangular(a), rel=0.01)
    assert np.std(a * np.cos(rng.uniform(0, 2 * np.pi, 400_000))) == pytest.approx(
        u_u_shaped(a), rel=0.01)


def test_type_a_matches_scipy_sem():
    # Reference library: scipy.stats.sem is s/sqrt(n) with ddof=1 (GUM 4.2.3)
    x = np.array([10.02, 9.98, 10.05, 9.97, 10.01, 10.00, 9.96, 10.04])
    mean, u, dof = type_a(x)
    assert mean == pytest.approx(x.mean())
    assert u == pytest.approx(stats.sem(x))
    assert dof == 7
    with pytest.raises(ValueError, match="at least 2"):
        type_a([1.0])


def test_worked_budget_from_references():
    # REFERENCES.md "Uncertainty (JCGM 100:2008)" worked budget [calc]: s = 0.158 dB over n = 10
    # -> 0.050 dB; with 0.1155 dB (rectangular 0.2) and 0.194 dB -> u_c = 0.231 dB, U = 0.46 dB.
    u_a = 0.158 / math.sqrt(10)
    assert u_a == pytest.approx(0.050, abs=5e-4)
    b = Budget((Component.normal("repeats", u_a, dof=9),
                Component.rectangular("attenuator", 0.2),
                Component.normal("mismatch", 0.194, kind="B")))
    assert b.combined_u == pytest.approx(0.231, abs=5e-4)
    assert b.expanded_u == pytest.approx(0.46, abs=5e-3)
    assert b.k == 2.0


def test_gum_h1_end_gauge_budget():
    # JCGM 100:2008 H.1 (end-gauge calibration), Table H.1 [from memory]: contributions |c_i|u_i in
    # nm and their dof: l_s 25 (18), d1 5.8 (24), d2 3.9 (5), d3 6.7 (8), delta-alpha 2.9 (50),
    # delta-theta 16.6 (2). GUM H.1.6: u_c = 32 nm, nu_eff = 16.7 -> 16, U99 = t99(16)*u_c = 93 nm.
    contributions = [25.0, 5.8, 3.9, 6.7, 2.9, 16.6]
    dof = [18, 24, 5, 8, 50, 2]
    b = Budget(tuple(Component.normal(f"x{i}", c, dof=d) for i, (c, d) in
                     enumerate(zip(contributions, dof))))
    assert b.combined_u == pytest.approx(32.0, abs=0.5)
    assert b.dof_eff == pytest.approx(16.7, abs=0.2)
    # GUM Table G.2: t_99(16) = 2.92 [from memory]
    assert coverage_factor(16, p=0.99) == pytest.approx(2.92, abs=5e-3)
    assert coverage_factor(math.floor(b.dof_eff), p=0.99) * b.combined_u == pytest.approx(93, abs=1)


def test_coverage_factor_table_g2():
    # JCGM 100:2008 Table G.2 [from memory]: t_95.45(inf) = 2.00, t_95.45(10) = 2.28, t_95(10) = 2.23
    assert coverage_factor() == pytest.approx(2.00, abs=5e-3)
    assert coverage_factor(10) == pytest.approx(2.28, abs=5e-3)
    assert coverage_factor(10, p=0.95) == pytest.approx(2.23, abs=5e-3)


def test_welch_satterthwaite_limits():
    # One input alone keeps its own dof; all-infinite stays infinite (GUM G.4.1).
    assert welch_satterthwaite([0.1], [7]) == pytest.approx(7)
    assert welch_satterthwaite([0.1, 0.2], [math.inf, math.inf]) == math.inf
    # Two equal inputs of 5 dof each -> 10 (G.2b by hand: (2u^2)^2 / (2 u^4 / 5))
    assert welch_satterthwaite([0.1, 0.1], [5, 5]) == pytest.approx(10)


def test_combination_matches_monte_carlo_of_a_sum():
    # Law of propagation (GUM 5.1.2) against sampling y = x1 - 0.5*x2 + x3 (physical invariant)
    rng = np.random.default_rng(2)
    n = 400_000
    x1 = rng.normal(0, 0.05, n)
    x2 = rng.uniform(-0.2, 0.2, n)
    x3 = 0.3 * np.cos(rng.uniform(0, 2 * np.pi, n))
    b = Budget((Component.normal("x1", 0.05),
                Component.rectangular("x2", 0.2, sensitivity=-0.5),
                Component.u_shaped("x3", 0.3)))
    assert np.std(x1 - 0.5 * x2 + x3) == pytest.approx(b.combined_u, rel=0.01)
    # coverage of the k = 2 interval of this mostly-normal mixture is near 95 % (GUM G.6.6)
    y = x1 - 0.5 * x2 + x3
    assert 0.93 < np.mean(np.abs(y) <= b.expanded_u) < 0.999


def test_combine_sensitivities_and_scaling():
    assert combine([0.3, 0.4]) == pytest.approx(0.5)
    assert combine([0.3, 0.4], [2.0, -1.0]) == pytest.approx(math.hypot(0.6, 0.4))
    b = Budget((Component.normal("a", 0.3), Component.rectangular("b", 0.4)))
    # half the result (per-device loss of a pair) halves every contribution
    assert b.scaled(0.5).expanded_u == pytest.approx(b.expanded_u / 2)
    assert (b + b).combined_u == pytest.approx(b.combined_u * math.sqrt(2))


def test_component_validation():
    with pytest.raises(ValueError, match="standard uncertainty"):
        Component.normal("x", -0.1)
    with pytest.raises(ValueError, match="standard uncertainty"):
        Component.normal("x", math.nan)
    with pytest.raises(ValueError, match="degrees of freedom"):
        Component.normal("x", 0.1, dof=0)
    with pytest.raises(ValueError, match="k must be"):
        Budget((), k=0)
    assert Budget(()).combined_u == 0.0 and Budget(()).dof_eff == math.inf
