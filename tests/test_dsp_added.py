"""Numerics moved out of the session into dsp/, checked at array level against outside references.

- The drift line: a rectangular distribution of half-width a has u = a/sqrt(3) (GUM 4.3.7).
- Density ratio in dB: first-order law of propagation (GUM 5.1.2), checked against a Monte Carlo
  propagation of the same inputs (JCGM 101:2008, GUM Supplement 1) with numpy's generator.
- SNR cost behind an excess X: 10*log10(1 + (L - 1)/X) (ITU-R P.372 noise through a matched loss,
  Friis 1944; REFERENCES.md "SNR cost of a loss"); its sensitivities checked against numerical
  derivatives of the same formula written out here, and its value against
  dsp.environment.snr_degradation_db with Ta = X*T0 ahead of a noiseless receiver.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from rxbench.dsp import environment as env
from rxbench.dsp import excess as exc
from rxbench.dsp.loss import drift_component
from rxbench.dsp.units import T0_K


def test_drift_line_takes_the_largest_change_as_a_rectangular_half_width():
    comp, i, beyond = drift_component([0.01, -0.09, 0.05], [0.02, 0.02, 0.02], ["a", "b", "c"])
    assert i == 1 and beyond
    assert comp.half_width == pytest.approx(0.09)
    assert comp.u == pytest.approx(0.09 / math.sqrt(3))  # GUM 4.3.7
    assert comp.distribution == "rectangular" and comp.kind == "B" and "b: -0.090 dB" in comp.note
    _, _, within = drift_component([0.01], [0.02])
    assert not within
    with pytest.raises(ValueError):
        drift_component([], [])


def test_density_ratio_uncertainty_agrees_with_a_monte_carlo_propagation():
    a = np.array([4.0e-12, 1.0e-12, 2.5e-13])
    ua = 0.01 * a * np.array([1.0, 2.0, 0.5])
    b = np.array([1.0e-12, 0.9e-12, 2.0e-13])
    ub = 0.015 * b
    ratio, u = exc.density_ratio_db(a, ua, b, ub)
    np.testing.assert_allclose(ratio, 10 * np.log10(a / b), rtol=1e-12)
    rng = np.random.default_rng(1)
    n = 400_000
    sa = a + ua * rng.standard_normal((n, 3))
    sb = b + ub * rng.standard_normal((n, 3))
    mc = 10 * np.log10(sa / sb).std(axis=0)
    np.testing.assert_allclose(u, mc, rtol=0.02)  # first order holds for 1-2 % inputs (JCGM 101)
    r, ur = exc.density_ratio_db(4.0, 0.0, 1.0, 0.0)
    assert isinstance(r, float) and r == pytest.approx(6.0206, abs=1e-4) and ur == 0.0
    with pytest.raises(ValueError):
        exc.density_ratio_db(0.0, 0.0, 1.0, 0.0)


def test_mean_density_of_repeats():
    m, u = exc.mean_density([1.0, 3.0], [0.3, 0.4])
    assert m == 2.0 and u == pytest.approx(0.25)  # sqrt(0.09 + 0.16)/2 (GUM 5.1.2)


def test_snr_cost_and_its_sensitivities():
    loss_db = np.array([0.5, 3.0, 6.0, 10.0])
    x_db = np.array([20.0, 10.0, 3.0, 0.5])
    cost, _ = env.snr_cost_from_excess_db(loss_db, x_db)
    # 6 dB behind 20 dB of excess: 10*log10(1 + (10**0.6 - 1)/100) = 0.1276 dB [calc]
    assert env.snr_cost_from_excess_db(6.0, 20.0)[0] == pytest.approx(0.1276, abs=1e-4)
    np.testing.assert_allclose(cost, env.snr_degradation_db(loss_db, T0_K * 10 ** (x_db / 10), 0.0), rtol=1e-12)

    def f(l_db, x):
        return 10 * np.log10(1 + (10 ** (l_db / 10) - 1) / 10 ** (x / 10))

    h = 1e-5
    d_l = (f(loss_db + h, x_db) - f(loss_db - h, x_db)) / (2 * h)
    d_x = (f(loss_db, x_db + h) - f(loss_db, x_db - h)) / (2 * h)
    _, u_l = env.snr_cost_from_excess_db(loss_db, x_db, 0.1, 0.0)
    _, u_x = env.snr_cost_from_excess_db(loss_db, x_db, 0.0, 0.2)
    np.testing.assert_allclose(u_l, np.abs(d_l) * 0.1, rtol=1e-6)
    np.testing.assert_allclose(u_x, np.abs(d_x) * 0.2, rtol=1e-6)
    # A loss below 0 dB is taken at 0 dB: no cost, and no sensitivity to the loss.
    c, u = env.snr_cost_from_excess_db(-0.2, 10.0, 0.1, 0.3)
    assert c == 0.0 and u == 0.0
