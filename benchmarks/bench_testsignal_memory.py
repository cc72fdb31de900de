"""Peak memory and time of ``envpredict testsignal stipa --seconds 3600`` (one hour at 48 kHz).

Run by hand: ``python benchmarks/bench_testsignal_memory.py [--seconds 3600] [--rate 48000] [--keep DIR]``.
Writes the STIPA test signal with the CLI in a child process (``os.wait4`` of that child
alone gives its peak resident memory), first at the default 100 s as the reference run,
then at the length asked for, and prints both peaks and their ratio. The signal is made
block by block, so its memory must not grow with its length (issue 12: before, one hour
needed about 49 GB, 13.6 MB per second of signal). Goal: peak RSS under 300 MB for one
hour at 48 kHz, and a ratio to the 100 s run near 1.
"""

from __future__ import annotations

import argparse
import json
import sys
import tempfile
from pathlib import Path

from _measure import run_or_exit

LIMIT_MB = 300.0
REFERENCE_S = 100.0


def write_signal(folder: Path, seconds: float, rate: int) -> tuple[dict, float, float]:
    path = folder / f"stipa_{seconds:g}s_{rate}.wav"
    out, wall, peak_mb = run_or_exit([sys.executable, "-c", "from envpredict.cli import main; main()", "testsignal",
                                      "stipa", str(path), "--seconds", str(seconds), "--rate", str(rate), "--json"])
    d = json.loads(out)
    print(f"{seconds:g} s at {rate} Hz: {path.stat().st_size / 1e6:.0f} MB written in {wall:.1f} s, "
          f"peak RSS {peak_mb:.0f} MB (RMS {d['rms_dbfs']:.2f} dBFS)")
    return d, wall, peak_mb


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=3600.0, help="length of the signal (default 3600)")
    ap.add_argument("--rate", type=int, default=48000)
    ap.add_argument("--keep", type=Path, default=None, help="write the files here and keep them")
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = a.keep or Path(tmp)
        folder.mkdir(parents=True, exist_ok=True)
        _, ref_wall, ref_mb = write_signal(folder, REFERENCE_S, a.rate)
        _, wall, peak_mb = write_signal(folder, a.seconds, a.rate)
    print(f"ratio to the {REFERENCE_S:g} s run: memory {peak_mb / ref_mb:.2f}x, time {wall / ref_wall:.1f}x "
          f"for {a.seconds / REFERENCE_S:g}x the length")
    verdict = "OK" if peak_mb <= LIMIT_MB else "OVER THE LIMIT"
    print(f"peak RSS {peak_mb:.0f} MB for {a.seconds:g} s (limit {LIMIT_MB:.0f} MB): {verdict}")
    if peak_mb > LIMIT_MB:
        raise SystemExit(1)


if __name__ == "__main__":
    main()
