"""Noise figure formulas (dsp.noisefig: worked examples with their sources) and the noise-source
method (dsp.subbands, dsp.noise_source, dsp.stitch) on synthetic spectra with known receiver noise
temperature, ENR and DUT loss."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rxbench.dsp import noise_source as nsm
from rxbench.dsp import noisefig as nfm
from rxbench.dsp import stitch as stm
from rxbench.dsp import subbands as sbm
from rxbench.dsp import synth
from rxbench.dsp.spectrum import get_window, psd
from rxbench.dsp.units import T0_K, db_from_power, noise_temperature_k, power_from_db

FS = 250e3


# ---------------------------------------------------------------------------------- worked examples


def test_y_factor_worked_example():
    # REFERENCES.md, Y-factor method (Pozar, Microwave Engineering, noise chapter [from memory]);
    # worked example [calc]: ENR 15 dB, Y 10.00 dB -> NF 5.458 dB, Te 729.0 K.
    f = nfm.noise_factor_from_y(10.0, power_from_db(15.0))
    assert db_from_power(f) == pytest.approx(5.458, abs=5e-4)
    assert noise_temperature_k(f) == pytest.approx(729.0, abs=0.05)
    # Same thing in the familiar form NF = ENR_dB - 10*log10(Y - 1) (same source).
    assert db_from_power(f) == pytest.approx(15.0 - 10 * np.log10(9.0), abs=1e-12)


def test_y_factor_cold_temperature_correction():
    # REFERENCES.md, Y-factor, T_cold != T0 [calc from the Te form]: T_cold 300 K -> 5.410 dB.
    f = nfm.noise_factor_from_y(10.0, power_from_db(15.0), t_cold_k=300.0)
    assert db_from_power(f) == pytest.approx(5.410, abs=5e-4)


def test_y_factor_te_form_agrees():
    # Te = (T_hot - Y*T_cold)/(Y - 1), T_hot = T0*(ENR + 1) (REFERENCES.md, Y-factor method).
    enr, y, t_cold = power_from_db(12.0), 4.0, 310.0
    te = (T0_K * (enr + 1.0) - y * t_cold) / (y - 1.0)
    f = nfm.noise_factor_from_y(y, enr, t_cold_k=t_cold)
    assert T0_K * (f - 1.0) == pytest.approx(te, rel=1e-12)


def test_second_stage_correction_worked_example():
    # REFERENCES.md, Y-factor, second stage [calc]: F12 6 dB, F2 10 dB, G1 15 dB -> NF1 5.678 dB.
    f1 = nfm.second_stage_correction(power_from_db(6.0), power_from_db(10.0), power_from_db(15.0))
    assert db_from_power(f1) == pytest.approx(5.678, abs=5e-4)


def test_friis_cascade_worked_examples():
    # REFERENCES.md, Friis cascade (Friis, Proc. IRE 32, 1944) [calc]:
    # 1 dB NF / 20 dB gain stage followed by a 10 dB NF stage -> 1.30 dB.
    f = nfm.friis_noise_factor([power_from_db(1.0), power_from_db(10.0)], [power_from_db(20.0)])
    assert db_from_power(f) == pytest.approx(1.30, abs=5e-3)
    # 3 dB pad (at T0: F = L) ahead of an 8 dB receiver -> 11.00 dB.
    pad = nfm.passive_noise_factor(power_from_db(3.0))
    f = nfm.friis_noise_factor([pad, power_from_db(8.0)], [power_from_db(-3.0), 1.0])
    assert db_from_power(f) == pytest.approx(11.00, abs=5e-3)


def test_friis_three_stages_by_hand():
    # Friis, Proc. IRE 32, 1944: F = F1 + (F2 - 1)/G1 + (F3 - 1)/(G1*G2).
    f = nfm.friis_noise_factor([2.0, 5.0, 11.0], [10.0, 4.0])
    assert f == pytest.approx(2.0 + 4.0 / 10.0 + 10.0 / 40.0)


def test_passive_loss_noise_factor():
    # REFERENCES.md, Friis cascade / Bedrosian (RAND 1960) [calc]: 3 dB loss at 350 K -> NF 3.43 dB.
    f = nfm.passive_noise_factor(power_from_db(3.0), 350.0)
    assert db_from_power(f) == pytest.approx(3.43, abs=5e-3)
    # At T0 the noise factor equals the loss (same source).
    assert nfm.passive_noise_factor(power_from_db(3.0)) == pytest.approx(power_from_db(3.0))


def test_gain_method_worked_example():
    # REFERENCES.md, gain method [calc]: -100 dBm, SNR 20 dB in 2500 Hz -> 19.995 dB
    # (C/N0 = SNR + 10*log10(B); kT0 from CODATA k via scipy.constants; the exact value 19.9958).
    cn0 = 20.0 + 10.0 * np.log10(2500.0)
    assert nfm.nf_gain_method_db(-100.0, cn0) == pytest.approx(19.995, abs=1e-3)
    # Equivalent form P_in - SNR - 10*log10(B) + 173.975 (same source).
    assert nfm.nf_gain_method_db(-100.0, cn0) == pytest.approx(-100 - 20 - 10 * np.log10(2500) + 173.975,
                                                               abs=1e-3)


# ------------------------------------------------------------------------------ validation, algebra


def test_bad_inputs_are_refused():
    with pytest.raises(ValueError, match="y="):
        nfm.noise_factor_from_y(0.9, 10.0)
    with pytest.raises(ValueError, match="enr="):
        nfm.noise_factor_from_y(2.0, -1.0)
    with pytest.raises(ValueError, match="loss="):
        nfm.passive_noise_factor(0.5)
    with pytest.raises(ValueError, match="gains="):
        nfm.friis_noise_factor([2.0, 3.0, 4.0], [10.0])
    with pytest.raises(ValueError, match="does not exceed"):
        nfm.dut_gain(1.0, 2.0, 3.0, 1.0)


@settings(max_examples=60, deadline=None)
@given(nf_db=st.floats(0.5, 25.0), enr_db=st.floats(3.0, 30.0), t_cold_k=st.floats(250.0, 330.0))
def test_y_factor_inverts_the_physics(nf_db, enr_db, t_cold_k):
    # Physical invariant: readings proportional to (T_source + Te) give back Te exactly
    # (Y-factor definition, REFERENCES.md).
    te = noise_temperature_k(power_from_db(nf_db))
    t_hot = T0_K * (power_from_db(enr_db) + 1.0)
    y = (t_hot + te) / (t_cold_k + te)
    f = nfm.noise_factor_from_y(y, power_from_db(enr_db), t_cold_k=t_cold_k)
    assert db_from_power(f) == pytest.approx(nf_db, abs=1e-9)


@settings(max_examples=60, deadline=None)
@given(loss_db=st.floats(0.1, 20.0), nf_rx_db=st.floats(1.0, 15.0), t_k=st.floats(250.0, 350.0))
def test_second_stage_recovers_a_passive_loss(loss_db, nf_rx_db, t_k):
    # Friis (1944) and Bedrosian (1960): build the cascade of a loss and a receiver, then undo it.
    f_loss = nfm.passive_noise_factor(power_from_db(loss_db), t_k)
    f_rx = power_from_db(nf_rx_db)
    f12 = nfm.friis_noise_factor([f_loss, f_rx], [power_from_db(-loss_db)])
    f1 = nfm.second_stage_correction(f12, f_rx, power_from_db(-loss_db))
    assert f1 == pytest.approx(f_loss, rel=1e-9)


def test_y_uncertainty_matches_the_analytic_sensitivity():
    # GUM (JCGM 100:2008) first-order propagation: u(F) = |dF/dY| * u(Y), dF/dY = -(F + Tc/T0 - 1)/(Y - 1).
    enr, dof = power_from_db(15.0), 2000.0
    r = nfm.y_factor(10.0, 1.0, enr, dof_hot=dof, dof_cold=dof)
    u_y = 10.0 * np.sqrt(2.0 / dof + 2.0 / dof)
    assert r.u_noise_factor == pytest.approx(r.noise_factor / 9.0 * u_y, rel=1e-5)
    # The dB-per-dB sensitivity: d(NF_dB)/d(Y_dB) = -F*Y/((Y - 1)*F) = -Y/(Y - 1) at T_cold = T0.
    assert nfm.y_sensitivity(10.0, enr) == pytest.approx(-10.0 / 9.0)
    # ENR uncertainty passes through with dF/dENR = 1/(Y - 1).
    r = nfm.y_factor(10.0, 1.0, enr, u_enr_db=0.1)
    assert r.u_noise_factor == pytest.approx(enr * (0.1 / (10 / np.log(10))) / 9.0, rel=1e-5)


def test_band_dof_of_hann_bins():
    # Hann: correlation of neighbouring DFT bins of white noise is 2/3, of bins two apart 1/6
    # (from the window's spectrum, -1/4, 1/2, -1/4 taps; Harris 1978). Two bins then carry
    # nu * 4 / (2 + 2 * (4/9)) degrees of freedom; many bins tend to nu * n / (1 + 2*(4/9 + 1/36)).
    w = get_window("hann", 4096)
    assert sbm.band_dof(10.0, 1, w) == pytest.approx(10.0)
    assert sbm.band_dof(10.0, 2, w) == pytest.approx(10.0 * 4 / (2 + 8 / 9))
    assert sbm.band_dof(10.0, 2000, w) == pytest.approx(10.0 * 2000 / (1 + 2 * (4 / 9 + 1 / 36)), rel=1e-3)


def test_stitch_trims_overlaps_at_the_midpoint():
    centers = [100e6, 100.15e6]
    cover = [(99.9e6, 100.1e6), (100.05e6, 100.25e6)]
    f = [np.linspace(99.9e6, 100.1e6, 21), np.linspace(100.05e6, 100.25e6, 21)]
    keep = stm.stitch_masks(centers, f, cover)
    kept = np.sort(np.concatenate([fi[k] for fi, k in zip(f, keep)]))
    # Everything from the first up to the midpoint 100.075 MHz, the second beyond it; no duplicates.
    assert f[0][keep[0]].max() <= 100.075e6
    assert f[1][keep[1]].min() >= 100.075e6
    assert np.all(np.diff(kept) > 0)
    assert kept[0] == 99.9e6 and kept[-1] == 100.25e6


# ----------------------------------------------------------------------- synthetic noise-source runs

N = 125_000  # 0.5 s at 250 kHz
RX = synth.Dongle(gain_db=90.0, noise_figure_db=6.0)


def _spectra(rng, enr_db=15.0, loss_db=None, n=N, dongle=RX, nperseg=1024):
    out = []
    for hot in (False, True):
        x = synth.noise_source(n, FS, enr_db, hot, rng)
        if loss_db is not None:
            x = synth.passive_loss(x, FS, loss_db, rng)
        out.append(psd(dongle.receive(x, FS, rng), FS, nperseg=nperseg))
    return out  # cold, hot


def test_sub_band_densities_read_the_known_noise_density():
    # Physical invariant: thermal noise of T kelvin has density k*T (Nyquist); through the dongle
    # the cold reading sits at k*(T0 + Te)*gain (synth.Dongle.noise_density_dbfs_per_hz).
    rng = np.random.default_rng(1)
    cold, hot = _spectra(rng)
    sb = sbm.sub_band_densities([cold, hot], n_sub_bands=8, enr_db=15.0)
    expected = power_from_db(RX.noise_density_dbfs_per_hz(T0_K))
    whole = sb.density[0][-1]
    assert db_from_power(whole / expected) == pytest.approx(0.0, abs=0.03)  # 8-bit quantisation adds ~0.01 dB here
    assert np.allclose(sb.enr, power_from_db(15.0))
    assert sb.n_bins[0][:-1].sum() == sb.n_bins[0][-1]  # sub-bands tile the usable band once


def test_noise_figure_from_synthetic_noise_source():
    # What must be shown: NF within 0.15 dB of the receiver's known noise figure (synthetic).
    rng = np.random.default_rng(2)
    cold, hot = _spectra(rng)
    sb = sbm.sub_band_densities([cold, hot], n_sub_bands=8, enr_db=15.0)
    r = nfm.y_factor(sb.density[1], sb.density[0], sb.enr, dof_hot=sb.dof[1], dof_cold=sb.dof[0])
    assert r.nf_db[-1] == pytest.approx(RX.noise_figure_db, abs=0.15)
    assert np.all(np.abs(r.nf_db[:-1] - RX.noise_figure_db) < 0.15 + 3 * r.u_nf_db[:-1])
    assert 0 < r.u_nf_db[-1] < 0.1


def test_cold_source_at_another_temperature():
    # A cold source at 370 K, read with the T_cold correction, still gives the receiver's NF.
    rng = np.random.default_rng(3)
    x_cold = synth.thermal_noise(N, FS, 370.0, rng)
    x_hot = synth.noise_source(N, FS, 15.0, True, rng)
    cold, hot = (psd(RX.receive(x, FS, rng), FS, nperseg=1024) for x in (x_cold, x_hot))
    sb = sbm.sub_band_densities([cold, hot], n_sub_bands=1, enr_db=15.0)
    r = nfm.y_factor(sb.density[1][-1], sb.density[0][-1], sb.enr[-1], t_cold_k=370.0)
    assert r.nf_db == pytest.approx(RX.noise_figure_db, abs=0.15)
    wrong = nfm.y_factor(sb.density[1][-1], sb.density[0][-1], sb.enr[-1])  # assuming 290 K misleads
    assert abs(wrong.nf_db - RX.noise_figure_db) > 0.3


def test_passive_dut_loss_and_noise_figure():
    # What must be shown: a passive DUT's loss within 0.15 dB; at T0 its NF equals its loss
    # (Bedrosian 1960), recovered by the second-stage correction (Friis 1944).
    rng = np.random.default_rng(4)
    cold, hot = _spectra(rng)
    cold_d, hot_d = _spectra(rng, loss_db=3.5)
    sb = sbm.sub_band_densities([cold, hot, cold_d, hot_d], n_sub_bands=8, enr_db=15.0)
    d = nfm.dut_from_noise(sb.density[1], sb.density[0], sb.density[3], sb.density[2], sb.enr,
                           dof=(sb.dof[1], sb.dof[0], sb.dof[3], sb.dof[2]))
    assert d.insertion_loss_db[-1] == pytest.approx(3.5, abs=0.15)
    assert d.nf_db[-1] == pytest.approx(3.5, abs=0.3)
    assert np.all(np.abs(d.insertion_loss_db[:-1] - 3.5) < 0.15 + 3 * d.u_insertion_loss_db[:-1])


def test_sloped_dut_recovered_across_the_band():
    # What must be shown: a filter whose loss runs from 2 to 8 dB across the capture, recovered
    # within 0.25 dB in every sub-band of the usable band.
    def slope(f_hz):
        return 5.0 + 3.0 * np.asarray(f_hz) / (FS / 2)

    rng = np.random.default_rng(5)
    cold, hot = _spectra(rng, enr_db=20.0)
    cold_d, hot_d = _spectra(rng, enr_db=20.0, loss_db=slope)
    sb = sbm.sub_band_densities([cold, hot, cold_d, hot_d], n_sub_bands=12, enr_db=20.0)
    d = nfm.dut_from_noise(sb.density[1], sb.density[0], sb.density[3], sb.density[2], sb.enr,
                           dof=(sb.dof[1], sb.dof[0], sb.dof[3], sb.dof[2]))
    truth = slope(sb.center_hz[:-1])
    err = d.insertion_loss_db[:-1] - truth
    assert np.max(np.abs(err)) < 0.25, err
    assert truth.max() - truth.min() > 4.0  # the slope really is several dB


@pytest.mark.parametrize("enr_db", [15.0, 3.0])
def test_stated_uncertainty_matches_the_scatter(enr_db):
    # Monte Carlo check of the degrees-of-freedom uncertainty: the spread of NF over independent
    # runs agrees with the stated standard uncertainty (GUM, JCGM 100:2008, Type A vs propagated).
    rng = np.random.default_rng(6)
    dongle = synth.Dongle(gain_db=80.0, noise_figure_db=6.0, bits=None)
    nfs, us = [], []
    for _ in range(60):
        cold, hot = _spectra(rng, enr_db=enr_db, n=8192, dongle=dongle, nperseg=256)
        sb = sbm.sub_band_densities([cold, hot], n_sub_bands=1, enr_db=enr_db)
        r = nfm.y_factor(sb.density[1][-1], sb.density[0][-1], sb.enr[-1], dof_hot=sb.dof[1][-1],
                         dof_cold=sb.dof[0][-1])
        nfs.append(r.nf_db)
        us.append(r.u_nf_db)
    ratio = np.std(nfs, ddof=1) / np.mean(us)
    assert 0.75 < ratio < 1.3, ratio


# ------------------------------------------------------------- the whole noise-source analysis


def test_noise_source_analysis_pools_repeats_and_recovers_the_truth():
    # What must be shown: with two captures of each state pooled, the receiver's NF (6.0 dB) and a
    # passive DUT's loss (3.5 dB; at T0 its NF equals its loss, Bedrosian 1960) are recovered, and the
    # stated uncertainty of the pooled reading is smaller than one pair's (about 1/sqrt(2):
    # independent chi-squared estimates of one density, Welch 1967).
    rng = np.random.default_rng(7)
    c1, h1 = _spectra(rng)
    c2, h2 = _spectra(rng)
    cd1, hd1 = _spectra(rng, loss_db=3.5)
    cd2, hd2 = _spectra(rng, loss_db=3.5)
    ns = nsm.noise_source_analysis([c1, c2], [h1, h2], [cd1, cd2], [hd1, hd2], enr_db=15.0, n_sub_bands=8)
    one = nsm.noise_source_analysis([c1], [h1], enr_db=15.0, n_sub_bands=8)
    assert ns.valid.all() and ns.valid_dut.all()
    assert ns.receiver.nf_db[-1] == pytest.approx(RX.noise_figure_db, abs=0.15)
    assert ns.dut.insertion_loss_db[-1] == pytest.approx(3.5, abs=0.15)
    assert ns.dut.nf_db[-1] == pytest.approx(3.5, abs=0.3)
    assert np.all(np.abs(ns.receiver.nf_db[:-1] - RX.noise_figure_db) < 0.15 + 3 * ns.receiver.u_nf_db[:-1])
    ratio = ns.receiver.u_nf_db[-1] / one.receiver.u_nf_db[-1]
    assert 0.6 < ratio < 0.8, ratio
    assert ns.dof_hot[-1] == pytest.approx(2 * one.dof_hot[-1], rel=1e-12)


def test_noise_source_analysis_agrees_with_the_per_call_functions():
    # The one-call analysis is the per-call functions (sub_band_densities, y_factor, dut_from_noise)
    # on the mean densities of the repeats with their degrees of freedom summed: same numbers.
    rng = np.random.default_rng(8)
    c1, h1 = _spectra(rng, enr_db=12.0)
    c2, h2 = _spectra(rng, enr_db=12.0)
    cd, hd = _spectra(rng, enr_db=12.0, loss_db=2.0)
    ns = nsm.noise_source_analysis([c1, c2], [h1, h2], [cd], [hd], enr_db=12.0, n_sub_bands=6,
                                   t_cold_k=300.0, u_enr_db=0.1)
    sb = sbm.sub_band_densities([c1, c2, h1, h2, cd, hd], n_sub_bands=6, enr_db=12.0)
    n_c, n_h = (sb.density[0] + sb.density[1]) / 2, (sb.density[2] + sb.density[3]) / 2
    dof_c, dof_h = sb.dof[0] + sb.dof[1], sb.dof[2] + sb.dof[3]
    y = nfm.y_factor(n_h, n_c, sb.enr, t_cold_k=300.0, dof_hot=dof_h, dof_cold=dof_c, u_enr_db=0.1)
    d = nfm.dut_from_noise(n_h, n_c, sb.density[5], sb.density[4], sb.enr, t_cold_k=300.0,
                           dof=(dof_h, dof_c, sb.dof[5], sb.dof[4]), u_enr_db=0.1)
    for got, want in ((ns.receiver.y, y.y), (ns.receiver.noise_factor, y.noise_factor),
                      (ns.receiver.u_noise_factor, y.u_noise_factor), (ns.dut.gain, d.gain),
                      (ns.dut.u_gain, d.u_gain), (ns.dut.noise_factor, d.noise_factor),
                      (ns.dut.u_noise_factor, d.u_noise_factor), (ns.dut.system.y, d.system.y),
                      (ns.low_hz, sb.low_hz), (ns.high_hz, sb.high_hz), (ns.enr, sb.enr)):
        np.testing.assert_allclose(got, want, rtol=1e-12)
    assert ns.t_cold_k == 300.0 and ns.u_enr_db == 0.1


def test_noise_source_analysis_leaves_out_sub_bands_without_excess():
    # Where the hot reading is not above the cold one the Y-factor does not exist (Y <= 1): those
    # sub-bands are NaN and marked invalid; the others keep their values (common practice).
    rng = np.random.default_rng(9)
    cold, hot = _spectra(rng)
    cold_d, hot_d = _spectra(rng, loss_db=3.0)
    top = hot.frequency_hz > 0.5 * FS / 2 * 0.9  # the top quarter of the usable band
    hot_bad = replace(hot, density=np.where(top, 0.9 * cold.density, hot.density))
    top_d = hot_d.frequency_hz < -0.5 * FS / 2 * 0.9
    hot_d_bad = replace(hot_d, density=np.where(top_d, 0.9 * cold_d.density, hot_d.density))
    ns = nsm.noise_source_analysis([cold], [hot_bad], [cold_d], [hot_d_bad], enr_db=15.0, n_sub_bands=8)
    good = nsm.noise_source_analysis([cold], [hot], [cold_d], [hot_d], enr_db=15.0, n_sub_bands=8)
    assert ns.valid.tolist() == [True] * 6 + [False, False, True]
    assert ns.valid_dut.tolist() == [False, False] + [True] * 4 + [False, False, True]
    assert np.all(np.isnan(ns.receiver.nf_db[~ns.valid]))
    assert np.all(np.isnan(ns.dut.insertion_loss_db[~ns.valid_dut]))
    keep = ns.valid_dut[:-1]
    np.testing.assert_allclose(ns.receiver.noise_factor[:6], good.receiver.noise_factor[:6], rtol=1e-12)
    np.testing.assert_allclose(ns.dut.gain[:-1][keep], good.dut.gain[:-1][keep], rtol=1e-12)


def test_noise_source_analysis_refuses_half_a_dut_pair():
    rng = np.random.default_rng(10)
    cold, hot = _spectra(rng, n=20_000, nperseg=256)
    with pytest.raises(ValueError, match="both cold and hot"):
        nsm.noise_source_analysis([cold], [hot], [cold], enr_db=15.0)
    with pytest.raises(ValueError, match="one cold and one hot"):
        nsm.noise_source_analysis([], [hot], enr_db=15.0)
    with pytest.raises(ValueError, match="too many"):
        nsm.noise_source_analysis([cold], [hot], enr_db=15.0, n_sub_bands=10_000)


def test_stitch_offsets_is_stitch_masks_on_absolute_frequencies():
    centers = [100e6, 100.15e6]
    offsets = [np.linspace(-0.1e6, 0.1e6, 21)] * 2
    bands = [(-0.1e6, 0.1e6)] * 2
    freqs, keep = stm.stitch_offsets(centers, offsets, bands)
    want = stm.stitch_masks(centers, [c + o for c, o in zip(centers, offsets)],
                            [(c - 0.1e6, c + 0.1e6) for c in centers])
    for f, c, o, k, w in zip(freqs, centers, offsets, keep, want):
        np.testing.assert_array_equal(f, c + o)
        np.testing.assert_array_equal(k, w)


def test_stitch_midpoint_between_centres_that_are_not_whole_hertz_is_kept_once():
    # Sub-bands on one grid, 1/8 of the usable band apart; the second tuning's centre carries a
    # fraction of a hertz (a sweep planner's "a hair less" spacing). The point at the midpoint of
    # the two centres is the same frequency seen from both: rounding must not drop it from both.
    c1, c2 = 17_460_800.0, 18_267_199.9991936
    offs = np.arange(-403_200.0, 403_201.0, 115_200.0)  # 8 sub-band centres: +-403.2 kHz outermost
    band = (-460_800.0, 460_800.0)
    freqs, keep = stm.stitch_offsets([c1, c2], [offs, offs], [band, band])
    kept = np.sort(np.concatenate([f[k] for f, k in zip(freqs, keep)]))
    mid = (c1 + c2) / 2
    assert np.sum(np.abs(kept - mid) < 1.0) == 1  # once: from the earlier tuning (the tie rule)
    assert np.all(np.diff(kept) > 115_200.0 - 1.0) and np.all(np.diff(kept) < 115_200.0 + 1.0)  # no gap
