"""Peak memory and time of ``pair_from_files`` on a long (default 30 min) 16 kHz pair.

Run by hand: ``python benchmarks/bench_long_pair.py [--minutes 30] [--keep DIR]``.
Writes an invented clean/degraded pair as 16-bit WAV files block by block
(speech-like signal from benchmarks/_signals.py; degraded = 120 ms late, in
fluctuating speech-shaped noise at 3 dB SNR), then analyses it in a child process and
prints the child's wall time and peak resident memory (resource.getrusage). Goal
(issue 3): peak RSS <= 600 MB for 30 minutes.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

from _measure import run_or_exit

BLOCK_S = 60.0
DELAY_S = 0.120
LIMIT_MB = 600.0

CHILD = """
import json, sys, time
from envpredict.pair import pair_from_files
t0 = time.perf_counter()
r = pair_from_files(sys.argv[1], sys.argv[2])
d = r.to_dict()
print(json.dumps({"seconds": time.perf_counter() - t0, "stoi": d["stoi"], "estoi": d["estoi"],
                  "ssti": d["ssti"], "delay_ms": d["delay_ms"], "duration_s": d["duration_s"],
                  "chunks": r.chunks}))
"""


def write_pair(folder: Path, minutes: float, fs: int) -> tuple[Path, Path]:
    import numpy as np
    import soundfile as sf
    from _signals import at_snr, fluctuating_noise, speech_like

    clean, degraded = folder / "clean.wav", folder / "degraded.wav"
    lag = int(DELAY_S * fs)
    n_blocks = int(np.ceil(minutes * 60 / BLOCK_S))
    with sf.SoundFile(clean, "w", fs, 1, "PCM_16") as fc, sf.SoundFile(degraded, "w", fs, 1, "PCM_16") as fd:
        fd.write(np.zeros(lag, dtype=np.float32))
        for b in range(n_blocks):
            x = speech_like(BLOCK_S, fs, seed=1000 + b)
            y = at_snr(x, fluctuating_noise(x, fs, seed=2000 + b), 3.0)
            fc.write(x.astype(np.float32))
            fd.write((0.5 * y).astype(np.float32))
    return clean, degraded


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--minutes", type=float, default=30.0)
    ap.add_argument("--fs", type=int, default=16000)
    ap.add_argument("--keep", type=Path, default=None, help="write the pair here and keep it")
    a = ap.parse_args()

    with tempfile.TemporaryDirectory() as tmp:
        folder = a.keep or Path(tmp)
        folder.mkdir(parents=True, exist_ok=True)
        t0 = time.perf_counter()
        clean, degraded = write_pair(folder, a.minutes, a.fs)
        print(f"wrote {a.minutes:g} min pair at {a.fs} Hz in {time.perf_counter() - t0:.0f} s")
        stdout, _wall, peak_mb = run_or_exit([sys.executable, "-c", CHILD, str(clean), str(degraded)])
        print(stdout.strip())
        verdict = "OK" if peak_mb <= LIMIT_MB else "OVER THE LIMIT"
        print(f"peak RSS of the analysis: {peak_mb:.0f} MB (limit {LIMIT_MB:.0f} MB): {verdict}")


if __name__ == "__main__":
    main()
