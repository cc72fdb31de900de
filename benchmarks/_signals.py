"""Invented test material for the benchmarks (benchmarks never import test files).

A speech-like signal (voiced syllables through three formant resonances, fricative
noise bursts, pauses) and maskers built from it. Same recipe as the tests' helper
module, kept apart so that benchmarks and tests stay independent. Also the analytic
modulation transfer of an exponential decay, for the benchmarks' sanity prints.
"""

from __future__ import annotations

import numpy as np


def speech_like(seconds: float, fs: int, seed: int = 0) -> np.ndarray:
    """Invented speech-like signal: voiced syllables and fricative bursts with pauses."""
    from scipy.signal import butter, lfilter, sosfilt

    rng = np.random.default_rng(seed)
    n = int(seconds * fs)
    out = np.zeros(n)
    pos = int(0.2 * fs)
    while pos < n:
        size = min(int(rng.uniform(0.12, 0.3) * fs), n - pos)
        if size < 8:
            break
        ts = np.arange(size) / fs
        if rng.random() < 0.75:  # voiced: harmonic complex through three formants
            f0 = rng.uniform(90, 220) * (1 + 0.15 * np.sin(2 * np.pi * rng.uniform(1, 3) * ts))
            ph = 2 * np.pi * np.cumsum(f0) / fs
            nh = int(min(40, (fs / 2 - 200) // 220))
            src = sum(np.cos(h * ph) / h for h in range(1, nh + 1))
            sig = np.zeros(size)
            for fmt, bw in ((rng.uniform(300, 900), 90), (rng.uniform(900, 2500), 120),
                            (rng.uniform(2300, 3500), 180)):
                if fmt < fs / 2 - 100:
                    r = np.exp(-np.pi * bw / fs)
                    sig += lfilter([1 - r], [1, -2 * r * np.cos(2 * np.pi * fmt / fs), r * r], src)
        else:  # fricative: band-limited noise burst
            lo = rng.uniform(2000, 3500)
            sos = butter(4, [lo, min(0.45 * fs, lo + 3000)], "bandpass", fs=fs, output="sos")
            sig = 3 * sosfilt(sos, rng.standard_normal(size))
        out[pos : pos + size] += sig * np.sin(np.pi * ts / ts[-1]) ** 2 * rng.uniform(0.3, 1.0)
        gap = rng.uniform(0.2, 0.6) if rng.random() < 0.15 else rng.uniform(0.0, 0.05)
        pos += size + int(gap * fs)
    return 0.3 * out / np.max(np.abs(out))


def fluctuating_noise(x: np.ndarray, fs: int, seed: int) -> np.ndarray:
    """Noise with the long-term spectrum of ``x`` (random phases), 100 % modulated at 2-8 Hz."""
    rng = np.random.default_rng(seed)
    spec = np.abs(np.fft.rfft(x))
    noise = np.fft.irfft(spec * np.exp(2j * np.pi * np.random.default_rng(seed).random(spec.size)), x.size)
    t = np.arange(x.size) / fs
    return noise * (1 + np.sin(2 * np.pi * rng.uniform(2, 8) * t + rng.uniform(0, 2 * np.pi)))


def at_snr(x: np.ndarray, noise: np.ndarray, snr_db: float) -> np.ndarray:
    """``x`` plus ``noise`` scaled to the given signal-to-noise ratio (mean power), dB."""
    return x + noise * np.sqrt(np.mean(x ** 2) / np.mean(noise ** 2)) * 10 ** (-snr_db / 20)


def decay_mtf(modulation_hz: np.ndarray, t60: float) -> np.ndarray:
    """Analytic MTF of an exponential energy decay with reverberation time ``t60``, no noise:
    m(F) = (1 + (2 pi F T / 13.8)^2)^-1/2 (Houtgast & Steeneken 1985)."""
    return (1.0 + (2 * np.pi * np.asarray(modulation_hz) * t60 / 13.8) ** 2) ** -0.5
