"""The capture pass against its limit, against numpy + scipy.signal.welch, and against another
rxbench (e.g. main before a change): whole processes, side by side, as ratios.

Run on demand (not part of the test run):

    python benchmarks/bench_pass.py [--durations 1 60 300] [--rounds 5] [--baseline PYTHON]
                                    [--baseline-tree PATH ...]

For each duration it writes a cu8 capture at 2.4 MS/s (the 1 s one by ``rxbench synth``, longer
ones by repeating it) and times, in interleaved rounds:

- ``rxbench inspect CAPTURE --rate 2.4e6 --json``;
- the limit: a script that only reads the same file in the same 4 MiB blocks, decodes cu8 and
  FFTs the same 4096-point half-overlapped Hann segments (``scipy.fft``, all cores), summing |X|^2;
- ``--baseline PYTHON``: ``rxbench inspect`` run by another interpreter (a venv with another
  checkout installed), e.g. main before the change;
- ``--baseline-tree PATH`` (repeatable): ``rxbench inspect`` of another checkout (e.g. a
  ``git worktree`` of main before the change), run by this same interpreter with that tree's
  ``bench/`` and ``dsp/`` put on ``PYTHONPATH`` as the package ``rxbench``. Prefer it to
  ``--baseline`` for memory: two venvs holding the very same numpy wheel have been seen to differ
  by 5 MB of resident memory on ``import numpy`` alone (20.7 vs 15.2 MB), which reads as the
  change's cost;
- numpy + ``scipy.signal.welch`` on the whole file in memory, for captures up to ``--welch-max-s``.

It prints medians of the wall times, the peak resident memory and the CPU time (user + system) of
each, and the per-round ratios' median and range of all three. The machine is shared and noisy: compare ratios taken in the same rounds.
Targets (DEVELOPERS.md): the 60 s pass within 1.25x of the limit, 1 s within 1.5x, peak memory
flat in the capture length, and within 10 % of the baseline in time and memory.
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import subprocess
import sys
import tempfile
import zlib
from pathlib import Path

from bench_inspect import CHILD_ENV, run_timed  # the same timing of a child process (this folder is on sys.path)

RATE = 2.4e6

LIMIT_SCRIPT = """
import sys, numpy as np, scipy.fft
n, step, block = 4096, 2048, 4 << 20
w = (0.5 - 0.5 * np.cos(2 * np.pi * np.arange(n) / n)).astype(np.float32)
total = np.zeros(n)
tail = np.zeros(0, np.complex64)
with open(sys.argv[1], "rb") as f:
    while True:
        raw = np.frombuffer(f.read(block), np.uint8)
        if raw.size == 0:
            break
        x = ((raw.astype(np.float32) - np.float32(127.5)) / np.float32(127.5)).view(np.complex64)
        x = np.concatenate([tail, x])
        k = 0 if x.size < n else 1 + (x.size - n) // step
        if k:
            seg = np.lib.stride_tricks.sliding_window_view(x, n)[::step][:k]
            for i in range(0, k, 64):
                spec = scipy.fft.fft(seg[i:i + 64] * w, axis=-1, workers=-1)
                total += (spec.real ** 2 + spec.imag ** 2).sum(axis=0)
        tail = x[k * step:].copy()
print(int(np.argmax(total)))
"""

WELCH_SCRIPT = """
import sys, numpy as np, scipy.signal
raw = np.fromfile(sys.argv[1], dtype=np.uint8).astype(np.float32)
x = ((raw[0::2] - 127.5) + 1j * (raw[1::2] - 127.5)) / 127.5
f, p = scipy.signal.welch(x, fs=2.4e6, nperseg=4096, return_onesided=False)
print(f[int(np.argmax(p))])
"""

def make_capture(work: Path, seconds: int) -> Path:
    one = work / "one_second.cu8"
    if not one.exists():
        subprocess.run([sys.executable, "-m", "rxbench", "synth", str(one), "--rate", str(RATE), "--duration", "1"],
                       check=True, stdout=subprocess.DEVNULL)
    if seconds == 1:
        return one
    out = work / f"seconds_{seconds}.cu8"
    if not out.exists():
        with open(out, "wb") as dst:
            for _ in range(seconds):
                with open(one, "rb") as src:
                    shutil.copyfileobj(src, dst)
    return out


def tree_package(work: Path, tree: Path) -> Path:
    """A folder holding ``rxbench`` as a package made of links to ``tree``'s ``bench/`` entries and
    its ``dsp/`` (the layout pyproject.toml installs), to put on PYTHONPATH."""
    tree = tree.resolve()
    if not (tree / "bench" / "__init__.py").is_file() or not (tree / "dsp").is_dir():
        raise SystemExit(f"--baseline-tree {tree}: not an rxbench checkout (no bench/__init__.py or dsp/)")
    root = work / "trees" / f"{tree.name}-{zlib.crc32(str(tree).encode()):08x}"
    pkg = root / "rxbench"
    if pkg.exists():
        shutil.rmtree(pkg)
    pkg.mkdir(parents=True)
    for entry in (tree / "bench").iterdir():
        if entry.name not in ("dsp", "__pycache__"):
            (pkg / entry.name).symlink_to(entry)
    (pkg / "dsp").symlink_to(tree / "dsp")
    found = subprocess.run([sys.executable, "-c", "import rxbench; print(rxbench.__file__)"], env={**CHILD_ENV, "PYTHONPATH": str(root)},
                           capture_output=True, text=True, check=True).stdout.strip()
    if not found.startswith(str(pkg)):
        raise SystemExit(f"--baseline-tree {tree}: rxbench imports from {found}, not from the tree")
    return root


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--durations", type=int, nargs="+", default=[1, 60, 300])
    ap.add_argument("--rounds", type=int, default=5)
    ap.add_argument("--baseline", help="python of another rxbench install to compare with")
    ap.add_argument("--baseline-tree", type=Path, action="append", default=[],
                    help="another rxbench checkout, run by this interpreter (repeatable)")
    ap.add_argument("--welch-max-s", type=float, default=10.0)
    ap.add_argument("--workdir", type=Path)
    args = ap.parse_args()
    work = args.workdir or Path(tempfile.mkdtemp(prefix="rxbench-pass-"))
    work.mkdir(parents=True, exist_ok=True)
    limit, welch = work / "limit.py", work / "welch.py"
    limit.write_text(LIMIT_SCRIPT)
    welch.write_text(WELCH_SCRIPT)
    trees = {f"tree {tree.name}": {"PYTHONPATH": str(tree_package(work, tree))} for tree in args.baseline_tree}
    for seconds in args.durations:
        cap = make_capture(work, seconds)
        inspect = ["-m", "rxbench", "inspect", str(cap), "--rate", str(RATE), "--json"]
        cmds = {"rxbench inspect": [sys.executable, *inspect], "limit (read, decode, FFT)": [sys.executable, str(limit), str(cap)]}
        if args.baseline:
            cmds["baseline inspect"] = [args.baseline, *inspect]
        for name in trees:
            cmds[name] = [sys.executable, *inspect]
        if seconds <= args.welch_max_s:
            cmds["numpy + scipy.signal.welch"] = [sys.executable, str(welch), str(cap)]
        envs = {name: trees.get(name) for name in cmds}
        for name, cmd in cmds.items():  # one untimed run each: page cache, bytecode
            run_timed(cmd, env=envs[name])
        runs = {name: [] for name in cmds}
        for _ in range(args.rounds):
            for name, cmd in cmds.items():
                runs[name].append(run_timed(cmd, cpu=True, env=envs[name]))
        ours = runs["rxbench inspect"]
        print(f"\n{seconds} s at 2.4 MS/s cu8 ({cap.stat().st_size / 1e6:.0f} MB), {args.rounds} interleaved rounds")
        for name, results in runs.items():
            t = statistics.median(r[0] for r in results)
            mem = statistics.median(r[1] for r in results)
            cpu = statistics.median(r[2] for r in results)
            line = f"  {name:28s} {t:7.3f} s  {mem:7.0f} MB  cpu {cpu:7.3f} s"
            if name != "rxbench inspect":
                ratios = [a[0] / b[0] for a, b in zip(ours, results)]
                mems = [a[1] / b[1] for a, b in zip(ours, results)]
                cpus = [a[2] / b[2] for a, b in zip(ours, results)]
                line += (f"   inspect/this: time {statistics.median(ratios):.3f}x ({min(ratios):.2f}-{max(ratios):.2f}),"
                         f" memory {statistics.median(mems):.3f}x ({min(mems):.2f}-{max(mems):.2f}),"
                         f" cpu {statistics.median(cpus):.3f}x ({min(cpus):.2f}-{max(cpus):.2f})")
            print(line, flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
