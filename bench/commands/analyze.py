"""``rxbench analyze SESSION``: every result a session's captures support, and a report folder."""

from __future__ import annotations

import argparse
import sys

from rxbench.options import add_drift_option, add_noise_band_option
from rxbench.dsp.same_signal import DEFAULT_PPM
from rxbench.output import Progress, add_json_option, emit
from rxbench.report import summary_lines, write_report
from rxbench.report.helper import start_helper
from rxbench.session import analyze_session, open_session


def add_parser(sub) -> None:
    p = sub.add_parser(
        "analyze", help="analyse a session folder and write its report",
        description=("Read every capture of a session folder (roles from the rxbench metadata), run every "
                     "measurement the captures support (tone readings, direct and substitution loss, "
                     "ladder check, noise figure and loss across frequency, external-noise excess, SNR cost "
                     "per band), and write report.md, results.json, results.csv and PNG plots into a new "
                     "report folder inside the session (report/, then report-2/, ...)."))
    p.add_argument("session", metavar="SESSION", help="session folder (as written by rxbench capture)")
    p.add_argument("--overwrite", action="store_true",
                   help="write the report into report/ even if it exists, replacing the earlier report")
    add_drift_option(p)
    add_noise_band_option(p)
    add_json_option(p)
    p.set_defaults(func=run)


def analyze_and_report(folder, *, overwrite: bool = False, extra_markdown=None, extra_json=None, progress=None,
                       drift_ppm: float = DEFAULT_PPM, noise_band_hz=None):
    """Open, analyse and report a session; returns (analysis, report folder)."""
    helper = start_helper()  # if a core is free: matplotlib loads there while the captures are analysed
    try:
        session = open_session(folder)
        analysis = analyze_session(session, progress=progress, drift_ppm=drift_ppm, noise_band_hz=noise_band_hz)
        report_dir = write_report(analysis, overwrite=overwrite, extra_markdown=extra_markdown,
                                  extra_json=extra_json, helper=helper)
    finally:
        if helper is not None:
            helper.close()
    return analysis, report_dir


def run(args: argparse.Namespace) -> int:
    show = Progress(sys.stderr)

    def progress(i: int, n: int, name: str) -> None:
        show.update(f"reading {name}", i, n)

    analysis, report_dir = analyze_and_report(args.session, overwrite=args.overwrite, progress=progress,
                                              drift_ppm=args.drift_ppm, noise_band_hz=args.noise_band)
    show.clear()
    result = analysis.to_dict()
    result["report_dir"] = str(report_dir)
    s = analysis.session
    head = f"{s.folder}: {len(s.entries)} captures analysed"
    if s.incomplete or s.skipped:
        head += f" ({len(s.incomplete)} incomplete and {len(s.skipped)} unusable left out)"
    lines = [head] + [f"  {x}" for x in summary_lines(analysis)]
    lines.append(f"uncertainties: expanded, k = 2 (about 95 %); {len(analysis.warnings)} warning(s)")
    lines.append(f"report: {report_dir / 'report.md'}")
    emit(args, result, "\n".join(lines), analysis.warnings)
    return 0
