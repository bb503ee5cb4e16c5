"""The spectra pages' trace decimation and page geometry, and the report drawing its spectra pages
in a forked child.

Decimation to the pixel columns drawn, keeping each column's lowest and highest point, is common
practice for drawing long traces (min/max decimation): a line through those points covers, in every
column, the same vertical extent as the full trace, so no peak disappears. The check below is a
plain loop over the columns, written apart from the vectorised code.
"""

from __future__ import annotations

import multiprocessing
import os

import numpy as np
import pytest

from rxbench import report as rep
from rxbench import spectra_pages
from rxbench.report import helper as helper_module
from rxbench.spectra_pages import decimate


def _columns(n: int, columns: int):
    edges = np.linspace(0, n, columns + 1).astype(int)
    return [range(a, b) for a, b in zip(edges[:-1], edges[1:])]


@pytest.mark.parametrize("n, columns", [(65536, 390), (4097, 400), (1000, 333)])
def test_decimation_keeps_every_columns_extent_and_the_peaks(n, columns):
    rng = np.random.default_rng(n)
    f = np.linspace(-125.0, 125.0, n, endpoint=False)
    y = -87.0 + rng.normal(0.0, 1.0, n)
    y[n // 2] = -72.0  # a one-bin DC spike
    tone = n // 2 + n // 12
    y[tone] = -20.0  # the tone, one bin
    y[n // 2 - n // 12] = -81.0  # its image, one bin
    fx, yx = decimate(f, y, columns)
    assert yx.size <= 2 * columns
    assert np.all(np.diff(fx) > 0), "points stay in their order along the trace"
    for k in (n // 2, tone, n // 2 - n // 12):  # each peak survives, at its own frequency
        assert f[k] in fx and yx[np.flatnonzero(fx == f[k])[0]] == y[k]
    for col in _columns(n, columns):
        seg = y[col.start:col.stop]
        inside = (fx >= f[col.start]) & (fx <= f[col.stop - 1])
        assert yx[inside].max() == seg.max() and yx[inside].min() == seg.min()


def test_short_traces_are_drawn_whole():
    f = np.arange(700.0)
    y = np.sin(f)
    fx, yx = decimate(f, y, 400)
    assert fx is f and yx is y


def _spectra(folder):
    return sorted(p.name for p in folder.glob("spectra-*.png"))


needs_fork = pytest.mark.skipif("fork" not in multiprocessing.get_all_start_methods(),
                                reason="the helper is a forked child: no fork, no helper (one process draws)")


@pytest.fixture(scope="module")
def fourteen(tmp_path_factory):
    """A session of 14 tone captures: two pages (12 panels a page), the second one cropped."""
    from test_session import tone_in, write_capture

    from rxbench.session import analyze_session, open_session

    d = tmp_path_factory.mktemp("fourteen")
    for i in range(14):
        write_capture(d, f"{i:02d}-thru", tone_in(-90.0, 200 + i), role="thru", seed=300 + i, time_s=i + 1)
    return analyze_session(open_session(d))


@needs_fork
def test_spectra_drawn_in_a_forked_child_are_the_same_pages(fourteen, monkeypatch):
    a = fourteen
    monkeypatch.setattr(helper_module, "core_free", lambda: False)
    serial = rep.write_report(a)
    monkeypatch.setattr(helper_module, "core_free", lambda: True)
    forked = rep.write_report(a)
    early = helper_module.start_helper()  # as rxbench analyze starts it: before the analysis
    assert early is not None
    try:
        before = rep.write_report(a, helper=early)
    finally:
        early.close()
    assert _spectra(serial) == _spectra(forked) == _spectra(before) == ["spectra-01.png", "spectra-02.png"]
    for name in _spectra(serial):  # the same drawing, pixel for pixel (Agg is deterministic)
        assert (serial / name).read_bytes() == (forked / name).read_bytes() == (before / name).read_bytes()

    # A child that fails leaves the pages to the parent, which draws them itself.
    parent = os.getpid()
    real = spectra_pages.draw_pages

    def fails_in_child(pages, folder, figures=None):
        if os.getpid() != parent:
            raise RuntimeError("child failed")
        return real(pages, folder, figures)

    monkeypatch.setattr(spectra_pages, "draw_pages", fails_in_child)
    again = rep.write_report(a)
    assert _spectra(again) == _spectra(serial)
    for name in _spectra(serial):
        assert (again / name).read_bytes() == (serial / name).read_bytes()


@needs_fork
def test_a_helper_never_given_pages_ends_when_closed(monkeypatch):
    """The analysis failed after the helper started: closing it ends the child (no process left)."""
    monkeypatch.setattr(helper_module, "core_free", lambda: True)
    h = helper_module.start_helper()
    assert h is not None and h._process.is_alive()
    h.close()
    assert not h._process.is_alive()
    assert h._process.exitcode is not None


@pytest.mark.parametrize("cols", [1, 2, 3])
def test_panel_columns_are_the_pixels_matplotlib_gives_a_panel(cols):
    """The traces are decimated (apart from matplotlib) to the width of a panel; the reference is
    matplotlib's own subplot layout of the page."""
    page = spectra_pages._Page(2, cols)
    width_px = page.axes[0].get_window_extent().width
    assert spectra_pages.panel_columns(cols) == round(width_px)


def test_a_page_of_fewer_rows_is_cropped_below_its_offset_scale(fourteen, tmp_path):
    """The second page (two panels) is drawn on the four-row figure and saved cropped: the crop
    keeps everything matplotlib finds drawn (its tight bounding box), and leaves out the empty rows."""
    from matplotlib.image import imread

    pages = spectra_pages.page_data(fourteen)
    assert [len(p) for p in pages] == [12, 2]
    assert spectra_pages._shape(2) == (1, 2)  # two panels: a figure of their own
    pages = [pages[0], pages[0][:5]]  # five panels: two of the full page's four rows
    figures = spectra_pages.prepare()
    names = spectra_pages.draw_pages(pages, tmp_path, figures)
    fig = figures[spectra_pages.FULL_PAGE].fig
    drawn = fig.get_tightbbox()  # inches, of the page just drawn (the five-panel one)
    width_in, height_in = fig.get_size_inches()
    full, cropped = (imread(tmp_path / n) for n in names)
    assert full.shape[:2] == (round(height_in * spectra_pages.DPI), round(width_in * spectra_pages.DPI))
    crop_height_in = cropped.shape[0] / spectra_pages.DPI
    assert crop_height_in < 0.6 * height_in
    bottom_in = height_in - crop_height_in  # the crop's lower edge, from the figure's bottom
    assert bottom_in <= drawn.y0, "the offset scale under the last row is inside the page"
    assert drawn.y0 - bottom_in < 0.6, "no more than the usual margin below it"
    assert np.all(cropped[-3:, :, :3] == 1.0), "the crop's last rows are margin (white)"


def test_the_run_queue_is_read_from_proc_loadavg():
    """/proc/loadavg's fourth field is "runnable/existing" scheduling entities (proc(5), the Linux
    man page; the sample line is of its form, from memory)."""
    assert helper_module.runnable_tasks("0.20 0.18 0.12 1/80 11206\n") == 1
    assert helper_module.runnable_tasks("2.49 1.96 1.37 3/89 25654") == 3


@pytest.mark.parametrize("others, cores, free", [(0, 2, True), (1, 2, False), (3, 2, False), (2, 4, True),
                                                 (3, 4, False), (0, 1, False)])
def test_a_core_is_free_when_fewer_others_run_than_cores_less_one(monkeypatch, others, cores, free):
    monkeypatch.setattr(helper_module, "_others_running", lambda: others)
    monkeypatch.setattr("rxbench._engine.cpu_threads", lambda: cores)
    assert helper_module.core_free() is free
