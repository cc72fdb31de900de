"""Time the envelope-power index (sEPSM) of a 10 s 16 kHz pair against a plain reference.

Run by hand: ``python benchmarks/bench_sepsm.py [--seconds 10] [--repeat 5]``.

``envpredict.sepsm(mixture, noise, fs)`` (gammatone responses applied on the FFT grid,
one inverse FFT per band for the analytic signal, modulation filters as power weights)
against a plain implementation of the same model written here: each band filtered by
``scipy.signal.lfilter`` with the ``scipy.signal.gammatone`` design, its envelope by
``scipy.signal.hilbert``, the same modulation weights. Both on one core (thread
variables set to 1 before numpy loads), in turns, median of ``--repeat`` runs.

Goal (issue 15): under 1 s for a 10 s 16 kHz pair on one core; the two SNR_env values
within 0.5 dB (they differ only in the filters' start and end: the reference filters
causally without padding).
"""

from __future__ import annotations

import os

for _v in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_v, "1")

import argparse  # noqa: E402
import statistics  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402
from _signals import at_snr, speech_like  # noqa: E402

GOAL_S = 1.0
GOAL_DB = 0.5


def plain_snr_env_db(mix: np.ndarray, noise: np.ndarray, fs: int) -> float:
    """The sEPSM's SNR_env written plainly, band by band, in the time domain."""
    from scipy.signal import gammatone, hilbert, lfilter

    from envpredict import standards as std
    from envpredict.envpower import MAX_BAND_SHARE, modulation_weights

    bands = [b for b in std.SEPSM_BANDS_HZ if b <= MAX_BAND_SHARE * fs]
    f = np.fft.rfftfreq(mix.size, 1 / fs)
    w = modulation_weights(f) / (1 + (f / std.SEPSM_ENVELOPE_LOWPASS_HZ) ** 2)
    w[:, 0] = 0.0
    total = 0.0
    for fc in bands:
        b, a = gammatone(fc, "iir", fs=fs)
        p = []
        for sig in (mix, noise):
            env = np.abs(hilbert(lfilter(b, a, sig)))
            ps = np.abs(np.fft.rfft(env)) ** 2
            p.append(np.maximum(2 * (w @ ps) / ps[0], std.SEPSM_ENVELOPE_POWER_FLOOR))
        snr = np.maximum((p[0] - p[1]) / p[1], std.SEPSM_SNR_ENV_MIN)
        used = np.asarray(std.SEPSM_MODULATION_HZ) < std.SEPSM_MODULATION_SHARE * fc
        total += float(np.sum(snr[used] ** 2))
    return 10 * np.log10(np.sqrt(total))


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--seconds", type=float, default=10.0)
    ap.add_argument("--repeat", type=int, default=5)
    a = ap.parse_args()
    import envpredict

    fs = 16000
    x = speech_like(a.seconds, fs, 1)
    rng = np.random.default_rng(2)
    noise = at_snr(x, rng.standard_normal(x.size), 0.0) - x
    mix = x + noise
    envpredict.sepsm(mix, noise, fs)  # warm the lazy imports and the filter cache
    t_ours, t_ref = [], []
    for _ in range(a.repeat):
        t0 = time.perf_counter()
        ours = envpredict.sepsm(mix, noise, fs).snr_env_db
        t1 = time.perf_counter()
        ref = plain_snr_env_db(mix, noise, fs)
        t2 = time.perf_counter()
        t_ours.append(t1 - t0)
        t_ref.append(t2 - t1)
    mo, mr = statistics.median(t_ours), statistics.median(t_ref)
    ok = mo < GOAL_S and abs(ours - ref) <= GOAL_DB
    print(f"sEPSM of a {a.seconds:g} s {fs} Hz pair, one core: envpredict {mo:.3f} s, plain reference {mr:.3f} s "
          f"({mr / mo:.1f}x); SNR_env {ours:.2f} dB vs {ref:.2f} dB")
    print(f"goal: < {GOAL_S:g} s and within {GOAL_DB} dB: {'met' if ok else 'NOT met'}")
    return 0 if ok else 1


if __name__ == "__main__":
    raise SystemExit(main())
