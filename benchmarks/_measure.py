"""Shared helpers of the memory benchmarks: run one child process and measure it alone;
write a long recording in a child of its own and analyse it with the CLI in another."""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path


def run_measured(args: list[str]) -> tuple[int, str, str, float, float]:
    """Run a child; return (exit code, stdout, stderr, wall time s, peak RSS MB) of that child alone.

    ``os.wait4`` gives the child's own resource usage; ``RUSAGE_CHILDREN`` would mix in
    every other child of this process (such as the one that wrote the test file).
    """
    with tempfile.TemporaryFile() as fo, tempfile.TemporaryFile() as fe:
        t0 = time.perf_counter()
        p = subprocess.Popen(args, stdout=fo, stderr=fe)
        _, status, usage = os.wait4(p.pid, 0)
        wall = time.perf_counter() - t0
        p.returncode = os.waitstatus_to_exitcode(status)
        fo.seek(0)
        fe.seek(0)
        return p.returncode, fo.read().decode(), fe.read().decode(), wall, usage.ru_maxrss / 1024.0  # KiB


def run_or_exit(args: list[str]) -> tuple[str, float, float]:
    """:func:`run_measured`, stopping the benchmark with the child's stderr if it failed.
    Returns (stdout, wall time s, peak RSS MB)."""
    code, out, err, wall, peak_mb = run_measured(args)
    if code != 0:
        print(err)
        raise SystemExit(1)
    return out, wall, peak_mb


def long_recording_parser(doc: str, minutes: float, fs: int) -> argparse.ArgumentParser:
    """The options every long-recording benchmark takes: --minutes, --fs, --keep and the
    hidden --write-only (the child that writes the recording)."""
    ap = argparse.ArgumentParser(description=doc.splitlines()[0])
    ap.add_argument("--minutes", type=float, default=minutes, help=f"length of the recording (default {minutes:g})")
    ap.add_argument("--fs", type=int, default=fs)
    ap.add_argument("--keep", type=Path, default=None, help="write the recording here and keep it")
    ap.add_argument("--write-only", type=Path, default=None, help=argparse.SUPPRESS)
    return ap


def write_in_child(script: str, path: Path, minutes: float, fs: int, *extra: str) -> None:
    """Run ``script --write-only PATH`` in a child process of its own (its memory stays out
    of the analysis' peak) and say what was written."""
    _, wall, _ = run_or_exit(
        [sys.executable, script, "--write-only", str(path), "--minutes", str(minutes), "--fs", str(fs), *extra])
    print(f"wrote {path.name}: {minutes:g} min at {fs} Hz, 16-bit, {path.stat().st_size / 1e6:.0f} MB, "
          f"in {wall:.0f} s")


def analyse_in_child(command: str, path: Path) -> tuple[dict, float, float]:
    """Run ``envpredict COMMAND PATH --json`` in a child process; return (its JSON output,
    wall time s, peak RSS MB of that child alone)."""
    out, wall, peak_mb = run_or_exit(
        [sys.executable, "-c", "from envpredict.cli import main; main()", command, str(path), "--json"])
    return json.loads(out), wall, peak_mb
