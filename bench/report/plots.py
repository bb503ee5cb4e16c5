"""The report's PNG figures, drawn on matplotlib's Agg canvas (no display, no global backend)."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from rxbench.methods.common import COVERAGE_FACTOR
from rxbench.report.text import _mhz, _pm
from rxbench.style import fmt_hz
from rxbench.session import QUIET_GALACTIC, Analysis
from rxbench.spectra_pages import PNG_COMPRESS_LEVEL


#: Colours (colour-blind safe, Okabe-Ito).
C_TRACE = "#0072B2"
C_FLOOR = "#D55E00"
C_TONE = "#009E73"
C_BAD = "#CC0000"
C_GREY = "#777777"
ENV_COLOURS = {"city": "#E69F00", "residential": "#56B4E9", "rural": "#009E73", "quiet-rural": "#CC79A7",
               QUIET_GALACTIC: "#999999"}
C_DIRECT = "#1B3A5C"
C_TRUTH = "#000000"
DPI = 100
#: Where the axes' titles go (axes fraction): given, matplotlib skips its search for tick labels
#: above the axes (there are none on these plots), a quarter of a plot's drawing time.
TITLE_Y = 1.0
#: The label of everything drawn from :class:`SimulatedTruth`.
TRUTH_LABEL = "simulated truth"


@dataclass(frozen=True)
class SimulatedTruth:
    """What the simulated bench knows and a real session cannot: drawn in the demo's plots beside
    the measured points and labelled "simulated truth" (a real session passes none).

    ``frequency_hz`` and ``loss_db``: the device's true insertion loss, sampled; the device is
    passive at 290 K, so its true noise figure is the same curve. ``receiver_nf_db``: the receive
    chain's true noise figure. ``snr_cost_db``: the true SNR cost at each band's frequency (Hz).
    """

    frequency_hz: np.ndarray
    loss_db: np.ndarray
    receiver_nf_db: float | None = None
    snr_cost_db: dict = field(default_factory=dict)


def _figure(width_in: float, height_in: float, *, constrained: bool = True, margins_in: tuple | None = None,
            gap_in: float = 0.0, rows: int = 1):
    """A figure on its own Agg canvas. ``margins_in`` (left, right, bottom, top, in inches) fixes the
    axes' place instead of matplotlib's constrained layout, which costs about as much again as
    drawing the figure (0.85 s of 2.2 s for the ladder, frequency and SNR-cost plots); ``gap_in`` is
    then the space between ``rows`` stacked axes, room for the lower ones' titles."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fixed = margins_in is not None
    fig = Figure(figsize=(width_in, height_in), dpi=DPI, layout="constrained" if constrained and not fixed else None)
    FigureCanvasAgg(fig)
    if fixed:
        left, right, bottom, top = margins_in
        axes_in = (height_in - bottom - top - gap_in * (rows - 1)) / rows
        fig.subplots_adjust(left=left / width_in, right=1 - right / width_in, bottom=bottom / height_in,
                            top=1 - top / height_in, hspace=gap_in / axes_in if rows > 1 else 0.2)
    return fig


def _save(fig, path: Path) -> None:
    fig.savefig(path, dpi=DPI, pil_kwargs={"compress_level": PNG_COMPRESS_LEVEL})


def plot_ladder(lad, path: Path) -> None:
    """Readings against the attenuator setting, and each step's error, of a LadderResult."""
    c = lad.check
    nom, rd, err, uerr = c.nominal_db, c.reading_dbfs, c.error_db, c.k * c.u_error_db
    region, flagged = c.region, c.flagged
    fig = _figure(8.0, 7.0, margins_in=(0.85, 0.15, 0.55, 0.4), gap_in=0.4, rows=2)
    ax1, ax2 = fig.subplots(2, 1, sharex=True, height_ratios=(3, 2))
    span = np.linspace(nom.min(), nom.max(), 50)
    ax1.plot(span, c.offset_dbfs - span, color=C_GREY, lw=1, ls="--", label="ideal (reading = reference − step)")
    styles = {"linear": (C_TRACE, "o", "linear"), "compressed": (C_FLOOR, "s", "compressed (dongle)"),
              "noise-limited": (C_GREY, "D", "noise-limited")}
    for reg, (col, mk, lab) in styles.items():
        sel = np.array([r == reg for r in region])
        if sel.any():
            ax1.plot(nom[sel], rd[sel], mk, color=col, label=lab, ms=6)
            ax2.errorbar(nom[sel], err[sel], yerr=uerr[sel], fmt=mk, color=col, ms=5, capsize=3)
    if flagged.any():
        ax1.plot(nom[flagged], rd[flagged], "o", mfc="none", mec=C_BAD, ms=13, mew=2, label="step off nominal")
        ax2.plot(nom[flagged], err[flagged], "o", mfc="none", mec=C_BAD, ms=13, mew=2)
        for x, y in zip(nom[flagged], err[flagged]):
            ax2.annotate(f"{y:+.2f} dB", (x, y), textcoords="offset points", xytext=(8, 6), color=C_BAD, fontsize=9)
    tol = c.tolerance_db
    ax2.axhspan(-tol, tol, color="#DDDDDD", alpha=0.6, label=f"tolerance ±{tol:g} dB")
    ax2.axhline(0, color=C_GREY, lw=0.8)
    ax1.set_ylabel("tone reading (dBFS)")
    ax1.set_title(f"Ladder at {_mhz(lad.center_hz)}: readings against the attenuator setting", y=TITLE_Y)
    ax1.legend(fontsize=8)
    ax1.grid(True, lw=0.3)
    ax2.set_xlabel("nominal attenuation (dB)")
    ax2.set_ylabel("error: measured − nominal (dB)")
    ax2.set_title(f"step errors with ±U bars (U = {c.k:g}u, about 95 %)", fontsize=10, y=TITLE_Y)
    ax2.legend(fontsize=8, loc="best")
    ax2.grid(True, lw=0.3)
    _save(fig, path)


def _segments(freq, *cols):
    """Split points into runs without gaps wider than 1.5 times their own spacing (one per tuning)."""
    f = np.asarray(freq, dtype=float)
    if f.size < 2:
        return [np.arange(f.size)]
    d = np.diff(f)
    cut = np.flatnonzero(d > 1.5 * np.median(d)) + 1
    return np.split(np.arange(f.size), cut)


def _values(seq) -> np.ndarray:
    return np.array([np.nan if v is None else v for v in seq], dtype=float)


def _bars(k: float, u_seq) -> np.ndarray:
    """Error-bar half-lengths k*u; an unknown (None, non-finite or negative) u draws no bar."""
    u = _values(u_seq)
    return np.where(np.isfinite(u) & (u >= 0), k * u, np.nan)


def _truth_line(ax, truth: SimulatedTruth | None, lo_mhz: float, hi_mhz: float, label: str) -> None:
    """The true loss between ``lo_mhz`` and ``hi_mhz`` as a thin black line (it is known
    everywhere, so a line is right here where the measured points stay points)."""
    if truth is None:
        return
    f = np.asarray(truth.frequency_hz, dtype=float) / 1e6
    sel = (f >= lo_mhz) & (f <= hi_mhz)
    if sel.sum() >= 2:
        ax.plot(f[sel], np.asarray(truth.loss_db)[sel], color=C_TRUTH, lw=1.0, zorder=5, label=label)


def plot_frequency(analysis: Analysis, path: Path, truth: SimulatedTruth | None = None) -> bool:
    """Loss (and noise figure) against frequency: each sub-band a point with its ±U bar (no lines
    joining noisy points into a ripple that is not there), the tone losses beside them, and in the
    noise-figure panel the passive device's "NF = loss" reference at each tuning's whole-band loss.
    With ``truth`` (the demo), the simulated bench's true loss and noise figures beside them."""
    curve = analysis.loss_vs_frequency
    tone_losses = [x for x in analysis.losses if x.frequency_hz is not None]
    if curve is None and not tone_losses:
        return False
    has_nf = curve is not None and bool(curve["frequency_hz"])
    fig = _figure(9.0, 7.5 if has_nf else 4.5, margins_in=(0.75, 0.15, 0.55, 0.35), gap_in=0.45,
                  rows=2 if has_nf else 1)
    axes = fig.subplots(2 if has_nf else 1, 1, sharex=True, squeeze=False).ravel()
    ax1 = axes[0]
    k = COVERAGE_FACTOR
    xs = [x.frequency_hz / 1e6 for x in tone_losses]
    if curve is not None and curve["has_loss"]:
        f = np.array(curve["frequency_hz"]) / 1e6
        xs += list(f)
        ax1.errorbar(f, _values(curve["insertion_loss_db"]), yerr=_bars(k, curve["u_insertion_loss_db"]),
                     fmt="o", color=C_TRACE, ms=3.5, elinewidth=0.9, capsize=0,
                     label=f"noise source, per sub-band (±U, k = {k:g})")
    markers = {"direct": ("s", C_FLOOR), "substitution": ("D", C_TONE)}
    seen = set()
    for x in tone_losses:
        mk, col = markers.get(x.method, ("o", C_GREY))
        lab = None if x.method in seen else f"tone, {x.method} (±U, k = 2)"
        seen.add(x.method)
        ax1.errorbar([x.frequency_hz / 1e6], [x.insertion_loss_db], yerr=[x.expanded_uncertainty_db],
                     fmt=mk, color=col, ms=7, capsize=4, label=lab, zorder=4)
    if len(set(np.round(xs, 6))) == 1:  # one frequency: a labelled point, not an empty axis
        for x in tone_losses:
            ax1.annotate(f"{x.method}: {_pm(x.insertion_loss_db, x.expanded_uncertainty_db)}",
                         (x.frequency_hz / 1e6, x.insertion_loss_db), xytext=(10, 0),
                         textcoords="offset points", va="center", fontsize=8)
        ax1.set_xlim(xs[0] - 0.075, xs[0] + 0.075)
        centre = float(np.mean([x.insertion_loss_db for x in tone_losses]))
        half = max(0.25, 3 * max(x.expanded_uncertainty_db for x in tone_losses))
        ax1.set_ylim(centre - half, centre + half)
    lo_mhz, hi_mhz = ax1.get_xlim()
    _truth_line(ax1, truth, lo_mhz, hi_mhz, TRUTH_LABEL)
    ax1.set_xlim(lo_mhz, hi_mhz)
    ax1.set_ylabel("insertion loss (dB)")
    ax1.set_title("Insertion loss of the device under test against frequency", y=TITLE_Y)
    ax1.grid(True, lw=0.3)
    ax1.legend(fontsize=8, loc="best")
    if has_nf:
        ax2 = axes[1]
        f = np.array(curve["frequency_hz"]) / 1e6
        for key, ukey, col, mk, lab in (
                ("noise_figure_db", "u_noise_figure_db", C_FLOOR, "o", "receiver (dongle)"),
                ("dut_noise_figure_db", "u_dut_noise_figure_db", C_TONE, "D", "device under test")):
            vals = _values(curve[key])
            if np.all(np.isnan(vals)):
                continue
            ax2.errorbar(f, vals, yerr=_bars(k, curve[ukey]), fmt=mk, color=col, ms=3.5, elinewidth=0.9,
                         capsize=0, label=f"{lab}, per sub-band (±U, k = {k:g})")
        first = True
        for n in analysis.noise_figure:  # a passive device at 290 K: its noise figure is its loss
            if not n.has_dut or n.center_hz is None:
                continue
            lo, hi = ((n.center_hz + v) / 1e6 for v in n.band_hz)  # band_hz: offsets from the centre
            ax2.plot([lo, hi], [n.insertion_loss_db] * 2, color=C_GREY, lw=1.6, ls="--",
                     label="NF = loss (passive device at 290 K; whole-band loss)" if first else None)
            first = False
        _truth_line(ax2, truth, lo_mhz, hi_mhz, f"{TRUTH_LABEL}: device (passive at 290 K: NF = loss)")
        if truth is not None and truth.receiver_nf_db is not None:
            ax2.axhline(truth.receiver_nf_db, color=C_TRUTH, lw=1.0, ls="-.", zorder=5,
                        label=f"{TRUTH_LABEL}: receiver")
        ax2.set_ylabel("noise figure (dB)")
        ax2.set_title("Noise figure (Y-factor) against frequency", y=TITLE_Y)
        ax2.grid(True, lw=0.3)
        ax2.legend(fontsize=8)
    axes[-1].set_xlabel("frequency (MHz)")
    _save(fig, path)
    return True


#: Bottom of the SNR-cost plot's log axis, dB (costs below it are drawn at it and labelled).
SNR_COST_FLOOR_DB = 0.003


def plot_snr_cost(analysis: Analysis, path: Path, truth: SimulatedTruth | None = None) -> bool:
    """The SNR the loss costs per band: measured (±U), predicted for the P.372 environments, the
    loss itself for scale; with ``truth`` (the demo), the true cost as a black bar across the
    measured ones."""
    costs = analysis.snr_cost
    if not costs:
        return False
    envs = [e for e in ENV_COLOURS if any(c.predicted and e in c.predicted for c in costs)]
    through = any(c.through_dut_db is not None for c in costs)
    n_bars = 1 + int(through) + len(envs)
    width = 0.8 / n_bars
    fig = _figure(max(7.0, 2.6 * len(costs) + 3.0), 5.2, margins_in=(0.75, 0.15, 0.65, 0.35))
    ax = fig.subplots()
    x = np.arange(len(costs))
    left = x - 0.4 + width / 2

    def labelled(bars, values, bold=False):
        for b, v in zip(bars, values):
            if np.isfinite(v):
                ax.annotate(f"{v:.2f}" if v >= 0.095 else f"{v:.3f}", (b.get_x() + b.get_width() / 2, v), textcoords="offset points",
                            xytext=(0, 10 if bold else 2), ha="center", fontsize=9 if bold else 7,
                            fontweight="bold" if bold else "normal")

    meas = np.array([c.snr_degradation_db for c in costs])
    err = np.array([c.expanded_uncertainty_db for c in costs])
    labelled(ax.bar(left, meas, width, yerr=err, capsize=4, color=C_TRACE,
                    label="measured: loss and band-noise excess (±U, k = 2)"), meas, bold=True)
    j = 1
    if through:
        vals = np.array([np.nan if c.through_dut_db is None
                         else c.through_dut_db for c in costs])
        errs = np.array([c.expanded_uncertainty_through_dut_db or 0.0 for c in costs])
        labelled(ax.bar(left + width, vals, width, yerr=errs, capsize=4, color=C_DIRECT,
                        label="measured: antenna through the device (±U, k = 2)"), vals, bold=True)
        j = 2
    for i, e in enumerate(envs):
        vals = np.array([c.predicted.get(e, np.nan) if c.predicted else np.nan for c in costs])
        labelled(ax.bar(left + (j + i) * width, vals, width, color=ENV_COLOURS[e], alpha=0.8,
                        label=f"predicted: ITU-R P.372 {e}"), vals)
    for xi, c in zip(x, costs):
        ax.hlines(c.loss_db, xi - 0.45, xi + 0.45, colors=C_BAD, linestyles=":", lw=1.5)
    ax.plot([], [], ":", color=C_BAD, label="the loss itself (the cost if the receiver's noise dominated)")
    if truth is not None:  # one black bar per band across its measured bars
        spans = [(truth.snr_cost_db[c.frequency_hz], xi - 0.4,
                  xi - 0.4 + (1 + int(c.through_dut_db is not None)) * width)
                 for xi, c in zip(x, costs) if c.frequency_hz in truth.snr_cost_db]
        if spans:
            ax.hlines(*zip(*spans), colors=C_TRUTH, lw=2.0, zorder=5, label=TRUTH_LABEL)
    labels = [f"{c.band}, {fmt_hz(c.frequency_hz)}\nloss {c.loss_db:.2f} dB, band noise "
              f"{c.excess_db:.1f} dB over the receiver's" for c in costs]
    ax.set_xticks(x, labels, fontsize=8)
    ax.set_ylabel("SNR lost to the device (dB, log scale)")
    ax.set_title("What the loss costs in signal-to-noise ratio, per band", y=TITLE_Y)
    # A log scale: the costs that matter (0.01-0.4 dB) stay visible beside the loss itself (several dB).
    from matplotlib.ticker import FuncFormatter

    top = float(np.nanmax(np.append(meas + err, [c.loss_db for c in costs])))
    ax.set_yscale("log")
    ax.set_ylim(SNR_COST_FLOOR_DB, top * 12)
    ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
    ax.grid(True, axis="y", lw=0.3)
    ax.legend(fontsize=7.5, loc="upper left", ncols=2)
    _save(fig, path)
    return True


