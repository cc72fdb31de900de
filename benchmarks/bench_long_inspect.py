"""Peak memory and time of ``envpredict inspect`` on a long (default 60 min) 48 kHz 16-bit recording.

Run by hand: ``python benchmarks/bench_long_inspect.py [--minutes 60] [--keep DIR]``.
Writes an invented speech-like recording block by block (in a child process of its
own): a harmonic complex (30 harmonics, amplitudes 1/k) whose F0 glides between about
100 and 160 Hz (slow sinusoid plus a faster one), with a 4 Hz syllable envelope
(raised cosine to the power 2, every fifth syllable silent: pauses) and white noise
30 dB below the signal, written as 16-bit PCM. Then runs
``envpredict inspect FILE --json`` in another child process and prints its wall time
and peak resident memory (``os.wait4`` of that child alone, i.e. its ``ru_maxrss``;
the benchmark's own process stays small). Goal (issue 8): peak RSS <= 600 MB for
60 minutes. As a sanity check it prints the median F0 (expected near the median of
the F0 contour, about 130 Hz) and the dominant modulation rate (expected near 4 Hz).
"""

from __future__ import annotations

import tempfile
from pathlib import Path

from _measure import analyse_in_child, long_recording_parser, write_in_child

BLOCK_S = 20.0
LIMIT_MB = 600.0
SYLLABLE_HZ = 4.0


def write_recording(path: Path, minutes: float, fs: int, noise_db: float = 30.0, seed: int = 0) -> None:
    import numpy as np
    import soundfile as sf

    rng = np.random.default_rng(seed)
    total = int(round(minutes * 60 * fs))
    block = int(BLOCK_S * fs)
    phase = 0.0
    with sf.SoundFile(str(path), "w", fs, 1, "PCM_16") as f:
        for start in range(0, total, block):
            t = np.arange(start, min(total, start + block)) / fs
            f0 = 130.0 + 20.0 * np.sin(2 * np.pi * 0.07 * t) + 10.0 * np.sin(2 * np.pi * 0.9 * t)
            ph = phase + 2 * np.pi * np.cumsum(f0) / fs
            phase = float(ph[-1])
            x = sum(np.cos(k * ph) / k for k in range(1, 31))
            syl = np.floor(t * SYLLABLE_HZ).astype(np.int64)
            env = (0.5 - 0.5 * np.cos(2 * np.pi * SYLLABLE_HZ * t)) ** 2 * (syl % 5 != 4)
            y = 0.08 * x * env
            # signal RMS: harmonic power sum(1/k^2)/2 times the mean of env^2 (sin^8: 35/128; 4 of 5 syllables)
            rms = 0.08 * np.sqrt(np.sum(1.0 / np.arange(1, 31) ** 2) / 2 * 35 / 128 * 4 / 5)
            f.write(y + rms * 10 ** (-noise_db / 20) * rng.standard_normal(t.size))


def main() -> None:
    a = long_recording_parser(__doc__, minutes=60.0, fs=48000).parse_args()
    if a.write_only is not None:
        write_recording(a.write_only, a.minutes, a.fs)
        return

    with tempfile.TemporaryDirectory() as tmp:
        folder = a.keep or Path(tmp)
        folder.mkdir(parents=True, exist_ok=True)
        path = folder / f"speechlike_{a.minutes:g}min_{a.fs}.wav"
        write_in_child(__file__, path, a.minutes, a.fs)
        d, wall, peak_mb = analyse_in_child("inspect", path)
        print(f"duration {d['duration_s']:.1f} s; voiced {100 * d['voiced_fraction']:.0f} %; median F0 "
              f"{d['f0_median_hz']} Hz (contour median ~130 Hz); modulation peak {d['modulation_peak_hz']} Hz "
              f"(syllable rate {SYLLABLE_HZ:g} Hz)")
        verdict = "OK" if peak_mb <= LIMIT_MB else "OVER THE LIMIT"
        print(f"analysis wall time {wall:.1f} s ({wall / max(a.minutes, 1e-9):.1f} s per minute); "
              f"peak RSS {peak_mb:.0f} MB (limit {LIMIT_MB:.0f} MB): {verdict}")


if __name__ == "__main__":
    main()
