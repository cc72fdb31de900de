"""Shared test signals and reference values (a helper module, not a test file).

Every test that needs invented speech, maskers or decays takes them from here; tests
never import other test files. All material is invented (no recordings): the recipes
below are written for the tests and owe nothing to the package's own generators, so a
test comparing the package with a reference does not feed the package its own output.

Reference helpers at the end call the reference library (pystoi) and state how closely
the package is expected to agree with it.
"""

from __future__ import annotations

import numpy as np

# ---------------------------------------------------------------------------
# Speech-like signals
# ---------------------------------------------------------------------------


def speech_like(seconds: float, fs: int, seed: int = 0) -> np.ndarray:
    """Invented speech-like signal: voiced syllables and fricative bursts with pauses.

    Voiced syllables (75 %) are harmonic complexes with a gliding F0 of 90-220 Hz through
    three two-pole formant resonances; fricatives are 4th-order Butterworth band-limited
    noise bursts above 2 kHz; each syllable has a sin**2 envelope of 120-300 ms, with
    occasional 0.2-0.6 s pauses. Peak 0.3.
    """
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


def harmonic_syllables(seconds: float = 3.0, fs: int = 16000, seed: int = 0) -> np.ndarray:
    """A simpler speech-like signal: a harmonic complex (F0 120 +- 20 Hz, 19 harmonics)
    gated by a 4 Hz syllable envelope, plus a -66 dB noise floor. Peak about 0.2."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * fs)) / fs
    f0 = 120 + 20 * np.sin(2 * np.pi * 0.5 * t)
    phase = 2 * np.pi * np.cumsum(f0) / fs
    x = sum(np.sin(k * phase) / k for k in range(1, 20))
    env = np.clip(np.sin(2 * np.pi * 4 * t), 0, None) ** 2
    return 0.2 * x * env / np.max(np.abs(x)) + 1e-4 * rng.standard_normal(t.size)


def gated_harmonic_complex(seconds: float = 3.0, fs: int = 16000, seed: int = 0) -> np.ndarray:
    """A gliding harmonic complex (F0 110 +- 10 Hz, 34 harmonics) gated by sin**2 syllables
    at 4 per second with random syllable levels (0.2-1.0). Peak 0.1. Used by the mapping
    and sweep tests, whose figures depend on this recipe."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * fs)) / fs
    phase = 2 * np.pi * np.cumsum(110 + 10 * np.sin(2 * np.pi * 0.5 * t)) / fs
    x = sum(np.sin(h * phase) / h for h in range(1, 35))
    amps = rng.uniform(0.2, 1.0, int(seconds * 4) + 1)
    env = np.repeat(amps, fs // 4)[: t.size] * np.maximum(0, np.sin(2 * np.pi * 2 * t)) ** 2
    return 0.1 * x * env / np.max(np.abs(x))


def raised_cosine_syllables(fs: int, seconds: float, seed: int = 3) -> np.ndarray:
    """A harmonic complex (F0 gliding 120-160 Hz, 24 harmonics) under a raised-cosine-squared
    4 Hz syllable envelope, peak 0.05, plus noise at 3e-4 rms. Used by the inspection tests."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * fs)) / fs
    ph = 2 * np.pi * np.cumsum(140.0 + 20.0 * np.sin(2 * np.pi * 0.4 * t)) / fs
    x = sum(np.cos(k * ph) / k for k in range(1, 25)) * (0.5 - 0.5 * np.cos(2 * np.pi * 4.0 * t)) ** 2
    return 0.05 * x / np.max(np.abs(x)) + 3e-4 * rng.standard_normal(t.size)


def intensity_modulated_noise(rate: float, m: float, fs: int, seconds: float, seed: int = 1) -> np.ndarray:
    """White noise whose intensity is 1 + m cos(2 pi rate t) (modulation index m by
    the definition of Houtgast & Steeneken 1985). Rms about 0.05."""
    t = np.arange(int(seconds * fs)) / fs
    n = np.random.default_rng(seed).standard_normal(t.size)
    return 0.05 * n * np.sqrt(1.0 + m * np.cos(2 * np.pi * rate * t))


def two_rate_modulated_noise(rng: np.random.Generator, n: int, fs: int) -> np.ndarray:
    """Gaussian noise with 4 Hz and 1.3 Hz intensity modulation: a speech-like envelope
    without a carrier structure. Draws ``n`` normals from ``rng`` (callers share one
    generator across a corpus)."""
    t = np.arange(n) / fs
    env = (1 + 0.9 * np.sin(2 * np.pi * 4 * t)) * (1 + 0.5 * np.sin(2 * np.pi * 1.3 * t + 1.0))
    return 0.05 * rng.standard_normal(n) * env


# ---------------------------------------------------------------------------
# Maskers and channels
# ---------------------------------------------------------------------------


def speech_shaped_noise(x: np.ndarray, seed: int) -> np.ndarray:
    """Stationary noise with the long-term spectrum of ``x`` (random phases)."""
    rng = np.random.default_rng(seed)
    spec = np.abs(np.fft.rfft(x))
    return np.fft.irfft(spec * np.exp(2j * np.pi * rng.random(spec.size)), x.size)


def fluctuating_noise(x: np.ndarray, fs: int, seed: int) -> np.ndarray:
    """Speech-shaped noise, 100 % modulated at a random 2-8 Hz rate (a modulated masker)."""
    rng = np.random.default_rng(seed)
    t = np.arange(x.size) / fs
    env = 1 + np.sin(2 * np.pi * rng.uniform(2, 8) * t + rng.uniform(0, 2 * np.pi))
    return speech_shaped_noise(x, seed) * env


def at_snr(x: np.ndarray, noise: np.ndarray, snr_db: float) -> np.ndarray:
    """``x`` plus ``noise`` scaled to the given signal-to-noise ratio of mean powers, dB."""
    return x + noise * np.sqrt(np.mean(x ** 2) / np.mean(noise ** 2)) * 10 ** (-snr_db / 20)


def reverberant(x: np.ndarray, fs: int, rt60: float, seed: int) -> np.ndarray:
    """Convolution with an exponentially decaying noise tail (direct sound at t = 0)."""
    from scipy.signal import fftconvolve

    rng = np.random.default_rng(seed)
    t = np.arange(int(rt60 * fs)) / fs
    h = rng.standard_normal(t.size) * np.exp(-6.9 * t / rt60) * 0.2
    h[0] = 1.0
    return fftconvolve(x, h)[: x.size]


def noise_decay(T, fs=48000, seconds=None, seed=0, amplitude=0.2, floor_db=None):
    """Gaussian noise times exp(-6.91 t/T): the energy decays 60 dB in T seconds
    (Schroeder's model of a diffuse decay), optionally over a steady noise floor."""
    rng = np.random.default_rng(seed)
    n = int((seconds if seconds else 1.5 * T + 0.6) * fs)
    t = np.arange(n) / fs
    x = amplitude * rng.standard_normal(n) * np.exp(-3 * np.log(10) * t / T)
    if floor_db is not None:
        x += amplitude * 10 ** (floor_db / 20) * rng.standard_normal(n)
    return x


def normalised_decay(rng: np.random.Generator, t60: float, fs: int, seconds: float) -> np.ndarray:
    """Exponentially decaying noise, energy falling 60 dB in ``t60`` seconds (Schroeder 1965
    model), scaled to peak 0.3. Draws from ``rng`` (callers share one generator across a corpus)."""
    t = np.arange(int(seconds * fs)) / fs
    x = rng.standard_normal(t.size) * 10.0 ** (-3.0 * t / t60)  # amplitude: -60 dB at t60
    return 0.3 * x / np.max(np.abs(x))


# ---------------------------------------------------------------------------
# Listening-test scores
# ---------------------------------------------------------------------------


def simulated_counts(a, b, x, n, seed, shape="logistic", guess=0.0, lapse=0.0) -> np.ndarray:
    """Binomial counts of correct answers drawn with scipy.stats at
    p = guess + (1 - guess - lapse) F(a + b x), F the logistic or the normal CDF."""
    from scipy import stats
    from scipy.special import expit, ndtr

    F = expit if shape == "logistic" else ndtr
    p = guess + (1 - guess - lapse) * F(a + b * np.asarray(x))
    return stats.binom.rvs(np.asarray(n), p, random_state=np.random.default_rng(seed))


# ---------------------------------------------------------------------------
# Reference values: pystoi
# ---------------------------------------------------------------------------

#: Agreement with pystoi at 10 kHz, where both run the same algorithm on the same grid
#: (measured: about 1e-13; pystoi adds EPS-sized noise in ESTOI's normalisation).
#: A 1 dB change of a published constant (beta = -15 dB) moves STOI by far more.
PYSTOI_TOL_10K: float = 1e-9

#: Agreement with pystoi at other rates, where the two resamplers differ (ours:
#: scipy resample_poly with its Kaiser window; pystoi: an Octave-compatible window).
PYSTOI_TOL_RESAMPLED: float = 0.005


def pystoi_value(x: np.ndarray, y: np.ndarray, fs: int, extended: bool = False) -> float:
    """STOI (or ESTOI with ``extended``) from the reference library pystoi."""
    import pystoi

    return float(pystoi.stoi(x, y, fs, extended=extended))


def pystoi_tolerance(fs: int) -> float:
    """How closely the package must agree with pystoi at sample rate ``fs``."""
    return PYSTOI_TOL_10K if int(fs) == 10000 else PYSTOI_TOL_RESAMPLED
