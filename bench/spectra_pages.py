"""Pages of capture spectra for the report: up to twelve panels a page, one y-scale per page.

Each panel shows the averaged PSD, the noise floor (dashed), the tone marked just above its peak
(inside the frame), the dongle's DC spike and the tone's I/Q image labelled, and the band edges the
floor leaves out (anti-alias roll-off) shaded. The legend is one per page, above the panels, so it
never covers a signal. One figure of four rows of three panels is built and reused for every page
of more than four panels (the artists are updated, not rebuilt; a page of fewer rows is saved
cropped to them), which with a per-page legend instead of one per panel makes the pages several
times quicker to draw.

The work is split so that another process can do the drawing: :func:`page_data` (numpy only: the
panels' traces, already reduced to the pixels a panel shows, and their labels), :func:`prepare`
(matplotlib's figure built before there is anything to draw) and :func:`draw_pages`.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from rxbench.dsp.units import db_from_power
from rxbench.style import fmt_hz

PANELS_PER_PAGE = 12
#: The figure every page of more than four panels is drawn on: rows, columns.
FULL_PAGE = (4, 3)
DPI = 100
#: zlib level of the PNG files (the report's plots too): 3 encodes a page in 57 ms against 94 ms at
#: Pillow's default 6, for files within 15 % of the size (DEVELOPERS.md, Speed).
PNG_COMPRESS_LEVEL = 3
C_TRACE = "#0072B2"
C_TONE = "#009E73"
C_MARK = "#555555"
C_SHADE = "#BBBBBB"
TONE_ROLES = ("thru", "dut", "step")
#: An image or DC spike is labelled when it stands this far above the floor, dB.
LABEL_ABOVE_FLOOR_DB = 6.0


def decimate(f: np.ndarray, y: np.ndarray, columns: int) -> tuple[np.ndarray, np.ndarray]:
    """The trace reduced to what ``columns`` pixel columns can show: in each column the lowest and
    the highest point, in their order along the trace. A line through them covers the same vertical
    extent in every column as the full trace, so no peak (the tone, the DC spike) is ever thinned
    away; traces with no more than two points per column are returned as they are."""
    n = y.size
    if columns < 1 or n <= 2 * columns:
        return f, y
    edges = np.linspace(0, n, columns + 1).astype(np.intp)  # uniform bins: columns by index
    col = np.repeat(np.arange(columns), np.diff(edges))
    order = np.lexsort((y, col))  # column by column, each from its lowest point to its highest
    keep = np.unique(np.concatenate([order[edges[:-1]], order[edges[1:] - 1]]))
    return f[keep], y[keep]


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
    at = "" if cap.center_hz is None else f" at {fmt_hz(cap.center_hz)}"
    d["title"] = f"{entry.name}  ({entry.role}{att}{dut}){at}"
    if d["tone"] is not None:
        d["note"] = (f"tone {tone.power_dbfs:.2f} dBFS at {tone.offset_hz / 1e3:+.2f} kHz; "
                     f"floor {floor_db:.1f} dBFS/Hz")
    else:
        d["note"] = f"floor {floor_db:.1f} dBFS/Hz"
    return d


#: Page geometry, inches: a row of panels, the margin above the panels (title and legend) and below.
ROW_IN = 2.6
TOP_IN = 1.05
BOTTOM_IN = 0.5
#: Ticks made per axis when a figure is built: the 7 the demo's pages use on both axes (a tick
#: costs about 2 ms to make; matplotlib makes any more a page needs when drawing it).
TICKS_MADE = 7


def _height_in(rows: int) -> float:
    return ROW_IN * rows + 1.1


def _margins(cols: int) -> tuple[float, float, float]:
    """left, right (fractions of the width) and wspace of a page of ``cols`` columns."""
    return (0.07 if cols > 1 else 0.13), 0.98, 0.12


def panel_columns(cols: int) -> int:
    """Pixel columns of one panel of a page of ``cols`` columns (the traces are decimated to
    these): the width matplotlib's subplot grid gives each of ``cols`` cells between the margins,
    ``wspace`` being the gap as a fraction of a cell."""
    left, right, wspace = _margins(cols)
    cell = (right - left) / (cols + wspace * (cols - 1))
    return int(round(cell * 5.0 * cols * DPI))


class _Page:
    """One figure of ``rows`` x ``cols`` panels, reused for every page of that shape."""

    def __init__(self, rows: int, cols: int):
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
        from matplotlib.lines import Line2D
        from matplotlib.patches import Patch
        from matplotlib.ticker import MaxNLocator

        height = _height_in(rows)
        self.rows, self.cols = rows, cols
        self.fig = Figure(figsize=(5.0 * cols, height), dpi=DPI)
        FigureCanvasAgg(self.fig)
        left, right, wspace = _margins(cols)
        self.fig.subplots_adjust(left=left, right=right, bottom=BOTTOM_IN / height,
                                 top=1.0 - TOP_IN / height, hspace=0.5, wspace=wspace)
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
            # The ticks' artists, made now rather than at the first page's drawing (where they cost
            # a third of it): a forked helper builds its figure before the analysis ends.
            ax.xaxis.get_major_ticks(TICKS_MADE)
            ax.yaxis.get_major_ticks(TICKS_MADE)
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
        """Draw ``items`` (up to rows x cols panels) as page ``page`` into ``path``; a page that
        fills fewer rows is saved cropped below its last row."""
        lows = [d["floor_db"] for d in items]
        highs = [max(d["peak_db"], d["floor_db"] + 10) for d in items]
        bottom, top = min(lows) - 12.0, max(highs) + 14.0  # room above the peak for the marker
        self.axes[0].set_ylim(bottom, top)
        # Panels of one frequency span show their offset scale once, under each column's last panel
        # (text is most of a page's drawing time); pages that mix spans label every panel.
        same_span = len({(d["half_khz"], d["complex"]) for d in items}) == 1
        last_in_column = {i % self.cols: i for i in range(len(items))}
        for i, (ax, p) in enumerate(zip(self.axes, self.panels)):
            d = items[i] if i < len(items) else None
            ax.set_visible(d is not None)
            if d is None:
                continue
            half = d["half_khz"]
            ax.set_xlim(-half if d["complex"] else 0.0, half)
            p["trace"].set_data(d["f_khz"], d["dens_db"])
            p["floor"].set_ydata([d["floor_db"], d["floor_db"]])
            if d["tone"] is not None:
                x, y, _ = d["tone"]
                p["tone"].set_data([x], [y + 5.0])
            else:
                p["tone"].set_data([], [])
            edge = d["edge_khz"]
            _set_span(p["shade_hi"], edge, half)
            _set_span(p["shade_lo"], -half if d["complex"] else 0.0, -edge if d["complex"] else 0.0)
            for key in ("dc", "image"):
                spot = d[key]
                p[key].set_visible(spot is not None)
                if spot is not None:
                    p[key].set_position((spot[0] + (half * 0.015 if key == "dc" else 0.0), min(spot[1] + 1.0, top - 4)))
            # y given: matplotlib then skips its search for overlapping tick labels above the panel.
            ax.set_title(f"{d['title']}\n{d['note']}", fontsize=8, y=1.0, pad=4.0)
            labelled = not same_span or last_in_column[i % self.cols] == i
            ax.tick_params(labelbottom=labelled)
            ax.set_xlabel("offset from the tuned frequency (kHz)" if labelled else "", fontsize=8)
        self.title.set_text(f"Capture spectra (page {page}), one level scale for the page")
        rows = math.ceil(len(items) / self.cols)
        crop = None
        if rows < self.rows:  # below the last row's panels: its offset scale, then the usual margin
            from matplotlib.transforms import Bbox

            width, height = self.fig.get_size_inches()
            bottom = self.axes[(rows - 1) * self.cols].get_position().y0 * height - BOTTOM_IN
            crop = Bbox.from_extents(0.0, bottom, width, height)
        self.fig.savefig(path, dpi=DPI, bbox_inches=crop, pil_kwargs={"compress_level": PNG_COMPRESS_LEVEL})


def _set_span(patch, x0: float, x1: float) -> None:
    """Move an axvspan (a Rectangle in matplotlib >= 3.9, a Polygon before) to [x0, x1]."""
    if hasattr(patch, "set_x") and hasattr(patch, "set_width"):
        patch.set_x(x0)
        patch.set_width(x1 - x0)
    else:  # pragma: no cover - older matplotlib
        xy = patch.get_xy()
        xy[:, 0] = [x0, x0, x1, x1, x0][: len(xy)]
        patch.set_xy(xy)


def _shape(n: int) -> tuple[int, int]:
    """The figure a page of ``n`` panels is drawn on: the full page for more than four panels
    (cropped to the rows they fill), else one or two columns of its own."""
    if n > 4:
        return FULL_PAGE
    cols = min(n, 2)
    return math.ceil(n / cols), cols


def page_data(analysis) -> list[list[dict]]:
    """The spectra pages of ``analysis``: per page, its panels' data (numpy and text only; nothing
    of matplotlib), the traces decimated to the pixel columns of the panel they are drawn in."""
    items = [(e, analysis.readings[e]) for e in analysis.session.entries if e in analysis.readings]
    pages = []
    for start in range(0, len(items), PANELS_PER_PAGE):
        chunk = items[start:start + PANELS_PER_PAGE]
        columns = panel_columns(_shape(len(chunk))[1])
        panels = []
        for e, r in chunk:
            d = _panel_data(e, r)
            d["f_khz"], d["dens_db"] = decimate(d["f_khz"], d["dens_db"], columns)
            panels.append(d)
        pages.append(panels)
    return pages


def prepare() -> dict:
    """The full page's figure, built ahead (about a tenth of the pages' drawing): pass it to
    :func:`draw_pages`. Imports matplotlib."""
    return {FULL_PAGE: _Page(*FULL_PAGE)}


def draw_pages(pages: list[list[dict]], folder: Path, figures: dict | None = None) -> list[str]:
    """Draw :func:`page_data`'s pages as ``spectra-NN.png`` in ``folder``; returns the file names.
    ``figures``: from :func:`prepare`, or None (built here as needed)."""
    figures = {} if figures is None else figures
    names: list[str] = []
    for page, panels in enumerate(pages, start=1):
        shape = _shape(len(panels))
        if shape not in figures:
            figures[shape] = _Page(*shape)
        name = f"spectra-{page:02d}.png"
        figures[shape].draw(panels, page, Path(folder) / name)
        names.append(name)
    return names


def plot_spectra(analysis, folder: Path) -> list[str]:
    """Pages of capture spectra (``spectra-NN.png``); returns the file names written."""
    return draw_pages(page_data(analysis), folder)
