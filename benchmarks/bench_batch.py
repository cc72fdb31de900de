"""Throughput of ``envpredict batch`` with 1 and 2 local workers, measured in one run.

Run by hand::

    python benchmarks/bench_batch.py [--rows 160] [--kind ir|pair] [--workers 2]

It writes a synthetic corpus (exponentially decaying noise impulse responses at
48 kHz, or 4 s clean/degraded pairs at 16 kHz) to a temporary folder, scores it with
``workers=1`` (in this process) and ``workers=N`` (process pool, start-up of the
worker processes included), checks that both results files are identical, and prints
rows/s and the ratio. Goal on 2 free cores: ratio >= 1.7. The figures are only
meaningful on an otherwise idle machine.
"""

from __future__ import annotations

import argparse
import csv
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import soundfile as sf


def make_ir_corpus(folder: Path, rows: int) -> Path:
    fs = 48000
    rng = np.random.default_rng(1)
    t = np.arange(int(1.5 * fs)) / fs
    with open(folder / "manifest.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["ir", "condition", "position"])
        for i in range(rows):
            t60 = (0.4, 0.8, 1.2)[i % 3]
            x = rng.standard_normal(t.size) * 10.0 ** (-3.0 * t / t60)
            sf.write(folder / f"ir{i:04d}.wav", 0.3 * x / np.abs(x).max(), fs, subtype="FLOAT")
            w.writerow([f"ir{i:04d}.wav", f"T{t60}", f"P{i // 3}"])
    return folder / "manifest.csv"


def make_pair_corpus(folder: Path, rows: int) -> Path:
    fs = 16000
    rng = np.random.default_rng(2)
    n = 4 * fs
    tt = np.arange(n) / fs
    with open(folder / "manifest.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["clean", "degraded", "condition", "utterance"])
        for i in range(rows):
            env = (1 + 0.9 * np.sin(2 * np.pi * 4 * tt + i)) * (1 + 0.5 * np.sin(2 * np.pi * 1.3 * tt))
            clean = 0.05 * rng.standard_normal(n) * env
            snr = (-5, 0, 5)[i % 3]
            deg = clean + 0.05 * 10 ** (-snr / 20) * rng.standard_normal(n)
            sf.write(folder / f"c{i:04d}.wav", clean, fs, subtype="FLOAT")
            sf.write(folder / f"d{i:04d}.wav", deg, fs, subtype="FLOAT")
            w.writerow([f"c{i:04d}.wav", f"d{i:04d}.wav", f"snr{snr}", f"u{i}"])
    return folder / "manifest.csv"


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=160)
    ap.add_argument("--kind", choices=["ir", "pair"], default="ir")
    ap.add_argument("--workers", type=int, default=2)
    args = ap.parse_args()

    from envpredict.batch import run_batch, score_row, usable_cores

    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        manifest = (make_ir_corpus if args.kind == "ir" else make_pair_corpus)(folder, args.rows)
        # warm up this process (imports, caches) so that the 1-worker run is not penalised
        from envpredict.batch import read_manifest

        score_row(read_manifest(manifest).jobs[0])
        t0 = time.perf_counter()
        s1 = run_batch(manifest, folder / "r1.csv", workers=1)
        t1 = time.perf_counter() - t0
        t0 = time.perf_counter()
        sn = run_batch(manifest, folder / "rn.csv", workers=args.workers)
        tn = time.perf_counter() - t0
        same = (folder / "r1.csv").read_bytes() == (folder / "rn.csv").read_bytes()
    r1, rn = s1.total / t1, sn.total / tn
    print(f"corpus: {args.rows} {args.kind} rows; usable cores: {usable_cores()}")
    print(f"1 worker  ({s1.backend}): {t1:7.2f} s  {r1:7.2f} rows/s")
    print(f"{args.workers} workers ({sn.backend}): {tn:7.2f} s  {rn:7.2f} rows/s  (worker start-up included)")
    print(f"ratio: {rn / r1:.2f}x   (goal on 2 idle cores: >= 1.7x)")
    print(f"results identical: {same}; failed rows: {s1.failed} / {sn.failed}")
    return 0 if same and not (s1.failed or sn.failed) else 1


if __name__ == "__main__":
    sys.exit(main())
