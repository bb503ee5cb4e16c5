"""The streaming Welch accumulator against Harris 1978, Welch 1967, Parseval and scipy.signal.welch."""

import numpy as np
import pytest
import scipy.signal
from hypothesis import given, settings, strategies as st

from rxbench.dsp.spectrum import PsdAccumulator, band_power, kernel, psd, welch_dof, window_properties


@pytest.mark.parametrize(
    "window, cg, enbw, scallop",
    [
        # Harris, Proc. IEEE 66(1), 1978, table I; values for periodic 4096-point windows from
        # REFERENCES.md [calc], matching Harris's table [mem].
        ("boxcar", 1.000, 1.000, 3.92),
        ("hann", 0.500, 1.500, 1.42),
        ("hamming", 0.540, 1.363, 1.75),
        ("blackmanharris", 0.359, 2.004, 0.83),
    ],
)
def test_window_figures_match_harris_1978(window, cg, enbw, scallop):
    p = window_properties(window, 4096)
    assert p.coherent_gain == pytest.approx(cg, abs=5e-4)
    assert p.enbw_bins == pytest.approx(enbw, abs=5e-4)
    assert p.scalloping_loss_db == pytest.approx(scallop, abs=5e-3)


@pytest.mark.parametrize("k, nu", [(10, 19.05), (20, 37.99)])
def test_equivalent_dof_hann_half_overlap(k, nu):
    # Welch 1967; Hann at 50 % overlap: nu = 36K^2/(19K - 1) (Percival & Walden 1993 [mem]);
    # K = 10 -> 19.05, K = 20 -> 37.99 (REFERENCES.md [calc]).
    w = scipy.signal.get_window("hann", 1024)
    assert welch_dof(k, w, 512) == pytest.approx(nu, abs=0.01)
    assert welch_dof(k, w, 512) == pytest.approx(36 * k**2 / (19 * k - 1), rel=2e-3)
    # No overlap: independent periodograms, 2K degrees of freedom.
    assert welch_dof(k, w, 1024) == 2 * k


def test_agrees_with_scipy_welch_two_sided(rng):
    # scipy.signal.welch (reference library), same window, overlap and density scaling.
    x = (rng.standard_normal(50_000) + 1j * rng.standard_normal(50_000)).astype(np.complex128)
    ours = psd(x, 1e5, nperseg=512)
    f, ref = scipy.signal.welch(x, fs=1e5, nperseg=512, noverlap=256, window="hann", detrend=False,
                                return_onesided=False, scaling="density")
    assert np.allclose(ours.frequency_hz, np.fft.fftshift(f))
    assert np.allclose(ours.density, np.fft.fftshift(ref), rtol=1e-10)


def test_agrees_with_scipy_welch_one_sided(rng):
    x = rng.standard_normal(40_000)
    ours = psd(x, 48e3, nperseg=1024)
    f, ref = scipy.signal.welch(x, fs=48e3, nperseg=1024, noverlap=512, detrend=False, scaling="density")
    assert np.allclose(ours.frequency_hz, f)
    assert np.allclose(ours.density, ref, rtol=1e-10)


def test_integrated_density_is_the_variance(rng):
    # Parseval: the integrated PSD of white noise equals its variance (physical invariant).
    sigma2 = 0.37
    n = 1 << 18
    x = np.sqrt(sigma2 / 2) * (rng.standard_normal(n) + 1j * rng.standard_normal(n))
    s = psd(x.astype(np.complex64), 1e6, nperseg=1024)
    total = band_power(s, -np.inf, np.inf)
    assert total == pytest.approx(np.mean(np.abs(x) ** 2), rel=2e-3)
    assert 10 * np.log10(total / sigma2) == pytest.approx(0.0, abs=0.03)  # 4.343/sqrt(N) = 0.008 dB


def test_tone_peak_integrates_to_its_power():
    # A complex tone of amplitude A has power A^2 wherever it falls between bins (Parseval).
    fs, n, a = 1e5, 1 << 15, 0.3
    for frac in (0.0, 0.25, 0.5):
        f0 = (100 + frac) * fs / 1024
        x = a * np.exp(2j * np.pi * f0 * np.arange(n) / fs)
        s = psd(x, fs, nperseg=1024)
        assert band_power(s, f0 - 20 * s.bin_width_hz, f0 + 20 * s.bin_width_hz) == pytest.approx(a**2, rel=1e-6)


def test_kernel_sums_to_one_over_all_bins():
    w = scipy.signal.get_window("hann", 256)
    for delta in (0.0, 0.3, 0.5):
        assert kernel(w, np.arange(256) - delta).sum() == pytest.approx(1.0, rel=1e-12)


def _fed_in_pieces(x, cuts, **kwargs):
    """The PSD of ``x`` fed in blocks of the lengths ``cuts`` (and the rest)."""
    acc = PsdAccumulator(1e4, **kwargs)
    i = 0
    for c in cuts:
        acc.update(x[i : i + c])
        i += c
    acc.update(x[i:])
    return acc.result()


@settings(max_examples=25, deadline=None)
@given(st.lists(st.integers(min_value=1, max_value=3000), min_size=1, max_size=12),
       st.sampled_from([0.0, 0.3, 0.5, 0.75]))
def test_result_does_not_depend_on_block_boundaries(cuts, overlap):
    x = np.random.default_rng(7).standard_normal(12_000).astype(np.float32).view(np.complex64)
    whole = psd(x, 1e4, nperseg=256, overlap=overlap)
    part = _fed_in_pieces(x, cuts, nperseg=256, overlap=overlap)
    assert part.n_segments == whole.n_segments
    assert np.allclose(part.density, whole.density, rtol=1e-5)
    assert np.array_equal(part.batch_counts, whole.batch_counts)
    assert np.allclose(part.batch_density, whole.batch_density, rtol=1e-5)


@settings(max_examples=25, deadline=None)
@given(st.lists(st.integers(min_value=1, max_value=9000), min_size=1, max_size=12), st.booleans())
def test_track_does_not_depend_on_block_boundaries(cuts, known_length):
    # Slots of several segments (a short MAX_SLOTS): a block's last unfinished slot waits for the
    # next block, and a stream of unknown length merges its slots as it grows; cut anyhow, the
    # capture gives the same PSD and the same track (to the bfloat16 track's rounding, 2**-8).
    from rxbench.dsp import track

    x = np.random.default_rng(8).standard_normal(2 * 40_000).astype(np.float32).view(np.complex64)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(track, "MAX_SLOTS", 16)
        expected = x.size if known_length else None
        whole = psd(x, 1e4, nperseg=256, expected_samples=expected)
        part = _fed_in_pieces(x, cuts, nperseg=256, expected_samples=expected)
    assert part.n_segments == whole.n_segments and part.slot_s == whole.slot_s > 256 / 1e4
    assert np.allclose(part.density, whole.density, rtol=1e-5)
    assert np.array_equal(part.track_counts, whole.track_counts)
    assert np.allclose(part.track, whole.track, rtol=2.0**-7, atol=0)


@pytest.mark.parametrize("n", [4096, 9000, 40_000, 300_000])
def test_known_length_gives_the_same_sub_averages(rng, n):
    x = (rng.standard_normal(n) + 1j * rng.standard_normal(n)).astype(np.complex64)
    grown = psd(x, 1e6, nperseg=256)
    sized = psd(x, 1e6, nperseg=256, expected_samples=n)
    assert np.array_equal(sized.batch_counts, grown.batch_counts)
    assert np.allclose(sized.batch_density, grown.batch_density, rtol=1e-6)
    assert np.allclose(sized.density, grown.density, rtol=1e-6)


def test_sub_averages_partition_the_segments(rng):
    x = (rng.standard_normal(300_000) + 1j * rng.standard_normal(300_000)).astype(np.complex64)
    s = psd(x, 1e6, nperseg=256)
    assert s.batch_counts.sum() == s.n_segments
    assert 16 <= s.batch_density.shape[0] <= 32
    weighted = (s.batch_density * s.batch_counts[:, None]).sum(0) / s.n_segments
    assert np.allclose(weighted, s.density, rtol=1e-9)


def test_too_short_and_bad_parameters():
    acc = PsdAccumulator(1e3, nperseg=256)
    acc.update(np.zeros(100, np.complex64))
    with pytest.raises(ValueError, match="shorter|too short"):
        acc.result()
    with pytest.raises(ValueError, match="overlap"):
        PsdAccumulator(1e3, overlap=1.0)
    with pytest.raises(ValueError, match="sample_rate_hz"):
        PsdAccumulator(0.0)


@pytest.mark.parametrize("window", ["boxcar", "hann", "hamming", "blackmanharris", "flattop"])
def test_windows_match_scipy_get_window(window):
    # scipy.signal.get_window (reference library), periodic form.
    from rxbench.dsp.spectrum import get_window

    assert np.allclose(get_window(window, 1000), scipy.signal.get_window(window, 1000, fftbins=True), atol=1e-12)


@pytest.mark.parametrize("window", ["hann", "blackmanharris", ("kaiser", 8.0)])
def test_kernel_equals_the_direct_dtft(window):
    # Definition: |sum_n w[n] exp(-2j pi d n / N)|^2 / (N sum w^2), evaluated directly.
    w = scipy.signal.get_window(window, 128)
    d = np.concatenate([np.linspace(-200, 200, 801), [0.0, 128.0, -256.0, 3.0]])
    n = np.arange(128)
    direct = np.abs(np.exp(-2j * np.pi * np.outer(d, n) / 128) @ w) ** 2 / (128 * np.sum(w**2))
    assert np.allclose(kernel(w, d), direct, atol=1e-13)


@pytest.mark.parametrize("max_slots", [64, 16])
@pytest.mark.parametrize("expected", [True, False])
def test_bfloat16_time_track_matches_a_float64_reference(rng, monkeypatch, expected, max_slots):
    """The track's slots (kept as bfloat16 during the pass, float32 in the result) against the same
    sub-band sums made in float64 with numpy's FFT (the reference library). bfloat16 keeps 8
    significant bits, so one rounding to nearest is within 2**-8 relative: each slot is rounded
    once when its length is known; a stream of unknown length merges its slots pairwise as it
    grows (here 1 -> 64 segments per slot, six merges), each merge a rounding more. Unbiased (the
    mean error within 2e-4), and its rms (0.1-0.2 %) an order below the scatter of a slot of 37 or
    64 periodograms of 32 bins (2-3 %). With 16 slots, a slot (147 or 256 segments) is longer than
    an FFT call and a job: its sums are joined across calls and across jobs."""
    from rxbench.dsp import track

    monkeypatch.setattr(track, "MAX_SLOTS", max_slots)
    n, nperseg, step = 300_000, 256, 128
    x = (rng.standard_normal(n) + 1j * rng.standard_normal(n)).astype(np.complex64) * np.float32(0.1)
    acc = PsdAccumulator(1e6, nperseg=nperseg, expected_samples=n if expected else None)
    for part in np.array_split(x, 7):
        acc.update(part)
    s = acc.result()
    w = scipy.signal.get_window("hann", nperseg)
    k = 1 + (n - nperseg) // step
    seg = np.lib.stride_tricks.sliding_window_view(x.astype(np.complex128), nperseg)[::step][:k]
    power = np.abs(np.fft.fftshift(np.fft.fft(seg * w, axis=-1), axes=-1)) ** 2  # float64
    slot_len = int(round(s.slot_s * 1e6 / step))
    assert len(s.track) <= max_slots and slot_len > 1
    sub = np.add.reduceat(power, s.track_bins[:, 0], axis=1) / np.diff(s.track_bins, axis=1)[:, 0]
    per_slot = np.add.reduceat(sub, np.arange(0, k, slot_len), axis=0) / s.track_counts[:, None]
    reference = per_slot / (1e6 * np.sum(w**2))
    assert s.track.dtype == np.float32
    error = s.track / reference - 1
    merges = 0 if expected else int(np.log2(slot_len))
    assert np.max(np.abs(error)) <= (1 + merges) * 2.0**-8
    assert abs(np.mean(error)) < 2e-4 and np.std(error) < 2.0**-7 / np.sqrt(12) * 1.5
    with pytest.raises(ValueError, match="no more blocks"):
        acc.update(x[:1000])
