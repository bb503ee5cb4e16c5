"""dsp.ladder and dsp.loss on arrays: ladder check, substitution, direct loss with drift, mismatch terms.

The readings here are invented ladders (synthetic); the checks are the formulas they must obey:
the law of propagation of uncertainty (JCGM 100:2008 5.1.3, checked against finite differences),
Harris & Warner's first-order mismatch terms (REFERENCES.md), and known truths planted in the data.
"""

import math

import numpy as np
import pytest

from rxbench.dsp.ladder import COMPRESSED, LINEAR, NOISE_LIMITED, check_ladder
from rxbench.dsp.loss import direct_loss, mean_reading, mismatch_components, substitution_loss
from rxbench.dsp.mismatch import swr_from_gamma
from rxbench.dsp.uncertainty import Budget

STEPS_DB = np.arange(0.0, 61.0, 10.0)


def _rapp_db(level_dbfs, saturation_dbfs, p=2.0):
    """Output level of a Rapp amplitude limiter (AM/AM), dB: the invented dongle's compression."""
    r = 10 ** ((level_dbfs - saturation_dbfs) / 20)
    return level_dbfs - 20 / (2 * p) * np.log10(1 + r ** (2 * p))


def test_ideal_ladder_all_linear():
    reading = -10.0 - STEPS_DB
    c = check_ladder(STEPS_DB, reading, np.full(7, 0.01))
    assert np.allclose(c.error_db, 0.0, atol=1e-12)
    assert np.allclose(c.measured_db, STEPS_DB)
    assert c.region == (LINEAR,) * 7 and not c.flagged.any()
    assert c.offset_dbfs == pytest.approx(-10.0)
    assert c.usable_range_db == 60.0
    assert (c.top_limited_by, c.bottom_limited_by) == ("ladder", "ladder")
    assert c.compression_db == 0.0


def test_one_bad_step_flagged_and_estimated():
    # planted truth: the 30 dB setting really gives 30.6 dB
    rng = np.random.default_rng(3)
    u = np.full(7, 0.02)
    reading = -10.0 - STEPS_DB + rng.normal(0, 0.02, 7)
    reading[3] -= 0.6
    c = check_ladder(STEPS_DB, reading, u)
    assert c.flagged.tolist() == [False, False, False, True, False, False, False]
    assert c.error_db[3] == pytest.approx(0.6, abs=0.1)
    assert np.all(np.abs(np.delete(c.error_db, 3)) < 0.1)
    # against a chosen reference step the same step stands out
    c0 = check_ladder(STEPS_DB, reading, u, reference_db=0.0)
    assert c0.flagged.tolist() == c.flagged.tolist() and c0.reference == "step 0 dB"


def test_input_order_does_not_matter():
    reading = -10.0 - STEPS_DB
    reading[5] -= 0.5
    perm = np.array([4, 0, 6, 2, 5, 1, 3])
    c = check_ladder(STEPS_DB[perm], reading[perm], np.full(7, 0.01))
    assert np.allclose(c.nominal_db, STEPS_DB)
    assert c.flagged.tolist() == [False] * 5 + [True, False]
    assert np.allclose(STEPS_DB[perm][c.order], c.nominal_db)


def test_compressed_top_and_noisy_bottom_are_the_dongle_not_the_attenuator():
    # invented dongle: Rapp p=2 saturating at -7 dBFS, top reading -10 dBFS (about 0.5 dB short);
    # readings at the bottom too noisy for 0.3 dB.
    steps = np.arange(0.0, 13.0, 1.0).tolist() + [20.0, 30.0, 40.0, 50.0]
    steps = np.array(steps)
    reading = _rapp_db(-10.0 - steps, -7.0)
    u = np.full(steps.size, 0.01)
    u[-2:] = [0.2, 0.5]
    c = check_ladder(steps, reading, u)
    assert c.region[0] == COMPRESSED and c.compression_db == pytest.approx(0.5, abs=0.08)
    assert c.region[-2:] == (NOISE_LIMITED, NOISE_LIMITED)
    assert not c.flagged.any()
    assert (c.top_limited_by, c.bottom_limited_by) == ("compression", "noise")
    first_linear = c.region.index(LINEAR)
    assert c.usable_top_db == steps[first_linear]
    assert c.usable_bottom_db == 30.0
    assert c.usable_range_db == 30.0 - steps[first_linear]
    # linear steps are within the linearity limit of the line
    lin = np.array(c.region) == LINEAR
    assert np.all(np.abs(c.error_db[lin]) <= 0.1)


def test_missing_readings_are_noise_limited():
    reading = -10.0 - STEPS_DB
    reading[-1] = np.nan
    u = np.full(7, 0.01)
    c = check_ladder(STEPS_DB, reading, u)
    assert c.region[-1] == NOISE_LIMITED and not c.flagged[-1]
    assert math.isnan(c.error_db[-1])


def test_check_ladder_validation():
    with pytest.raises(ValueError, match="at least 3"):
        check_ladder([0, 10], [-10, -20], [0.01, 0.01])
    with pytest.raises(ValueError, match="distinct"):
        check_ladder([0, 10, 10], [-10, -20, -20], [0.01] * 3)
    with pytest.raises(ValueError, match="noise-limited"):
        check_ladder([0, 10, 20], [-10, -20, -30], [1.0] * 3)
    with pytest.raises(ValueError, match="not one of the steps"):
        check_ladder([0, 10, 20], [-10, -20, -30], [0.01] * 3, reference_db=5)


def test_substitution_on_a_linear_ladder_is_exact():
    steps = np.arange(0.0, 11.0, 1.0)
    reading = -20.0 - steps
    loss = substitution_loss(steps, reading, np.full(11, 0.01), -23.37, 0.01)
    assert loss.loss_db == pytest.approx(3.37, abs=1e-9)
    assert loss.bracket_db == (3.0, 4.0)
    assert loss.method == "substitution"
    interp = [c for c in loss.budget.components if c.name.startswith("interpolation")][0]
    assert interp.u == pytest.approx(0.0, abs=1e-9)  # PCHIP of a straight line is the line
    # with the DUT behind a 2 dB setting the loss is the difference
    loss2 = substitution_loss(steps, reading, np.full(11, 0.01), -25.37, 0.01, dut_step_db=2.0)
    assert loss2.loss_db == pytest.approx(3.37, abs=1e-9)


def test_substitution_sensitivities_match_finite_differences():
    # JCGM 100:2008 5.1.3: c_i = df/dx_i; checked numerically on a curved (compressed) ladder
    steps = np.array([0.0, 2.0, 4.0, 6.0])
    reading = _rapp_db(-10.0 - steps, -8.0)
    u = np.array([0.01, 0.02, 0.03, 0.04])
    dut = reading[1] - 1.1
    loss = substitution_loss(steps, reading, u, dut, 0.05)
    by_name = {c.name: c for c in loss.budget.components}
    h = 1e-6

    def chord(r, d):
        return float(np.interp(-d, -r, steps))

    base = chord(reading, dut)
    assert by_name["DUT reading"].sensitivity == pytest.approx((chord(reading, dut + h) - base) / h, rel=1e-4)
    for i, name in ((1, "ladder reading 2 dB"), (2, "ladder reading 4 dB")):
        r = reading.copy()
        r[i] += h
        assert by_name[name].sensitivity == pytest.approx((chord(r, dut) - base) / h, rel=1e-4)


def test_substitution_through_compression_beats_direct():
    # invented dongle compressed ~0.5 dB at the top of a 1 dB ladder; DUT truly 3.00 dB
    steps = np.arange(0.0, 11.0, 1.0)
    sat = -7.07
    reading = _rapp_db(-10.0 - steps, sat)
    assert reading[0] == pytest.approx(-10.5, abs=0.05)
    dut = float(_rapp_db(-13.0, sat))
    sub = substitution_loss(steps, reading, np.full(11, 0.005), dut, 0.005)
    direct = direct_loss(reading[0], 0.005, dut, 0.005)
    assert sub.loss_db == pytest.approx(3.0, abs=0.01)
    assert abs(direct.loss_db - 3.0) > 0.3


def test_substitution_refuses_outside_and_non_monotonic():
    steps = np.array([0.0, 5.0, 10.0])
    with pytest.raises(ValueError, match="outside the ladder"):
        substitution_loss(steps, [-20.0, -25.0, -30.0], [0.01] * 3, -31.0, 0.01)
    with pytest.raises(ValueError, match="outside the ladder"):
        substitution_loss(steps, [-20.0, -25.0, -30.0], [0.01] * 3, -19.9, 0.01)
    with pytest.raises(ValueError, match="do not fall"):
        substitution_loss(steps, [-20.0, -31.0, -30.0], [0.01] * 3, -22.0, 0.01)


def test_substitution_budget_terms():
    steps = np.arange(0.0, 11.0, 1.0)
    loss = substitution_loss(steps, -20.0 - steps, np.full(11, 0.0), -23.5, 0.0,
                             dut_step_db=1.0, atten_tolerance_db=0.2)
    # two independent rectangular settings of +/-0.2 dB: sqrt(2)*0.2/sqrt(3) (GUM 4.3.7, 5.1.2)
    assert loss.u_db == pytest.approx(math.sqrt(2) * 0.2 / math.sqrt(3), rel=1e-9)
    assert loss.expanded_uncertainty_db == pytest.approx(2 * loss.u_db)


def test_direct_loss_drift_interpolation():
    # generator drifting linearly by -0.4 dB between thru before (t=0) and after (t=2);
    # DUT (true loss 3 dB) at t=1
    loss = direct_loss(-20.0, 0.01, -23.2, 0.01, thru_after_dbfs=-20.4, u_thru_after_db=0.01,
                       times_s=(0.0, 1.0, 2.0))
    assert loss.loss_db == pytest.approx(3.0, abs=1e-12)
    assert loss.drift_db == pytest.approx(-0.4)
    sens = {c.name: c.sensitivity for c in loss.budget.components}
    assert sens["thru reading (before)"] == pytest.approx(0.5)
    assert sens["thru reading (after)"] == pytest.approx(0.5)
    # u_c = sqrt(0.5^2 + 0.5^2 + 1) * 0.01 (GUM 5.1.2)
    assert loss.u_db == pytest.approx(0.01 * math.sqrt(1.5))
    with pytest.raises(ValueError, match="does not lie between"):
        direct_loss(-20.0, 0.01, -23.2, 0.01, thru_after_dbfs=-20.4, u_thru_after_db=0.01,
                    times_s=(0.0, 3.0, 2.0))


def test_direct_loss_budget_notes_unassessed_terms():
    loss = direct_loss(-20.0, 0.01, -23.0, 0.02)
    notes = {c.name: c.note for c in loss.budget.components}
    assert "not assessed" in notes["dongle linearity"] and "not assessed" in notes["drift"]
    with_lin = direct_loss(-20.0, 0.0, -23.0, 0.0, linearity_db=0.1)
    assert with_lin.u_db == pytest.approx(0.1 / math.sqrt(3))


def test_mean_reading_keeps_the_larger_of_estimator_and_scatter():
    # scatter much larger than the estimators claim -> s/sqrt(n), n-1 dof (GUM 4.2.3)
    mean, u, dof = mean_reading([-20.0, -20.3, -19.9], [0.01] * 3)
    assert mean == pytest.approx(-20.0667, abs=1e-4)
    assert u == pytest.approx(np.std([-20.0, -20.3, -19.9], ddof=1) / math.sqrt(3))
    assert dof == 2
    # scatter smaller than the estimators -> sqrt(sum u^2)/n
    mean, u, dof = mean_reading([-20.0, -20.001], [0.05, 0.05], [20, 20])
    assert u == pytest.approx(0.05 / math.sqrt(2))
    assert dof == pytest.approx(40)
    mean, u, dof = mean_reading([-20.0], [0.05], [20])
    assert (mean, u) == (-20.0, 0.05) and dof == pytest.approx(20)


def test_mismatch_terms_reference_values():
    # REFERENCES.md Mismatch (Harris & Warner, IEE Proc. H 128, 1981): Gs 0.1, Gl 0.2,
    # S11 = S22 = 0.1, |S21|^2 = 0.5 -> about +/-0.51 dB; standard deviation 0.194 dB [calc].
    comps = mismatch_components(swr_from_gamma(0.1), swr_from_gamma(0.2), swr_from_gamma(0.1),
                                loss_db=10 * math.log10(2))
    assert len(comps) == 4 and all(c.distribution == "U-shaped" for c in comps)
    assert sum(c.half_width for c in comps) == pytest.approx(0.51, abs=0.015)
    assert Budget(tuple(comps)).combined_u == pytest.approx(0.194, abs=0.001)
    # no DUT SWR: only the source-load terms; no source/load SWR: nothing
    assert len(mismatch_components(1.5, 2.0)) == 2
    assert mismatch_components(None, 2.0, 1.2) == []


def test_mismatch_terms_against_monte_carlo_of_the_exact_two_port():
    # Exact ratio of the DUT and thru readings of a two-port between mismatched ports, random
    # phases (signal-flow graph of a two-port, e.g. Pozar, Microwave Engineering [from memory]):
    # |1 - Gs*Gl|^2 / |(1 - S11*Gs)(1 - S22*Gl) - S21*S12*Gs*Gl|^2.
    rng = np.random.default_rng(4)
    n = 200_000

    def ph(mag):
        return mag * np.exp(2j * np.pi * rng.random(n))

    gs, gl, s11, s22, s21s12 = ph(0.1), ph(0.2), ph(0.1), ph(0.1), ph(0.5)
    err_db = 10 * np.log10(np.abs(1 - gs * gl) ** 2
                           / np.abs((1 - s11 * gs) * (1 - s22 * gl) - s21s12 * gs * gl) ** 2)
    comps = mismatch_components(swr_from_gamma(0.1), swr_from_gamma(0.2), swr_from_gamma(0.1),
                                loss_db=10 * math.log10(2))
    assert np.std(err_db) == pytest.approx(Budget(tuple(comps)).combined_u, rel=0.05)
    assert np.max(np.abs(err_db)) <= 1.05 * sum(c.half_width for c in comps)
