"""dsp.bands.curve_at (a stitched curve read at one frequency), near_tunings and band_of, on arrays.

Checks: the straight line between two neighbouring sub-bands against numpy.interp (a general-purpose
reference library); its uncertainty against the first-order law of propagation written out by hand
for independent inputs (JCGM 100:2008, 5.1.2), in a hand-worked case; the band edges against the
table (IARU band plans, common practice: 10 m is 28.0-29.7 MHz).
"""

import math

import numpy as np
import pytest

from rxbench.dsp.bands import band_of, curve_at, near_tunings

CENTRES = np.array([28.00e6, 28.01e6, 28.02e6, 28.50e6])
WIDTHS = np.full(4, 0.006e6)  # half-width 3 kHz: gaps of 4 kHz between the first three
VALUES = np.array([4.0, 7.0, 5.0, 6.0])
U = np.array([0.1, 0.2, 0.3, 0.1])


def test_inside_a_sub_band_its_own_value():
    p = curve_at(28.002e6, CENTRES, WIDTHS, VALUES, U)
    assert (p.value_db, p.u_db, p.at_hz, p.interpolated) == (4.0, 0.1, 28.00e6, False)


def test_between_neighbours_the_line_numpy_interp_draws():
    for f in np.linspace(28.0031e6, 28.0069e6, 7):  # between the first two sub-bands
        p = curve_at(f, CENTRES, WIDTHS, VALUES, U)
        assert p.interpolated and p.at_hz == f
        assert p.value_db == pytest.approx(float(np.interp(f, CENTRES, VALUES)), abs=1e-12)


def test_hand_worked_interpolation_and_its_uncertainty():
    # Half-widths 3 kHz: 28.0065 MHz lies between the sub-bands at 28.00 and 28.01 MHz, w = 0.65:
    # v = 0.35*4 + 0.65*7 = 5.95 dB; u = sqrt((0.35*0.1)^2 + (0.65*0.2)^2) = sqrt(0.001225 + 0.0169)
    # = 0.134629... dB (worked by hand).
    p = curve_at(28.0065e6, CENTRES, WIDTHS, VALUES, U)
    assert p.value_db == pytest.approx(5.95, abs=1e-12)
    assert p.u_db == pytest.approx(math.sqrt(0.018125), abs=1e-12)


def test_never_extrapolated_nor_across_a_wide_gap():
    assert curve_at(27.99e6, CENTRES, WIDTHS, VALUES, U) is None  # below the first sub-band
    assert curve_at(28.60e6, CENTRES, WIDTHS, VALUES, U) is None  # above the last
    assert curve_at(28.30e6, CENTRES, WIDTHS, VALUES, U) is None  # 480 kHz gap, widths 6 kHz


def test_missing_points_are_left_out_and_order_does_not_matter():
    v = VALUES.copy()
    v[1] = np.nan  # no value at 28.01 MHz: 28.0075 MHz then lies in a gap of 20 kHz, over two widths
    assert curve_at(28.0075e6, CENTRES[::-1], WIDTHS, v[::-1], U[::-1]) is None
    wide = np.full(4, 0.01e6)  # widths 10 kHz: the 20 kHz gap may be bridged
    p = curve_at(28.0075e6, CENTRES[::-1], wide, v[::-1], U[::-1])
    assert p.interpolated and p.value_db == pytest.approx(float(np.interp(28.0075e6, [28.0e6, 28.02e6], [4.0, 5.0])))
    assert curve_at(28.01e6, CENTRES, wide, [4.0, None, 5.0, 6.0], U).interpolated  # None counts as missing


def test_arrays_must_match():
    with pytest.raises(ValueError):
        curve_at(28.0e6, CENTRES, WIDTHS[:3], VALUES, U)


def test_band_of_the_table_edges():
    assert band_of(28.0e6) == "10 m" and band_of(29.7e6) == "10 m"
    assert band_of(27.999e6) is None and band_of(None) is None and band_of(float("nan")) is None
    assert band_of(14.2e6) == "20 m"


def test_near_tunings_line_between_the_two_either_side():
    # Tunings at 28.2, 28.9 and 29.2 MHz (any order); 29.0 MHz lies between 28.9 and 29.2: w = 1/3,
    # the line numpy.interp draws; u the larger of the two (a bound for fully correlated inputs).
    centres, nf, u = [29.2e6, 28.2e6, 28.9e6], [7.0, 5.0, 6.4], [0.3, 0.1, 0.2]
    p = near_tunings(29.0e6, centres, nf, u, max_distance_hz=2.9e6)
    assert (p.low_hz, p.high_hz) == (28.9e6, 29.2e6)
    assert p.value_db == pytest.approx(float(np.interp(29.0e6, [28.2e6, 28.9e6, 29.2e6], [5.0, 6.4, 7.0])), abs=1e-12)
    assert p.value_db == pytest.approx(6.4 + (0.1 / 0.3) * 0.6, abs=1e-12)  # 6.6 dB, by hand
    assert p.u_db == 0.3


def test_near_tunings_one_side_and_too_far():
    centres, nf, u = [28.2e6, 28.9e6], [5.0, 6.4], [0.1, 0.2]
    p = near_tunings(29.1e6, centres, nf, u, max_distance_hz=2.91e6)
    assert (p.value_db, p.u_db, p.low_hz, p.high_hz) == (6.4, 0.2, 28.9e6, None)
    assert near_tunings(29.1e6, centres, nf, u, max_distance_hz=0.1e6) is None  # 200 kHz to the nearest
    assert near_tunings(28.5e6, centres, [np.nan, 6.4], u, max_distance_hz=1e6).high_hz is None  # nan left out
