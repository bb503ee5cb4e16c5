"""dB helpers, kT0 and noise temperature against published constants and worked values."""

import math

import numpy as np
import pytest
from hypothesis import given, strategies as st
from scipy import constants

from rxbench.dsp import units


def test_kt0_from_codata():
    # k exact in the 2019 SI (scipy.constants); kT0 at 290 K = -173.975 dBm/Hz (REFERENCES.md [calc]).
    assert units.K_B == constants.k == 1.380649e-23
    assert units.KT0_DBM_PER_HZ == pytest.approx(-173.975, abs=5e-4)


@pytest.mark.parametrize("nf_db, te_k", [(1, 75.1), (3, 288.6), (6, 864.5), (8, 1539.8)])
def test_noise_temperature_of_noise_figure(nf_db, te_k):
    # Te = T0 (F - 1), IEEE/ITS definitions; values REFERENCES.md [calc].
    assert units.noise_temperature_from_nf_db(nf_db) == pytest.approx(te_k, abs=0.05)
    assert units.nf_db_from_noise_temperature(te_k) == pytest.approx(nf_db, abs=1e-3)


def test_zero_power_is_minus_infinity_not_a_floor():
    assert units.db_from_power(0.0) == -math.inf
    assert units.db_from_amplitude(0.0) == -math.inf
    with pytest.raises(ValueError, match="must be >= 0"):
        units.db_from_power(-1.0)


@given(st.floats(min_value=-300, max_value=300))
def test_db_round_trips(db):
    assert units.db_from_power(units.power_from_db(db)) == pytest.approx(db, abs=1e-9)
    assert units.db_from_amplitude(units.amplitude_from_db(db)) == pytest.approx(db, abs=1e-9)
    assert units.dbm_from_w(units.w_from_dbm(db)) == pytest.approx(db, abs=1e-9)


def test_power_and_amplitude_differ_by_two():
    # 20 log10 for amplitude, 10 log10 for power (common practice).
    assert units.db_from_amplitude(10.0) == pytest.approx(20.0)
    assert units.db_from_power(10.0) == pytest.approx(10.0)
    assert np.allclose(units.power_from_db([0, 3.0103]), [1, 2], atol=1e-5)
