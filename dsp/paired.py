"""Location of paired differences with a confidence interval: the paired t method and the
Hodges-Lehmann estimate with its distribution-free (Wilcoxon signed-rank) interval.

Used by the on-air comparison (:mod:`rxbench.dsp.compare`) on per-pair SNR and noise differences,
which fading makes heavy-tailed: the Hodges-Lehmann interval keeps its coverage there, the paired t
interval is the familiar one. The signed-rank null distribution and the Walsh-average interval are
written here because no reference library returns that interval (``scipy.stats.wilcoxon`` gives
the test's p-value only, and is used for it).

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

#: Above this many pairs the signed-rank critical value uses the normal approximation.
EXACT_SIGNED_RANK_MAX_N = 200
#: The two estimates, by name; either can be the headline.
METHODS = ("hodges-lehmann", "paired-t")


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


def check_confidence(confidence: float) -> None:
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
    check_confidence(confidence)
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
    check_confidence(confidence)
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
    check_confidence(confidence)
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

