"""CPU time of `envpredict --help` (goal <= 1 s): the CLI imports heavy modules lazily.

Run by hand:  python benchmarks/bench_help.py
"""

from __future__ import annotations

import resource
import subprocess
import sys


def measure(repeat: int = 5) -> float:
    """Median CPU time (user + system) of one `--help` run in a fresh interpreter, s."""
    times = []
    for _ in range(repeat):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        subprocess.run([sys.executable, "-c", "from envpredict.cli import main; main(['--help'])"],
                       check=True, stdout=subprocess.DEVNULL)
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        times.append((after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime))
    times.sort()
    return times[len(times) // 2]


def main() -> None:
    t = measure()
    base = []
    for _ in range(5):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        subprocess.run([sys.executable, "-c", "pass"], check=True)
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        base.append((after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime))
    base.sort()
    print(f"bare interpreter start:        {base[2]:.3f} s CPU")
    print(f"envpredict --help:             {t:.3f} s CPU  (goal <= 1 s)")


if __name__ == "__main__":
    main()
