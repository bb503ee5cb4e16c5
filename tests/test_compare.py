"""dsp.paired, dsp.detection, dsp.compare and dsp.onair: paired statistics, detection, matching, and
the on-air comparison on the simulated band against the truth of the SNR-cost formula."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from rxbench.dsp import compare as cmp
from rxbench.dsp import detection, paired
from rxbench.dsp import onair, synth
from rxbench.dsp.environment import snr_degradation_db
from rxbench.dsp.onair import Carrier
from rxbench.dsp.spectrum import psd
from rxbench.dsp.units import K_B, T0_K, noise_temperature_from_nf_db

FS = 250e3
NPERSEG = 128
#: Short captures keep the repeated-seed runs fast: 2048 samples = 8.2 ms at 250 kHz, 31 segments.
CAPTURE_S = 2048 / FS
#: Three carriers: one Rician (K = 3 dB), two Rayleigh.
CARRIERS = (Carrier(-70e3, -104.0), Carrier(-20e3, -100.0, rician_k_db=3.0), Carrier(45e3, -106.0))


def _run(band, seed, *, n_pairs=8, interval_s=0.5, simultaneous=False, **kw):
    s = onair.simulate_session(band, np.random.default_rng(seed), n_pairs=n_pairs, capture_s=CAPTURE_S,
                               interval_s=interval_s, simultaneous=simultaneous)
    pa = [psd(x, FS, nperseg=NPERSEG) for x in s.a]
    pb = [psd(x, FS, nperseg=NPERSEG) for x in s.b]
    return cmp.compare_paths(pa, pb, times_a_s=s.times_a_s, times_b_s=s.times_b_s, **kw)


def _band(**changes):
    return onair.demo_band(**{"carriers": CARRIERS, "coherence_time_s": 60.0, **changes})


# --------------------------------------------------------------------------------------------
# Paired statistics against scipy


def test_paired_t_matches_scipy_ttest_rel():
    rng = np.random.default_rng(3)
    a = rng.normal(20.0, 3.0, 12)
    b = a - 2.0 + rng.normal(0, 0.7, 12)
    iv = paired.paired_t_interval(b - a, 0.95)
    ref = stats.ttest_rel(b, a)  # reference: scipy.stats.ttest_rel (paired t test)
    ci = ref.confidence_interval(confidence_level=0.95)
    assert iv.estimate == pytest.approx(np.mean(b - a), rel=1e-12)
    assert iv.p_value == pytest.approx(ref.pvalue, rel=1e-9)
    assert iv.estimate / iv.standard_error == pytest.approx(ref.statistic, rel=1e-9)
    assert (iv.low, iv.high) == pytest.approx((ci.low, ci.high), rel=1e-9)


@pytest.mark.parametrize("n, confidence, t_table", [(2, 0.95, 12.706), (11, 0.95, 2.228), (11, 0.99, 3.169),
                                                    (31, 0.95, 2.042)])
def test_paired_t_half_width_uses_the_t_table(n, confidence, t_table):
    # Two-sided critical values of Student's t for n - 1 dof, as printed in the usual t-tables
    # (from memory): 12.706 (1 dof, 95 %), 2.228 (10, 95 %), 3.169 (10, 99 %), 2.042 (30, 95 %).
    d = np.linspace(-1.0, 3.0, n)
    iv = paired.paired_t_interval(d, confidence)
    se = np.std(d, ddof=1) / np.sqrt(n)
    assert iv.half_width == pytest.approx(t_table * se, rel=2e-4)
    # Two-sided p-value at t = 2.228 with 10 dof is 0.05 (the same table read the other way).
    if n == 11 and confidence == 0.95:
        shifted = paired.paired_t_interval(d - d.mean() + 2.228 * se, confidence)
        assert shifted.p_value == pytest.approx(0.05, abs=2e-4)


def test_hodges_lehmann_normal_approximation_above_the_exact_range():
    # Above EXACT_SIGNED_RANK_MAX_N pairs the interval's rank is M/2 - z sqrt(n(n+1)(2n+1)/24) with
    # z = 1.960 for 95 % (normal table, from memory; Hollander, Wolfe & Chicken 3.3).
    n = paired.EXACT_SIGNED_RANK_MAX_N + 1
    d = np.linspace(-1.0, 1.0, n) ** 3
    iv = paired.hodges_lehmann_interval(d, 0.95)
    i, j = np.triu_indices(n)
    walsh = np.sort(0.5 * (d[i] + d[j]))
    m = walsh.size
    c = int(np.floor(m / 2 - 1.960 * np.sqrt(n * (n + 1) * (2 * n + 1) / 24)))
    assert (iv.low, iv.high) == (walsh[c - 1], walsh[m - c])


@pytest.mark.parametrize("n, critical", [(6, 0), (8, 3), (10, 8), (20, 52)])
def test_signed_rank_critical_values(n, critical):
    # Two-sided 5 % critical values of the Wilcoxon signed-rank statistic (the largest T with
    # P(T+ <= T) <= 0.025), as printed in the usual tables (from memory; Wilcoxon 1945).
    cdf = np.cumsum(paired.signed_rank_pmf(n))
    assert int(np.max(np.flatnonzero(cdf <= 0.025))) == critical
    assert cdf[-1] == pytest.approx(1.0, abs=1e-12)


def test_signed_rank_pmf_gives_scipy_exact_p_values():
    rng = np.random.default_rng(11)
    for n in (5, 9, 14):
        x = rng.normal(0.3, 1.0, n)
        ranks = stats.rankdata(np.abs(x))
        t_plus = int(round(ranks[x > 0].sum()))
        cdf = np.cumsum(paired.signed_rank_pmf(n))
        p_ours = min(1.0, 2 * min(cdf[t_plus], 1 - (cdf[t_plus - 1] if t_plus else 0.0)))
        # reference: scipy.stats.wilcoxon with the exact null distribution
        assert p_ours == pytest.approx(stats.wilcoxon(x, method="exact").pvalue, rel=1e-9)


def test_min_pairs_for_interval():
    # 2/2**n <= alpha: n = 6 at 5 %, n = 8 at 1 % (2/256 = 0.0078) [calc].
    assert paired.min_pairs_for_interval(0.95) == 6
    assert paired.min_pairs_for_interval(0.99) == 8
    with pytest.raises(ValueError, match="at least 6"):
        paired.hodges_lehmann_interval([1.0, 2.0, 3.0, 4.0, 5.0])


def test_hodges_lehmann_worked_example():
    # Walsh averages of (1, 2, 3, 10): 1, 1.5, 2, 2, 2.5, 3, 5.5, 6, 6.5, 10 -> median 2.75 [calc].
    # At 80 % (n = 4: t = 10, C = 1) the interval runs from the smallest to the largest Walsh average,
    # with exact coverage 1 - 2/16 = 0.875 [calc].
    iv = paired.hodges_lehmann_interval([10.0, 1.0, 3.0, 2.0], confidence=0.8)
    assert iv.estimate == pytest.approx(2.75)
    assert (iv.low, iv.high) == (1.0, 10.0)
    assert iv.achieved_confidence == pytest.approx(0.875)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_hodges_lehmann_interval_inverts_the_wilcoxon_test(seed):
    # The interval is the set of shifts the two-sided signed-rank test does not reject at the
    # achieved level. Reference: scipy.stats.wilcoxon (exact null distribution).
    x = np.random.default_rng(seed).standard_t(3, size=11)
    iv = paired.hodges_lehmann_interval(x, 0.95)
    level = 1 - iv.achieved_confidence
    assert level <= 0.05
    eps = 1e-9
    for theta in (iv.low - eps, iv.high + eps):
        assert stats.wilcoxon(x - theta, method="exact").pvalue <= level + 1e-12
    for theta in (iv.low + eps, iv.high - eps):
        assert stats.wilcoxon(x - theta, method="exact").pvalue > level
    assert iv.p_value == pytest.approx(stats.wilcoxon(x).pvalue)


def test_hodges_lehmann_coverage_under_heavy_tails():
    # Distribution-free: for Cauchy differences (no mean at all) the coverage equals the achieved
    # confidence (Hodges & Lehmann 1963). 2000 samples: binomial sd ~ 0.5 %.
    rng = np.random.default_rng(5)
    hits = []
    for _ in range(2000):
        iv = paired.hodges_lehmann_interval(1.5 + rng.standard_cauchy(10), 0.95)
        hits.append(iv.contains(1.5))
    assert np.mean(hits) == pytest.approx(iv.achieved_confidence, abs=0.015)


@settings(max_examples=25, deadline=None)
@given(st.lists(st.floats(-30, 30, allow_nan=False), min_size=6, max_size=25, unique=True),
       st.floats(-10, 10, allow_nan=False))
def test_hodges_lehmann_moves_with_a_shift(values, shift):
    x = np.array(values)
    a = paired.hodges_lehmann_interval(x)
    b = paired.hodges_lehmann_interval(x + shift)
    assert a.low <= a.estimate <= a.high
    assert (b.estimate, b.low, b.high) == pytest.approx((a.estimate + shift, a.low + shift, a.high + shift), abs=1e-9)


def test_estimates_fall_back_when_too_few():
    e = paired.estimate_both([1.0, 2.0, 1.5])
    assert e.hodges_lehmann is None and e.paired_t is not None
    assert e.get("hodges-lehmann") is e.paired_t
    assert paired.estimate_both([1.0]).get("paired-t") is None


# --------------------------------------------------------------------------------------------
# Spectra, detection, matching


def _noise_psds(rng, n_captures, n=4096):
    return [psd(synth.thermal_noise(n, FS, 1e22, rng), FS, nperseg=NPERSEG) for _ in range(n_captures)]


def test_mean_psd_adds_degrees_of_freedom():
    rng = np.random.default_rng(2)
    parts = _noise_psds(rng, 3)
    m = detection.mean_psd(parts)
    assert m.dof == pytest.approx(sum(p.dof for p in parts))
    assert m.n_segments == sum(p.n_segments for p in parts)
    np.testing.assert_allclose(m.density, np.mean([p.density for p in parts], axis=0))
    with pytest.raises(ValueError, match="differ"):
        detection.mean_psd([parts[0], psd(np.ones(4096, complex), FS, nperseg=256)])


def test_detection_false_alarm_rate_on_noise_alone():
    # Stated rate: P(any noise bin over the threshold in the searched band) <= false_alarm
    # (chi-squared bin statistics, Bonferroni over the bins). 300 noise-only spectra at 10 %.
    rng = np.random.default_rng(9)
    fired = [bool(detection.detect_peaks(detection.mean_psd(_noise_psds(rng, 2)), false_alarm=0.10)) for _ in range(300)]
    assert np.mean(fired) <= 0.13


def test_detection_finds_carriers_above_local_noise():
    rng = np.random.default_rng(4)
    n = 8192
    x = synth.thermal_noise(n, FS, 1e22, rng)
    noise_w_per_hz = K_B * 1e22
    for f, cn0_db in ((-60e3, 45.0), (10e3, 40.0), (80e3, 50.0)):
        x = x + synth.tone(n, FS, power_w=noise_w_per_hz * 10 ** (cn0_db / 10), offset_hz=f)
    found = [p.offset_hz for p in detection.detect_peaks(psd(x, FS, nperseg=NPERSEG))]
    assert len(found) == 3
    np.testing.assert_allclose(found, [-60e3, 10e3, 80e3], atol=FS / NPERSEG)


def test_match_frequencies_removes_a_common_offset():
    fa = np.array([-70e3, -20e3, 45e3, 90e3])
    offset = 1234.0
    fb = np.concatenate([fa[[0, 1, 2]] + offset + np.array([30.0, -40.0, 10.0]), [5e3]])  # one B-only signal
    got, matches = detection.match_frequencies(fa, fb, tolerance_hz=2000.0, max_offset_hz=5000.0)
    assert got == pytest.approx(offset + 10.0)  # median of the matched differences
    assert sorted(matches) == [(0, 0), (1, 1), (2, 2)]
    none, m = detection.match_frequencies(fa, np.array([]), tolerance_hz=100.0, max_offset_hz=100.0)
    assert none == 0.0 and m == []


def test_pair_captures():
    # Alternating A B A B: by rank. Simultaneous: equal times. Unequal counts: nearest in time.
    np.testing.assert_array_equal(cmp.pair_captures([0, 2, 4], [1, 3, 5]), [[0, 0], [1, 1], [2, 2]])
    np.testing.assert_array_equal(cmp.pair_captures([4, 0, 2], [5, 1, 3]), [[1, 1], [2, 2], [0, 0]])
    np.testing.assert_array_equal(cmp.pair_captures([0, 2, 4, 6], [2.1, 4.2]), [[1, 0], [2, 1]])
    np.testing.assert_array_equal(cmp.pair_captures(n_a=3, n_b=2), [[0, 0], [1, 1]])


# --------------------------------------------------------------------------------------------
# The simulated band


def test_fading_is_rayleigh_with_the_stated_coherence_time():
    # Clarke 1968: a Rayleigh-faded carrier's power is exponential (P(|g|^2 < x) = 1 - exp(-x));
    # our Gauss-Markov model has amplitude correlation exp(-tau/Tc) by construction.
    band = onair.OnAirBand(carriers=(Carrier(0.0, -100.0),), coherence_time_s=1.0)
    t = np.arange(0, 2000.0, 0.05)
    g = onair.fading_gains(t, band, np.random.default_rng(1), grid_step_s=0.05)[0]
    p = np.abs(g) ** 2
    assert p.mean() == pytest.approx(1.0, abs=0.06)
    assert np.mean(p < 0.1) == pytest.approx(1 - math.exp(-0.1), abs=0.012)
    lag = 20  # 1 s = Tc
    rho = np.vdot(g[:-lag], g[lag:]).real / np.vdot(g, g).real
    assert rho == pytest.approx(math.exp(-1.0), abs=0.06)


def test_expected_difference_is_the_snr_cost_formula():
    # Quiet rural 28 MHz (Fa 12.21 dB), 3 dB loss, NF 8 dB -> 1.09 dB (REFERENCES.md, ITU-R P.372 [calc]).
    rx = synth.Dongle(gain_db=70.0, noise_figure_db=8.0, bits=None)
    band = onair.OnAirBand(carriers=CARRIERS, external_fa_db=12.21, loss_b_db=3.0, dongle_a=rx, dongle_b=rx)
    assert onair.expected_snr_difference_db(band) == pytest.approx(-1.09, abs=0.006)
    # Ta = T0: the SNR cost equals the loss for any receiver (REFERENCES.md [calc]); noise unchanged.
    band0 = onair.OnAirBand(carriers=CARRIERS, external_fa_db=0.0, loss_b_db=6.0, dongle_a=rx, dongle_b=rx)
    assert onair.expected_snr_difference_db(band0) == pytest.approx(-6.0, abs=1e-9)
    assert onair.expected_noise_difference_db(band0) == pytest.approx(0.0, abs=1e-9)
    # Two different receivers: the formula plus the receivers' own difference.
    rx_b = synth.Dongle(gain_db=73.0, noise_figure_db=5.0, bits=None)
    band2 = onair.OnAirBand(carriers=CARRIERS, external_fa_db=10.0, loss_b_db=2.0, dongle_a=rx, dongle_b=rx_b)
    ta, tra, trb = 2900.0, noise_temperature_from_nf_db(8.0), noise_temperature_from_nf_db(5.0)
    big_l = 10 ** 0.2
    direct = -10 * math.log10((ta + (big_l - 1) * T0_K + big_l * trb) / (ta + tra))
    assert onair.expected_snr_difference_db(band2) == pytest.approx(direct, abs=1e-9)
    assert direct == pytest.approx(-(snr_degradation_db(2.0, ta, trb) + 10 * math.log10((ta + trb) / (ta + tra))))
    assert onair.expected_signal_difference_db(band2) == pytest.approx(-2.0 + 3.0)


def test_pooled_difference_contains_the_truth():
    band = _band()
    truth = onair.expected_snr_difference_db(band)  # -3.55 dB
    c = _run(band, 2024, n_pairs=10)
    assert len(c.signals) == 3
    assert c.headline.method == "hodges-lehmann"
    assert c.headline.contains(truth)
    assert c.snr.paired_t.contains(truth)
    assert c.classification == "snr-cost"
    assert c.noise.get("paired-t").estimate == pytest.approx(onair.expected_noise_difference_db(band), abs=0.15)
    assert c.signal.get("paired-t").estimate == pytest.approx(onair.expected_signal_difference_db(band), abs=0.5)
    assert c.frequency_offset_hz == 0.0


def test_two_dongles_with_a_tuning_error_and_different_noise_figures():
    a = synth.Dongle(gain_db=75.0, noise_figure_db=8.0, center_hz=14.1e6)
    b = synth.Dongle(gain_db=75.0, noise_figure_db=5.0, center_hz=14.1e6, freq_offset_ppm=45.0)
    band = _band(dongle_a=a, dongle_b=b, loss_b_db=3.0)
    c = _run(band, 7, n_pairs=10, simultaneous=True, max_offset_hz=100e-6 * 14.1e6)
    assert c.frequency_offset_hz == pytest.approx(onair.expected_frequency_offset_hz(band), abs=FS / NPERSEG / 2)
    assert len(c.signals) == 3
    assert c.headline.contains(onair.expected_snr_difference_db(band))


def test_external_noise_limited_versus_receiver_noise_limited():
    # Loud band (Fa 40 dB): a 6 dB loss lowers signal and noise alike, costing < 0.1 dB of SNR.
    # Band noise 30 dB louder than the demo band: carriers 30 dB stronger, dongle gain 22 dB lower.
    rx = synth.Dongle(gain_db=53.0, noise_figure_db=8.0, center_hz=14.1e6)
    loud = _band(external_fa_db=40.0, dongle_a=rx, dongle_b=rx,
                 carriers=tuple(Carrier(k.offset_hz, k.power_dbm + 30, k.rician_k_db) for k in CARRIERS))
    c = _run(loud, 3, n_pairs=10)
    assert abs(onair.expected_snr_difference_db(loud)) < 0.1
    assert c.classification == "external-noise-limited"
    assert c.noise.get("paired-t").estimate == pytest.approx(-6.0, abs=0.2)
    # Ta = T0: the loss costs its full 6 dB and the noise floor does not move (REFERENCES.md [calc]).
    quiet = _band(external_fa_db=0.0,
                  carriers=tuple(Carrier(k.offset_hz, k.power_dbm - 6, k.rician_k_db) for k in CARRIERS))
    c = _run(quiet, 3, n_pairs=10)
    assert c.classification == "snr-cost"
    assert c.headline.contains(onair.expected_snr_difference_db(quiet))
    assert c.noise.get("hodges-lehmann").contains(onair.expected_noise_difference_db(quiet))
    assert abs(c.noise.get("paired-t").estimate) < 0.1


def _coverage(band, seeds, truth):
    rows = []
    for seed in seeds:
        c = _run(band, seed)
        t, h = c.snr.paired_t, c.snr.hodges_lehmann
        rows.append((t.contains(truth), h.contains(truth), t.estimate, h.estimate, t.significant, h.significant))
    return np.array(rows, dtype=float)


def test_interval_coverage_over_seeds():
    # 100 seeds of 8 pairs: a 95 % interval should contain the truth in about 95 of them
    # (binomial: P(<= 88 | p = 0.95) ~ 0.4 %). The intervals must also be informative: a 3.5 dB cost is
    # declared significant in nearly every seed, and the estimates centre on the truth.
    band = _band()
    truth = onair.expected_snr_difference_db(band)
    r = _coverage(band, range(100), truth)
    assert 0.88 <= r[:, 0].mean() <= 1.0  # paired t
    assert 0.88 <= r[:, 1].mean() <= 1.0  # Hodges-Lehmann
    assert r[:, 4].mean() >= 0.95 and r[:, 5].mean() >= 0.95
    for col in (2, 3):
        assert abs(r[:, col].mean() - truth) < 3 * r[:, col].std() / 10


@pytest.mark.slow  # 100 seeds; the default run keeps the 3.5 dB case, and the long run covers no loss with 500
def test_no_loss_interval_contains_zero_in_about_95_percent():
    band = _band(loss_b_db=0.0)
    assert onair.expected_snr_difference_db(band) == 0.0
    r = _coverage(band, range(100, 200), 0.0)
    assert 0.88 <= r[:, 0].mean() <= 1.0
    assert 0.88 <= r[:, 1].mean() <= 1.0


@pytest.mark.slow
@pytest.mark.parametrize("loss_db, coherence_s", [(6.0, 60.0), (0.0, 60.0), (6.0, 2.0)])
def test_interval_coverage_long_run(loss_db, coherence_s):
    # 500 seeds: binomial sd ~1 %; the interval should cover 95 % +/- 3 %.
    band = _band(loss_b_db=loss_db, coherence_time_s=coherence_s)
    truth = onair.expected_snr_difference_db(band)
    r = _coverage(band, range(1000, 1500), truth)
    assert 0.92 <= r[:, 0].mean() <= 0.985
    assert 0.92 <= r[:, 1].mean() <= 0.985


def test_bad_inputs():
    rng = np.random.default_rng(0)
    p = _noise_psds(rng, 2)
    with pytest.raises(ValueError, match="method"):
        cmp.compare_paths(p, p, method="median")
    with pytest.raises(ValueError, match="both paths"):
        cmp.compare_paths(p, [])
    with pytest.raises(ValueError, match="confidence"):
        paired.paired_t_interval([1.0, 2.0], confidence=1.5)
    with pytest.raises(ValueError, match="false_alarm"):
        detection.detect_peaks(p[0], false_alarm=0.0)
    with pytest.raises(ValueError, match="carrier"):
        onair.OnAirBand(carriers=())
