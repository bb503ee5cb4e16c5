"""Where a report goes, and writing it whole: built in a hidden folder, renamed into place."""

from __future__ import annotations

import json
import os
import shutil
from pathlib import Path

from rxbench.errors import UsageError
from rxbench.files import is_recording
from rxbench.output import json_safe
from rxbench.report.document import markdown
from rxbench import spectra_pages
from rxbench.report.helper import Helper, start_helper
from rxbench.report.plots import SimulatedTruth, plot_frequency, plot_ladder, plot_snr_cost
from rxbench.report.tables import csv_rows, write_csv
from rxbench.session import Analysis


REPORT_DIR = "report"


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


def write_report(analysis: Analysis, *, overwrite: bool = False, extra_markdown: str | None = None,
                 extra_json: dict | None = None, truth: SimulatedTruth | None = None,
                 helper: Helper | None = None) -> Path:
    """Write the report of ``analysis`` into a new folder of its session; returns that folder.

    ``extra_markdown`` is added after the summary (the demo puts its truth table there);
    ``extra_json`` is merged into ``results.json``; ``truth`` (the demo's simulated bench) is drawn
    in the loss, noise-figure and SNR-cost plots beside the measured points. ``helper``: a child
    started before the analysis (:func:`rxbench.report.helper.start_helper`) to draw the spectra
    pages, closed here when the report is done or fails (its caller closes it too, for an analysis
    that fails); without one, one is started here if a second core is free.
    """
    folder = analysis.session.folder
    final = next_report_dir(folder, overwrite=overwrite)
    tmp = folder / f".{final.name}.tmp-{os.urandom(4).hex()}"
    tmp.mkdir()
    try:
        pages = spectra_pages.page_data(analysis)
        if helper is None:
            from matplotlib.backends import backend_agg  # noqa: F401 - loaded once, for the child too

            helper = start_helper()
        handed = helper is not None and helper.draw(pages, tmp)
        plots: dict = {"spectra": [], "ladder": []}
        for i, lad in enumerate(analysis.ladders, start=1):
            name = "ladder.png" if len(analysis.ladders) == 1 else f"ladder-{i}.png"
            plot_ladder(lad, tmp / name)
            plots["ladder"].append(name)
        if plot_frequency(analysis, tmp / "frequency.png", truth):
            plots["frequency"] = "frequency.png"
        if plot_snr_cost(analysis, tmp / "snr-cost.png", truth):
            plots["snr_cost"] = "snr-cost.png"
        from rxbench import sweep_report

        if sweep_report.plot_bands(analysis, tmp / sweep_report.BAND_PLOT):
            plots["bands"] = sweep_report.BAND_PLOT
        names = helper.pages() if handed else None
        plots["spectra"] = names if names is not None else spectra_pages.draw_pages(pages, tmp)
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
        if helper is not None:  # done, or stopped before the temporary folder goes
            helper.close()
        if tmp.exists():
            shutil.rmtree(tmp, ignore_errors=True)
