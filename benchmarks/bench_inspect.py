"""Speed and memory of ``rxbench inspect``, whole process, against numpy-load + scipy.signal.welch.

Run on demand (not part of the test run):

    python benchmarks/bench_inspect.py [--workdir DIR] [--repeat 3] [--big-gb 1.0]

It writes a 10 s, 2.4 MS/s cu8 capture (48 MB) with ``rxbench synth``, then times, as separate
processes and side by side, ``rxbench inspect`` and a script that loads the same file with numpy and
runs ``scipy.signal.welch(nperseg=4096)``; and reports the peak resident memory of
``rxbench inspect`` on a capture of ``--big-gb`` GB (0 skips it). Targets: >= 10x faster than the
welch script; peak memory <= 200 MB whatever the capture length.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

#: The comparison script, in two flavours: single precision (a careful user) and the plain float64
#: arithmetic numpy gives by default.
WELCH_SCRIPT = """
import sys, numpy as np, scipy.signal
raw = np.fromfile(sys.argv[1], dtype=np.uint8){cast}
x = ((raw[0::2] - 127.5) + 1j * (raw[1::2] - 127.5)) / 127.5
f, p = scipy.signal.welch(x, fs=2.4e6, nperseg=4096, return_onesided=False)
k = int(np.argmax(p)); print(f[k], 10 * np.log10(p[k]))
"""


#: Children run as an installed program normally does: with its compiled bytecode cached (a
#: PYTHONDONTWRITEBYTECODE in the calling shell would make every run recompile rxbench's modules).
CHILD_ENV = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}


def run_timed(cmd: list[str], cpu: bool = False, env: dict | None = None) -> tuple:
    """Wall time (s) and peak RSS (MB) of one child process; with ``cpu`` also its CPU time (user +
    system, s), which a loaded machine disturbs less than the wall time. ``env``: variables added to
    the child's environment."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env={**CHILD_ENV, **(env or {})})
    _, status, usage = os.wait4(proc.pid, 0)
    elapsed = time.perf_counter() - t0
    if os.waitstatus_to_exitcode(status) != 0:
        raise SystemExit(f"{' '.join(cmd)} failed: {proc.stderr.read().decode()[-500:]}")
    if cpu:
        return elapsed, usage.ru_maxrss / 1024.0, usage.ru_utime + usage.ru_stime
    return elapsed, usage.ru_maxrss / 1024.0


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--workdir", type=Path, help="where to write the captures (default: a temp folder)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--big-gb", type=float, default=1.0, help="size of the memory-test capture, GB (0: skip)")
    args = ap.parse_args()
    work = args.workdir or Path(tempfile.mkdtemp(prefix="rxbench-bench-"))
    work.mkdir(parents=True, exist_ok=True)
    rx = [sys.executable, "-m", "rxbench"]
    cap = work / "ten_seconds.cu8"
    if not cap.exists():
        subprocess.run([*rx, "synth", str(cap), "--rate", "2.4e6", "--duration", "10"], check=True)
    scripts = {}
    for name, cast in (("float32", ".astype(np.float32)"), ("float64", "")):
        scripts[name] = work / f"welch_{name}.py"
        scripts[name].write_text(WELCH_SCRIPT.format(cast=cast))
    runs = {"rxbench inspect": [], "numpy + welch, float32": [], "numpy + welch, float64": []}
    # One untimed run of each first: the capture in the page cache, the bytecode compiled.
    run_timed([*rx, "inspect", str(cap), "--rate", "2.4e6", "--json"])
    run_timed([sys.executable, str(scripts["float32"]), str(cap)])
    for _ in range(args.repeat):
        runs["rxbench inspect"].append(run_timed([*rx, "inspect", str(cap), "--rate", "2.4e6", "--json"]))
        runs["numpy + welch, float32"].append(run_timed([sys.executable, str(scripts["float32"]), str(cap)]))
        runs["numpy + welch, float64"].append(run_timed([sys.executable, str(scripts["float64"]), str(cap)]))
    print(f"capture: {cap} ({cap.stat().st_size / 1e6:.0f} MB, 10 s at 2.4 MS/s cu8), median of {args.repeat}")
    t_ours = statistics.median(t for t, _ in runs["rxbench inspect"])
    for name, results in runs.items():
        t = statistics.median(t for t, _ in results)
        ratio = ""
        if not name.startswith("rxbench"):
            # Each round's runs are side by side, so the ratio within a round shares the machine's mood.
            rounds = sorted(w / r for (w, _), (r, _) in zip(results, runs["rxbench inspect"]))
            ratio = (f"   rxbench {t / t_ours:4.1f}x faster (target >= 10x; rounds "
                     f"{rounds[0]:.1f}-{rounds[-1]:.1f}x)")
        print(f"{name:24s} {t:6.2f} s   peak {max(m for _, m in results):6.0f} MB{ratio}")
    if args.big_gb > 0:
        big = work / "big.cu8"
        seconds = args.big_gb * 1e9 / (2 * 2.4e6)
        if not big.exists():
            subprocess.run([*rx, "synth", str(big), "--rate", "2.4e6", "--duration", f"{seconds:.3f}"], check=True)
        t_big, m_big = run_timed([*rx, "inspect", str(big), "--rate", "2.4e6", "--json"])
        print(f"rxbench inspect {big.stat().st_size / 1e9:.2f} GB: {t_big:.1f} s, peak {m_big:.0f} MB "
              "(target <= 200 MB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
