"""Peak memory and time of ``envpredict stipa`` on a long (default 60 min) 48 kHz 16-bit recording.

Run by hand: ``python benchmarks/bench_long_stipa.py [--minutes 60] [--keep DIR]``.
Writes an invented STIPA recording block by block: the loopable 100 s STIPA signal,
passed once through a room (exponentially decaying noise impulse response of
reverberation time ``--t60``, applied as a circular convolution of the 100 s period,
which is exactly the steady-state response of the looped signal), looped to the
length asked for, plus fresh white noise ``--noise-db`` below the signal RMS, written
as 16-bit PCM (in a child process of its own). Then runs the CLI analysis in another
child process and prints its wall time and peak resident memory (``os.wait4`` of that
child alone; the benchmark's own process stays small, because Linux counts the memory
of the process that starts a child into the child's peak). Goal (issue 8): peak RSS
<= 600 MB for 60 minutes. For a sanity check it also prints the STI of the analytic
MTF of the exponential decay (Houtgast & Steeneken; no noise, so a little higher
than the measurement).
"""

from __future__ import annotations

import tempfile
from pathlib import Path

from _measure import analyse_in_child, long_recording_parser, write_in_child

BLOCK_S = 20.0
LIMIT_MB = 600.0
PERIOD_S = 100.0  # the STIPA signal's loopable length (common period of its modulations)


def write_recording(path: Path, minutes: float, fs: int, t60: float, noise_db: float, seed: int = 0) -> None:
    import numpy as np
    import soundfile as sf

    from envpredict.signals import stipa_signal

    rng = np.random.default_rng(seed)
    x = stipa_signal(PERIOD_S, fs, seed=seed)
    n_ir = int(1.6 * t60 * fs)
    t = np.arange(n_ir) / fs
    h = rng.standard_normal(n_ir) * np.exp(-6.9 * t / t60)  # energy -60 dB after t60
    y = np.fft.irfft(np.fft.rfft(x) * np.fft.rfft(h, x.size), x.size)  # periodic steady state
    del x
    y *= 0.3 / np.abs(y).max()
    noise_rms = np.sqrt(np.mean(y * y)) * 10 ** (-noise_db / 20)
    total = int(round(minutes * 60 * fs))
    block = int(BLOCK_S * fs)
    with sf.SoundFile(str(path), "w", fs, 1, "PCM_16") as f:
        for start in range(0, total, block):
            idx = np.arange(start, min(total, start + block)) % y.size
            f.write(y[idx] + noise_rms * rng.standard_normal(idx.size))


def main() -> None:
    ap = long_recording_parser(__doc__, minutes=60.0, fs=48000)
    ap.add_argument("--t60", type=float, default=0.8, help="reverberation time of the room, s")
    ap.add_argument("--noise-db", type=float, default=30.0, help="white noise this far below the signal RMS, dB")
    a = ap.parse_args()
    if a.write_only is not None:
        write_recording(a.write_only, a.minutes, a.fs, a.t60, a.noise_db)
        return

    with tempfile.TemporaryDirectory() as tmp:
        folder = a.keep or Path(tmp)
        folder.mkdir(parents=True, exist_ok=True)
        path = folder / f"stipa_{a.minutes:g}min_{a.fs}.wav"
        write_in_child(__file__, path, a.minutes, a.fs, "--t60", str(a.t60), "--noise-db", str(a.noise_db))
        d, wall, peak_mb = analyse_in_child("stipa", path)
        rec = d["recordings"][0]
        print(f"STI {d['sti']:.3f} +- {d['uncertainty']:.3f} ({len(d['window_sti'])} windows), analysed "
              f"{rec['analysed_start_s']:.1f}-{rec['analysed_end_s']:.1f} s of {rec['duration_s']:.1f} s")
        from _signals import decay_mtf

        from envpredict import standards as std
        from envpredict.sti import sti_from_mtf

        mtf = decay_mtf(std.STIPA_MODULATION_HZ, a.t60)
        print(f"analytic STI of the decay alone (T = {a.t60:g} s, no noise): "
              f"{sti_from_mtf(mtf, modulation_hz=std.STIPA_MODULATION_HZ, auditory=False).sti:.3f}")
        verdict = "OK" if peak_mb <= LIMIT_MB else "OVER THE LIMIT"
        print(f"analysis wall time {wall:.1f} s; peak RSS {peak_mb:.0f} MB (limit {LIMIT_MB:.0f} MB): {verdict}")


if __name__ == "__main__":
    main()
