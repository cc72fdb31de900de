"""Write the demo material in demo_pairs/ (run by hand; the files are committed).

Scenario (invented): the waiting hall of the Pier 4 ferry terminal in the harbour town
of Kessel Bay. A ceiling loudspeaker line carries departure announcements and the
evacuation message. The acoustician measured an impulse response at seat row F and
the octave-band background noise with the ventilation running and a boarding queue
waiting. The hearing-aid team next door wants to know how an announcement survives
the hall and what a denoiser could win.

Files
-----
waiting_hall_ir.wav          impulse response at seat row F (48 kHz, synthetic)
scenario.json                site noise, speech level and description
announcement_clean.wav       a spoken announcement, dry (16 kHz, espeak-ng voice)
announcement_in_hall.wav     the same announcement through the hall with its noise
hall_noise.wav               the hall's background noise alone (16 kHz)
corpus/                      eight short announcements, each dry ("clean"), through the hall
                             in noise ("unprocessed"), and after two invented noise-reduction
                             chains ("wiener", "gate"); corpus.csv is the batch manifest
corpus/*_inverted.flac       each condition's output for the speech with the noise's polarity
                             inverted (speech - noise), at the gain of its degraded file: the
                             phase-inversion counterparts (Hagerman & Olofsson 2004) from which
                             `envpredict batch` separates the processed noise for the
                             envelope-power index (the manifest's "inverted" column)

Run ``python tools/make_demo.py`` to write everything (needs espeak-ng), or
``python tools/make_demo.py --inverted-only`` to write only the inverted counterparts and the
manifest from the committed clean sentences (no speech synthesis; the committed files stay as
they are).
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import soundfile as sf
from scipy.signal import butter, fftconvolve, resample_poly, sosfiltfilt

OUT = Path(__file__).resolve().parent.parent / "demo_pairs"
BANDS = (125, 250, 500, 1000, 2000, 4000, 8000)
T60 = (1.9, 1.8, 1.6, 1.45, 1.3, 1.1, 0.85)      # a hard-surfaced hall
NOISE_DB = [58.0, 55.0, 52.0, 49.0, 45.0, 40.0, 33.0]  # ventilation + queue, at row F
SPEECH_DBA = 68.0                                # announcement level at row F
TEXT = ("Attention please. The ferry to North Island will depart from gate four in ten minutes. "
        "Passengers with bicycles please board first.")


def hall_ir(fs=48000, seconds=3.0, seed=7):
    rng = np.random.default_rng(seed)
    n = int(seconds * fs)
    t = np.arange(n) / fs
    ir = np.zeros(n)
    d0 = int(0.012 * fs)  # 4 m from the loudspeaker
    for fc, T in zip(BANDS, T60):
        sos = butter(3, [fc / 2 ** 0.5, min(fc * 2 ** 0.5, 0.45 * fs)], btype="bandpass", fs=fs, output="sos")
        noise = sosfiltfilt(sos, rng.standard_normal(n))
        env = np.exp(-3 * np.log(10) * np.clip(t - t[d0], 0, None) / T) * (t >= t[d0] + 0.004)
        ir += noise * env / np.sqrt(np.mean(noise ** 2))
    ir *= 0.05
    ir[d0] += 1.0  # direct sound
    for delay, gain in ((0.019, 0.55), (0.027, 0.4), (0.041, 0.35), (0.056, 0.3)):  # early reflections
        ir[d0 + int(delay * fs)] += gain * rng.choice([-1, 1])
    ir += 10 ** (-68 / 20) * rng.standard_normal(n)  # measurement noise floor
    return 0.5 * ir / np.max(np.abs(ir)), fs


def speech(fs=16000):
    with tempfile.TemporaryDirectory() as d:
        wav = Path(d) / "s.wav"
        subprocess.run(["espeak-ng", "-v", "en-gb", "-s", "150", "-w", str(wav), TEXT], check=True)
        x, fs0 = sf.read(wav)
    x = resample_poly(x, fs, fs0)
    x = np.concatenate([np.zeros(int(0.3 * fs)), x, np.zeros(int(0.5 * fs))])
    return 0.3 * x / np.max(np.abs(x)), fs


def shaped_noise(n, fs, seed=3):
    """Noise with the site's octave-band levels (relative), bands up to Nyquist."""
    rng = np.random.default_rng(seed)
    out = np.zeros(n)
    for fc, L in zip(BANDS, NOISE_DB):
        hi = fc * 2 ** 0.5
        if hi >= 0.5 * fs:
            continue
        sos = butter(3, [fc / 2 ** 0.5, hi], btype="bandpass", fs=fs, output="sos")
        b = sosfiltfilt(sos, rng.standard_normal(n))
        out += b / np.sqrt(np.mean(b ** 2)) * 10 ** (L / 20)
    # slow level fluctuation of a crowd (about 0.5 Hz)
    t = np.arange(n) / fs
    out *= 1 + 0.3 * np.sin(2 * np.pi * 0.45 * t + 1.0)
    return out / np.sqrt(np.mean(out ** 2))


SENTENCES = [
    "Gate four is now open for boarding.",
    "The ferry to North Island is delayed by ten minutes.",
    "Please keep your ticket ready at the barrier.",
    "Bicycles board through the lower deck entrance.",
    "The last ferry tonight leaves at eleven fifteen.",
    "Lost property can be collected at the information desk.",
    "Passengers for Kessel Bay please proceed to gate two.",
    "Do not leave luggage unattended in the waiting hall.",
]


def say(text, fs=16000):
    with tempfile.TemporaryDirectory() as d:
        wav = Path(d) / "s.wav"
        subprocess.run(["espeak-ng", "-v", "en-gb", "-s", "155", "-w", str(wav), text], check=True)
        x, fs0 = sf.read(wav)
    x = resample_poly(x, fs, fs0)
    x = np.concatenate([np.zeros(int(0.25 * fs)), x, np.zeros(int(0.35 * fs))])
    return 0.3 * x / np.max(np.abs(x))


def stft_gain(mix, noise_only, fs, kind):
    """Two invented noise-reduction chains on a short-time spectrum (oracle noise PSD)."""
    from scipy.signal import istft, stft

    _, _, Y = stft(mix, fs, nperseg=512)
    _, _, N = stft(noise_only, fs, nperseg=512)
    pn = np.mean(np.abs(N) ** 2, axis=1, keepdims=True)
    py = np.abs(Y) ** 2
    snr_post = np.maximum(py / pn - 1, 1e-3)
    if kind == "wiener":
        g = snr_post / (1 + snr_post)
        g = np.maximum(g, 0.1)
    else:  # hard spectral gate: strong reduction, musical noise
        g = np.where(py > 4 * pn, 1.0, 0.05)
    _, y = istft(Y * g, fs, nperseg=512)
    return y[: mix.size]


def corpus(ir, fs_ir, fs=16000, inverted_only=False):
    """The corpus: clean, degraded and inverted files per sentence and condition, and the
    manifest. ``inverted_only``: read the committed clean sentences instead of synthesising
    them and write only the inverted counterparts and the manifest."""
    folder = OUT / "corpus"
    folder.mkdir(exist_ok=True)
    for old in folder.glob("*_inverted.flac" if inverted_only else "*.*"):
        if old.suffix in (".wav", ".flac"):
            old.unlink()
    ir16 = resample_poly(ir, fs, fs_ir)
    rows = []
    for i, text in enumerate(SENTENCES, start=1):
        name = f"s{i:02d}"
        x = sf.read(folder / f"{name}_clean.wav")[0] if inverted_only else say(text, fs)
        wet = fftconvolve(x, ir16)[: x.size]
        wet = wet / np.sqrt(np.mean(wet ** 2)) * np.sqrt(np.mean(x ** 2))
        nz = shaped_noise(x.size, fs, seed=100 + i) * np.sqrt(np.mean(wet ** 2)) * 10 ** (-3.0 / 20)
        mix, inv = wet + nz, wet - nz
        versions = {"unprocessed": (mix, inv),
                    "wiener": (stft_gain(mix, nz, fs, "wiener"), stft_gain(inv, nz, fs, "wiener")),
                    "gate": (stft_gain(mix, nz, fs, "gate"), stft_gain(inv, nz, fs, "gate"))}
        if not inverted_only:
            sf.write(folder / f"{name}_clean.wav", x, fs, subtype="PCM_16")
        for cond, (y, y_inv) in versions.items():
            gain = 0.4 / np.max(np.abs(y))  # the degraded file's gain, for both outputs of the chain
            if not inverted_only:
                sf.write(folder / f"{name}_{cond}.wav", gain * y, fs, subtype="PCM_16")
            sf.write(folder / f"{name}_{cond}_inverted.flac", gain * y_inv, fs, subtype="PCM_16")
            rows.append(f"corpus/{name}_clean.wav,corpus/{name}_{cond}.wav,{cond},{name},"
                        f"corpus/{name}_{cond}_inverted.flac")
    (OUT / "corpus.csv").write_text("clean,degraded,condition,sentence,inverted\n" + "\n".join(rows) + "\n")


def main():
    OUT.mkdir(exist_ok=True)
    ir, fs_ir = hall_ir()
    if "--inverted-only" in sys.argv[1:]:
        corpus(ir, fs_ir, inverted_only=True)
        return
    sf.write(OUT / "waiting_hall_ir.wav", ir, fs_ir, subtype="PCM_24")
    x, fs = speech()
    sf.write(OUT / "announcement_clean.wav", x, fs, subtype="PCM_16")
    ir16 = resample_poly(ir, fs, fs_ir)
    wet = fftconvolve(x, ir16)[: x.size + int(0.0 * fs)]
    wet = wet / np.sqrt(np.mean(wet ** 2)) * np.sqrt(np.mean(x ** 2))
    noise = shaped_noise(int(20 * fs), fs)
    seg = noise[: wet.size]
    snr_db = 3.0  # broadband speech-to-noise ratio at row F during boarding
    mix = wet + seg * np.sqrt(np.mean(wet ** 2)) * 10 ** (-snr_db / 20)
    mix = 0.4 * mix / np.max(np.abs(mix))
    sf.write(OUT / "announcement_in_hall.wav", mix, fs, subtype="PCM_16")
    sf.write(OUT / "hall_noise.wav", 0.25 * noise / np.max(np.abs(noise)), fs, subtype="PCM_16")
    scenario = {
        "title": "Pier 4 ferry terminal, waiting hall, seat row F",
        "description": ("Ceiling loudspeaker line carrying departure announcements and the evacuation "
                        "message; ventilation running, boarding queue waiting (invented demo scenario)."),
        "ir": "waiting_hall_ir.wav",
        "noise_db": NOISE_DB,
        "speech_level_dba": SPEECH_DBA,
        "talker": "male",
        "clean": "announcement_clean.wav",
        "degraded": "announcement_in_hall.wav",
        "noise": "hall_noise.wav",
        "broadband_snr_db": snr_db,
    }
    (OUT / "scenario.json").write_text(json.dumps(scenario, indent=2) + "\n")
    corpus(ir, fs_ir)


if __name__ == "__main__":
    main()
