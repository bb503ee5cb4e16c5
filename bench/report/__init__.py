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

The package, by concept: :mod:`.writer` (where the report goes, written whole or not at all),
:mod:`.helper` (the forked child that draws the spectra pages beside the parent, when a core is
free), :mod:`.text` (number formatting and the summary lines), :mod:`.document` (``report.md``),
:mod:`.tables` (``results.csv``) and :mod:`.plots` (the PNG figures).
"""

from rxbench.report.document import markdown
from rxbench.report.tables import csv_rows, write_csv
from rxbench.report.text import summary_lines
from rxbench.report.writer import REPORT_DIR, next_report_dir, write_report

__all__ = ["REPORT_DIR", "csv_rows", "markdown", "next_report_dir", "summary_lines", "write_csv", "write_report"]


