"""``rxbench compare --a C ... --b C ...``: on-air A/B comparison of two receive paths.

Captures of the same band through path A and path B, taken in quick alternation (or at the same time
from two dongles), are read capture by capture; the signals heard in both paths give paired SNR and
noise-floor differences B - A, per signal and pooled, with confidence intervals (see
:mod:`dsp.compare`). Output: a table, JSON, and optionally a PNG.
"""

from __future__ import annotations

import argparse
import datetime as _dt
import math
from pathlib import Path

import numpy as np

from rxbench.analyze import accumulate, choose_nperseg, health_warnings, require_comparable
from rxbench.errors import MeasurementError, UsageError
from rxbench.output import add_json_option, emit, fmt_db
from rxbench.files import check_output
from rxbench.recordings import add_capture_options, atomic_path, capture_from_args
from rxbench.dsp import compare as cmp
from rxbench.dsp.tone import DEFAULT_SNR_BANDWIDTH_HZ
from rxbench.quantities import arg as quantity_arg

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
#: Colours (colour-blind safe, Okabe-Ito).
C_SNR = "#0072B2"
C_NOISE = "#D55E00"
C_POOLED = "#000000"
C_GREY = "#777777"


def add_parser(subparsers) -> None:
    p = subparsers.add_parser(
        "compare",
        help="on-air A/B comparison of two receive paths: paired SNR differences on the signals heard",
        description=(
            "Compare two receive paths on the air. Give the captures of path A and of path B in the order "
            "they were taken (A, B, A, B, ... through a switch, or simultaneous pairs from two dongles; "
            "timestamps in the metadata take precedence). Narrowband signals heard in both paths are "
            "compared pair by pair, so fading and propagation common to both captures cancel."
        ),
    )
    p.add_argument("--a", nargs="+", required=True, metavar="C", dest="a", help="captures of path A")
    p.add_argument("--b", nargs="+", required=True, metavar="C", dest="b", help="captures of path B")
    p.add_argument("--alpha", type=quantity_arg("probability"), default=0.05,
                   help="1 - confidence of the intervals (default %(default)g: 95 %% intervals)")
    p.add_argument("--method", choices=cmp.METHODS, default="hodges-lehmann",
                   help="headline estimate (both are reported; default %(default)s)")
    p.add_argument("--false-alarm", type=quantity_arg("probability"), default=cmp.DEFAULT_FALSE_ALARM, metavar="P",
                   help="probability that noise alone is called a signal in a path's mean spectrum "
                        "(default %(default)g)")
    p.add_argument("--max-offset", type=quantity_arg("bandwidth"), metavar="HZ",
                   help=f"largest frequency offset between the paths searched, Hz (default "
                        f"{DEFAULT_MAX_PPM:g} ppm of the centre, or 1/20 of the sample rate)")
    p.add_argument("--tolerance", type=quantity_arg("bandwidth"), metavar="HZ",
                   help="frequency matching tolerance once the offset is removed, Hz (default 2 bins)")
    p.add_argument("--snr-bandwidth", type=quantity_arg("bandwidth"), default=DEFAULT_SNR_BANDWIDTH_HZ, metavar="HZ",
                   help="noise bandwidth of the SNRs shown, Hz (default %(default)g; differences do not depend on it)")
    p.add_argument("--nperseg", type=int, metavar="N",
                   help="FFT segment length (default 4096, shorter for short captures)")
    p.add_argument("--plot", metavar="FILE.png", help="draw the per-signal and pooled differences to this PNG")
    p.add_argument("--overwrite", action="store_true", help="replace an existing --plot file")
    add_capture_options(p)
    add_json_option(p)
    p.set_defaults(func=run)


# --------------------------------------------------------------------------------------------
# Checks on the inputs


def _check_args(args) -> None:
    if not 0.0 < args.alpha < 0.5:
        raise UsageError(f"--alpha must lie between 0 and 0.5 (e.g. 0.05 for 95 % intervals), got {args.alpha}")
    if not 0.0 < args.false_alarm < 0.5:
        raise UsageError(f"--false-alarm must lie between 0 and 0.5, got {args.false_alarm}")
    if not (args.snr_bandwidth > 0 and math.isfinite(args.snr_bandwidth)):
        raise UsageError(f"--snr-bandwidth must be a positive number of Hz, got {args.snr_bandwidth}")
    if args.max_offset is not None and not (args.max_offset >= 0 and math.isfinite(args.max_offset)):
        raise UsageError(f"--max-offset must be a number of Hz >= 0, got {args.max_offset}")
    if args.tolerance is not None and not (args.tolerance > 0 and math.isfinite(args.tolerance)):
        raise UsageError(f"--tolerance must be a positive number of Hz, got {args.tolerance}")
    if args.nperseg is not None and args.nperseg < 16:
        raise UsageError(f"--nperseg must be at least 16, got {args.nperseg}")
    if args.plot:
        plot = Path(args.plot)
        if plot.suffix.lower() != ".png":
            raise UsageError(f"--plot {plot}: the plot is written as PNG; give a name ending in .png")
        if not plot.parent.is_dir():
            raise UsageError(f"--plot {plot}: folder {plot.parent} does not exist")
        check_output(plot, overwrite=args.overwrite)  # never an input or a recording
        inputs = {Path(p).resolve() for p in args.a + args.b}
        if plot.resolve() in inputs:
            raise UsageError(f"--plot {plot}: is one of the captures; choose another name")


def _parse_time(text) -> float | None:
    if not text:
        return None
    try:
        t = _dt.datetime.fromisoformat(str(text).replace("Z", "+00:00"))
    except ValueError:
        return None
    if t.tzinfo is None:
        t = t.replace(tzinfo=_dt.timezone.utc)
    return t.timestamp()


def _times(caps_a, caps_b):
    """Start times in s from the first capture, or (None, None, warning) when not all are known."""
    ta = [_parse_time(c.datetime) for c in caps_a]
    tb = [_parse_time(c.datetime) for c in caps_b]
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


# --------------------------------------------------------------------------------------------
# Result


def _iv(iv: cmp.Interval | None) -> dict | None:
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


def _both(est: cmp.Estimates) -> dict:
    return {"paired_t": _iv(est.paired_t), "hodges_lehmann": _iv(est.hodges_lehmann)}


def _head(est: cmp.Estimates, method: str):
    iv = est.get(method)
    return (None, None, None) if iv is None else (iv.estimate, [iv.low, iv.high], iv.method)


#: Short verdicts for the plot title.
VERDICTS = {
    "snr-cost": "path B costs SNR: it lowers the signals more than the noise",
    "snr-gain": "path B improves the SNR",
    "external-noise-limited": "path B lowers signal and noise alike: no SNR cost (external noise dominates)",
    "no-significant-difference": "no significant difference at this precision",
}

METHOD_NAMES = {
    "paired-t": "paired t (Student 1908)",
    "hodges-lehmann": "Hodges-Lehmann with the Wilcoxon signed-rank interval (Hodges & Lehmann 1963)",
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


def _warnings_from(c: cmp.Comparison, alpha: float) -> list[str]:
    out = []
    conf = 1.0 - alpha
    need = cmp.min_pairs_for_interval(conf)
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


def _human(result: dict, c: cmp.Comparison, center_hz) -> str:
    pct = f"{100 * c.confidence:g} %"
    lines = [
        f"On-air comparison: {len(result['captures']['a'])} captures of A, {len(result['captures']['b'])} of B, "
        f"{result['pairs']} pairs ({result['pairing']})",
        f"signals found: {c.n_found_a} in A, {c.n_found_b} in B, {len(c.signals)} in both "
        f"(false-alarm rate {c.false_alarm:g} per path); frequency offset B - A {c.frequency_offset_hz:+.1f} Hz",
        "",
    ]
    freq_head = "MHz" if center_hz is not None else "offset kHz"
    lines.append(f"{freq_head:>12} {'pairs':>5} {'SNR A':>7} {'SNR B':>7} {'dSNR':>7}  {pct + ' interval':>17} "
                 f"{'dNoise':>7}")
    for row in result["signals"]:
        f = (f"{row['frequency_hz'] / 1e6:.5f}" if row["frequency_hz"] is not None
             else f"{row['offset_hz'] / 1e3:+.2f}")
        ci = row["snr_difference_ci_db"]
        ci_text = "n/a" if ci is None else f"{fmt_db(ci[0])} .. {fmt_db(ci[1])}"
        lines.append(f"{f:>12} {row['n_pairs']:>5} {fmt_db(row['snr_a_db'], 1):>7} {fmt_db(row['snr_b_db'], 1):>7} "
                     f"{fmt_db(row['snr_difference_db']):>7}  {ci_text:>17} {fmt_db(row['noise_difference_db']):>7}")
    lines.append("")
    for label, key in (("SNR", "snr"), ("noise floor", "noise"), ("signal", "signal")):
        est, ci = result[f"{key}_difference_db"], result[f"{key}_difference_ci_db"]
        if est is None:
            lines.append(f"pooled {label:<12} B - A: n/a")
        else:
            lines.append(f"pooled {label:<12} B - A: {est:+.2f} dB  ({pct}: {ci[0]:+.2f} .. {ci[1]:+.2f} dB)")
    other = c.snr.hodges_lehmann if result["method"] == "paired-t" else c.snr.paired_t
    if other is not None and result["method"] is not None:
        name = "Hodges-Lehmann" if other.method == "hodges-lehmann" else "paired t"
        lines.append(f"  ({name} for the SNR: {other.estimate:+.2f} dB, "
                     f"{pct}: {other.low:+.2f} .. {other.high:+.2f} dB)")
    lines += ["", result["summary"], "", f"Method: {result['method_name']}; SNRs in {result['snr_bandwidth_hz']:g} Hz. "
              "Differences are B - A; each pair is a B capture and the A capture taken next to it."]
    return "\n".join(lines)


# --------------------------------------------------------------------------------------------
# Plot


def plot(c: cmp.Comparison, path: Path, *, center_hz=None, timed: bool = True, overwrite: bool = False,
         title: str = "") -> None:
    """Per-signal SNR and noise differences with their intervals and the pooled figure (left), and the
    per-pair differences over the session (right); written atomically as PNG."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    method = c.method
    pct = f"{100 * c.confidence:g} %"
    fig = Figure(figsize=(11.0, 0.45 * max(len(c.signals), 4) + 3.2), dpi=100, layout="constrained")
    FigureCanvasAgg(fig)
    ax, ax2 = fig.subplots(1, 2, width_ratios=[1.3, 1.0])

    labels, y = [], []
    for k, s in enumerate(c.signals):
        yk = len(c.signals) - k + 1
        f = (f"{(center_hz + s.offset_hz) / 1e6:.4f} MHz" if center_hz is not None else f"{s.offset_hz / 1e3:+.1f} kHz")
        labels.append(f"{f}  (n={s.n_pairs})")
        y.append(yk)
        marks = ((s.snr.get(method), C_SNR, 0.12, "o"), (s.noise.get(method), C_NOISE, -0.12, "s"))
        for est, colour, dy, marker in marks:
            if est is not None:
                ax.errorbar(est.estimate, yk + dy, xerr=[[est.estimate - est.low], [est.high - est.estimate]],
                            fmt=marker, color=colour, ms=6, capsize=3, lw=1.4)
    pooled = [(c.snr.get(method), C_SNR, 0.12, "o"), (c.noise.get(method), C_NOISE, -0.12, "s")]
    for est, colour, dy, marker in pooled:
        if est is not None:
            ax.errorbar(est.estimate, 0 + dy, xerr=[[est.estimate - est.low], [est.high - est.estimate]],
                        fmt=marker, color=colour, mfc="white", ms=8, capsize=4, lw=2.4, mew=2)
    head = c.snr.get(method)
    if head is not None:
        ax.axvspan(head.low, head.high, color=C_SNR, alpha=0.12, lw=0)
    ax.axvline(0.0, color=C_GREY, lw=1.0, ls="--")
    ax.axhline(0.9, color=C_GREY, lw=0.6)
    ax.set_yticks(y + [0], labels + ["pooled (all signals)"], fontsize=9)
    ax.set_ylim(-0.8, len(c.signals) + 1.8)
    ax.set_xlabel("difference B − A (dB)", fontsize=10)
    ax.set_title(f"Per signal and pooled, {pct} intervals", fontsize=10)
    ax.errorbar([], [], xerr=[], fmt="o", color=C_SNR, label="SNR difference")
    ax.errorbar([], [], xerr=[], fmt="s", color=C_NOISE, label="noise-floor difference")
    ax.legend(fontsize=8, loc="upper center", bbox_to_anchor=(0.5, -0.09), ncol=2, frameon=False)
    ax.grid(True, axis="x", lw=0.3, alpha=0.6)

    t = c.pair_times_b
    ok = np.isfinite(c.pair_snr_db)
    ax2.plot(t[ok], c.pair_snr_db[ok], "o-", color=C_SNR, ms=5, lw=1.0, label="SNR difference (mean over signals)")
    okn = np.isfinite(c.pair_noise_db)
    ax2.plot(t[okn], c.pair_noise_db[okn], "s-", color=C_NOISE, ms=4, lw=1.0, label="noise-floor difference")
    if head is not None:
        ax2.axhspan(head.low, head.high, color=C_SNR, alpha=0.12, lw=0, label=f"pooled SNR, {pct}")
        ax2.axhline(head.estimate, color=C_SNR, lw=1.2)
    ax2.axhline(0.0, color=C_GREY, lw=1.0, ls="--")
    ax2.set_xlabel("time of the B capture (s)" if timed else "capture slot (order given: A1 B1 A2 B2 ...)",
                   fontsize=10)
    ax2.set_ylabel("difference B − A (dB)", fontsize=10)
    ax2.set_title("Each pair over the session", fontsize=10)
    ax2.legend(fontsize=8, loc="upper center", bbox_to_anchor=(0.5, -0.09), ncol=2, frameon=False)
    ax2.grid(True, lw=0.3, alpha=0.6)
    if not title:
        title = "On-air comparison of two receive paths"
        if head is not None:
            title += (f": SNR difference B − A {head.estimate:+.2f} dB "
                      f"({pct}: {head.low:+.2f} .. {head.high:+.2f} dB, {len(c.signals)} signals, {c.n_pairs} pairs)"
                      f"\n{VERDICTS.get(c.classification, '')}")
    fig.suptitle(title, fontsize=11)
    with atomic_path(path, overwrite=overwrite) as tmp:
        fig.savefig(tmp, dpi=100, format="png")


# --------------------------------------------------------------------------------------------


def run(args: argparse.Namespace) -> int:
    _check_args(args)
    caps_a = [capture_from_args(p, args) for p in args.a]
    caps_b = [capture_from_args(p, args) for p in args.b]
    warnings = require_comparable(caps_a + caps_b, gain=False)
    ta, tb, time_notes = _times(caps_a, caps_b)
    warnings += time_notes
    warnings += _gain_warnings(caps_a, caps_b)

    shortest = min(c.n_samples for c in caps_a + caps_b)
    nperseg = choose_nperseg(shortest, args.nperseg)
    psds_a, psds_b = [], []
    for caps, psds in ((caps_a, psds_a), (caps_b, psds_b)):
        for cap in caps:
            spectrum, health = accumulate(cap, nperseg)
            warnings += health_warnings(cap.path.name, health, "readings are compressed; lower the gain")
            psds.append(spectrum)

    center = next((c.center_hz for c in caps_a + caps_b if c.center_hz is not None), None)
    if args.max_offset is not None:
        max_offset = args.max_offset
    elif center is not None:
        max_offset = DEFAULT_MAX_PPM * 1e-6 * abs(center)
    else:
        max_offset = caps_a[0].sample_rate_hz / 20.0
    pairs = cmp.pair_captures(ta, tb, n_a=len(caps_a), n_b=len(caps_b))
    warnings += _alternation_warnings(caps_a, caps_b, ta, tb, pairs)
    try:
        c = cmp.compare_paths(
            psds_a, psds_b, times_a_s=ta, times_b_s=tb, confidence=1.0 - args.alpha,
            false_alarm=args.false_alarm, max_offset_hz=max_offset, tolerance_hz=args.tolerance,
            snr_bandwidth_hz=args.snr_bandwidth, method=args.method,
            dc_halfwidth_hz=None if caps_a[0].is_complex else 0.0,
        )
    except ValueError as exc:
        raise MeasurementError(f"cannot compare these captures: {exc}") from None
    warnings += _warnings_from(c, args.alpha)

    if ta is None:
        pairing = "by the order given"
    elif np.allclose(ta[c.pairs[:, 0]], tb[c.pairs[:, 1]], atol=1e-3):
        pairing = "simultaneous, by timestamp"
    else:
        pairing = "alternating, by timestamp"
    snr_est, snr_ci, used = _head(c.snr, c.method)
    noise_est, noise_ci, _ = _head(c.noise, c.method)
    sig_est, sig_ci, _ = _head(c.signal, c.method)
    result = {
        "captures": {"a": [str(x.path) for x in caps_a], "b": [str(x.path) for x in caps_b]},
        "sample_rate_hz": caps_a[0].sample_rate_hz,
        "center_hz": center,
        "pairs": c.n_pairs,
        "pairing": pairing,
        "alpha": args.alpha,
        "confidence": c.confidence,
        "false_alarm": c.false_alarm,
        "method": used,
        "method_name": METHOD_NAMES.get(used or c.method, ""),
        "snr_bandwidth_hz": args.snr_bandwidth,
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
        "summary": summary(c),
        "signals": [_signal_row(s, center, c.method) for s in c.signals],
        "per_pair": [
            {"a": str(caps_a[ia].path), "b": str(caps_b[ib].path),
             "time_a_s": None if ta is None else float(ta[ia]), "time_b_s": None if tb is None else float(tb[ib]),
             "snr_difference_db": float(c.pair_snr_db[i]), "noise_difference_db": float(c.pair_noise_db[i])}
            for i, (ia, ib) in enumerate(c.pairs)
        ],
        "missing_fraction": c.missing_fraction,
        "trend_bias_db": c.trend_bias_db,
        "warnings": warnings,
    }
    if args.plot and c.signals:
        plot(c, Path(args.plot), center_hz=center, timed=ta is not None, overwrite=args.overwrite)
        result["plot"] = str(args.plot)
    elif args.plot:
        warnings.append(f"no plot drawn to {args.plot}: there is nothing to compare")
        result["plot"] = None
    emit(args, result, _human(result, c, center), warnings)
    return 0 if snr_est is not None else 1
