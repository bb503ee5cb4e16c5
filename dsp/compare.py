"""On-air comparison of two receive paths: paired SNR and noise differences on the signals heard.

Captures of the same band are taken through path A and path B in quick alternation (or at the same
time from two dongles). Narrowband signals that stand above the local noise in both paths are found
with a stated false-alarm rate, matched by frequency after a common frequency offset between the two
dongles is removed, and read capture by capture with the core's tone reading. Each signal's SNR in
path B is compared with its SNR in the path A capture taken next to it, so that fading and propagation
changes common to both captures cancel; the pairs give the SNR difference B - A with a confidence
interval, per signal and pooled, by the paired t method and by the Hodges-Lehmann estimator with its
distribution-free (Wilcoxon signed-rank) interval.

Everything stands on :mod:`dsp.spectrum` (one PSD per capture), :mod:`dsp.floor` (noise density,
detection threshold) and :mod:`dsp.tone` (tone power and SNR); this module adds no FFT of its own.

Notes
-----
Signs: every difference is B - A in dB. A negative SNR difference means path B hears worse.
The signal-power difference is dS = dSNR + dN (dN the noise-density difference), so the three
answer different questions: dSNR is what the operator hears; dS and dN tell *why*. A loss in front
of a receiver whose noise is dominated by the band's external noise lowers signal and noise alike
(dS = dN < 0, dSNR = 0); a loss in front of a receiver that is limited by its own noise lowers the
signal and not the noise (dSNR = dS < 0).

References
----------
Student (W. S. Gosset), "The probable error of a mean", Biometrika 6, 1908 (paired t).
Wilcoxon, F., "Individual comparisons by ranking methods", Biometrics Bulletin 1(6), 1945.
Hodges, J. L. and Lehmann, E. L., "Estimates of location based on rank tests", Ann. Math. Statist.
34(2), 1963.
Hollander, M., Wolfe, D. A. and Chicken, E., *Nonparametric Statistical Methods*, 3rd ed., Wiley,
2014, section 3.2-3.3 (the Walsh-average estimator and its distribution-free interval) [from memory].
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special

from rxbench.dsp.floor import detection_threshold, median_bias, noise_floor, usable_mask
from rxbench.dsp.spectrum import Psd
from rxbench.dsp.tone import BAND_HALFWIDTH_BINS, DEFAULT_SNR_BANDWIDTH_HZ, measure_tone
from rxbench.dsp.units import db_from_power

#: Default probability that noise alone produces at least one detection in a path's mean spectrum.
DEFAULT_FALSE_ALARM = 0.01
#: Half-width of the window around each bin (or signal) over which the local noise is taken, bins.
LOCAL_HALFWIDTH_BINS = 32
#: Default matching tolerance after the common offset is removed, bins.
MATCH_TOLERANCE_BINS = 2.0
#: Fewer signals than this and the pooled figure rests on too few stations to speak for the band.
MIN_SIGNALS = 3
#: Above this many pairs the signed-rank critical value uses the normal approximation.
EXACT_SIGNED_RANK_MAX_N = 200

METHODS = ("hodges-lehmann", "paired-t")


# --------------------------------------------------------------------------------------------
# Paired statistics


@dataclass(frozen=True)
class Interval:
    """A location estimate of paired differences with its confidence interval.

    Attributes
    ----------
    method : str
        ``"paired-t"`` or ``"hodges-lehmann"``.
    estimate, low, high : float
        Estimate and interval limits, in the units of the differences (dB here).
    confidence : float
        Coverage the interval was built for (the Hodges-Lehmann interval's exact coverage,
        ``achieved_confidence``, is at least this for symmetric differences).
    n : int
        Number of differences.
    standard_error : float
        Standard error of the mean (paired t); NaN for Hodges-Lehmann.
    p_value : float
        Two-sided p-value of "no difference" (t test, or Wilcoxon signed-rank test).
    achieved_confidence : float
        Exact coverage of the interval under the method's assumptions.
    """

    method: str
    estimate: float
    low: float
    high: float
    confidence: float
    n: int
    standard_error: float = math.nan
    p_value: float = math.nan
    achieved_confidence: float = math.nan

    @property
    def half_width(self) -> float:
        return 0.5 * (self.high - self.low)

    def contains(self, value: float) -> bool:
        return self.low <= value <= self.high

    @property
    def significant(self) -> bool:
        """True when the interval excludes zero."""
        return self.high < 0 or self.low > 0


def _clean(differences) -> np.ndarray:
    d = np.asarray(differences, dtype=float).ravel()
    return d[np.isfinite(d)]


def _check_confidence(confidence: float) -> None:
    if not 0.0 < confidence < 1.0:
        raise ValueError(f"{confidence=} must lie strictly between 0 and 1")


def paired_t_interval(differences, confidence: float = 0.95) -> Interval:
    """Mean of paired differences with its Student-t interval.

    Parameters
    ----------
    differences : array_like
        Paired differences B - A (NaN entries are dropped).
    confidence : float
        Two-sided coverage, e.g. 0.95.

    Returns
    -------
    Interval

    Notes
    -----
    mean +/- t_{n-1}((1 + c)/2) * s/sqrt(n), s the sample standard deviation (Student 1908). The same
    numbers as ``scipy.stats.ttest_rel(b, a)`` and its ``confidence_interval``.
    """
    _check_confidence(confidence)
    d = _clean(differences)
    n = d.size
    if n < 2:
        raise ValueError(f"a paired t interval needs at least 2 differences, got {n}")
    mean = float(d.mean())
    se = float(d.std(ddof=1) / math.sqrt(n))
    k = float(special.stdtrit(n - 1, 0.5 + confidence / 2.0))
    if se > 0:
        p = float(2.0 * special.stdtr(n - 1, -abs(mean) / se))
    else:
        p = 1.0 if mean == 0 else 0.0
    return Interval("paired-t", mean, mean - k * se, mean + k * se, confidence, n, se, p, confidence)


def signed_rank_pmf(n: int) -> np.ndarray:
    """Exact null distribution of the Wilcoxon signed-rank statistic T+ for ``n`` untied differences.

    Returns ``p`` with ``p[s] = P(T+ = s)``, s = 0 .. n(n+1)/2.

    Notes
    -----
    Under the null each rank k enters T+ with probability 1/2 independently, so the pmf is the
    convolution of n two-point distributions {0, k} (Wilcoxon 1945).
    """
    if n < 0:
        raise ValueError(f"{n=} must be >= 0")
    p = np.ones(1)
    for k in range(1, n + 1):
        q = np.zeros(p.size + k)
        q[: p.size] += 0.5 * p
        q[k:] += 0.5 * p
        p = q
    return p


def min_pairs_for_interval(confidence: float = 0.95) -> int:
    """Fewest differences for which a distribution-free signed-rank interval at ``confidence`` exists.

    The most extreme signed-rank outcome has probability 2/2**n (two-sided); the interval exists when
    that is at most 1 - confidence (n = 6 for 95 %).
    """
    _check_confidence(confidence)
    return max(1, int(math.ceil(math.log2(2.0 / (1.0 - confidence)) - 1e-12)))


def hodges_lehmann_interval(differences, confidence: float = 0.95) -> Interval:
    """Hodges-Lehmann estimate of paired differences with its distribution-free interval.

    Parameters
    ----------
    differences : array_like
        Paired differences B - A (NaN entries are dropped).
    confidence : float
        Two-sided coverage sought, e.g. 0.95.

    Returns
    -------
    Interval
        ``achieved_confidence`` is the exact coverage (at least ``confidence``; the signed-rank
        distribution is discrete).

    Raises
    ------
    ValueError
        Fewer differences than :func:`min_pairs_for_interval`.

    Notes
    -----
    The estimate is the median of the n(n+1)/2 Walsh averages (x_i + x_j)/2, i <= j. With W_(1) <= ...
    <= W_(M) the sorted Walsh averages and t the smallest value with P0(T+ >= t) <= (1 - c)/2 under the
    exact null distribution of the signed-rank statistic, the interval is (W_(C), W_(M+1-C)) with
    C = M + 1 - t. It is the set of shifts theta that the two-sided Wilcoxon signed-rank test of
    x - theta does not reject, valid for any distribution of the differences symmetric about theta,
    and it keeps its coverage when fading makes the differences heavy-tailed. Above
    ``EXACT_SIGNED_RANK_MAX_N`` differences C comes from the normal approximation
    C = M/2 - z*sqrt(n(n+1)(2n+1)/24) (rounded down).

    References
    ----------
    Hodges & Lehmann, Ann. Math. Statist. 34, 1963; Hollander, Wolfe & Chicken, *Nonparametric
    Statistical Methods*, 3rd ed., 2014, section 3.3 [from memory].
    """
    _check_confidence(confidence)
    d = np.sort(_clean(differences))
    n = d.size
    need = min_pairs_for_interval(confidence)
    if n < need:
        raise ValueError(f"a distribution-free {100 * confidence:g} % interval needs at least {need} "
                         f"differences, got {n}")
    i, j = np.triu_indices(n)
    walsh = np.sort(0.5 * (d[i] + d[j]))
    m = walsh.size
    alpha_half = (1.0 - confidence) / 2.0
    if n <= EXACT_SIGNED_RANK_MAX_N:
        pmf = signed_rank_pmf(n)
        upper_tail = np.cumsum(pmf[::-1])[::-1]  # P(T+ >= s)
        t_crit = int(np.argmax(upper_tail <= alpha_half + 1e-12))
        c = m + 1 - t_crit
        achieved = 1.0 - 2.0 * float(upper_tail[t_crit])
    else:
        z = float(special.ndtri(1.0 - alpha_half))
        c = int(math.floor(m / 2.0 - z * math.sqrt(n * (n + 1) * (2 * n + 1) / 24.0)))
        c = max(c, 1)
        achieved = confidence
    low, high = float(walsh[c - 1]), float(walsh[m - c])
    estimate = float(np.median(walsh))
    if np.all(d == 0):
        p = 1.0
    else:
        from scipy import stats  # here, not at the top: a slow import

        p = float(stats.wilcoxon(d).pvalue)
    return Interval("hodges-lehmann", estimate, low, high, confidence, n, math.nan, p, achieved)


@dataclass(frozen=True)
class Estimates:
    """Both estimates of one set of differences (either may be None when too few differences)."""

    paired_t: Interval | None
    hodges_lehmann: Interval | None

    def get(self, method: str) -> Interval | None:
        """The estimate of ``method``, falling back to the other one when it is unavailable."""
        first, second = (
            (self.hodges_lehmann, self.paired_t) if method == "hodges-lehmann" else (self.paired_t, self.hodges_lehmann)
        )
        return first if first is not None else second


def estimate_both(differences, confidence: float = 0.95) -> Estimates:
    """Paired-t and Hodges-Lehmann estimates of ``differences``; None where too few values."""
    d = _clean(differences)
    t_iv = paired_t_interval(d, confidence) if d.size >= 2 else None
    hl_iv = hodges_lehmann_interval(d, confidence) if d.size >= min_pairs_for_interval(confidence) else None
    return Estimates(t_iv, hl_iv)


# --------------------------------------------------------------------------------------------
# Spectra: combining captures, local noise, detection


def _check_compatible(psds, what: str) -> None:
    first = psds[0]
    for p in psds[1:]:
        if (p.sample_rate_hz != first.sample_rate_hz or p.nperseg != first.nperseg
                or p.one_sided != first.one_sided):
            raise ValueError(
                f"{what}: spectra differ in sample rate ({p.sample_rate_hz:g} vs {first.sample_rate_hz:g} Hz), "
                f"FFT length ({p.nperseg} vs {first.nperseg}) or sidedness"
            )


def mean_psd(psds) -> Psd:
    """The average of several captures' PSDs (same rate, FFT length and window), weighted by segments.

    Notes
    -----
    Independent captures add their degrees of freedom; for unequal weights w_k = segments the
    effective value is (sum w_k)**2 / sum(w_k**2/nu_k) (Satterthwaite). Sub-averages are stacked in
    capture order.
    """
    psds = list(psds)
    if not psds:
        raise ValueError("no spectra to average")
    _check_compatible(psds, "mean_psd")
    w = np.array([p.n_segments for p in psds], dtype=float)
    density = np.sum([wi * p.density for wi, p in zip(w, psds)], axis=0) / w.sum()
    dof = float(w.sum() ** 2 / np.sum(w**2 / np.array([p.dof for p in psds])))
    first = psds[0]
    return Psd(
        frequency_hz=first.frequency_hz,
        density=density,
        batch_density=np.vstack([p.batch_density for p in psds]),
        batch_counts=np.concatenate([p.batch_counts for p in psds]),
        bin_width_hz=first.bin_width_hz,
        enbw_hz=first.enbw_hz,
        dof=dof,
        n_segments=int(w.sum()),
        sample_rate_hz=first.sample_rate_hz,
        one_sided=first.one_sided,
        window=first.window,
    )


def local_noise_density(spectrum: Psd, halfwidth_bins: int = LOCAL_HALFWIDTH_BINS) -> np.ndarray:
    """Noise density around every bin: a sliding median over +/- ``halfwidth_bins``, bias-corrected.

    Notes
    -----
    The sliding form of :func:`dsp.floor.noise_floor`: the median of chi2(nu)/nu-distributed bins
    divided by :func:`dsp.floor.median_bias` is unbiased for the mean density. Signals inside the
    window bias it upward a little (conservative for detection) as long as they fill well under half
    of it.
    """
    if halfwidth_bins < 4:
        raise ValueError(f"{halfwidth_bins=} must be at least 4")
    import scipy.ndimage  # here, not at the top: a slow import

    med = scipy.ndimage.median_filter(spectrum.density, size=2 * halfwidth_bins + 1, mode="nearest")
    return med / median_bias(spectrum.dof)


@dataclass(frozen=True)
class Peak:
    """A narrowband signal standing above the local noise of a spectrum."""

    offset_hz: float
    ratio_db: float  # peak bin over the local noise density, dB


def detect_peaks(
    spectrum: Psd,
    *,
    false_alarm: float = DEFAULT_FALSE_ALARM,
    halfwidth_bins: int = LOCAL_HALFWIDTH_BINS,
    edge_fraction: float = 0.1,
    dc_halfwidth_hz: float | None = None,
) -> list[Peak]:
    """Narrowband signals above the local noise, with a stated false-alarm rate.

    Parameters
    ----------
    spectrum : Psd
        Usually the mean of one path's captures (:func:`mean_psd`).
    false_alarm : float
        Probability that noise alone puts at least one bin of the searched band over the threshold.
    halfwidth_bins : int
        Half-width of the local-noise window, bins.
    edge_fraction, dc_halfwidth_hz : float
        Band edges and DC spike left out, as in :func:`dsp.floor.usable_mask`.

    Returns
    -------
    list of Peak
        One peak per contiguous run of bins over the threshold (its strongest bin), ascending in
        frequency. Runs closer than 2*BAND_HALFWIDTH_BINS + 1 bins are one signal.

    Notes
    -----
    A noise bin of a Welch average is S*chi2(nu)/nu; the threshold is the chi2 upper quantile at
    false_alarm / n_bins (a Bonferroni bound, conservative since neighbouring bins are correlated),
    :func:`dsp.floor.detection_threshold`, times the local density of :func:`local_noise_density`.
    """
    if not 0.0 < false_alarm < 1.0:
        raise ValueError(f"{false_alarm=} must lie strictly between 0 and 1")
    usable, _, _ = usable_mask(spectrum, edge_fraction=edge_fraction, dc_halfwidth_hz=dc_halfwidth_hz)
    if usable.sum() < 8:
        raise ValueError(f"only {int(usable.sum())} usable bins: the spectrum is too coarse to search")
    local = local_noise_density(spectrum, halfwidth_bins)
    threshold = detection_threshold(spectrum.dof, int(usable.sum()), false_alarm)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = spectrum.density / local
    above = usable & (ratio > threshold)
    idx = np.flatnonzero(above)
    if idx.size == 0:
        return []
    gap = 2 * BAND_HALFWIDTH_BINS + 1
    runs = np.split(idx, np.flatnonzero(np.diff(idx) > gap) + 1)
    peaks = []
    for run in runs:
        k = int(run[np.argmax(spectrum.density[run])])
        peaks.append(Peak(float(spectrum.frequency_hz[k]), float(db_from_power(ratio[k]))))
    return peaks


def _mutual_nearest(fa: np.ndarray, fb: np.ndarray, tolerance_hz: float) -> list[tuple[int, int]]:
    if fa.size == 0 or fb.size == 0:
        return []
    dist = np.abs(fa[:, None] - fb[None, :])
    best_b = np.argmin(dist, axis=1)
    best_a = np.argmin(dist, axis=0)
    return [(i, int(k)) for i, k in enumerate(best_b) if best_a[k] == i and dist[i, k] <= tolerance_hz]


def match_frequencies(freqs_a_hz, freqs_b_hz, *, tolerance_hz: float, max_offset_hz: float):
    """Estimate the common frequency offset of B relative to A and match the two lists of signals.

    Parameters
    ----------
    freqs_a_hz, freqs_b_hz : array_like
        Signal frequencies found in path A and path B, Hz.
    tolerance_hz : float
        Largest residual frequency difference of a match once the common offset is removed, Hz.
    max_offset_hz : float
        Largest common offset considered (the dongles' tuning error, e.g. 100 ppm of the centre), Hz.

    Returns
    -------
    offset_hz : float
        Common offset, B - A, Hz (0 when nothing matches).
    matches : list of (int, int)
        Index pairs (into A, into B), mutual nearest neighbours within the tolerance.

    Notes
    -----
    Every difference f_B - f_A within +/-max_offset_hz (and zero) is a candidate offset; the one that
    matches the most signals wins (ties: the smaller sum of squared residuals, then the smaller offset).
    The offset is then refined as the median difference of the matched pairs and the lists matched
    again. A dongle's tuning error shifts the whole band alike to within ppm * bandwidth, far below a
    bin for the bandwidths of these dongles.
    """
    fa = np.asarray(freqs_a_hz, dtype=float)
    fb = np.asarray(freqs_b_hz, dtype=float)
    if tolerance_hz <= 0 or max_offset_hz < 0:
        raise ValueError(f"{tolerance_hz=} must be > 0 and {max_offset_hz=} >= 0")
    candidates = {0.0}
    for d in (fb[None, :] - fa[:, None]).ravel():
        if abs(d) <= max_offset_hz:
            candidates.add(float(d))
    best = None
    for delta in sorted(candidates, key=abs):
        m = _mutual_nearest(fa, fb - delta, tolerance_hz)
        resid = sum((fb[k] - delta - fa[i]) ** 2 for i, k in m)
        key = (-len(m), resid, abs(delta))
        if best is None or key < best[0]:
            best = (key, delta, m)
    _, delta, m = best
    if not m:
        return 0.0, []
    delta = float(np.median([fb[k] - fa[i] for i, k in m]))
    return delta, _mutual_nearest(fa, fb - delta, tolerance_hz)


def local_floor(spectrum: Psd, offset_hz: float, halfwidth_bins: int = LOCAL_HALFWIDTH_BINS, **kwargs):
    """:func:`dsp.floor.noise_floor` restricted to +/- ``halfwidth_bins`` around ``offset_hz``."""
    w = halfwidth_bins * spectrum.bin_width_hz
    return noise_floor(spectrum, exclude_hz=[(-np.inf, offset_hz - w), (offset_hz + w, np.inf)], adaptive=False,
                       **kwargs)


@dataclass(frozen=True)
class SignalReadings:
    """Readings of several signals in one capture (NaN where the signal was not found)."""

    offset_hz: np.ndarray
    power: np.ndarray  # FS**2, noise subtracted
    noise_density: np.ndarray  # FS**2/Hz, local
    snr_db: np.ndarray


def read_signals(
    spectrum: Psd,
    offsets_hz,
    *,
    search_hz: float,
    halfwidth_bins: int = LOCAL_HALFWIDTH_BINS,
    snr_bandwidth_hz: float = DEFAULT_SNR_BANDWIDTH_HZ,
    dc_halfwidth_hz: float | None = None,
) -> SignalReadings:
    """Read each signal near ``offsets_hz`` in one capture with :func:`dsp.tone.measure_tone`
    against its local noise floor. A signal that does not stand above the noise within
    ``search_hz`` (a deep fade), or whose noise-subtracted power is not positive, reads NaN."""
    offsets = np.asarray(offsets_hz, dtype=float)
    out = np.full((4, offsets.size), np.nan)
    for j, f in enumerate(offsets):
        try:
            fl = local_floor(spectrum, f, halfwidth_bins, dc_halfwidth_hz=dc_halfwidth_hz)
        except ValueError:
            continue
        out[2, j] = fl.density
        try:
            t = measure_tone(spectrum, fl, near_hz=f, search_hz=search_hz, snr_bandwidth_hz=snr_bandwidth_hz)
        except ValueError:
            continue
        if t.power > 0:
            out[0, j], out[1, j], out[3, j] = t.offset_hz, t.power, t.snr_db
    return SignalReadings(out[0], out[1], out[2], out[3])


# --------------------------------------------------------------------------------------------
# Pairing and the comparison


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
    _check_confidence(confidence)
    psds_a, psds_b = list(psds_a), list(psds_b)
    if not psds_a or not psds_b:
        raise ValueError(f"need captures of both paths, got {len(psds_a)} of A and {len(psds_b)} of B")
    _check_compatible(psds_a + psds_b, "compare_paths")
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
