"""The report's PNG figures, drawn on matplotlib's Agg canvas (no display, no global backend)."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from rxbench.dsp.units import db_from_power
from rxbench.report.text import _mhz
from rxbench.session import QUIET_GALACTIC, Analysis


#: Capture panels per spectra page.
PANELS_PER_PAGE = 12
#: Colours (colour-blind safe, Okabe-Ito).
C_TRACE = "#0072B2"
C_FLOOR = "#D55E00"
C_TONE = "#009E73"
C_BAD = "#CC0000"
C_GREY = "#777777"
ENV_COLOURS = {"city": "#E69F00", "residential": "#56B4E9", "rural": "#009E73", "quiet-rural": "#CC79A7",
               QUIET_GALACTIC: "#999999"}
C_DIRECT = "#1B3A5C"
DPI = 100


def _figure(width_in: float, height_in: float, *, constrained: bool = True):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width_in, height_in), dpi=DPI, layout="constrained" if constrained else None)
    FigureCanvasAgg(fig)
    return fig


def _save(fig, path: Path) -> None:
    fig.savefig(path, dpi=DPI)


def _spectrum_panel(ax, entry, reading) -> None:
    psd, floor, tone = reading.psd, reading.floor, reading.tone
    cap = entry.capture
    f_khz = psd.frequency_hz / 1e3
    dens_db = db_from_power(np.maximum(psd.density, 1e-300))
    ax.plot(f_khz, dens_db, color=C_TRACE, lw=0.6, alpha=0.8, label="spectrum", zorder=2)
    floor_db = db_from_power(floor.density)
    ax.axhline(floor_db, color="black", lw=1.6, ls="--", zorder=3, label=f"noise floor {floor_db:.1f} dBFS/Hz")
    top = float(np.max(dens_db))
    if tone is not None and entry.role in ("thru", "dut", "step"):
        k = psd.index_of(tone.offset_hz)
        ax.plot([tone.offset_hz / 1e3], [dens_db[k] + 2.5], marker="v", ms=9, color=C_TONE, ls="none", zorder=4,
                label=f"tone {tone.power_dbfs:.2f} dBFS at {tone.offset_hz / 1e3:+.2f} kHz")
    ax.set_ylim(floor_db - 15, max(top, floor_db + 10) + 6)
    ax.set_xlim(f_khz[0], f_khz[-1])
    centre = "" if cap.center_hz is None else f" from {cap.center_hz / 1e6:.3f} MHz"
    ax.set_xlabel(f"offset{centre} (kHz)", fontsize=8)
    ax.set_ylabel("dBFS/Hz", fontsize=8)
    att = "" if entry.attenuation_db is None else f", {entry.attenuation_db:g} dB"
    dut = ", with DUT" if entry.through_dut and entry.role != "dut" else ""
    ax.set_title(f"{entry.name}  ({entry.role}{att}{dut})", fontsize=9)
    ax.tick_params(labelsize=7)
    ax.grid(True, lw=0.3, alpha=0.6)
    ax.legend(fontsize=7, loc="upper right", framealpha=0.85)


def plot_spectra(analysis: Analysis, folder: Path) -> list[str]:
    """One or more pages of capture spectra; returns the file names written."""
    items = [(e, analysis.readings[e]) for e in analysis.session.entries if e in analysis.readings]
    names = []
    for page, start in enumerate(range(0, len(items), PANELS_PER_PAGE), start=1):
        chunk = items[start:start + PANELS_PER_PAGE]
        cols = 3 if len(chunk) > 4 else min(len(chunk), 2)
        rows = math.ceil(len(chunk) / cols)
        height = 3.0 * rows + 0.5
        # Fixed margins (a constrained layout of many panels costs more than the drawing itself).
        fig = _figure(5.0 * cols, height, constrained=False)
        fig.subplots_adjust(left=0.06 if cols > 1 else 0.12, right=0.98, bottom=0.55 / height * 1.1,
                            top=1.0 - 0.75 / height, hspace=0.55, wspace=0.25)
        axes = np.atleast_1d(fig.subplots(rows, cols, squeeze=False)).ravel()
        for ax, (e, r) in zip(axes, chunk):
            _spectrum_panel(ax, e, r)
        for ax in axes[len(chunk):]:
            ax.set_visible(False)
        fig.suptitle(f"Capture spectra (page {page}): tone marked ▼, noise floor dashed", fontsize=11)
        name = f"spectra-{page:02d}.png"
        _save(fig, folder / name)
        names.append(name)
    return names


def plot_ladder(lad: dict, path: Path) -> None:
    steps = lad["steps"]
    nom = np.array([s["nominal_db"] for s in steps])
    rd = np.array([s["reading_dbfs"] for s in steps])
    err = np.array([s["error_db"] for s in steps])
    uerr = np.array([s["expanded_error_uncertainty_db"] for s in steps])
    region = [s["region"] for s in steps]
    flagged = np.array([s["flagged"] for s in steps])
    fig = _figure(8.0, 7.0)
    ax1, ax2 = fig.subplots(2, 1, sharex=True, height_ratios=(3, 2))
    span = np.linspace(nom.min(), nom.max(), 50)
    ax1.plot(span, lad["offset_dbfs"] - span, color=C_GREY, lw=1, ls="--", label="ideal (reading = reference − step)")
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
    tol = lad["tolerance_db"]
    ax2.axhspan(-tol, tol, color="#DDDDDD", alpha=0.6, label=f"tolerance ±{tol:g} dB")
    ax2.axhline(0, color=C_GREY, lw=0.8)
    ax1.set_ylabel("tone reading (dBFS)")
    ax1.set_title(f"Ladder at {_mhz(lad['center_hz'])}: readings against the attenuator setting")
    ax1.legend(fontsize=8)
    ax1.grid(True, lw=0.3)
    ax2.set_xlabel("nominal attenuation (dB)")
    ax2.set_ylabel("error: measured − nominal (dB)")
    ax2.set_title(f"step errors with ±{lad['k']:g}u bars", fontsize=10)
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


def plot_frequency(analysis: Analysis, path: Path) -> bool:
    curve = analysis.loss_vs_frequency
    tone_losses = [x for x in analysis.losses if x["frequency_hz"] is not None]
    if curve is None and not tone_losses:
        return False
    has_nf = curve is not None and bool(curve["frequency_hz"])
    fig = _figure(9.0, 7.5 if has_nf else 4.5)
    axes = fig.subplots(2 if has_nf else 1, 1, sharex=True, squeeze=False).ravel()
    ax1 = axes[0]
    k = 2.0
    if curve is not None and curve["has_loss"]:
        f = np.array(curve["frequency_hz"]) / 1e6
        loss = np.array([np.nan if v is None else v for v in curve["insertion_loss_db"]], dtype=float)
        u = np.array([np.nan if v is None else v for v in curve["u_insertion_loss_db"]], dtype=float)
        for i, idx in enumerate(_segments(f)):
            ax1.fill_between(f[idx], loss[idx] - k * u[idx], loss[idx] + k * u[idx], color=C_TRACE, alpha=0.25,
                             lw=0, label="noise source ±2u" if i == 0 else None)
            ax1.plot(f[idx], loss[idx], "-o", color=C_TRACE, ms=3, lw=1.2,
                     label="noise source (per sub-band)" if i == 0 else None)
    markers = {"direct": ("s", C_FLOOR), "substitution": ("D", C_TONE)}
    seen = set()
    for x in tone_losses:
        mk, col = markers.get(x["method"], ("o", C_GREY))
        lab = None if x["method"] in seen else f"tone, {x['method']} (±U)"
        seen.add(x["method"])
        ax1.errorbar([x["frequency_hz"] / 1e6], [x["insertion_loss_db"]], yerr=[x["expanded_uncertainty_db"]],
                     fmt=mk, color=col, ms=7, capsize=4, label=lab)
    ax1.set_ylabel("insertion loss (dB)")
    ax1.set_title("Insertion loss of the device under test against frequency")
    ax1.grid(True, lw=0.3)
    ax1.legend(fontsize=8)
    if has_nf:
        ax2 = axes[1]
        f = np.array(curve["frequency_hz"]) / 1e6
        for key, ukey, col, lab in (("noise_figure_db", "u_noise_figure_db", C_FLOOR, "receiver (dongle)"),
                                    ("dut_noise_figure_db", "u_dut_noise_figure_db", C_TONE, "device under test")):
            vals = np.array([np.nan if v is None else v for v in curve[key]], dtype=float)
            if np.all(np.isnan(vals)):
                continue
            u = np.array([np.nan if v is None else v for v in curve[ukey]], dtype=float)
            for i, idx in enumerate(_segments(f)):
                ax2.fill_between(f[idx], vals[idx] - k * u[idx], vals[idx] + k * u[idx], color=col, alpha=0.25, lw=0)
                ax2.plot(f[idx], vals[idx], "-o", color=col, ms=3, lw=1.2, label=f"{lab} ±2u" if i == 0 else None)
        ax2.set_ylabel("noise figure (dB)")
        ax2.set_title("Noise figure (Y-factor) against frequency")
        ax2.grid(True, lw=0.3)
        ax2.legend(fontsize=8)
    axes[-1].set_xlabel("frequency (MHz)")
    _save(fig, path)
    return True


def plot_snr_cost(analysis: Analysis, path: Path) -> bool:
    costs = analysis.snr_cost
    if not costs:
        return False
    envs = [e for e in ENV_COLOURS if any(c["predicted"] and e in c["predicted"] for c in costs)]
    through = any(c.get("snr_degradation_through_dut_db") is not None for c in costs)
    n_bars = 1 + int(through) + len(envs)
    width = 0.8 / n_bars
    fig = _figure(max(7.0, 2.6 * len(costs) + 3.0), 5.2)
    ax = fig.subplots()
    x = np.arange(len(costs))
    left = x - 0.4 + width / 2

    def labelled(bars, values, bold=False):
        for b, v in zip(bars, values):
            if np.isfinite(v):
                ax.annotate(f"{v:.2f}", (b.get_x() + b.get_width() / 2, v), textcoords="offset points",
                            xytext=(0, 10 if bold else 2), ha="center", fontsize=9 if bold else 7,
                            fontweight="bold" if bold else "normal")

    meas = np.array([c["snr_degradation_db"] for c in costs])
    err = np.array([c["expanded_uncertainty_db"] for c in costs])
    labelled(ax.bar(left, meas, width, yerr=err, capsize=4, color=C_TRACE,
                    label="measured: loss and band-noise excess (±U)"), meas, bold=True)
    j = 1
    if through:
        vals = np.array([np.nan if c.get("snr_degradation_through_dut_db") is None
                         else c["snr_degradation_through_dut_db"] for c in costs])
        errs = np.array([c.get("expanded_uncertainty_through_dut_db") or 0.0 for c in costs])
        labelled(ax.bar(left + width, vals, width, yerr=errs, capsize=4, color=C_DIRECT,
                        label="measured: antenna through the device (±U)"), vals, bold=True)
        j = 2
    for i, e in enumerate(envs):
        vals = np.array([c["predicted"].get(e, np.nan) if c["predicted"] else np.nan for c in costs])
        labelled(ax.bar(left + (j + i) * width, vals, width, color=ENV_COLOURS[e], alpha=0.8,
                        label=f"predicted: ITU-R P.372 {e}"), vals)
    for xi, c in zip(x, costs):
        ax.hlines(c["loss_db"], xi - 0.45, xi + 0.45, colors=C_BAD, linestyles=":", lw=1.5)
    ax.plot([], [], ":", color=C_BAD, label="the loss itself (the cost if the receiver's noise dominated)")
    labels = [f"{c['band']}, {c['frequency_hz'] / 1e6:.3f} MHz\nloss {c['loss_db']:.2f} dB, band noise "
              f"{c['excess_db']:.1f} dB over the receiver's" for c in costs]
    ax.set_xticks(x, labels, fontsize=8)
    ax.set_ylabel("SNR lost to the device (dB)")
    ax.set_title("What the loss costs in signal-to-noise ratio, per band")
    top = float(np.nanmax(np.append(meas + err, [c["loss_db"] for c in costs])))
    ax.set_ylim(0, top * 1.45 + 0.2)
    ax.grid(True, axis="y", lw=0.3)
    ax.legend(fontsize=7.5, loc="upper left", ncols=2)
    _save(fig, path)
    return True
