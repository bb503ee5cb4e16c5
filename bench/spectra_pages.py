"""Pages of capture spectra for the report: up to twelve panels a page, one y-scale per page.

Each panel shows the averaged PSD, the noise floor (dashed), the tone marked just above its peak
(inside the frame), the dongle's DC spike and the tone's I/Q image labelled, and the band edges the
floor leaves out (anti-alias roll-off) shaded. The legend is one per page, above the panels, so it
never covers a signal. One figure is drawn per page shape and reused for the next page of that
shape (the artists are updated, not rebuilt), which with a per-page legend instead of one per panel
makes the pages several times quicker to draw.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from rxbench.dsp.units import db_from_power
from rxbench.style import fmt_hz

PANELS_PER_PAGE = 12
DPI = 100
C_TRACE = "#0072B2"
C_TONE = "#009E73"
C_MARK = "#555555"
C_SHADE = "#BBBBBB"
TONE_ROLES = ("thru", "dut", "step")
#: An image or DC spike is labelled when it stands this far above the floor, dB.
LABEL_ABOVE_FLOOR_DB = 6.0
#: Points of a trace kept per panel (min and max per bucket, so peaks survive the thinning).
TRACE_POINTS = 1200


def _thin(f: np.ndarray, y: np.ndarray, points: int = TRACE_POINTS) -> tuple[np.ndarray, np.ndarray]:
    """The trace thinned to about ``points`` points: each bucket's minimum and maximum, in order,
    so a line through them covers the same vertical extent as the full trace at this size."""
    n = y.size
    bucket = n // (points // 2)
    if bucket < 2:
        return f, y
    m = (n // bucket) * bucket
    yb = y[:m].reshape(-1, bucket)
    fb = f[:m].reshape(-1, bucket)
    lo, hi = yb.argmin(axis=1), yb.argmax(axis=1)
    first = np.minimum(lo, hi)
    second = np.maximum(lo, hi)
    rows = np.arange(yb.shape[0])
    fx = np.column_stack([fb[rows, first], fb[rows, second]]).ravel()
    yx = np.column_stack([yb[rows, first], yb[rows, second]]).ravel()
    return fx, yx


def _panel_data(entry, reading) -> dict:
    psd, floor, tone = reading.psd, reading.floor, reading.tone
    f = psd.frequency_hz
    dens = db_from_power(np.maximum(psd.density, 1e-300))
    floor_db = float(db_from_power(floor.density))
    d = {"f_khz": f / 1e3, "dens_db": dens, "floor_db": floor_db, "peak_db": float(np.max(dens)),
         "edge_khz": floor.edge_hz / 1e3, "half_khz": psd.sample_rate_hz / 2e3, "complex": not psd.one_sided,
         "tone": None, "dc": None, "image": None}
    if tone is not None and entry.role in TONE_ROLES:
        k = psd.index_of(tone.offset_hz)
        d["tone"] = (tone.offset_hz / 1e3, float(dens[k]), tone.power_dbfs)
        if d["complex"] and abs(tone.offset_hz) > 2 * floor.dc_halfwidth_hz:
            ki = psd.index_of(-tone.offset_hz)
            lo, hi = max(ki - 2, 0), min(ki + 3, dens.size)
            level = float(np.max(dens[lo:hi]))
            if level > floor_db + LABEL_ABOVE_FLOOR_DB:
                d["image"] = (-tone.offset_hz / 1e3, level)
    if d["complex"]:
        kd = psd.index_of(0.0)
        lo, hi = max(kd - 2, 0), min(kd + 3, dens.size)
        level = float(np.max(dens[lo:hi]))
        if level > floor_db + LABEL_ABOVE_FLOOR_DB:
            d["dc"] = (0.0, level)
    cap = entry.capture
    att = "" if entry.attenuation_db is None else f", {entry.attenuation_db:g} dB"
    dut = ", with DUT" if entry.through_dut and entry.role != "dut" else ""
    d["title"] = f"{entry.name}  ({entry.role}{att}{dut})"
    if d["tone"] is not None:
        d["note"] = (f"tone {tone.power_dbfs:.2f} dBFS at {tone.offset_hz / 1e3:+.2f} kHz; "
                     f"floor {floor_db:.1f} dBFS/Hz")
    else:
        d["note"] = f"floor {floor_db:.1f} dBFS/Hz"
    d["xlabel"] = "offset (kHz)" if cap.center_hz is None else f"offset from {fmt_hz(cap.center_hz)} (kHz)"
    return d


class _Page:
    """One figure of ``rows`` x ``cols`` panels, reused for every page of that shape."""

    def __init__(self, rows: int, cols: int):
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
        from matplotlib.lines import Line2D
        from matplotlib.patches import Patch
        from matplotlib.ticker import MaxNLocator

        height = 3.0 * rows + 1.1
        self.fig = Figure(figsize=(5.0 * cols, height), dpi=DPI)
        FigureCanvasAgg(self.fig)
        self.fig.subplots_adjust(left=0.07 if cols > 1 else 0.13, right=0.98, bottom=0.5 / height,
                                 top=1.0 - 1.05 / height, hspace=0.75, wspace=0.12)
        self.axes = self.fig.subplots(rows, cols, squeeze=False, sharey=True).ravel()
        self.panels = []
        for ax in self.axes:
            p = {
                "trace": ax.plot([], [], color=C_TRACE, lw=0.6, zorder=2)[0],
                "floor": ax.axhline(0, color="black", lw=1.4, ls="--", zorder=3),
                "tone": ax.plot([], [], marker="v", ms=8, color=C_TONE, ls="none", zorder=4)[0],
                "shade_lo": ax.axvspan(0, 0, color=C_SHADE, alpha=0.45, lw=0, zorder=1),
                "shade_hi": ax.axvspan(0, 0, color=C_SHADE, alpha=0.45, lw=0, zorder=1),
                "dc": ax.text(0, 0, "DC", fontsize=7, color=C_MARK, ha="left", va="bottom", zorder=5),
                "image": ax.text(0, 0, "image", fontsize=7, color=C_MARK, ha="center", va="bottom", zorder=5),
            }
            ax.tick_params(labelsize=7)
            ax.xaxis.set_major_locator(MaxNLocator(5))
            ax.yaxis.set_major_locator(MaxNLocator(5))
            ax.grid(True, lw=0.3, alpha=0.6)
            self.panels.append(p)
        for i, ax in enumerate(self.axes):
            if i % cols:
                ax.tick_params(labelleft=False)  # one level scale for the page: labels on the left only
            else:
                ax.set_ylabel("dBFS/Hz", fontsize=8)
        handles = [Line2D([], [], color=C_TRACE, lw=0.8), Line2D([], [], color="black", lw=1.4, ls="--"),
                   Line2D([], [], marker="v", ms=8, color=C_TONE, ls="none"),
                   Patch(color=C_SHADE, alpha=0.45)]
        labels = ["spectrum (averaged PSD)", "noise floor", "tone (its level in each panel's title)",
                  "band edges left out of the floor (anti-alias roll-off)"]
        self.fig.legend(handles, labels, loc="upper center", ncol=4, fontsize=8, frameon=False,
                        bbox_to_anchor=(0.5, 1.0 - 0.42 / height))
        self.title = self.fig.suptitle("", fontsize=11, y=1.0 - 0.08 / height)

    def draw(self, items: list[dict], page: int, path: Path) -> None:
        lows = [d["floor_db"] for d in items]
        highs = [max(d["peak_db"], d["floor_db"] + 10) for d in items]
        bottom, top = min(lows) - 12.0, max(highs) + 14.0  # room above the peak for the marker
        self.axes[0].set_ylim(bottom, top)
        for ax, p, d in zip(self.axes, self.panels, items + [None] * (len(self.axes) - len(items))):
            ax.set_visible(d is not None)
            if d is None:
                continue
            p["trace"].set_data(*_thin(d["f_khz"], d["dens_db"]))
            p["floor"].set_ydata([d["floor_db"], d["floor_db"]])
            if d["tone"] is not None:
                x, y, _ = d["tone"]
                p["tone"].set_data([x], [y + 5.0])
            else:
                p["tone"].set_data([], [])
            half, edge = d["half_khz"], d["edge_khz"]
            lo_edge = -edge if d["complex"] else None
            _set_span(p["shade_hi"], edge, half)
            _set_span(p["shade_lo"], -half if d["complex"] else 0.0, lo_edge if lo_edge is not None else 0.0)
            for key in ("dc", "image"):
                spot = d[key]
                p[key].set_visible(spot is not None)
                if spot is not None:
                    p[key].set_position((spot[0] + (half * 0.015 if key == "dc" else 0.0), min(spot[1] + 1.0, top - 4)))
            ax.set_xlim(-half if d["complex"] else 0.0, half)
            ax.set_title(f"{d['title']}\n{d['note']}", fontsize=8)
            ax.set_xlabel(d["xlabel"], fontsize=8)
        self.title.set_text(f"Capture spectra (page {page}), one level scale for the page")
        self.fig.savefig(path, dpi=DPI)


def _set_span(patch, x0: float, x1: float) -> None:
    """Move an axvspan (a Rectangle in matplotlib >= 3.9, a Polygon before) to [x0, x1]."""
    if hasattr(patch, "set_x") and hasattr(patch, "set_width"):
        patch.set_x(x0)
        patch.set_width(x1 - x0)
    else:  # pragma: no cover - older matplotlib
        xy = patch.get_xy()
        xy[:, 0] = [x0, x0, x1, x1, x0][: len(xy)]
        patch.set_xy(xy)


def plot_spectra(analysis, folder: Path) -> list[str]:
    """Pages of capture spectra (``spectra-NN.png``); returns the file names written."""
    items = [(e, analysis.readings[e]) for e in analysis.session.entries if e in analysis.readings]
    names: list[str] = []
    pages: dict[tuple[int, int], _Page] = {}
    for page, start in enumerate(range(0, len(items), PANELS_PER_PAGE), start=1):
        chunk = [_panel_data(e, r) for e, r in items[start:start + PANELS_PER_PAGE]]
        cols = 3 if len(chunk) > 4 else min(len(chunk), 2)
        rows = math.ceil(len(chunk) / cols)
        if (rows, cols) not in pages:
            pages[(rows, cols)] = _Page(rows, cols)
        name = f"spectra-{page:02d}.png"
        pages[(rows, cols)].draw(chunk, page, Path(folder) / name)
        names.append(name)
    return names
