"""Time envpredict's STOI + ESTOI against pystoi on the same 30 s, 16 kHz pair.

Run by hand: ``python benchmarks/bench_stoi.py [--seconds 30] [--repeat 3]``.
Prints both timings (best of ``--repeat``), their ratio and the differences of the
values. Goal (issue 3): at least 3x faster than pystoi, values within 0.005.
The pair is invented: a speech-like signal (tests/test_correlation.py) in
fluctuating speech-shaped noise at 0 dB SNR.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from test_correlation import at_snr, fluctuating_noise, speech_like  # noqa: E402


def best(fn, repeat: int) -> tuple[float, object]:
    times, out = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=30.0)
    ap.add_argument("--fs", type=int, default=16000)
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()

    import pystoi

    from envpredict.correlation import correlation_indices

    fs = a.fs
    x = speech_like(a.seconds, fs, 1)
    y = at_snr(x, fluctuating_noise(x, fs, 2), 0.0)

    t_ours, ours = best(lambda: correlation_indices(x, y, fs), a.repeat)
    t_ref, refs = best(lambda: (pystoi.stoi(x, y, fs), pystoi.stoi(x, y, fs, extended=True)), a.repeat)
    d_stoi = abs(ours.stoi - refs[0])
    d_estoi = abs(ours.estoi - refs[1])
    print(f"pair: {a.seconds:g} s at {fs} Hz, best of {a.repeat}")
    print(f"envpredict STOI+ESTOI: {t_ours * 1000:8.1f} ms   STOI {ours.stoi:.4f}  ESTOI {ours.estoi:.4f}")
    print(f"pystoi     STOI+ESTOI: {t_ref * 1000:8.1f} ms   STOI {refs[0]:.4f}  ESTOI {refs[1]:.4f}")
    print(f"speed ratio (pystoi / envpredict): {t_ref / t_ours:.1f}x   (goal >= 3x)")
    print(f"|difference|: STOI {d_stoi:.5f}  ESTOI {d_estoi:.5f}   (goal <= 0.005)")


if __name__ == "__main__":
    main()
