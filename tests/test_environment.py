"""dsp.environment: ITU-R P.372 external noise, SNR cost of a loss; dsp.excess: antenna-noise excess, knee fit."""

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from rxbench.dsp import environment as env
from rxbench.dsp import excess as exc
from rxbench.dsp.units import T0_K, noise_temperature_from_nf_db

# ITU-R P.372 median man-made and galactic noise, Fa in dB above kT0b, worked from
# Fam = c - d*log10(f/MHz) [calc, REFERENCES.md "External noise: ITU-R Recommendation P.372"].
P372_FA_TABLE_DB = {
    "residential": (57.43, 49.09, 40.75, 32.41),
    "city": (61.73, 53.39, 45.05, 36.71),
    "rural": (52.13, 43.79, 35.45, 27.11),
    "quiet-rural": (38.04, 29.43, 20.82, 12.21),
}
P372_GALACTIC_DB = (39.49, 32.56, 25.64, 18.72)
TABLE_FREQUENCIES_HZ = (3.5e6, 7e6, 14e6, 28e6)


@pytest.mark.parametrize("environment", sorted(P372_FA_TABLE_DB))
def test_man_made_fa_matches_p372_table(environment):
    # ITU-R P.372 coefficients; table values rounded to 0.01 dB [calc].
    got = env.man_made_fa_db(np.array(TABLE_FREQUENCIES_HZ), environment)
    np.testing.assert_allclose(got, P372_FA_TABLE_DB[environment], atol=0.006)


def test_galactic_fa_matches_p372_table():
    # ITU-R P.372 galactic noise 52.0 - 23.0*log10(f/MHz) [calc].
    got = [env.galactic_fa_db(f) for f in TABLE_FREQUENCIES_HZ]
    np.testing.assert_allclose(got, P372_GALACTIC_DB, atol=0.006)


def test_man_made_coefficients_are_p372():
    # ITU-R P.372 (c, d) per category, as tabulated in REFERENCES.md.
    assert env.MAN_MADE_NOISE == {
        "city": (76.8, 27.7), "residential": (72.5, 27.7),
        "rural": (67.2, 27.7), "quiet-rural": (53.6, 28.6),
    }
    # At 1 MHz the line gives c itself: log10(1) = 0.
    for name, (c, _d) in env.MAN_MADE_NOISE.items():
        assert env.man_made_fa_db(1e6, name) == pytest.approx(c, abs=1e-12)


@pytest.mark.parametrize("frequency_hz", [0.29e6, 251e6, 0.0, -5e6, float("nan"), float("inf")])
def test_outside_validity_range_is_refused(frequency_hz):
    # ITU-R P.372 lines are given for 0.3-250 MHz.
    with pytest.raises(ValueError, match="0.3-250 MHz"):
        env.man_made_fa_db(frequency_hz, "rural")
    with pytest.raises(ValueError, match="0.3-250 MHz"):
        env.galactic_fa_db(frequency_hz)


def test_validity_range_edges_accepted():
    assert math.isfinite(env.man_made_fa_db(0.3e6, "city"))
    assert math.isfinite(env.external_fa_db(250e6, "quiet-rural", galactic=True))


def test_unknown_environment_is_refused():
    with pytest.raises(ValueError, match="suburban"):
        env.man_made_fa_db(7e6, "suburban")


def test_galactic_is_power_added():
    # Independent noise powers add: at 28 MHz quiet rural 12.21 dB and galactic 18.72 dB
    # (ITU-R P.372 [calc]) combine to 10*log10(10**1.221 + 10**1.872) = 19.60 dB [calc].
    got = env.external_fa_db(28e6, "quiet-rural", galactic=True)
    assert got == pytest.approx(10 * math.log10(10**1.221 + 10**1.872), abs=0.01)
    assert env.external_fa_db(28e6, "quiet-rural") == pytest.approx(12.21, abs=0.006)


@given(st.floats(0.3e6, 250e6), st.sampled_from(sorted(env.MAN_MADE_NOISE)))
def test_galactic_sum_is_bounded_by_its_parts(frequency_hz, environment):
    # A power sum lies between the larger part and the larger part + 3.01 dB (equal parts).
    a = env.man_made_fa_db(frequency_hz, environment)
    b = env.galactic_fa_db(frequency_hz)
    s = env.external_fa_db(frequency_hz, environment, galactic=True)
    assert max(a, b) - 1e-9 <= s <= max(a, b) + 10 * math.log10(2) + 1e-9


@given(st.floats(-30.0, 90.0))
def test_fa_temperature_round_trip(fa_db):
    # Fa = 10*log10(Ta/T0) (ITU-R P.372 definition).
    ta = env.temperature_from_fa_db(fa_db)
    assert ta == pytest.approx(T0_K * 10 ** (fa_db / 10), rel=1e-12)
    assert env.fa_db_from_temperature(ta) == pytest.approx(fa_db, abs=1e-9)


@pytest.mark.parametrize(
    "environment, frequency_hz, loss_db, nf_db, expected_db",
    [
        # REFERENCES.md worked values of the SNR cost [calc], Fa from ITU-R P.372.
        ("residential", 14e6, 3.0, 8.0, 0.002),
        ("quiet-rural", 28e6, 3.0, 8.0, 1.09),
        ("quiet-rural", 14e6, 6.0, 15.0, 2.10),
    ],
)
def test_snr_cost_worked_values(environment, frequency_hz, loss_db, nf_db, expected_db):
    ta = env.temperature_from_fa_db(env.external_fa_db(frequency_hz, environment))
    trx = noise_temperature_from_nf_db(nf_db)
    assert env.snr_degradation_db(loss_db, ta, trx) == pytest.approx(expected_db, abs=0.006)


@given(st.floats(0.0, 40.0), st.floats(0.0, 30.0))
def test_snr_cost_equals_loss_when_antenna_is_at_t0(loss_db, nf_db):
    # Sanity check [calc, REFERENCES.md]: with Ta = T0 the cost equals the loss for any receiver
    # (a resistor at T0 seen through a loss at T0 is still a resistor at T0).
    trx = noise_temperature_from_nf_db(nf_db)
    assert env.snr_degradation_db(loss_db, T0_K, trx) == pytest.approx(loss_db, abs=1e-9)


def test_snr_cost_with_noiseless_antenna_is_the_friis_cascade():
    # Ta = 0: the cost is the ratio of system temperatures T0*(F - 1) before and after the pad, with
    # F after the pad from Friis; a 3 dB pad ahead of an 8 dB receiver -> 11.00 dB
    # [calc, REFERENCES.md].
    trx = noise_temperature_from_nf_db(8.0)
    f_rx = 10 ** 0.8
    f_cascade = 10 ** 0.3 + (f_rx - 1) * 10 ** 0.3  # Friis, Proc. IRE 1944: F1 + (F2 - 1)/G1
    expected = 10 * math.log10((f_cascade - 1) / (f_rx - 1))
    assert env.snr_degradation_db(3.0, 0.0, trx) == pytest.approx(expected, abs=1e-9)
    assert 10 * math.log10(f_cascade) == pytest.approx(11.00, abs=0.005)


@given(st.floats(0.0, 3.0), st.floats(0.0, 1e9), st.floats(0.0, 1e5))
def test_loss_for_cost_inverts_cost(cost_db, ta_k, trx_k):
    if ta_k + trx_k < 1.0:
        return
    loss_db = env.loss_for_snr_degradation_db(cost_db, ta_k, trx_k)
    assert loss_db >= -1e-9
    assert env.snr_degradation_db(max(loss_db, 0.0), ta_k, trx_k) == pytest.approx(cost_db, abs=1e-6)


def test_cost_from_excess_alone():
    # With excess X = (Ta + Trx)/(T0 + Trx), dSNR = 10*log10(1 + (L - 1)/X) for any Trx [calc from
    # the REFERENCES.md formula]. 20 dB excess, 6 dB loss -> 10*log10(1 + 2.981/100) = 0.1276 dB.
    for nf_db in (2.0, 8.0, 20.0):
        trx = noise_temperature_from_nf_db(nf_db)
        ta = env.antenna_temperature_from_excess(20.0, trx)
        assert env.snr_degradation_db(6.0, ta, trx) == pytest.approx(0.1276, abs=1e-4)
    assert env.snr_degradation_db(6.0, 100 * T0_K, 0.0) == pytest.approx(0.1276, abs=1e-4)


@given(st.floats(-20.0, 60.0), st.floats(0.0, 30.0))
def test_excess_temperature_round_trip(fa_db, nf_db):
    trx = noise_temperature_from_nf_db(nf_db)
    ta = env.temperature_from_fa_db(fa_db)
    x_db = env.excess_db_from_temperature(ta, trx)
    assert env.antenna_temperature_from_excess(x_db, trx) == pytest.approx(ta, rel=1e-6, abs=1e-6)


def test_excess_implying_negative_temperature_is_refused():
    # (Ta + Trx)/(T0 + Trx) cannot be below Trx/(T0 + Trx): with NF 8 dB that is -0.78 dB.
    with pytest.raises(ValueError, match="negative antenna temperature"):
        env.antenna_temperature_from_excess(-1.0, noise_temperature_from_nf_db(8.0))


def test_loss_refused_if_negative():
    with pytest.raises(ValueError, match="loss_db"):
        env.snr_degradation_db(-1.0, 1e4, 500.0)


# ---- knee fit on arrays (the synthetic-capture version lives in test_excess_cli.py) ----

def _model(loss_db, ta_k, trx_k, gain=1e-3):
    big_l = 10 ** (np.asarray(loss_db) / 10)
    # Bedrosian (RAND 1960): T_out = T_in/L + T0*(1 - 1/L); the receiver adds Trx.
    return gain * (ta_k / big_l + T0_K * (1 - 1 / big_l) + trx_k)


def test_knee_fit_recovers_noise_free_model():
    loss_db = np.array([0, 3, 6, 10, 15, 20, 30, 40.0])
    ta, trx = 4.0e5, 1539.8
    fit = exc.fit_knee(loss_db, _model(loss_db, ta, trx), receiver_temperature_k=trx)
    assert fit.external_density == pytest.approx(1e-3 * ta, rel=1e-6)
    assert fit.internal_density == pytest.approx(1e-3 * trx, rel=1e-6)
    assert fit.excess_db == pytest.approx(10 * math.log10((ta + trx) / (T0_K + trx)), abs=1e-6)
    assert fit.residual_rms_db < 1e-6


def test_knee_fit_with_load_and_noise():
    rng = np.random.default_rng(7)
    loss_db = np.array([0, 5, 10, 15, 20.0])
    ta, trx = 2.0e4, 864.5
    d = _model(loss_db, ta, trx) * (1 + 0.02 * rng.standard_normal(loss_db.size))
    u = 0.02 * d
    load = _model(200.0, ta, trx)  # effectively a matched load at T0
    fit = exc.fit_knee(loss_db, d, u_density=u, load_density=load, u_load_density=0.02 * load,
                       receiver_temperature_k=trx)
    assert 10 * math.log10(fit.external_density / (1e-3 * ta)) == pytest.approx(0.0, abs=0.1)
    assert 10 * math.log10(fit.internal_density / (1e-3 * trx)) == pytest.approx(0.0, abs=0.1)
    assert 0 < fit.u_excess_db < 0.2
    assert fit.n_points == 6


def test_knee_fit_without_receiver_temperature_gives_no_split():
    loss_db = np.array([0, 10, 20.0])
    fit = exc.fit_knee(loss_db, _model(loss_db, 1e5, 500.0))
    assert math.isnan(fit.external_density) and math.isnan(fit.internal_density)
    assert fit.load_density == pytest.approx(1e-3 * (T0_K + 500.0), rel=1e-6)


def test_knee_fit_needs_two_attenuations():
    with pytest.raises(ValueError, match="two different"):
        exc.fit_knee([6.0, 6.0], [1.0, 1.1])
    with pytest.raises(ValueError, match="density"):
        exc.fit_knee([0.0, 6.0], [1.0, -1.0])
