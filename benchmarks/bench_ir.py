"""Speed of the IR path: STI + ISO 3382-1 figures vs the cost of seven band-pass filters.

Run by hand:  python benchmarks/bench_ir.py

The reference is measured in the same run: seven 6th-order Butterworth band passes
(scipy.signal.sosfiltfilt) over the same 3 s, 48 kHz impulse response -- the filtering
any octave-band analysis must do. Goal: the whole analysis within 3x of that.
"""

from __future__ import annotations

import time

import numpy as np
from scipy.signal import butter, sosfiltfilt

from envpredict.indirect import sti_from_ir


def best_of(fn, repeat=5):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main():
    fs = 48000
    rng = np.random.default_rng(0)
    t = np.arange(3 * fs) / fs
    ir = 0.2 * rng.standard_normal(t.size) * np.exp(-6.9 * t / 1.2) + 1e-4 * rng.standard_normal(t.size)
    sos = [butter(3, [fc / 2 ** 0.5, fc * 2 ** 0.5], btype="bandpass", fs=fs, output="sos")
           for fc in (125, 250, 500, 1000, 2000, 4000, 8000)]

    def reference():
        for s in sos:
            sosfiltfilt(s, ir)

    def ours():
        sti_from_ir(ir, fs, noise_db=[45, 42, 40, 38, 35, 30, 25])

    ours()  # warm-up (filter design cache, imports)
    t_ref = best_of(reference)
    t_ours = best_of(ours)
    print(f"seven sosfiltfilt band passes, 3 s @ 48 kHz: {1000 * t_ref:8.1f} ms")
    print(f"envpredict STI + decay figures (same IR):    {1000 * t_ours:8.1f} ms")
    print(f"ratio ours / reference: {t_ours / t_ref:.2f}x  (goal <= 3x)")


if __name__ == "__main__":
    main()
