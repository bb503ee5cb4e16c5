"""Speed of ``rxbench analyze`` on the demo session, and of ``rxbench demo``: whole processes, wall
and CPU time, side by side with another rxbench (e.g. main before a change) as ratios.

Run on demand (not part of the test run):

    python benchmarks/bench_analyze.py [--rounds 5] [--baseline PYTHON] [--workdir DIR]

It writes the demo session once (``rxbench demo --out DIR/demo``), then times, in interleaved
rounds:

- ``rxbench analyze SESSION --overwrite --json`` (this install);
- the same with every figure drawn in the one process, and with the spectra pages always drawn in
  a forked child beside the other figures (by default the report forks only when the load average
  leaves a core free), to show what the second core gains;
- ``--baseline PYTHON``: ``rxbench analyze`` run by another interpreter (a venv with another
  checkout installed, e.g. main before the change), on the same session;
- ``rxbench demo`` (capture, analysis and report), to check its wall time stays within 2x of its
  CPU time.

CPU time is user + system of the process and the children it waited for. It prints the medians and
the per-round ratios' median and range. The machine may be shared: only ratios taken in the same
rounds mean much. Target (DEVELOPERS.md): ``analyze`` of the demo session under 4 s of wall time on
two cores.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

#: Children run as an installed program normally does: with its compiled bytecode cached.
CHILD_ENV = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}

#: ``rxbench analyze`` with the spectra pages drawn in a forked child, or not, whatever the load
#: (by default the report forks only when the load average leaves a core free).
FORCED = ("import rxbench.report.helper as h; h.core_free = lambda: {}; "
          "from rxbench.cli import run_console; run_console()")


def run_timed(cmd: list[str]) -> tuple[float, float]:
    """Wall time and CPU time (user + system, with waited-for children) of one child process, s."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=CHILD_ENV)
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    err = proc.stderr.read().decode()
    proc.stderr.close()
    if os.waitstatus_to_exitcode(status) != 0:
        raise SystemExit(f"{' '.join(cmd)} failed: {err[-500:]}")
    return wall, usage.ru_utime + usage.ru_stime


def _summary(name: str, results: list, ref: list | None) -> str:
    wall = statistics.median(r[0] for r in results)
    cpu = statistics.median(r[1] for r in results)
    line = (f"  {name:34s} wall {wall:6.2f} s ({min(r[0] for r in results):.2f}-{max(r[0] for r in results):.2f})"
            f"  CPU {cpu:6.2f} s  wall/CPU {statistics.median(r[0] / r[1] for r in results):.2f}")
    if ref is not None and ref is not results:
        wr = [a[0] / b[0] for a, b in zip(ref, results)]
        cr = [a[1] / b[1] for a, b in zip(ref, results)]
        line += (f"\n  {'':34s} this/that: wall {statistics.median(wr):.2f}x ({min(wr):.2f}-{max(wr):.2f}),"
                 f" CPU {statistics.median(cr):.2f}x ({min(cr):.2f}-{max(cr):.2f})")
    return line


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=5)
    ap.add_argument("--baseline", help="python of another rxbench install to compare with")
    ap.add_argument("--no-demo", action="store_true", help="leave out the timing of rxbench demo")
    ap.add_argument("--workdir", type=Path)
    args = ap.parse_args()
    work = args.workdir or Path(tempfile.mkdtemp(prefix="rxbench-analyze-"))
    work.mkdir(parents=True, exist_ok=True)
    session = work / "demo"
    if not session.exists():
        subprocess.run([sys.executable, "-m", "rxbench", "demo", "--out", str(session), "--json"],
                       check=True, stdout=subprocess.DEVNULL, env=CHILD_ENV)
    analyze = ["analyze", str(session), "--overwrite", "--json"]
    cmds = {"rxbench analyze": [sys.executable, "-m", "rxbench", *analyze],
            "analyze, all figures in one process": [sys.executable, "-c", FORCED.format(False), *analyze],
            "analyze, spectra in a forked child": [sys.executable, "-c", FORCED.format(True), *analyze]}
    if args.baseline:
        cmds["baseline analyze"] = [args.baseline, "-m", "rxbench", *analyze]
    demo_dir = work / "demo-runs"
    for cmd in cmds.values():  # one untimed run each: page cache, bytecode, font cache
        run_timed(cmd)
    runs: dict[str, list] = {name: [] for name in cmds}
    demo_runs: list = []
    for _ in range(args.rounds):
        for name, cmd in cmds.items():
            runs[name].append(run_timed(cmd))
        if not args.no_demo:
            shutil.rmtree(demo_dir, ignore_errors=True)
            demo_runs.append(run_timed([sys.executable, "-m", "rxbench", "demo", "--out", str(demo_dir), "--json"]))
    print(f"\nrxbench analyze of the demo session ({args.rounds} interleaved rounds; median (range))")
    ours = runs["rxbench analyze"]
    for name, results in runs.items():
        print(_summary(name, results, ours), flush=True)
    if demo_runs:
        print("\nrxbench demo (capture, analysis, report)")
        print(_summary("rxbench demo", demo_runs, None))
    shutil.rmtree(demo_dir, ignore_errors=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
