"""On-air comparison of two receive paths, from the readings of their captures.

Captures of the same band through path A and path B, taken in quick alternation (or at the same time
from two dongles), are paired by time; the signals heard in both paths give paired SNR and noise
differences B - A, per signal and pooled, with confidence intervals. :func:`compare_paths` takes the
readings of both paths (:func:`read_paths` reads the captures alike) and the settings, checks that
the captures were taken alike and at an even pace, and returns a :class:`CompareResult`: the numbers
(:class:`rxbench.dsp.compare.Comparison`), the warnings on them, and where they came from.
``rxbench compare`` parses its flags, calls these two functions and renders the result.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from rxbench.compared import require_comparable
from rxbench.reading import Reading, capture_start_s, choose_nperseg, read_capture
from rxbench.dsp import compare as cmp
from rxbench.dsp.detection import DEFAULT_FALSE_ALARM
from rxbench.dsp.paired import Estimates, Interval, min_pairs_for_interval
from rxbench.dsp.tone import DEFAULT_SNR_BANDWIDTH_HZ
from rxbench.errors import MeasurementError, UsageError

#: Default 1 - confidence of the intervals (95 % intervals).
DEFAULT_ALPHA = 0.05
#: Default headline estimate (both are always computed).
DEFAULT_METHOD = "hodges-lehmann"
#: Default limit on the two dongles' relative tuning error searched for, ppm of the centre frequency.
DEFAULT_MAX_PPM = 100.0
#: Capture lengths of the two paths that differ by more than this fraction get a warning.
DURATION_TOLERANCE = 0.1
#: Alternation periods (or A-to-B gaps) that differ by more than this fraction get a warning.
INTERVAL_TOLERANCE = 0.25
#: Readings lost to fades above this share get a warning (the difference is then biased toward 0).
MISSING_WARN_FRACTION = 0.1
#: A level drift whose bias per pair exceeds this share of the interval's half-width gets a warning.
TREND_WARN_SHARE = 0.5

METHOD_NAMES = {
    "paired-t": "paired t (Student 1908)",
    "hodges-lehmann": "Hodges-Lehmann with the Wilcoxon signed-rank interval (Hodges & Lehmann 1963)",
}


@dataclass(frozen=True, eq=False)
class CompareResult:
    """An on-air comparison, its warnings and where it came from.

    Attributes
    ----------
    comparison : rxbench.dsp.compare.Comparison
        The numbers: per-signal and pooled SNR, noise and signal differences B - A.
    captures_a, captures_b : tuple of str
        The captures of each path, in the order given.
    sample_rate_hz : float
    center_hz : float or None
        The captures' tuning (the first capture that records one).
    times_a_s, times_b_s : ndarray or None
        Capture start times, s from the earliest capture; None when not every capture has one
        (the captures are then paired by the order given).
    alpha : float
        1 - confidence of the intervals.
    snr_bandwidth_hz : float
        Noise bandwidth of the SNRs shown.
    settings : dict
        The other settings the comparison used (false alarm, offset searched, tolerance, FFT length).
    warnings : tuple of str
    """

    comparison: cmp.Comparison
    captures_a: tuple
    captures_b: tuple
    sample_rate_hz: float
    center_hz: float | None
    times_a_s: np.ndarray | None
    times_b_s: np.ndarray | None
    alpha: float
    snr_bandwidth_hz: float
    settings: dict = field(default_factory=dict)
    warnings: tuple = ()

    @property
    def headline(self) -> Interval | None:
        """The pooled SNR difference by the chosen method (or the other when it is unavailable)."""
        return self.comparison.headline

    @property
    def method(self) -> str | None:
        """The method of the headline figure; None when there is none."""
        head = self.headline
        return None if head is None else head.method

    @property
    def classification(self) -> str:
        return self.comparison.classification

    @property
    def pairing(self) -> str:
        c = self.comparison
        if self.times_a_s is None:
            return "by the order given"
        if np.allclose(self.times_a_s[c.pairs[:, 0]], self.times_b_s[c.pairs[:, 1]], atol=1e-3):
            return "simultaneous, by timestamp"
        return "alternating, by timestamp"

    @property
    def summary(self) -> str:
        return summary(self.comparison)

    def to_dict(self) -> dict:
        c = self.comparison
        snr_est, snr_ci, used = _head(c.snr, c.method)
        noise_est, noise_ci, _ = _head(c.noise, c.method)
        sig_est, sig_ci, _ = _head(c.signal, c.method)
        ta, tb = self.times_a_s, self.times_b_s
        return {
            "captures": {"a": list(self.captures_a), "b": list(self.captures_b)},
            "sample_rate_hz": self.sample_rate_hz,
            "center_hz": self.center_hz,
            "pairs": c.n_pairs,
            "pairing": self.pairing,
            "alpha": self.alpha,
            "confidence": c.confidence,
            "false_alarm": c.false_alarm,
            "method": used,
            "method_name": METHOD_NAMES.get(used or c.method, ""),
            "snr_bandwidth_hz": self.snr_bandwidth_hz,
            "frequency_offset_hz": c.frequency_offset_hz,
            "signals_found": {"a": c.n_found_a, "b": c.n_found_b, "both": len(c.signals)},
            "snr_difference_db": snr_est,
            "snr_difference_ci_db": snr_ci,
            "noise_difference_db": noise_est,
            "noise_difference_ci_db": noise_ci,
            "signal_difference_db": sig_est,
            "signal_difference_ci_db": sig_ci,
            "pooled": {"snr": _both(c.snr), "noise": _both(c.noise), "signal": _both(c.signal)},
            "classification": c.classification,
            "summary": self.summary,
            "signals": [_signal_row(s, self.center_hz, c.method) for s in c.signals],
            "per_pair": [
                {"a": self.captures_a[ia], "b": self.captures_b[ib],
                 "time_a_s": None if ta is None else float(ta[ia]), "time_b_s": None if tb is None else float(tb[ib]),
                 "snr_difference_db": float(c.pair_snr_db[i]), "noise_difference_db": float(c.pair_noise_db[i])}
                for i, (ia, ib) in enumerate(c.pairs)
            ],
            "missing_fraction": c.missing_fraction,
            "trend_bias_db": c.trend_bias_db,
            "settings": dict(self.settings),
            "warnings": list(self.warnings),
        }


def read_paths(captures_a, captures_b, *, nperseg: int | None = None) -> tuple[list[Reading], list[Reading]]:
    """Read the captures of both paths alike: one FFT length (``nperseg``, or the default for the
    shortest capture), no tone search (the comparison finds its own signals)."""
    captures_a, captures_b = list(captures_a), list(captures_b)
    if not captures_a or not captures_b:
        raise UsageError(f"need captures of both paths, got {len(captures_a)} of A and {len(captures_b)} of B")
    if nperseg is not None and nperseg < 16:
        raise UsageError(f"--nperseg must be at least 16, got {nperseg}")
    require_comparable(captures_a + captures_b, gain=False)  # refuse captures not taken alike before the pass
    n = choose_nperseg(min(c.n_samples for c in captures_a + captures_b), nperseg)
    return ([read_capture(c, nperseg=n, want_tone=False) for c in captures_a],
            [read_capture(c, nperseg=n, want_tone=False) for c in captures_b])


def compare_paths(
    readings_a,
    readings_b,
    *,
    alpha: float = DEFAULT_ALPHA,
    method: str = DEFAULT_METHOD,
    false_alarm: float = DEFAULT_FALSE_ALARM,
    max_offset_hz: float | None = None,
    tolerance_hz: float | None = None,
    snr_bandwidth_hz: float = DEFAULT_SNR_BANDWIDTH_HZ,
) -> CompareResult:
    """Paired comparison of the signals two receive paths hear.

    Parameters
    ----------
    readings_a, readings_b : sequence of Reading
        The captures of path A and of path B (:func:`read_paths`), in the order they were taken;
        timestamps in the metadata take precedence over the order.
    alpha : float
        1 - confidence of the intervals, in (0, 0.5).
    method : {"hodges-lehmann", "paired-t"}
        The headline estimate (both are computed).
    false_alarm : float
        Probability that noise alone is called a signal in a path's mean spectrum, in (0, 0.5).
    max_offset_hz : float, optional
        Largest frequency offset between the paths searched, Hz; default DEFAULT_MAX_PPM of the
        centre frequency, or 1/20 of the sample rate when no centre is recorded.
    tolerance_hz : float, optional
        Frequency matching tolerance once the offset is removed, Hz (default 2 bins).
    snr_bandwidth_hz : float
        Noise bandwidth of the SNRs shown, Hz (differences do not depend on it).

    Raises
    ------
    UsageError
        A setting out of range; UnlikeCapturesError (a UsageError): captures not taken alike.
    MeasurementError
        A comparison that cannot be formed from these captures.
    """
    check_settings(alpha, false_alarm, max_offset_hz, tolerance_hz, snr_bandwidth_hz, method)
    readings_a, readings_b = list(readings_a), list(readings_b)
    if not readings_a or not readings_b:
        raise UsageError(f"need captures of both paths, got {len(readings_a)} of A and {len(readings_b)} of B")
    caps_a = [r.capture for r in readings_a]
    caps_b = [r.capture for r in readings_b]
    warnings = require_comparable(caps_a + caps_b, gain=False)
    ta, tb, time_notes = _times(caps_a, caps_b)
    warnings += time_notes
    warnings += _gain_warnings(caps_a, caps_b)
    for r in readings_a + readings_b:
        warnings += r.warnings

    center = next((c.center_hz for c in caps_a + caps_b if c.center_hz is not None), None)
    if max_offset_hz is None:
        max_offset_hz = (DEFAULT_MAX_PPM * 1e-6 * abs(center) if center is not None
                         else caps_a[0].sample_rate_hz / 20.0)
    pairs = cmp.pair_captures(ta, tb, n_a=len(caps_a), n_b=len(caps_b))
    warnings += _alternation_warnings(caps_a, caps_b, ta, tb, pairs)
    try:
        c = cmp.compare_paths(
            [r.psd for r in readings_a], [r.psd for r in readings_b], times_a_s=ta, times_b_s=tb,
            confidence=1.0 - alpha, false_alarm=false_alarm, max_offset_hz=max_offset_hz,
            tolerance_hz=tolerance_hz, snr_bandwidth_hz=snr_bandwidth_hz, method=method,
            dc_halfwidth_hz=None if caps_a[0].is_complex else 0.0,
        )
    except ValueError as exc:
        raise MeasurementError(f"cannot compare these captures: {exc}") from None
    warnings += _warnings_from(c, alpha)
    settings = {"false_alarm": false_alarm, "max_offset_hz": float(max_offset_hz), "tolerance_hz": tolerance_hz,
                "nperseg": readings_a[0].psd.nperseg, "method": method}
    return CompareResult(
        comparison=c, captures_a=tuple(str(x.path) for x in caps_a), captures_b=tuple(str(x.path) for x in caps_b),
        sample_rate_hz=caps_a[0].sample_rate_hz, center_hz=center, times_a_s=ta, times_b_s=tb, alpha=alpha,
        snr_bandwidth_hz=snr_bandwidth_hz, settings=settings, warnings=tuple(warnings),
    )


# --------------------------------------------------------------------------------------------
# Checks on the settings and the captures


def check_settings(alpha, false_alarm, max_offset_hz, tolerance_hz, snr_bandwidth_hz, method) -> None:
    """UsageError for a setting out of range (the messages name the command's options)."""
    if not 0.0 < alpha < 0.5:
        raise UsageError(f"--alpha must lie between 0 and 0.5 (e.g. 0.05 for 95 % intervals), got {alpha}")
    if not 0.0 < false_alarm < 0.5:
        raise UsageError(f"--false-alarm must lie between 0 and 0.5, got {false_alarm}")
    if not (snr_bandwidth_hz > 0 and math.isfinite(snr_bandwidth_hz)):
        raise UsageError(f"--snr-bandwidth must be a positive number of Hz, got {snr_bandwidth_hz}")
    if max_offset_hz is not None and not (max_offset_hz >= 0 and math.isfinite(max_offset_hz)):
        raise UsageError(f"--max-offset must be a number of Hz >= 0, got {max_offset_hz}")
    if tolerance_hz is not None and not (tolerance_hz > 0 and math.isfinite(tolerance_hz)):
        raise UsageError(f"--tolerance must be a positive number of Hz, got {tolerance_hz}")
    if method not in cmp.METHODS:
        raise UsageError(f"--method must be one of {', '.join(cmp.METHODS)}, got {method!r}")


def _times(caps_a, caps_b):
    """Start times in s from the first capture, or (None, None, warning) when not all are known."""
    ta = [capture_start_s(c) for c in caps_a]
    tb = [capture_start_s(c) for c in caps_b]
    if all(t is not None for t in ta + tb):
        t0 = min(ta + tb)
        return np.array(ta) - t0, np.array(tb) - t0, []
    n_missing = sum(t is None for t in ta + tb)
    note = ("" if n_missing == len(ta) + len(tb)
            else f"{n_missing} capture(s) have no readable timestamp: ")
    return None, None, [f"{note}pairing the captures by the order given (A1 with B1, A2 with B2, ...)"]


def _gain_warnings(caps_a, caps_b) -> list[str]:
    ga = [c.extra.get("gain_db") for c in caps_a]
    gb = [c.extra.get("gain_db") for c in caps_b]
    known_a = {float(g) for g in ga if isinstance(g, (int, float))}
    known_b = {float(g) for g in gb if isinstance(g, (int, float))}

    def gains(values) -> str:
        return "/".join(f"{g:g}" for g in sorted(values)) + " dB"

    out = []
    if len(known_a) > 1 or len(known_b) > 1:
        out.append("the dongle gain changes within a path "
                   f"(A: {gains(known_a)}, B: {gains(known_b)}): keep it fixed during a comparison")
    if known_a and known_b and known_a != known_b:
        out.append(
            f"gain differs between the paths (A {gains(known_a)}, B {gains(known_b)}): the signal and "
            "noise differences include the gain difference, and a dongle's noise figure changes with its gain, "
            "so the SNR difference is not the device's alone; set the same gain on both"
        )
    if (known_a or known_b) and (None in ga or None in gb) and not (len(known_a) > 1 or len(known_b) > 1):
        out.append("the gain is recorded on some captures only: cannot check it matches between the paths")
    return out


def _alternation_warnings(caps_a, caps_b, ta, tb, pairs) -> list[str]:
    out = []
    da = np.array([c.duration_s for c in caps_a])
    db = np.array([c.duration_s for c in caps_b])
    if abs(da.mean() - db.mean()) > DURATION_TOLERANCE * max(da.mean(), db.mean()):
        out.append(f"captures of path A last {da.mean():.3g} s on average and those of path B {db.mean():.3g} s: "
                   "give both paths the same dwell time")
    if ta is None:
        return out
    pa, pb = np.diff(np.sort(ta)), np.diff(np.sort(tb))
    if pa.size and pb.size:
        ma, mb = float(np.mean(pa)), float(np.mean(pb))
        if abs(ma - mb) > INTERVAL_TOLERANCE * max(ma, mb, 1e-9):
            out.append(f"the alternation interval differs between the paths (A every {ma:.3g} s, B every {mb:.3g} s)")
    gaps = tb[pairs[:, 1]] - ta[pairs[:, 0]]
    if gaps.size > 1:
        typical = float(np.median(np.abs(gaps)))
        if np.max(np.abs(gaps)) > (1.0 + INTERVAL_TOLERANCE) * typical + 1e-3 and typical > 0:
            out.append(f"the time between the A and B capture of a pair varies from {np.min(np.abs(gaps)):.3g} to "
                       f"{np.max(np.abs(gaps)):.3g} s: alternate at an even pace so fading cancels alike in every pair")
        elif typical == 0 and np.max(np.abs(gaps)) > 1e-3:
            out.append("some pairs are simultaneous and some are not: check the timestamps")
    if len(caps_a) != len(caps_b):
        used = pairs.shape[0]
        out.append(f"{len(caps_a)} captures of A and {len(caps_b)} of B: {used} pairs formed, "
                   f"{len(caps_a) + len(caps_b) - 2 * used} capture(s) left unpaired")
    return out


def _warnings_from(c: cmp.Comparison, alpha: float) -> list[str]:
    out = []
    conf = 1.0 - alpha
    need = min_pairs_for_interval(conf)
    n_sig = len(c.signals)
    if n_sig == 0:
        out.append(f"no signal stands above the noise in both paths (found {c.n_found_a} in A, {c.n_found_b} in B): "
                   "nothing to compare")
        return out
    if n_sig < cmp.MIN_SIGNALS:
        out.append(f"only {n_sig} signal(s) heard in both paths: the pooled figure speaks for those stations, "
                   f"not for the band (at least {cmp.MIN_SIGNALS} wanted)")
    if c.n_pairs < need:
        fallback = "paired t" if c.n_pairs >= 2 else "no interval"
        out.append(f"only {c.n_pairs} pairs: too few for a distribution-free {100 * conf:g} % interval (need at "
                   f"least {need}); headline by {fallback}")
    elif c.n_pairs < 10:
        out.append(f"only {c.n_pairs} pairs: the interval is wide and rests on the differences being symmetric "
                   "(Hodges-Lehmann) or normal (paired t); take more pairs for a firmer figure")
    if math.isfinite(c.missing_fraction) and c.missing_fraction > MISSING_WARN_FRACTION:
        out.append(f"{100 * c.missing_fraction:.0f} % of the readings were lost in fades: pairs with a missing reading "
                   "are left out, which pulls the difference toward 0 dB; use longer captures or stronger signals")
    head = c.headline
    if head is not None and math.isfinite(c.trend_bias_db):
        if abs(c.trend_bias_db) > TREND_WARN_SHARE * head.half_width:
            out.append(f"the signal levels drift during the session by enough to bias each pair by about "
                       f"{c.trend_bias_db:+.2f} dB (B taken after A): alternate faster, or alternate the order "
                       "(A B B A ...)")
    if c.n_found_a > n_sig or c.n_found_b > n_sig:
        out.append(f"signals found: {c.n_found_a} in A, {c.n_found_b} in B, {n_sig} matched in both; "
                   "the others are heard in one path only and are not compared")
    for s in c.signals:
        if s.n_pairs < 2:
            out.append(f"signal at {s.offset_hz:+.0f} Hz read in both paths in {s.n_pairs} pair(s) only: no interval")
    return out


# --------------------------------------------------------------------------------------------
# The result as JSON and as a sentence


def _iv(iv: Interval | None) -> dict | None:
    if iv is None:
        return None
    return {
        "estimate_db": iv.estimate,
        "ci_db": [iv.low, iv.high],
        "n": iv.n,
        "confidence": iv.confidence,
        "achieved_confidence": iv.achieved_confidence,
        "standard_error_db": iv.standard_error,
        "p_value": iv.p_value,
    }


def _both(est: Estimates) -> dict:
    return {"paired_t": _iv(est.paired_t), "hodges_lehmann": _iv(est.hodges_lehmann)}


def _head(est: Estimates, method: str):
    iv = est.get(method)
    return (None, None, None) if iv is None else (iv.estimate, [iv.low, iv.high], iv.method)


def _signal_row(s: cmp.SignalComparison, center_hz, method: str) -> dict:
    snr_est, snr_ci, used = _head(s.snr, method)
    noise_est, noise_ci, _ = _head(s.noise, method)
    return {
        "offset_hz": s.offset_hz,
        "offset_b_hz": s.offset_b_hz,
        "frequency_hz": None if center_hz is None else center_hz + s.offset_hz,
        "n_pairs": s.n_pairs,
        "snr_a_db": s.snr_a_db,
        "snr_b_db": s.snr_b_db,
        "snr_difference_db": snr_est,
        "snr_difference_ci_db": snr_ci,
        "noise_difference_db": noise_est,
        "noise_difference_ci_db": noise_ci,
        "method": used,
        "snr": _both(s.snr),
        "noise": _both(s.noise),
    }


def summary(c: cmp.Comparison) -> str:
    """One plain sentence saying which way the comparison points."""
    snr, noise, sig = c.snr.get(c.method), c.noise.get(c.method), c.signal.get(c.method)
    pct = f"{100 * c.confidence:g} %"
    kind = c.classification
    if snr is None:
        return "no comparison possible: too few signals heard in both paths"
    span = f"{pct} interval {snr.low:+.2f} to {snr.high:+.2f} dB"
    if kind == "snr-cost":
        text = (f"Path B costs {-snr.estimate:.2f} dB of SNR on the signals heard "
                f"({pct} interval {-snr.high:.2f} to {-snr.low:.2f} dB).")
        if noise is not None and sig is not None:
            if noise.low <= 0 <= noise.high:
                text += (f" The signals drop by {-sig.estimate:.2f} dB while the noise floor stays put "
                         f"({noise.estimate:+.2f} dB): the receiver's own noise sets the floor, so the loss counts "
                         "in full.")
            else:
                text += (f" The signals change by {sig.estimate:+.2f} dB and the noise floor by "
                         f"{noise.estimate:+.2f} dB: the loss lowers the signal more than the noise.")
        return text
    if kind == "snr-gain":
        return f"Path B improves the SNR by {snr.estimate:.2f} dB on the signals heard ({span})."
    if kind == "external-noise-limited":
        return (f"No significant SNR difference at this precision ({snr.estimate:+.2f} dB, {span}): path B lowers "
                f"signal and noise alike (noise {noise.estimate:+.2f} dB), so the band's external noise dominates "
                "and the loss costs no SNR here.")
    return f"No significant difference at this precision: SNR difference {snr.estimate:+.2f} dB ({span})."
