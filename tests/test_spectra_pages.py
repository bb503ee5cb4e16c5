"""The spectra pages' trace decimation, and the report drawing its spectra pages in a forked child.

Decimation to the pixel columns drawn, keeping each column's lowest and highest point, is common
practice for drawing long traces (min/max decimation): a line through those points covers, in every
column, the same vertical extent as the full trace, so no peak disappears. The check below is a
plain loop over the columns, written apart from the vectorised code.
"""

from __future__ import annotations

import os

import numpy as np
import pytest

from rxbench import report as rep
from rxbench.report import writer
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


def test_spectra_drawn_in_a_forked_child_are_the_same_pages(tmp_path, monkeypatch):
    from test_session import tone_in, write_capture

    from rxbench.session import analyze_session, open_session

    for i in range(14):  # two pages (12 panels a page)
        write_capture(tmp_path, f"{i:02d}-thru", tone_in(-90.0, 200 + i), role="thru", seed=300 + i, time_s=i + 1)
    a = analyze_session(open_session(tmp_path))
    monkeypatch.setattr(writer, "_core_free", lambda: False)
    serial = rep.write_report(a)
    monkeypatch.setattr(writer, "_core_free", lambda: True)
    forked = rep.write_report(a)
    assert _spectra(serial) == _spectra(forked) == ["spectra-01.png", "spectra-02.png"]
    for name in _spectra(serial):  # the same drawing, pixel for pixel (Agg is deterministic)
        assert (serial / name).read_bytes() == (forked / name).read_bytes()

    # A child that fails leaves the pages to the parent, which draws them itself.
    parent = os.getpid()
    real = writer.plot_spectra

    def fails_in_child(analysis, folder):
        if os.getpid() != parent:
            raise RuntimeError("child failed")
        return real(analysis, folder)

    monkeypatch.setattr(writer, "plot_spectra", fails_in_child)
    again = rep.write_report(a)
    assert _spectra(again) == _spectra(serial)
