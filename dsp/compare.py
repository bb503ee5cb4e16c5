"""On-air comparison of two receive paths: paired SNR and noise differences on the signals heard.

Captures of the same band are taken through path A and path B in quick alternation (or at the same
time from two dongles). Narrowband signals that stand above the local noise in both paths are found
with a stated false-alarm rate, matched by frequency after a common frequency offset between the two
dongles is removed, and read capture by capture with the core's tone reading. Each signal's SNR in
path B is compared with its SNR in the path A capture taken next to it, so that fading and propagation
changes common to both captures cancel; the pairs give the SNR difference B - A with a confidence
interval, per signal and pooled, by the paired t method and by the Hodges-Lehmann estimator with its
distribution-free (Wilcoxon signed-rank) interval.

The statistics are in :mod:`rxbench.dsp.paired`, detection, matching and the readings of each signal
in :mod:`rxbench.dsp.detection`; this module pairs the captures and puts them together.

Notes
-----
Signs: every difference is B - A in dB. A negative SNR difference means path B hears worse.
The signal-power difference is dS = dSNR + dN (dN the noise-density difference), so the three
answer different questions: dSNR is what the operator hears; dS and dN tell *why*. A loss in front
of a receiver whose noise is dominated by the band's external noise lowers signal and noise alike
(dS = dN < 0, dSNR = 0); a loss in front of a receiver that is limited by its own noise lowers the
signal and not the noise (dSNR = dS < 0).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rxbench.dsp.detection import (DEFAULT_FALSE_ALARM, LOCAL_HALFWIDTH_BINS, check_compatible, detect_peaks,
                                   match_frequencies, mean_psd, read_signals)
from rxbench.dsp.paired import METHODS, Estimates, Interval, check_confidence, estimate_both
from rxbench.dsp.tone import DEFAULT_SNR_BANDWIDTH_HZ

#: Default matching tolerance after the common offset is removed, bins.
MATCH_TOLERANCE_BINS = 2.0
#: Fewer signals than this and the pooled figure rests on too few stations to speak for the band.
MIN_SIGNALS = 3


def pair_captures(times_a_s=None, times_b_s=None, *, n_a: int | None = None, n_b: int | None = None):
    """Pair each B capture with the A capture taken next to it.

    Parameters
    ----------
    times_a_s, times_b_s : array_like or None
        Start times of the captures, s (any common origin). Without times, captures are taken to
        alternate A, B, A, B, ... in the order given and are paired by position.
    n_a, n_b : int
        Numbers of captures, needed when no times are given.

    Returns
    -------
    ndarray of int, shape (n_pairs, 2)
        (index into A, index into B) per pair, in time order.

    Notes
    -----
    With equal numbers the k-th A in time is paired with the k-th B in time (alternation, or
    simultaneous captures from two dongles). With unequal numbers pairs are formed greedily by the
    smallest time gap, each capture used once; the captures left over are not used.
    """
    if times_a_s is None or times_b_s is None:
        if n_a is None or n_b is None:
            raise ValueError("without times, give n_a and n_b")
        n = min(n_a, n_b)
        return np.column_stack([np.arange(n), np.arange(n)]).astype(int)
    ta = np.asarray(times_a_s, dtype=float)
    tb = np.asarray(times_b_s, dtype=float)
    order_a, order_b = np.argsort(ta, kind="stable"), np.argsort(tb, kind="stable")
    if ta.size == tb.size:
        return np.column_stack([order_a, order_b]).astype(int)
    gaps = np.abs(ta[:, None] - tb[None, :])
    used_a, used_b, pairs = set(), set(), []
    for flat in np.argsort(gaps, axis=None, kind="stable"):
        i, k = divmod(int(flat), tb.size)
        if i not in used_a and k not in used_b:
            used_a.add(i)
            used_b.add(k)
            pairs.append((i, k))
    pairs.sort(key=lambda p: ta[p[0]])
    return np.array(pairs, dtype=int).reshape(-1, 2)


@dataclass(frozen=True)
class SignalComparison:
    """One signal heard in both paths.

    Attributes
    ----------
    offset_hz, offset_b_hz : float
        Frequency in path A's and in path B's spectrum, Hz (median of the capture readings).
    n_pairs : int
        Pairs in which the signal was read in both captures.
    snr_a_db, snr_b_db : float
        Median SNR in each path over those pairs, dB (in the SNR bandwidth).
    snr : Estimates
        SNR difference B - A, dB.
    noise : Estimates
        Local noise-density difference B - A, dB.
    """

    offset_hz: float
    offset_b_hz: float
    n_pairs: int
    snr_a_db: float
    snr_b_db: float
    snr: Estimates
    noise: Estimates


@dataclass(frozen=True)
class Comparison:
    """The result of :func:`compare_paths`.

    Attributes
    ----------
    signals : tuple of SignalComparison
        The signals heard in both paths, ascending in frequency.
    pairs : ndarray of int, shape (n_pairs, 2)
        Capture indices (A, B) of every pair.
    snr_difference_db, noise_difference_db : ndarray, shape (n_pairs, n_signals)
        Per pair and signal, B - A; NaN where a reading is missing.
    pair_snr_db, pair_noise_db, pair_signal_db : ndarray, shape (n_pairs,)
        Per pair: the mean over signals of the SNR, noise and signal-power differences (NaN when no
        signal was read in both captures of the pair).
    snr, noise, signal : Estimates
        Pooled estimates over the pairs.
    frequency_offset_hz : float
        Common offset of path B's spectrum relative to path A's, Hz.
    n_found_a, n_found_b : int
        Signals detected in each path's mean spectrum.
    missing_fraction : float
        Share of (pair, signal) readings lost because the signal had faded into the noise in one
        of the two captures.
    trend_db_per_time, trend_bias_db, trend_bias_se_db : float
        Common drift of the signal levels (dB per time unit of the times given) and the bias it puts
        on each pair's difference through the time between its A and B captures, with its standard
        error (NaN with fewer than 3 pairs).
    """

    signals: tuple
    pairs: np.ndarray
    snr_difference_db: np.ndarray
    noise_difference_db: np.ndarray
    pair_snr_db: np.ndarray
    pair_noise_db: np.ndarray
    pair_signal_db: np.ndarray
    pair_times_a: np.ndarray
    pair_times_b: np.ndarray
    snr: Estimates
    noise: Estimates
    signal: Estimates
    frequency_offset_hz: float
    n_found_a: int
    n_found_b: int
    missing_fraction: float
    trend_db_per_time: float
    trend_bias_db: float
    trend_bias_se_db: float
    confidence: float
    false_alarm: float
    method: str

    @property
    def n_pairs(self) -> int:
        """Pairs with at least one signal read in both captures."""
        return int(np.isfinite(self.pair_snr_db).sum())

    @property
    def headline(self) -> Interval | None:
        return self.snr.get(self.method)

    @property
    def classification(self) -> str:
        return classify(self.snr.get(self.method), self.noise.get(self.method))


def classify(snr: Interval | None, noise: Interval | None) -> str:
    """Which way the comparison points.

    Returns
    -------
    str
        ``"snr-cost"`` (the SNR interval lies below zero), ``"snr-gain"`` (above zero),
        ``"external-noise-limited"`` (SNR interval contains zero while the noise interval lies below
        zero: path B lowers signal and noise alike), ``"no-significant-difference"``, or
        ``"undetermined"`` (no interval).
    """
    if snr is None:
        return "undetermined"
    if snr.high < 0:
        return "snr-cost"
    if snr.low > 0:
        return "snr-gain"
    if noise is not None and noise.high < 0:
        return "external-noise-limited"
    return "no-significant-difference"


def _trend(levels_a, levels_b, ta, tb):
    """Common slope of the (per-signal centred) levels against time, and its standard error."""
    from scipy import stats  # here, not at the top: a slow import

    slopes, ses = [], []
    for y, t in ((levels_a, ta), (levels_b, tb)):
        ok = np.isfinite(y)
        if ok.sum() < 3 or np.ptp(t[ok]) == 0:
            return math.nan, math.nan
        r = stats.linregress(t[ok], y[ok])
        slopes.append(r.slope)
        ses.append(r.stderr)
    return float(np.mean(slopes)), float(0.5 * math.hypot(*ses))


def _row_mean(a: np.ndarray) -> np.ndarray:
    """Mean of the finite entries of each row; NaN for a row with none."""
    ok = np.isfinite(a)
    count = ok.sum(axis=1)
    total = np.where(ok, a, 0.0).sum(axis=1)
    return np.where(count > 0, total / np.maximum(count, 1), np.nan)


def _centred_levels(power: np.ndarray) -> np.ndarray:
    """Per pair: the mean over signals of each signal's level (dB) about its own mean level."""
    with np.errstate(divide="ignore", invalid="ignore"):
        level = 10.0 * np.log10(np.where(power > 0, power, np.nan))
    column_mean = _row_mean(level.T)
    return _row_mean(level - column_mean[None, :])


def compare_paths(
    psds_a,
    psds_b,
    *,
    times_a_s=None,
    times_b_s=None,
    confidence: float = 0.95,
    false_alarm: float = DEFAULT_FALSE_ALARM,
    max_offset_hz: float | None = None,
    tolerance_hz: float | None = None,
    snr_bandwidth_hz: float = DEFAULT_SNR_BANDWIDTH_HZ,
    method: str = "hodges-lehmann",
    halfwidth_bins: int = LOCAL_HALFWIDTH_BINS,
    dc_halfwidth_hz: float | None = None,
) -> Comparison:
    """Paired comparison of the signals two receive paths hear.

    Parameters
    ----------
    psds_a, psds_b : sequence of Psd
        One PSD per capture of path A and of path B (same sample rate and FFT length).
    times_a_s, times_b_s : array_like, optional
        Capture start times, s; without them the captures are taken to alternate A, B, A, B, ...
        in the order given.
    confidence : float
        Two-sided coverage of the intervals (0.95 for alpha = 0.05).
    false_alarm : float
        Detection false-alarm probability per path's mean spectrum (see :func:`detect_peaks`).
    max_offset_hz : float, optional
        Largest common frequency offset between the paths searched, Hz; default fs/20.
    tolerance_hz : float, optional
        Matching tolerance after the offset is removed, Hz; default 2 bins.
    snr_bandwidth_hz : float
        Noise bandwidth of the SNRs reported, Hz (differences do not depend on it).
    method : {"hodges-lehmann", "paired-t"}
        Which estimate is the headline; both are always computed.
    halfwidth_bins : int
        Half-width of the local-noise window around each signal, bins.
    dc_halfwidth_hz : float, optional
        DC region left out (default four bins; 0 for real captures).

    Returns
    -------
    Comparison

    Notes
    -----
    For pair i and signal j, d_ij = SNR_B,ij - SNR_A,ij (dB; the tone power with the noise under it
    subtracted over the local noise density, :func:`dsp.tone.measure_tone`). The pooled estimate
    works on the per-pair means x_i = mean_j d_ij: the noise-floor errors, the propagation trend and
    any gain wander are common to all signals of a pair, so the pairs, not the (pair, signal)
    readings, are the independent units. The paired t interval assumes the x_i are roughly normal;
    the Hodges-Lehmann interval only that they are symmetric about the true difference.
    Readings lost to deep fades leave the pair out for that signal; since the path with the lower SNR
    loses more, a large missing fraction biases the difference toward zero.
    """
    if method not in METHODS:
        raise ValueError(f"{method=} must be one of {METHODS}")
    check_confidence(confidence)
    psds_a, psds_b = list(psds_a), list(psds_b)
    if not psds_a or not psds_b:
        raise ValueError(f"need captures of both paths, got {len(psds_a)} of A and {len(psds_b)} of B")
    check_compatible(psds_a + psds_b, "compare_paths")
    pairs = pair_captures(times_a_s, times_b_s, n_a=len(psds_a), n_b=len(psds_b))
    if pairs.shape[0] == 0:
        raise ValueError("no A/B pairs could be formed")
    if times_a_s is None or times_b_s is None:
        ta_all = 2.0 * np.arange(len(psds_a))
        tb_all = 2.0 * np.arange(len(psds_b)) + 1.0
    else:
        ta_all = np.asarray(times_a_s, dtype=float)
        tb_all = np.asarray(times_b_s, dtype=float)

    first = psds_a[0]
    bin_hz = first.bin_width_hz
    if tolerance_hz is None:
        tolerance_hz = MATCH_TOLERANCE_BINS * bin_hz
    if max_offset_hz is None:
        max_offset_hz = first.sample_rate_hz / 20.0
    mean_a, mean_b = mean_psd(psds_a), mean_psd(psds_b)
    kw = dict(false_alarm=false_alarm, halfwidth_bins=halfwidth_bins, dc_halfwidth_hz=dc_halfwidth_hz)
    peaks_a, peaks_b = detect_peaks(mean_a, **kw), detect_peaks(mean_b, **kw)
    fa = np.array([p.offset_hz for p in peaks_a])
    fb = np.array([p.offset_hz for p in peaks_b])
    offset_hz, matches = match_frequencies(fa, fb, tolerance_hz=tolerance_hz, max_offset_hz=max_offset_hz)
    freqs_a = np.array([fa[i] for i, _ in matches])
    freqs_b = freqs_a + offset_hz
    n_pairs, n_sig = pairs.shape[0], freqs_a.size

    read = dict(search_hz=tolerance_hz, halfwidth_bins=halfwidth_bins, snr_bandwidth_hz=snr_bandwidth_hz,
                dc_halfwidth_hz=dc_halfwidth_hz)
    shape = (n_pairs, n_sig)
    snr_a, snr_b, p_a, p_b = (np.full(shape, np.nan) for _ in range(4))
    n_a, n_b, f_a, f_b = (np.full(shape, np.nan) for _ in range(4))
    if n_sig:
        for i, (ia, ib) in enumerate(pairs):
            ra = read_signals(psds_a[ia], freqs_a, **read)
            rb = read_signals(psds_b[ib], freqs_b, **read)
            snr_a[i], snr_b[i], p_a[i], p_b[i] = ra.snr_db, rb.snr_db, ra.power, rb.power
            n_a[i], n_b[i], f_a[i], f_b[i] = ra.noise_density, rb.noise_density, ra.offset_hz, rb.offset_hz
    both = np.isfinite(snr_a) & np.isfinite(snr_b)
    d_snr = np.where(both, snr_b - snr_a, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        d_noise = np.where(both, 10.0 * np.log10(n_b / n_a), np.nan)
    pair_snr, pair_noise = _row_mean(d_snr), _row_mean(d_noise)
    pair_signal = pair_snr + pair_noise

    signals = []
    for j in range(n_sig):
        ok = both[:, j]
        signals.append(SignalComparison(
            offset_hz=float(np.nanmedian(f_a[ok, j])) if ok.any() else float(freqs_a[j]),
            offset_b_hz=float(np.nanmedian(f_b[ok, j])) if ok.any() else float(freqs_b[j]),
            n_pairs=int(ok.sum()),
            snr_a_db=float(np.median(snr_a[ok, j])) if ok.any() else math.nan,
            snr_b_db=float(np.median(snr_b[ok, j])) if ok.any() else math.nan,
            snr=estimate_both(d_snr[:, j], confidence),
            noise=estimate_both(d_noise[:, j], confidence),
        ))

    ta, tb = ta_all[pairs[:, 0]], tb_all[pairs[:, 1]]
    slope, slope_se = _trend(_centred_levels(p_a), _centred_levels(p_b), ta, tb)
    gap = float(np.mean(tb - ta))
    missing = 1.0 - float(both.sum()) / both.size if both.size else math.nan
    return Comparison(
        signals=tuple(signals),
        pairs=pairs,
        snr_difference_db=d_snr,
        noise_difference_db=d_noise,
        pair_snr_db=pair_snr,
        pair_noise_db=pair_noise,
        pair_signal_db=pair_signal,
        pair_times_a=ta,
        pair_times_b=tb,
        snr=estimate_both(pair_snr, confidence),
        noise=estimate_both(pair_noise, confidence),
        signal=estimate_both(pair_signal, confidence),
        frequency_offset_hz=float(offset_hz),
        n_found_a=len(peaks_a),
        n_found_b=len(peaks_b),
        missing_fraction=missing,
        trend_db_per_time=slope,
        trend_bias_db=slope * gap if math.isfinite(slope) else math.nan,
        trend_bias_se_db=abs(slope_se * gap) if math.isfinite(slope_se) else math.nan,
        confidence=confidence,
        false_alarm=false_alarm,
        method=method,
    )
