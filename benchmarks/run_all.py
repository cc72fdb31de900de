"""All speed goals in one run (each script measures its own reference in the same run).

Run by hand:  python benchmarks/run_all.py [--long]

(a) stoi() then estoi() vs pystoi's two calls, 30 s pair      goal >= 5x at 16 kHz, >= 3x at 10 kHz
(b) IR STI + decay figures vs seven sosfiltfilt band passes    goal <= 3x their time
(c) batch throughput, 2 workers vs 1, 400 IR rows               goal >= 1.8x
(d) `envpredict --help` CPU time                                goal <= 1 s
(e) design grid, 10 000 points x 20 loudspeakers, one core      goal < 1 s (ratio vs plain numpy printed)
(f) sEPSM of a 10 s 16 kHz pair, one core, vs a plain version  goal < 1 s
--long adds the peak-memory runs: a 30-minute 16 kHz pair and a 60-minute 48 kHz
STIPA recording (goal <= 600 MB each), and writing the one-hour 48 kHz STIPA test
signal (goal < 300 MB); several minutes each.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent

RUNS = [
    ("(a) STOI+ESTOI vs pystoi", ["bench_stoi.py"]),
    ("(b) IR path vs band-pass filtering", ["bench_ir.py"]),
    ("(c) batch throughput", ["bench_batch.py", "--rows", "400", "--repeat", "3"]),
    ("(d) --help CPU time", ["bench_help.py"]),
    ("(e) design grid vs plain numpy", ["bench_design.py"]),
    ("(f) sEPSM vs a plain implementation", ["bench_sepsm.py"]),
]
LONG = [
    ("long pair memory", ["bench_long_pair.py", "--minutes", "30"]),
    ("long STIPA memory", ["bench_long_stipa.py", "--minutes", "60"]),
    ("one-hour test signal memory", ["bench_testsignal_memory.py", "--seconds", "3600"]),
]


def main() -> int:
    runs = RUNS + (LONG if "--long" in sys.argv[1:] else [])
    failed = 0
    for title, args in runs:
        script = HERE / args[0]
        print(f"== {title}: {' '.join(args)}", flush=True)
        if not script.exists():
            print("   (script missing)")
            failed += 1
            continue
        r = subprocess.run([sys.executable, str(script), *args[1:]])
        failed += r.returncode != 0
        print(flush=True)
    return 1 if failed else 0


if __name__ == "__main__":
    raise SystemExit(main())
