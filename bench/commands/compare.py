"""``rxbench compare --a C ... --b C ...``: on-air A/B comparison of two receive paths.

Reads the captures of both paths and calls :func:`rxbench.methods.compare.compare_paths`; renders the
result as a table, JSON (:meth:`~rxbench.methods.compare.CompareResult.to_dict`), and optionally a PNG.
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

from rxbench.dsp import compare as cmp
from rxbench.errors import UsageError
from rxbench.files import check_output
from rxbench.methods import compare as method
from rxbench.output import add_json_option, emit, fmt_db
from rxbench.quantities import arg as quantity_arg
from rxbench.recordings import add_capture_options, atomic_path, capture_from_args

#: Colours (colour-blind safe, Okabe-Ito).
C_SNR = "#0072B2"
C_NOISE = "#D55E00"
C_POOLED = "#000000"
C_GREY = "#777777"

#: Short verdicts for the plot title.
VERDICTS = {
    "snr-cost": "path B costs SNR: it lowers the signals more than the noise",
    "snr-gain": "path B improves the SNR",
    "external-noise-limited": "path B lowers signal and noise alike: no SNR cost (external noise dominates)",
    "no-significant-difference": "no significant difference at this precision",
}


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
    p.add_argument("--alpha", type=quantity_arg("probability"), default=method.DEFAULT_ALPHA,
                   help="1 - confidence of the intervals (default %(default)g: 95 %% intervals)")
    p.add_argument("--method", choices=cmp.METHODS, default=method.DEFAULT_METHOD,
                   help="headline estimate (both are reported; default %(default)s)")
    p.add_argument("--false-alarm", type=quantity_arg("probability"), default=method.DEFAULT_FALSE_ALARM, metavar="P",
                   help="probability that noise alone is called a signal in a path's mean spectrum "
                        "(default %(default)g)")
    p.add_argument("--max-offset", type=quantity_arg("bandwidth"), metavar="HZ",
                   help=f"largest frequency offset between the paths searched, Hz (default "
                        f"{method.DEFAULT_MAX_PPM:g} ppm of the centre, or 1/20 of the sample rate)")
    p.add_argument("--tolerance", type=quantity_arg("bandwidth"), metavar="HZ",
                   help="frequency matching tolerance once the offset is removed, Hz (default 2 bins)")
    p.add_argument("--snr-bandwidth", type=quantity_arg("bandwidth"), default=method.DEFAULT_SNR_BANDWIDTH_HZ, metavar="HZ",
                   help="noise bandwidth of the SNRs shown, Hz (default %(default)g; differences do not depend on it)")
    p.add_argument("--nperseg", type=int, metavar="N",
                   help="FFT segment length (default 4096, shorter for short captures)")
    p.add_argument("--plot", metavar="FILE.png", help="draw the per-signal and pooled differences to this PNG")
    p.add_argument("--overwrite", action="store_true", help="replace an existing --plot file")
    add_capture_options(p)
    add_json_option(p)
    p.set_defaults(func=run)


# --------------------------------------------------------------------------------------------
# Checks on the options


def _check_args(args) -> None:
    method.check_settings(args.alpha, args.false_alarm, args.max_offset, args.tolerance, args.snr_bandwidth,
                          args.method)
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


# --------------------------------------------------------------------------------------------
# Text


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
    readings_a, readings_b = method.read_paths([capture_from_args(p, args) for p in args.a],
                                               [capture_from_args(p, args) for p in args.b], nperseg=args.nperseg)
    res = method.compare_paths(
        readings_a, readings_b, alpha=args.alpha, method=args.method, false_alarm=args.false_alarm,
        max_offset_hz=args.max_offset, tolerance_hz=args.tolerance, snr_bandwidth_hz=args.snr_bandwidth,
    )
    c = res.comparison
    result = res.to_dict()
    warnings = result["warnings"]
    if args.plot and c.signals:
        plot(c, Path(args.plot), center_hz=res.center_hz, timed=res.times_a_s is not None, overwrite=args.overwrite)
        result["plot"] = str(args.plot)
    elif args.plot:
        warnings.append(f"no plot drawn to {args.plot}: there is nothing to compare")
        result["plot"] = None
    emit(args, result, _human(result, c, res.center_hz), warnings)
    return 0 if res.headline is not None else 1
