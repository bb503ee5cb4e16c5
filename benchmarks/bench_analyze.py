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
  checkout installed, e.g. main before the change), on the same session, as it comes and with its
  spectra pages always in a forked child;
- ``rxbench demo`` (capture, analysis and report), to check its wall time stays within 2x of its
  CPU time.

CPU time is user + system of the process and the children it waited for. It prints the medians and
the per-round ratios' median and range, and the load each run met: the CPU the rest of the
machine used meanwhile (/proc/stat), in cores (1.0 on two cores: the second one was taken). The
machine may be shared: only ratios taken in the same rounds mean much, and a forked child only
gains where the other load leaves a core free. ``--rounds-csv FILE`` writes every run. Target (DEVELOPERS.md): ``analyze`` of the demo session under 4 s of wall time on
two cores.
"""

from __future__ import annotations

import argparse
import csv
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
#: (by default the report forks only when the load average leaves a core free). The switch is
#: ``rxbench.report.helper.core_free``, before it ``rxbench.report.writer._core_free`` (a baseline).
FORCED = ("try:\n import rxbench.report.helper as h; h.core_free = lambda: {0}\n"
          "except ImportError:\n import rxbench.report.writer as w; w._core_free = lambda: {0}\n"
          "from rxbench.cli import run_console; run_console()")


def busy_cpu_s() -> float:
    """CPU time the whole machine has spent busy since boot (user, nice, system, irq, softirq), s;
    NaN where /proc/stat is not there (Linux only)."""
    try:
        with open("/proc/stat", encoding="ascii") as f:
            fields = f.readline().split()
    except OSError:
        return float("nan")
    user, nice, system, _idle, _iowait, irq, softirq = (int(x) for x in fields[1:8])
    return (user + nice + system + irq + softirq) / os.sysconf("SC_CLK_TCK")


def run_timed(cmd: list[str]) -> tuple[float, float, float]:
    """Wall time and CPU time (user + system, with waited-for children) of one child process, and
    the CPU time the rest of the machine used meanwhile (other processes: the load it met), s."""
    busy0 = busy_cpu_s()
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=CHILD_ENV)
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    busy = busy_cpu_s() - busy0
    err = proc.stderr.read().decode()
    proc.stderr.close()
    if os.waitstatus_to_exitcode(status) != 0:
        raise SystemExit(f"{' '.join(cmd)} failed: {err[-500:]}")
    cpu = usage.ru_utime + usage.ru_stime
    return wall, cpu, max(busy - cpu, 0.0)


def _summary(name: str, results: list, ref: list | None) -> str:
    wall = statistics.median(r[0] for r in results)
    cpu = statistics.median(r[1] for r in results)
    other = [r[2] / r[0] for r in results]  # cores the other processes kept busy, on average
    line = (f"  {name:34s} wall {wall:6.2f} s ({min(r[0] for r in results):.2f}-{max(r[0] for r in results):.2f})"
            f"  CPU {cpu:6.2f} s  wall/CPU {statistics.median(r[0] / r[1] for r in results):.2f}"
            f"  other load {statistics.median(other):.2f} cores ({min(other):.2f}-{max(other):.2f})")
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
    ap.add_argument("--rounds-csv", type=Path, help="write every run (round, name, wall, CPU, other load) here")
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
        cmds["baseline, spectra in a forked child"] = [args.baseline, "-c", FORCED.format(True), *analyze]
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
    if args.rounds_csv:
        with open(args.rounds_csv, "w", newline="", encoding="utf-8") as f:
            out = csv.writer(f)
            out.writerow(["round", "name", "wall_s", "cpu_s", "other_load_cores"])
            for name, results in runs.items():
                for i, (wall, cpu, other) in enumerate(results, start=1):
                    out.writerow([i, name, f"{wall:.3f}", f"{cpu:.3f}", f"{other / wall:.2f}"])
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
