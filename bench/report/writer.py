"""Where a report goes, and writing it whole: built in a hidden folder, renamed into place."""

from __future__ import annotations

import json
import multiprocessing
import os
import shutil
import sys
from pathlib import Path

from rxbench.errors import UsageError
from rxbench.files import is_recording
from rxbench.output import json_safe
from rxbench.report.document import markdown
from rxbench.report.plots import SimulatedTruth, plot_frequency, plot_ladder, plot_snr_cost
from rxbench.spectra_pages import plot_spectra
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


def _spectra_child(analysis: Analysis, folder: Path, conn) -> None:
    """In the forked child: draw the spectra pages and send back their names (None on any failure:
    the parent then draws them itself, so an error surfaces there with its usual message)."""
    names = None
    try:
        names = plot_spectra(analysis, folder)
    except BaseException:  # noqa: BLE001 - an interrupt, or an error the parent's own attempt reports
        pass
    try:
        conn.send(names)
        conn.close()
    except OSError:  # the parent stopped listening (interrupted): nothing to report
        pass


def _core_free() -> bool:
    """Whether a second core is likely free: two or more cores, and a load average (last minute)
    below one less than their number. On a busy machine a second process only adds its start-up
    and competes with the first (measured: 1.1x the wall time; DEVELOPERS.md, Speed)."""
    from rxbench._engine import cpu_threads

    cores = cpu_threads()
    try:
        load = os.getloadavg()[0]
    except (AttributeError, OSError):
        load = 0.0
    return cores >= 2 and load < cores - 1


def _start_spectra(analysis: Analysis, folder: Path):
    """Start drawing the spectra pages in a forked child when a second core is free to take them
    (they are about half the report's drawing, and matplotlib draws on one core); None otherwise."""
    if "fork" not in multiprocessing.get_all_start_methods() or not _core_free():
        return None
    ctx = multiprocessing.get_context("fork")
    receive, send = ctx.Pipe(duplex=False)
    sys.stdout.flush()  # nothing buffered may be written twice, by the child too
    sys.stderr.flush()
    child = ctx.Process(target=_spectra_child, args=(analysis, folder, send), daemon=True)
    child.start()
    send.close()
    return child, receive


def _finish_spectra(started, analysis: Analysis, folder: Path) -> list[str]:
    """The spectra pages' names: from the child if it drew them, else drawn here."""
    if started is not None:
        child, receive = started
        try:
            names = receive.recv()
        except EOFError:
            names = None
        finally:
            receive.close()
            child.join()
        if names is not None:
            return names
    return plot_spectra(analysis, folder)


def _stop(started) -> None:
    if started is not None and started[0].is_alive():
        started[0].terminate()
        started[0].join()


def write_report(analysis: Analysis, *, overwrite: bool = False, extra_markdown: str | None = None,
                 extra_json: dict | None = None, truth: SimulatedTruth | None = None) -> Path:
    """Write the report of ``analysis`` into a new folder of its session; returns that folder.

    ``extra_markdown`` is added after the summary (the demo puts its truth table there);
    ``extra_json`` is merged into ``results.json``; ``truth`` (the demo's simulated bench) is drawn
    in the loss, noise-figure and SNR-cost plots beside the measured points.
    """
    folder = analysis.session.folder
    final = next_report_dir(folder, overwrite=overwrite)
    tmp = folder / f".{final.name}.tmp-{os.urandom(4).hex()}"
    tmp.mkdir()
    started = None
    try:
        started = _start_spectra(analysis, tmp)
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
        plots["spectra"] = _finish_spectra(started, analysis, tmp)
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
        _stop(started)
        if tmp.exists():
            shutil.rmtree(tmp, ignore_errors=True)
