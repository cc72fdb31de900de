"""Shared helper of the memory benchmarks: run one child process and measure it alone."""

from __future__ import annotations

import os
import subprocess
import tempfile
import time


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
