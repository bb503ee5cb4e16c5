"""The report of a session: ``report.md``, ``results.json``, ``results.csv`` and PNG plots.

Where it goes: a new folder inside the session, ``report/`` the first time, then ``report-2/``,
``report-3/``, ... so that no earlier report is ever overwritten. With ``overwrite=True`` the
report goes to ``report/`` again, replacing the one there (only that folder; captures are never
touched). The report is built in a hidden temporary folder and renamed into place when complete,
so a report folder is never left half-written.

Plots are drawn with matplotlib's Agg canvas (no display, no global backend switch):

- ``spectra-NN.png``: the spectrum of every capture, with the tone and the noise floor marked;
- ``ladder-*.png``: ladder readings against nominal attenuation, and each step's error;
- ``frequency.png``: insertion loss and noise figure against frequency, with uncertainty bands;
- ``snr-cost.png``: the SNR the loss costs on each band, measured and as predicted for the
  ITU-R P.372 environments.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
import shutil
import tomllib
from pathlib import Path

import numpy as np

from rxbench.files import is_recording
from rxbench.errors import UsageError
from rxbench.output import CAUTIONS, json_safe, fmt_db
from rxbench.session import QUIET_GALACTIC, Analysis
from rxbench.dsp.units import db_from_power

REPORT_DIR = "report"
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



# --------------------------------------------------------------------------------------------
# Where the report goes


def next_report_dir(session_folder, *, overwrite: bool = False) -> Path:
    """``report/`` (or with ``overwrite``, ``report/`` even when it exists), else the first free
    ``report-N/``."""
    folder = Path(session_folder)
    first = folder / REPORT_DIR
    if overwrite or not first.exists():
        return first
    for n in range(2, 10000):
        cand = folder / f"{REPORT_DIR}-{n}"
        if not cand.exists():
            return cand
    raise UsageError(f"{folder}: 10000 reports already; remove old ones or use --overwrite")


def _install(tmp: Path, final: Path, overwrite: bool) -> Path:
    """Rename the finished temporary folder into place (never over an existing one unless asked)."""
    if final.exists():
        if not overwrite:
            raise UsageError(f"{final}: already exists; not overwriting it")
        if not final.is_dir():
            raise UsageError(f"{final}: exists and is not a folder; not replacing it")
        if any(is_recording(p) for p in final.rglob("*")):
            raise UsageError(f"{final}: holds a recording; --overwrite never replaces one (move it out first)")
        old = final.parent / f".{final.name}.old-{os.urandom(4).hex()}"
        os.rename(final, old)
        os.rename(tmp, final)
        shutil.rmtree(old, ignore_errors=True)
        return final
    os.rename(tmp, final)
    return final


# --------------------------------------------------------------------------------------------
# Text helpers


def _pm(value, u, digits=2, unit="dB") -> str:
    """``value ± u`` in dB; a third decimal when the uncertainty would otherwise print as 0.0x."""
    if value is None:
        return "n/a"
    if u is None or not math.isfinite(u):
        return f"{fmt_db(value, digits)} {unit}"
    if u < 0.05:
        digits = max(digits, 3)
    return f"{fmt_db(value, digits)} ± {u:.{digits}f} {unit}"


def _mhz(f) -> str:
    return "n/a" if f is None else f"{f / 1e6:.4f} MHz"


def plan_title(analysis: Analysis) -> str:
    """The plan's title, read as data from the session's copy of the plan ('' when none)."""
    p = analysis.session.plan_path
    if p is None:
        return ""
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, RecursionError, tomllib.TOMLDecodeError):
        return ""
    title = data.get("title")
    return title if isinstance(title, str) else ""


def summary_lines(analysis: Analysis) -> list[str]:
    """A few lines with the headline numbers (expanded uncertainties, k = 2)."""
    lines = []
    for x in analysis.losses:
        per = ""
        if x["n_devices"] > 1:
            per = f"; per device {_pm(x['per_device_db'], x['expanded_uncertainty_per_device_db'])}"
        lines.append(f"insertion loss ({x['method']}, device at {x['dut_attenuation_db']:g} dB) at "
                     f"{_mhz(x['frequency_hz'])}: {_pm(x['insertion_loss_db'], x['expanded_uncertainty_db'])}{per}")
    for lad in analysis.ladders:
        flagged = [s for s in lad["steps"] if s["flagged"]]
        text = (f"ladder at {_mhz(lad['center_hz'])}: {len(lad['steps'])} steps, dongle linear from "
                f"{lad['usable_top_db']:g} to {lad['usable_bottom_db']:g} dB")
        if lad["compression_db"] > 0:
            text += f", compressed {lad['compression_db']:.2f} dB at the top"
        if flagged:
            text += "; off: " + ", ".join(f"{s['nominal_db']:g} dB ({s['error_db']:+.2f} dB)" for s in flagged)
        lines.append(text)
    for n in analysis.noise_figure:
        text = (f"noise figure (receiver) at {_mhz(n['center_hz'])}: "
                f"{_pm(n['noise_figure_db'], n['expanded_uncertainty_db'])}")
        if n.get("insertion_loss_db") is not None:
            text += (f"; {n.get('device') or 'DUT'} loss over the band "
                     f"{_pm(n['insertion_loss_db'], n['expanded_uncertainty_loss_db'])}")
        lines.append(text)
    for ex in analysis.external_noise:
        lines.append(f"band noise on {ex['band']} ({_mhz(ex['frequency_hz'])}): "
                     f"{_pm(ex['excess_db'], ex['expanded_uncertainty_db'])} above the receiver's own")
    for c in analysis.snr_cost:
        text = (f"SNR cost on {c['band']} ({_mhz(c['frequency_hz'])}): "
                f"{_pm(c['snr_degradation_db'], c['expanded_uncertainty_db'])} for a loss of {c['loss_db']:.2f} dB")
        if c.get("snr_degradation_through_dut_db") is not None:
            text += (f" (antenna through the device: "
                     f"{_pm(c['snr_degradation_through_dut_db'], c['expanded_uncertainty_through_dut_db'])})")
        lines.append(text)
    if not lines:
        lines.append("no measurement could be made from these captures (see the warnings)")
    return lines


# --------------------------------------------------------------------------------------------
# Plots


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


# --------------------------------------------------------------------------------------------
# Tables


def csv_rows(analysis: Analysis) -> list[dict]:
    """One row per reported number: section, quantity, frequency, value, unit, expanded uncertainty."""
    rows = []

    def add(section, quantity, frequency_hz, value, unit, expanded=None, method="", detail=""):
        rows.append({"section": section, "quantity": quantity, "frequency_hz": frequency_hz,
                     "value": value, "unit": unit, "expanded_uncertainty": expanded,
                     "k": 2.0 if expanded is not None else None, "method": method, "detail": detail})

    for c in analysis.captures:
        t = c.get("tone")
        if t and t.get("power_dbfs") is not None:
            u = t.get("u_power_db")
            add("capture", "tone_power", t.get("frequency_hz"), t["power_dbfs"], "dBFS",
                None if u is None else 2 * u, "tone", c["name"])
        if c.get("noise"):
            add("capture", "noise_density", c["center_hz"], c["noise"]["density_dbfs_per_hz"], "dBFS/Hz",
                2 * c["noise"]["u_density_db"], "", c["name"])
    for x in analysis.losses:
        add("loss", "insertion_loss", x["frequency_hz"], x["insertion_loss_db"], "dB",
            x["expanded_uncertainty_db"], x["method"])
        if x["n_devices"] > 1:
            add("loss", "insertion_loss_per_device", x["frequency_hz"], x["per_device_db"], "dB",
                x["expanded_uncertainty_per_device_db"], x["method"])
    for lad in analysis.ladders:
        for s in lad["steps"]:
            add("ladder", "step_error", lad["frequency_hz"], s["error_db"], "dB", s["expanded_error_uncertainty_db"],
                s["region"], f"nominal {s['nominal_db']:g} dB" + (" FLAGGED" if s["flagged"] else ""))
    for n in analysis.noise_figure:
        add("noise_figure", "receiver_noise_figure", n["center_hz"], n["noise_figure_db"], "dB",
            n["expanded_uncertainty_db"], "y-factor", "whole band")
        if n.get("insertion_loss_db") is not None:
            add("noise_figure", "insertion_loss", n["center_hz"], n["insertion_loss_db"], "dB",
                n["expanded_uncertainty_loss_db"], "noise source", "whole band")
    curve = analysis.loss_vs_frequency
    if curve is not None:
        for i, f in enumerate(curve["frequency_hz"]):
            add("vs_frequency", "receiver_noise_figure", f, curve["noise_figure_db"][i], "dB",
                2 * curve["u_noise_figure_db"][i], "y-factor", "sub-band")
            if curve["insertion_loss_db"][i] is not None:
                add("vs_frequency", "insertion_loss", f, curve["insertion_loss_db"][i], "dB",
                    2 * curve["u_insertion_loss_db"][i], "noise source", "sub-band")
                add("vs_frequency", "dut_noise_figure", f, curve["dut_noise_figure_db"][i], "dB",
                    2 * curve["u_dut_noise_figure_db"][i], "noise source", "sub-band")
    for ex in analysis.external_noise:
        add("external_noise", "excess", ex["frequency_hz"], ex["excess_db"], "dB", ex["expanded_uncertainty_db"],
            "antenna/load", ex["band"])
        if ex.get("fa_db") is not None:
            add("external_noise", "fa", ex["frequency_hz"], ex["fa_db"], "dB", None, "from excess and NF", ex["band"])
    for c in analysis.snr_cost:
        add("snr_cost", "snr_degradation", c["frequency_hz"], c["snr_degradation_db"], "dB",
            c["expanded_uncertainty_db"], "from loss and excess", c["band"])
        if c.get("snr_degradation_through_dut_db") is not None:
            add("snr_cost", "snr_degradation", c["frequency_hz"], c["snr_degradation_through_dut_db"], "dB",
                c["expanded_uncertainty_through_dut_db"], "antenna through the device", c["band"])
        for env, v in (c["predicted"] or {}).items():
            add("snr_cost", "snr_degradation_predicted", c["frequency_hz"], v, "dB", None, f"ITU-R P.372 {env}",
                c["band"])
    return rows


def write_csv(rows: list[dict], path: Path) -> None:
    fields = ["section", "quantity", "frequency_hz", "value", "unit", "expanded_uncertainty", "k", "method", "detail"]
    with open(path, "w", newline="", encoding="utf-8") as f:
        w = csv.DictWriter(f, fieldnames=fields)
        w.writeheader()
        for r in rows:
            w.writerow({k: ("" if r[k] is None else (f"{r[k]:.6g}" if isinstance(r[k], float) else r[k]))
                        for k in fields})


def _mismatch_sentence(losses: list[dict]) -> str:
    """What the loss budgets say about mismatch between generator, attenuator, device and dongle."""
    assessed = [x for x in losses if any(c["name"].startswith("mismatch") and c["u_db"] > 0 for c in x["budget"])]
    if len(assessed) == len(losses):
        return ("Mismatch between generator, attenuator, device and dongle is in these budgets, from the "
                "plan's `[match]` SWRs (first-order terms, U-shaped; Harris & Warner 1981).")
    return ("Mismatch between generator, attenuator, device and dongle is not assessed in "
            f"{'these budgets' if not assessed else 'some of these budgets'} (a zero line marks it): give "
            "the SWRs in the plan's `[match]` table (`source_swr`, `load_swr`, `dut_swr`). It is commonly "
            "a few tenths of a dB, more with a bare dongle input (Harris & Warner 1981).")


def _table(header: list[str], rows: list[list]) -> str:
    out = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    for r in rows:
        out.append("| " + " | ".join(str(c) for c in r) + " |")
    return "\n".join(out)


def _f(v, d=2) -> str:
    return "n/a" if v is None else fmt_db(v, d)


def markdown(analysis: Analysis, plots: dict, extra_markdown: str | None = None) -> str:
    s = analysis.session
    title = plan_title(analysis)
    md = io.StringIO()
    w = md.write
    w(f"# rxbench report: {s.folder.name}\n\n")
    if title:
        w(f"Plan: *{title}*\n\n")
    simulated = any(e.capture.extra.get("simulated") for e in s.entries)
    w(f"{len(s.entries)} captures analysed" + (" (from the simulated bench: invented data)" if simulated else "")
      + f"; {len(s.incomplete)} incomplete and {len(s.skipped)} unusable left out. Uncertainties are "
      "expanded uncertainties U = k·u with k = 2 (about 95 %), JCGM 100:2008 (GUM).\n\n")
    w("## Summary\n\n")
    for line in summary_lines(analysis):
        w(f"- {line}\n")
    w("\n")
    if extra_markdown:
        w(extra_markdown.rstrip() + "\n\n")

    if analysis.losses:
        w("## Insertion loss (tone)\n\n")
        w("Direct: the thru reading minus the DUT reading at the same generator level (a thru after the "
          "DUT removes linear drift). Substitution: the ladder setting that reads like the DUT, "
          "interpolated (PCHIP) between the neighbouring steps, so the dongle serves only as a "
          "comparator (Kaylie 1966).\n\n")
        rows = []
        for x in analysis.losses:
            rows.append([x["method"], f"{x['dut_attenuation_db']:g}", _mhz(x["frequency_hz"]), _f(x["insertion_loss_db"], 3),
                         _f(x["expanded_uncertainty_db"], 3), x["n_devices"], _f(x["per_device_db"], 3),
                         "" if x["drift_db"] is None else f"{x['drift_db']:+.3f}",
                         "" if x["bracket_db"] is None else f"{x['bracket_db'][0]:g}–{x['bracket_db'][1]:g} dB"])
        w(_table(["method", "device at (dB)", "frequency", "loss (dB)", "U (dB)", "devices", "per device (dB)",
                  "thru drift (dB)", "between steps"], rows) + "\n\n")
        w(_mismatch_sentence(analysis.losses) + "\n\n")
        for x in analysis.losses:
            nu = x["dof_eff"]
            nu_text = "> 1000" if nu is None or not math.isfinite(nu) or nu > 1000 else f"{nu:.0f}"
            w(f"Budget, {x['method']} with the device at {x['dut_attenuation_db']:g} dB "
              f"(u_c = {x['u_db']:.3f} dB, ν_eff = {nu_text}):\n\n")
            w(_table(["component", "u (dB)", "sensitivity", "contribution (dB)", "type", "note"],
                     [[c["name"], f"{c['u_db']:.4f}", f"{c['sensitivity']:.3f}", f"{c['contribution_db']:.4f}",
                       f"{c['kind']}, {c['distribution']}", c["note"]] for c in x["budget"]]) + "\n\n")

    for lad, name in zip(analysis.ladders, plots.get("ladder", [])):
        w(f"## Ladder check at {_mhz(lad['center_hz'])}\n\n")
        w(f"Errors against a robust reference ({lad['reference']} of the linear steps); a step whose error "
          f"exceeds ±{lad['tolerance_db']:g} dB in the dongle's linear range is flagged (the attenuator, "
          f"not the dongle). The dongle read linearly from {lad['usable_top_db']:g} dB "
          f"(limited by {lad['top_limited_by']}) to {lad['usable_bottom_db']:g} dB "
          f"(limited by {lad['bottom_limited_by']}).\n\n")
        w(_table(["nominal (dB)", "reading (dBFS)", "measured (dB)", "error (dB)", "U (dB)", "region", "flag"],
                 [[f"{st['nominal_db']:g}", _f(st["reading_dbfs"], 2), _f(st["measured_db"], 3),
                   f"{st['error_db']:+.3f}", f"{st['expanded_error_uncertainty_db']:.3f}", st["region"],
                   "**off**" if st["flagged"] else ""] for st in lad["steps"]]) + "\n\n")
        w(f"![ladder]({name})\n\n")

    if analysis.noise_figure:
        w("## Noise figure and loss across frequency (noise source)\n\n")
        w("Y-factor: F = [ENR − Y·(T_cold/T0 − 1)]/(Y − 1); the DUT's gain from the change of the hot − cold "
          "excess, G = (N_hot,DUT − N_cold,DUT)/(N_hot − N_cold), and its own noise figure by the "
          "second-stage correction (Friis 1944).\n\n")
        rows = []
        for n in analysis.noise_figure:
            rows.append([_mhz(n["center_hz"]), _f(n["enr_db"]), _f(n["y_db"]),
                         _pm(n["noise_figure_db"], n["expanded_uncertainty_db"]),
                         f"{n['noise_temperature_k']:.0f}",
                         _pm(n.get("insertion_loss_db"), n.get("expanded_uncertainty_loss_db")),
                         _pm(n.get("dut_noise_figure_db"), 2 * n["u_dut_noise_figure_db"]
                             if n.get("u_dut_noise_figure_db") is not None else None)])
        w(_table(["tuned to", "ENR (dB)", "Y (dB)", "receiver NF", "T_e (K)", "DUT loss", "DUT NF"], rows) + "\n\n")
    if "frequency" in plots:
        w(f"![loss and noise figure against frequency]({plots['frequency']})\n\n")

    if analysis.external_noise:
        w("## External noise and what the loss costs\n\n")
        w("Excess X: noise density with the antenna over that with a 50-ohm load, same gain and tuning. "
          "The SNR a loss L costs is ΔSNR = 10·log10(1 + (L − 1)/X), the receiver's own noise included "
          "(ITU-R P.372; Friis 1944). The predictions use the ITU-R P.372 median man-made noise and "
          "the measured receiver noise figure; real sites differ from the medians by several dB.\n\n")
        rows = []
        for ex in analysis.external_noise:
            rows.append([ex["band"], _mhz(ex["frequency_hz"]), _pm(ex["excess_db"], ex["expanded_uncertainty_db"]),
                         _f(ex.get("receiver_noise_figure_db")),
                         "n/a" if ex.get("antenna_temperature_k") is None else f"{ex['antenna_temperature_k']:.0f}",
                         _f(ex.get("fa_db"), 1)])
        w(_table(["band", "frequency", "excess X", "receiver NF (dB)", "T_a (K)", "F_a (dB)"], rows) + "\n\n")
        for ex in analysis.external_noise:
            knee = ex.get("knee")
            if knee:
                steps = ", ".join(f"{v:g}" for v in knee["steps_db"])
                w(f"- {ex['band']} at {_mhz(ex['frequency_hz'])}: the antenna through {steps} dB of attenuation "
                  f"(and the load) fits the lossy-network model with an excess of {_pm(knee['excess_db'], 2 * knee['u_excess_db'])}, "
                  f"residuals {knee['residual_rms_db']:.2f} dB RMS.\n")
            td = ex.get("through_dut")
            if td:
                w(f"- {ex['band']} at {_mhz(ex['frequency_hz'])}: through the device the antenna noise drops by "
                  f"{_pm(td['drop_db'], 2 * td['u_drop_db'])}.\n")
        w("\n")
        if analysis.snr_cost:
            envs = list(ENV_COLOURS)
            rows = []
            for c in analysis.snr_cost:
                pred = c["predicted"] or {}
                rows.append([c["band"], _mhz(c["frequency_hz"]), _pm(c["loss_db"], 2 * c["u_loss_db"]),
                             _pm(c["snr_degradation_db"], c["expanded_uncertainty_db"]),
                             _pm(c.get("snr_degradation_through_dut_db"), c.get("expanded_uncertainty_through_dut_db"))]
                            + [_f(pred.get(e)) for e in envs])
            w(_table(["band", "frequency", "loss", "SNR cost (from the excess)", "SNR cost (antenna through the device)"]
                     + [f"{e} (dB)" for e in envs], rows) + "\n\n")
            w("The cost through the device is L minus the drop of the antenna noise through it: "
              "SNR_with/SNR_without = N_with/(L·N_without) at the dongle, with no noise model needed.\n\n")
            for c in analysis.snr_cost:
                w(f"- {c['band']}: loss taken from the {c['loss_source']}.\n")
            w("\n")
        if "snr_cost" in plots:
            w(f"![SNR cost per band]({plots['snr_cost']})\n\n")

    w("## Captures\n\n")
    rows = []
    for c in analysis.captures:
        t = c.get("tone") or {}
        noise = c.get("noise") or {}
        rows.append([c["name"], c["role"], "" if c["attenuation_db"] is None else f"{c['attenuation_db']:g}",
                     "yes" if c["through_dut"] else "", _mhz(c["center_hz"]), f"{c['duration_s']:.3g}",
                     _f(t.get("power_dbfs")), _f(t.get("snr_db"), 1), _f(noise.get("density_dbfs_per_hz"), 1),
                     "" if c.get("clip_fraction") is None else f"{100 * c['clip_fraction']:.3g}",
                     c["error"] or ""])
    w(_table(["capture", "role", "att. (dB)", "DUT", "tuned to", "s", "tone (dBFS)", "SNR (dB)",
              "noise (dBFS/Hz)", "clipped (%)", "error"], rows) + "\n\n")
    for name in plots.get("spectra", []):
        w(f"![spectra]({name})\n\n")

    if s.incomplete or s.skipped:
        w("## Left out\n\n")
        for p in s.incomplete:
            w(f"- `{p.name}`: incomplete (interrupted capture)\n")
        for p, why in s.skipped:
            w(f"- `{p.name}`: {why}\n")
        w("\n")
    from rxbench.sweep_report import band_markdown

    w(band_markdown(analysis, plots))
    w("## Warnings\n\n")
    if analysis.warnings:
        for x in analysis.warnings:
            w(f"- {x}\n")
    else:
        w("None.\n")
    w("\n## Cautions\n\n" + CAUTIONS + "\n")
    return md.getvalue()


# --------------------------------------------------------------------------------------------
# The whole report


def write_report(analysis: Analysis, *, overwrite: bool = False, extra_markdown: str | None = None,
                 extra_json: dict | None = None) -> Path:
    """Write the report of ``analysis`` into a new folder of its session; returns that folder.

    ``extra_markdown`` is added after the summary (the demo puts its truth table there);
    ``extra_json`` is merged into ``results.json``.
    """
    folder = analysis.session.folder
    final = next_report_dir(folder, overwrite=overwrite)
    tmp = folder / f".{final.name}.tmp-{os.urandom(4).hex()}"
    tmp.mkdir()
    try:
        plots: dict = {"spectra": plot_spectra(analysis, tmp), "ladder": []}
        for i, lad in enumerate(analysis.ladders, start=1):
            name = "ladder.png" if len(analysis.ladders) == 1 else f"ladder-{i}.png"
            plot_ladder(lad, tmp / name)
            plots["ladder"].append(name)
        if plot_frequency(analysis, tmp / "frequency.png"):
            plots["frequency"] = "frequency.png"
        if plot_snr_cost(analysis, tmp / "snr-cost.png"):
            plots["snr_cost"] = "snr-cost.png"
        from rxbench import sweep_report

        if sweep_report.plot_bands(analysis, tmp / sweep_report.BAND_PLOT):
            plots["bands"] = sweep_report.BAND_PLOT
        doc = analysis.to_dict()
        doc["plots"] = [p for v in plots.values() for p in (v if isinstance(v, list) else [v])]
        if extra_json:
            doc.update(extra_json)
        with open(tmp / "results.json", "w", encoding="utf-8") as f:
            json.dump(json_safe(doc), f, indent=2, allow_nan=False)
            f.write("\n")
        write_csv(csv_rows(analysis), tmp / "results.csv")
        if analysis.per_band or analysis.per_band_noise_figure:
            sweep_report.write_band_csv(sweep_report.band_csv_rows(analysis), tmp / sweep_report.BAND_CSV)
        (tmp / "report.md").write_text(markdown(analysis, plots, extra_markdown), encoding="utf-8")
        return _install(tmp, final, overwrite)
    finally:
        if tmp.exists():
            shutil.rmtree(tmp, ignore_errors=True)
