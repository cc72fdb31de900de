"""Time envpredict's STOI and ESTOI against pystoi on the same invented 30 s pair.

Run by hand: ``python benchmarks/bench_stoi.py [--seconds 30] [--repeat 5]``.

Both are called as a user calls them: ``envpredict.stoi(x, y, fs)`` then
``envpredict.estoi(x, y, fs)`` (two separate calls), against ``pystoi.stoi(x, y, fs)``
then ``pystoi.stoi(x, y, fs, extended=True)``, in the same process, taking turns,
median of ``--repeat`` runs each. Two rates: 16 kHz (both resample to 10 kHz first) and 10 kHz, where
no resampling hides the cost of the analysis itself.

Goals (issue 11): at least 5x faster than pystoi at 16 kHz and at least 3x at 10 kHz;
values equal to pystoi within 1e-9 at 10 kHz (same algorithm, same grid) and within
0.005 at 16 kHz (the two resamplers differ).
The pair is invented (benchmarks/_signals.py): a speech-like signal in fluctuating
speech-shaped noise at 0 dB SNR.
"""

from __future__ import annotations

import argparse
import statistics
import time

from _signals import at_snr, fluctuating_noise, speech_like

#: Goals per rate: (minimum speed ratio, maximum |difference| of the values).
GOALS = {16000: (5.0, 0.005), 10000: (3.0, 1e-9)}


def interleaved_medians(fn_a, fn_b, repeat: int) -> tuple[float, object, float, object]:
    """Median wall times of two functions run in turns (a, b, a, b, ...), with their last
    results: on a shared machine both see the same load, so their ratio is fair."""
    ta, tb, out_a, out_b = [], [], None, None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out_a = fn_a()
        t1 = time.perf_counter()
        out_b = fn_b()
        t2 = time.perf_counter()
        ta.append(t1 - t0)
        tb.append(t2 - t1)
    return statistics.median(ta), out_a, statistics.median(tb), out_b


def run(seconds: float, fs: int, repeat: int) -> bool:
    import pystoi

    import envpredict

    x = speech_like(seconds, fs, 1)
    y = at_snr(x, fluctuating_noise(x, fs, 2), 0.0)
    envpredict.stoi(x, y, fs)  # warm caches and lazy imports, like pystoi's module import
    pystoi.stoi(x, y, fs)

    t_ours, ours, t_ref, refs = interleaved_medians(
        lambda: (envpredict.stoi(x, y, fs), envpredict.estoi(x, y, fs)),
        lambda: (pystoi.stoi(x, y, fs), pystoi.stoi(x, y, fs, extended=True)),
        repeat,
    )
    ratio = t_ref / t_ours
    d = max(abs(ours[0] - refs[0]), abs(ours[1] - refs[1]))
    goal_ratio, goal_d = GOALS.get(fs, (5.0, 0.005))
    ok = ratio >= goal_ratio and d <= goal_d
    print(f"pair: {seconds:g} s at {fs} Hz, median of {repeat}")
    print(f"  envpredict stoi + estoi: {t_ours * 1000:8.1f} ms   STOI {ours[0]:.6f}  ESTOI {ours[1]:.6f}")
    print(f"  pystoi two calls:        {t_ref * 1000:8.1f} ms   STOI {refs[0]:.6f}  ESTOI {refs[1]:.6f}")
    print(f"  speed ratio (pystoi / envpredict): {ratio:.1f}x   (goal >= {goal_ratio:g}x)")
    print(f"  max |difference|: {d:.2e}   (goal <= {goal_d:g})   {'ok' if ok else 'MISSED'}")
    return ok


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=30.0)
    ap.add_argument("--fs", type=int, nargs="*", default=[16000, 10000])
    ap.add_argument("--repeat", type=int, default=5)
    a = ap.parse_args()
    results = [run(a.seconds, fs, a.repeat) for fs in a.fs]
    raise SystemExit(0 if all(results) else 1)


if __name__ == "__main__":
    main()
