"""Throughput of ``envpredict batch`` with 1 and 2 local workers, measured in one run.

Run by hand::

    python benchmarks/bench_batch.py [--rows 400] [--kind ir|pair] [--workers 2] [--repeat 5]

It writes a synthetic corpus (exponentially decaying noise impulse responses of
1.5 s at 48 kHz, or 4 s clean/degraded pairs at 16 kHz) to a temporary folder,
scores it with ``workers=1`` (in-process) and ``workers=N`` (process pool), each in a
fresh child process timed from its start (interpreter start and every import
included, like two separate command runs), checks that both results files are
identical, and prints rows/s end to end (worker start-up and first imports included)
and in the steady state, and their ratios.
Goal on 2 free cores: end-to-end ratio >= 1.8. The figures are only meaningful on an
otherwise idle machine: the load average before and after is printed beside them.
With ``--repeat N`` the measurement runs N times, each in a fresh child process (so
every run pays its own imports, like separate command runs), and the median ratios
are printed last.
"""

from __future__ import annotations

import argparse
import csv
import os
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import soundfile as sf


#: End-to-end throughput ratio, 2 workers against 1, that the pool must reach (issue 11).
GOAL_RATIO = 1.8

#: Distinct audio files; the manifest rows cycle through them (same work per row,
#: less disk space).
DISTINCT_FILES = 40


def make_ir_corpus(folder: Path, rows: int) -> Path:
    fs = 48000
    rng = np.random.default_rng(1)
    t = np.arange(int(1.5 * fs)) / fs
    for i in range(min(rows, DISTINCT_FILES)):
        t60 = (0.4, 0.8, 1.2)[i % 3]
        x = rng.standard_normal(t.size) * 10.0 ** (-3.0 * t / t60)
        sf.write(folder / f"ir{i:04d}.wav", 0.3 * x / np.abs(x).max(), fs, subtype="FLOAT")
    with open(folder / "manifest.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["ir", "condition", "position"])
        for i in range(rows):
            k = i % DISTINCT_FILES
            w.writerow([f"ir{k:04d}.wav", f"T{(0.4, 0.8, 1.2)[k % 3]}", f"P{i}"])
    return folder / "manifest.csv"


def make_pair_corpus(folder: Path, rows: int) -> Path:
    fs = 16000
    rng = np.random.default_rng(2)
    n = 4 * fs
    tt = np.arange(n) / fs
    for i in range(min(rows, DISTINCT_FILES)):
        env = (1 + 0.9 * np.sin(2 * np.pi * 4 * tt + i)) * (1 + 0.5 * np.sin(2 * np.pi * 1.3 * tt))
        clean = 0.05 * rng.standard_normal(n) * env
        snr = (-5, 0, 5)[i % 3]
        deg = clean + 0.05 * 10 ** (-snr / 20) * rng.standard_normal(n)
        sf.write(folder / f"c{i:04d}.wav", clean, fs, subtype="FLOAT")
        sf.write(folder / f"d{i:04d}.wav", deg, fs, subtype="FLOAT")
    with open(folder / "manifest.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["clean", "degraded", "condition", "utterance"])
        for i in range(rows):
            k = i % DISTINCT_FILES
            w.writerow([f"c{k:04d}.wav", f"d{k:04d}.wav", f"snr{(-5, 0, 5)[k % 3]}", f"u{i}"])
    return folder / "manifest.csv"


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=400)
    ap.add_argument("--kind", choices=["ir", "pair"], default="ir")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--repeat", type=int, default=1, help="runs, each in a fresh process; medians printed")
    args = ap.parse_args()
    if args.repeat > 1:
        return _repeat(args)

    from envpredict.batch import usable_cores

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        load0 = os.getloadavg()[0]
        manifest = (make_ir_corpus if args.kind == "ir" else make_pair_corpus)(folder, args.rows)
        # each configuration runs in a fresh child process, timed from its start: like two
        # separate command runs, each pays the interpreter start and all its imports (the
        # in-process run once, the pool in its workers or its fork server)
        r1_ = _child_run(manifest, folder / "r1.csv", 1)
        rn_ = _child_run(manifest, folder / "rn.csv", args.workers)
        same = (folder / "r1.csv").read_bytes() == (folder / "rn.csv").read_bytes()
    (s1, t1, st1), (sn, tn, stn) = r1_, rn_
    stamps = {1: st1, args.workers: stn}

    def steady(ts: list[float], skip: int) -> float:
        # rows/s after the first `skip` rows (worker start-up and first imports excluded)
        ts = ts[1:]  # the first call is progress(0, total)
        return (len(ts) - skip) / (ts[-1] - ts[skip - 1])

    r1, rn = s1["total"] / t1, sn["total"] / tn
    q1, qn = steady(stamps[1], 1), steady(stamps[args.workers], args.workers)
    print(f"corpus: {args.rows} {args.kind} rows; usable cores: {usable_cores()}; load average before/after: "
          f"{load0:.2f} / {os.getloadavg()[0]:.2f}")
    print(f"1 worker  ({s1['backend']}): {t1:7.2f} s  {r1:7.2f} rows/s   steady {q1:7.2f} rows/s")
    print(f"{args.workers} workers ({sn['backend']}): {tn:7.2f} s  {rn:7.2f} rows/s   steady {qn:7.2f} rows/s")
    print(f"ratio end to end (worker start-up included): {rn / r1:.2f}x   steady state: {qn / q1:.2f}x   "
          f"(goal on 2 idle cores: >= {GOAL_RATIO}x)")
    print(f"results identical: {same}; failed rows: {s1['failed']} / {sn['failed']}")
    return 0 if same and not (s1["failed"] or sn["failed"]) else 1


#: The child process of one measured run: prints the batch summary, then the
#: perf_counter of every progress call, as JSON.
_CHILD = """
import json, sys, time
from envpredict.batch import run_batch
stamps = []
s = run_batch(sys.argv[1], sys.argv[2], workers=int(sys.argv[3]),
              progress=lambda done, total: stamps.append(time.perf_counter()))
print(json.dumps({"summary": s.to_dict(), "stamps": stamps, "end": time.perf_counter()}))
"""


def _child_run(manifest: Path, out: Path, workers: int) -> tuple[dict, float, list[float]]:
    """Run one batch in a fresh interpreter; (summary, seconds from its start, progress stamps)."""
    import json
    import subprocess

    t0 = time.perf_counter()  # perf_counter is system-wide on Linux: comparable across processes
    r = subprocess.run([sys.executable, "-c", _CHILD, str(manifest), str(out), str(workers)],
                       capture_output=True, text=True, check=True)
    wall = time.perf_counter() - t0
    d = json.loads(r.stdout.strip().splitlines()[-1])
    return d["summary"], wall, d["stamps"]


def _repeat(args) -> int:
    import statistics
    import subprocess

    ends, steadies, ok = [], [], True
    cmd = [sys.executable, __file__, "--rows", str(args.rows), "--kind", args.kind, "--workers", str(args.workers)]
    for i in range(args.repeat):
        r = subprocess.run(cmd, capture_output=True, text=True)
        print(f"run {i + 1}:\n{r.stdout.rstrip()}")
        ok = ok and r.returncode == 0
        for line in r.stdout.splitlines():
            if line.startswith("ratio end to end"):
                parts = line.replace("x", " ").split()
                ends.append(float(parts[parts.index("included):") + 1]))
                steadies.append(float(parts[parts.index("state:") + 1]))
    print(f"median of {len(ends)} runs: end to end {statistics.median(ends):.2f}x   steady state "
          f"{statistics.median(steadies):.2f}x   (goal on 2 idle cores: >= {GOAL_RATIO}x end to end)")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
