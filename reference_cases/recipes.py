"""Signals of the reference cases, made from the recipe stored in each case file.

Plain numpy/scipy, on purpose separate from ``envpredict.signals``: a case that
analyses a test signal must not take it from the generator under test. The same
functions serve ``make_cases.py`` (which computes stored reference values, e.g. with
pystoi, on these signals and never imports envpredict) and ``envpredict check`` (which
analyses them with envpredict), so both see the same samples.

Recipes (keys of the case file's ``input``):

``{"signal": "stipa", "fs", "seconds", "seed", "bands_hz", "band_levels_db",
"carrier_octaves", "depth", "modulation_hz": [[f1, f2] per band], "channel"}``
    STIPA per IEC 60268-16:2011 Annex B: in each octave band a noise carrier
    ``carrier_octaves`` wide centred on the band, at the band level, its intensity
    modulated by ``1 + depth (sin 2 pi f1 t - sin 2 pi f2 t)``.
``{"signal": "fullsti", ..., "depth", "modulation_hz": [F, ...], "seconds", "channel"}``
    The full-STI set (IEC 60268-16:2011, 6.1): one signal per F with all bands'
    intensity modulated by ``1 + depth cos 2 pi F t``.
``"channel": {"t60_s", "ir_seed", "snr_db", "noise_seed"}``
    Convolution with an exponentially decaying Gaussian noise (energy falls 60 dB in
    ``t60_s``; omitted or null: no reverberation), then stationary noise in each
    carrier band at ``snr_db`` below the received band power (omitted or null: none).
``{"signal": "sweep", "fs", "f1_hz", "f2_hz", "seconds", "fade_in_s", "fade_out_s", "repeats", "tail_s",
"peak_dbfs", "channel": {"t60_s", "ir_seed"}, "offset_s", "square_share", "noise_db", "noise_seed"}``
    An exponential sine sweep (Farina 2000, eq. 4: sin(2 pi f1 T/ln(f2/f1) (exp(t ln(f2/f1)/T) - 1)),
    half-Hann fades, peak ``peak_dbfs``) repeated ``repeats`` times with ``tail_s`` of silence
    after each: the played signal. Its recording: the nonlinearity x + ``square_share`` x^2
    (computed at twice the rate, as an analogue chain before the recorder's anti-alias filter),
    convolution with the exponential decay, ``offset_s`` of silence before it and white noise at
    ``noise_db`` re the recording's peak.
``{"signal": "speechlike", "fs", "seconds", "seed", "f0_hz", "top_hz", "syllable_hz",
"pause_share", "noise": {"kind", "snr_db", "seed", "gate_hz"}}``
    A harmonic complex (F0 ``f0_hz``, harmonics up to ``top_hz`` with amplitudes
    1/k and random phases, raised near two random formants drawn for each syllable)
    under a syllabic envelope (raised-cosine syllables at ``syllable_hz`` with random
    peak amplitudes, a share ``pause_share`` of them silent). Returns the clean signal
    and the degraded one: clean plus noise at ``snr_db`` (overall power ratio).
    ``kind`` ``"speech_shaped"``: the clean signal with random phases (stationary,
    the same long-term spectrum, so the same SNR in every band); ``"white"``:
    Gaussian noise. ``gate_hz``: the noise is switched on and off (square wave) at this
    rate (a fluctuating masker).
"""

from __future__ import annotations

import numpy as np
from scipy.signal import fftconvolve


def band_spectra(rng: np.random.Generator, n: int, fs: int, edges, levels_db) -> np.ndarray:
    """One-sided spectra (bands, n // 2 + 1) of Gaussian noises flat between each band's
    edges (zero outside), scaled so that each band's time signal has RMS 10^(level/20)."""
    f = np.fft.rfftfreq(n, 1.0 / fs)
    out = np.zeros((len(edges), f.size), dtype=complex)
    for k, ((lo, hi), level) in enumerate(zip(edges, levels_db)):
        sel = (f >= lo) & (f <= hi)
        z = rng.standard_normal(int(sel.sum())) + 1j * rng.standard_normal(int(sel.sum()))
        # Parseval for a band clear of 0 Hz and Nyquist: mean square = 2 sum |X|^2 / n^2
        out[k, sel] = z * (10.0 ** (float(level) / 20.0) * n / np.sqrt(2.0 * np.sum(np.abs(z) ** 2)))
    return out


def _band_edges(spec: dict) -> list[tuple[float, float]]:
    half = float(spec["carrier_octaves"]) / 2
    return [(fc * 2.0 ** -half, fc * 2.0 ** half) for fc in spec["bands_hz"]]


def decay_ir(t60_s: float, fs: int, seed: int) -> np.ndarray:
    """Gaussian noise times exp(-3 ln(10) t / T60), unit energy: its energy falls 60 dB in T60 (2 T60 long)."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(round(2.0 * t60_s * fs))) / fs
    h = rng.standard_normal(t.size) * np.exp(-3.0 * np.log(10.0) * t / t60_s)
    return h / np.sqrt(np.sum(h * h))


def _channel_ir(spec: dict) -> np.ndarray | None:
    channel = spec.get("channel") or {}
    return decay_ir(float(channel["t60_s"]), int(spec["fs"]), int(channel["ir_seed"])) if channel.get("t60_s") else None


def apply_channel(x: np.ndarray, spec: dict, ir: np.ndarray | None, noise_seed: int) -> np.ndarray:
    """Reverberation (convolution with ``ir``), then stationary noise at the channel's SNR
    in every carrier band (mean square of the noise = that of the received band / SNR)."""
    channel = spec.get("channel") or {}
    fs = int(spec["fs"])
    y = x if ir is None else fftconvolve(x, ir)[: x.size]
    if channel.get("snr_db") is not None:
        n = y.size
        ys = np.fft.rfft(y)
        f = np.fft.rfftfreq(n, 1.0 / fs)
        edges = _band_edges(spec)
        # received mean square of each carrier band (Parseval), in dB, minus the SNR
        levels = [10 * np.log10(2.0 * np.sum(np.abs(ys[(f >= lo) & (f <= hi)]) ** 2) / n ** 2)
                  - float(channel["snr_db"]) for lo, hi in edges]
        noise = band_spectra(np.random.default_rng(noise_seed), n, fs, edges, levels).sum(axis=0)
        y = y + np.fft.irfft(noise, n)
    return y


def _peak(y: np.ndarray) -> np.ndarray:
    return 0.5 * y / np.max(np.abs(y))


def stipa(spec: dict) -> tuple[np.ndarray, int]:
    """The received STIPA signal of a case (see the module docstring)."""
    fs, seed = int(spec["fs"]), int(spec["seed"])
    n = int(round(float(spec["seconds"]) * fs))
    t = np.arange(n) / fs
    m = float(spec["depth"])
    carriers = np.fft.irfft(band_spectra(np.random.default_rng(seed), n, fs, _band_edges(spec),
                                         spec["band_levels_db"]), n, axis=1)
    x = np.zeros(n)
    for k, (f1, f2) in enumerate(spec["modulation_hz"]):
        intensity = 1.0 + m * (np.sin(2 * np.pi * float(f1) * t) - np.sin(2 * np.pi * float(f2) * t))
        x += carriers[k] * np.sqrt(np.clip(intensity, 0.0, None))
    channel = spec.get("channel") or {}
    return _peak(apply_channel(x, spec, _channel_ir(spec), int(channel.get("noise_seed", seed + 1)))), fs


def full_sti(spec: dict) -> list[tuple[np.ndarray, int, str]]:
    """The received full-STI signals of a case (one per modulation frequency), as ``(x, fs, name)``."""
    fs, seed = int(spec["fs"]), int(spec["seed"])
    n = int(round(float(spec["seconds"]) * fs))
    t = np.arange(n) / fs
    m = float(spec["depth"])
    ir = _channel_ir(spec)
    channel = spec.get("channel") or {}
    out = []
    for i, F in enumerate(float(f) for f in spec["modulation_hz"]):
        spectra = band_spectra(np.random.default_rng(seed + 100 * i), n, fs, _band_edges(spec),
                               spec["band_levels_db"])
        x = np.fft.irfft(spectra.sum(axis=0), n) * np.sqrt(1.0 + m * np.cos(2 * np.pi * F * t))
        y = apply_channel(x, spec, ir, int(channel.get("noise_seed", seed + 1)) + 100 * i)
        out.append((_peak(y), fs, f"F = {F:g} Hz"))
    return out


def sweep(spec: dict) -> tuple[np.ndarray, np.ndarray, int]:
    """The played sweep signal of a case and its recording (see the module docstring), at ``fs``."""
    from scipy.signal import resample_poly

    fs = int(spec["fs"])
    f1, f2, T = float(spec["f1_hz"]), float(spec["f2_hz"]), float(spec["seconds"])
    n = int(round(T * fs))
    t = np.arange(n) / fs
    L = np.log(f2 / f1)
    x = np.sin(2 * np.pi * f1 * T / L * (np.exp(t * L / T) - 1.0))
    for key, at_start in (("fade_in_s", True), ("fade_out_s", False)):
        m = int(round(float(spec[key]) * fs))
        ramp = np.sin(0.5 * np.pi * (np.arange(m) + 0.5) / m) ** 2  # half Hann, 0 -> 1
        if at_start:
            x[:m] *= ramp
        elif m:
            x[-m:] *= ramp[::-1]
    x *= 10 ** (float(spec["peak_dbfs"]) / 20)
    one = np.r_[x, np.zeros(int(round(float(spec["tail_s"]) * fs)))]
    played = np.tile(one, int(spec["repeats"]))
    up = resample_poly(played, 2, 1)
    driven = played + resample_poly(float(spec.get("square_share", 0.0)) * up ** 2, 1, 2)[: played.size]
    wet = fftconvolve(driven, _channel_ir(spec))
    rec = np.r_[np.zeros(int(round(float(spec["offset_s"]) * fs))), _peak(wet)]
    noise = np.random.default_rng(int(spec["noise_seed"])).standard_normal(rec.size)
    return played, rec + 0.5 * 10 ** (float(spec["noise_db"]) / 20) * noise, fs


def speechlike(spec: dict) -> tuple[np.ndarray, np.ndarray, int]:
    """Clean and degraded speech-like signals of a case (see the module docstring)."""
    fs, seed = int(spec["fs"]), int(spec["seed"])
    n = int(round(float(spec["seconds"]) * fs))
    rng = np.random.default_rng(seed)
    t = np.arange(n) / fs
    f0 = float(spec["f0_hz"])
    syl = float(spec["syllable_hz"])
    n_syl = int(np.ceil(float(spec["seconds"]) * syl))
    which = np.minimum((t * syl).astype(int), n_syl - 1)  # syllable of each sample
    peaks = rng.uniform(0.3, 1.0, n_syl) * (rng.uniform(size=n_syl) >= float(spec["pause_share"]))
    f1, f2 = rng.uniform(300, 900, n_syl), rng.uniform(900, 2500, n_syl)  # formants of each syllable
    x = np.zeros(n)
    for k in range(1, int(float(spec["top_hz"]) // f0) + 1):
        fk = k * f0
        gain = (1 + 4 * np.exp(-((fk - f1) / 150) ** 2) + 3 * np.exp(-((fk - f2) / 250) ** 2)) / k
        x += gain[which] * np.cos(2 * np.pi * fk * t + rng.uniform(0, 2 * np.pi))
    env = peaks[which] * (0.5 - 0.5 * np.cos(2 * np.pi * syl * t))
    clean = x * env
    clean = 0.25 * clean / np.max(np.abs(clean))
    nspec = spec["noise"]
    nrng = np.random.default_rng(int(nspec["seed"]))
    if nspec["kind"] == "speech_shaped":
        c = np.fft.rfft(clean)
        phase = np.exp(2j * np.pi * nrng.uniform(size=c.size))
        phase[0] = 1.0
        noise = np.fft.irfft(np.abs(c) * phase, n)
    elif nspec["kind"] == "white":
        noise = nrng.standard_normal(n)
    else:
        raise ValueError(f"unknown noise kind '{nspec['kind']}'")
    if nspec.get("gate_hz"):
        noise = noise * (np.sin(2 * np.pi * float(nspec["gate_hz"]) * t) >= 0)
    noise *= np.sqrt(np.mean(clean ** 2) / np.mean(noise ** 2) * 10.0 ** (-float(nspec["snr_db"]) / 10.0))
    return clean, clean + noise, fs
