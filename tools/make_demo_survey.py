"""Write the demo survey in demo_pairs/survey/ (run by hand; the files are committed).

Scenario (invented, the demo site of tools/make_demo.py): the commissioning survey of
the Pier 4 ferry terminal's announcement system. Three zones -- the waiting hall, the
boarding corridor and the ticket office -- with two to four listening positions each,
every position measured twice (the loudspeaker line driven by a sweep, the impulse
response recovered, the microphone re-placed between repeats). The waiting hall and
the corridor were given octave-band noise levels from the site's noise log; in the
ticket office the noise was recorded with a calibrated microphone.

Files
-----
survey.csv              the survey (zone, position, repeat, ir, noise/speech columns)
<zone>_<pos>_r<k>.flac  impulse responses (24 kHz, 16 bit, synthetic)
office_noise.flac       the ticket office's background noise (calibration: see survey.csv)
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import soundfile as sf
from scipy.signal import butter, sosfiltfilt

OUT = Path(__file__).resolve().parent.parent / "demo_pairs" / "survey"
FS = 24000
BANDS = (125, 250, 500, 1000, 2000, 4000, 8000)
CALIBRATION_DB = 110.0  # dB SPL of a full-scale RMS signal in office_noise.flac

#: zone -> (reverberation time per octave band, noise column, speech level dB(A) at the
#: zone's reference position, positions as (name, distance m, direct-to-reverberant
#: energy dB, speech level offset dB))
ZONES = {
    "waiting hall": ((1.9, 1.8, 1.6, 1.45, 1.3, 1.1, 0.85), "58;55;52;49;45;40;33", 68.0,
                     (("row B", 3.0, -2.0, 1.0), ("row F", 4.0, -11.0, 0.0), ("row K", 9.0, -16.0, -5.0),
                      ("kiosk", 6.0, -9.0, -2.0))),
    "boarding corridor": ((1.1, 1.0, 0.9, 0.85, 0.8, 0.7, 0.6), "52;49;46;43;39;34;28", 66.0,
                          (("gate 3", 2.5, 4.0, 0.0), ("gate 4", 2.5, 3.5, 0.0), ("stairs", 5.0, 0.0, -3.0))),
    "ticket office": ((0.7, 0.6, 0.55, 0.5, 0.5, 0.45, 0.4), None, 63.0,
                      (("counter", 2.0, 5.0, 0.0), ("queue", 4.0, 2.0, -2.0))),
}


def position_ir(T60, distance_m, dr_db, seed, seconds=2.0):
    rng = np.random.default_rng(seed)
    n = int(seconds * FS)
    t = np.arange(n) / FS
    d0 = int((0.005 + distance_m / 343.0) * FS)
    tail = np.zeros(n)
    for fc, T in zip(BANDS, T60):
        sos = butter(3, [fc / 2 ** 0.5, min(fc * 2 ** 0.5, 0.46 * FS)], btype="bandpass", fs=FS, output="sos")
        noise = sosfiltfilt(sos, rng.standard_normal(n))
        env = np.exp(-3 * np.log(10) * np.clip(t - t[d0], 0, None) / T) * (t >= t[d0] + 0.003)
        tail += noise * env / np.sqrt(np.mean(noise ** 2))
    # scale the reverberant tail so that direct / reverberant energy is dr_db
    tail *= np.sqrt(10 ** (-dr_db / 10) / np.sum(tail ** 2))
    ir = tail
    ir[d0] += 1.0
    for delay, gain in ((0.011, 0.5), (0.023, 0.35), (0.038, 0.3)):  # early reflections
        ir[d0 + int(delay * FS)] += gain * rng.choice([-1, 1])
    ir += 10 ** (-62 / 20) * np.max(np.abs(ir)) * rng.standard_normal(n)  # measurement noise floor
    return 0.5 * ir / np.max(np.abs(ir))


def office_noise(seconds=8.0, seed=41):
    rng = np.random.default_rng(seed)
    n = int(seconds * FS)
    # ventilation hum plus a murmur: low-passed noise, about 45 dB(A) with CALIBRATION_DB
    x = sosfiltfilt(butter(2, 600, fs=FS, output="sos"), rng.standard_normal(n))
    x += 0.3 * sosfiltfilt(butter(2, [300, 3000], btype="bandpass", fs=FS, output="sos"), rng.standard_normal(n))
    return x * 10 ** ((52 - CALIBRATION_DB) / 20) / np.sqrt(np.mean(x ** 2))


def main():
    OUT.mkdir(parents=True, exist_ok=True)
    lines = ["zone,position,repeat,ir,noise,noise_recording,calibration_db,speech_level"]
    seed = 100
    for zone, (T60, noise, level, positions) in ZONES.items():
        for name, dist, dr, offset in positions:
            for rep in (1, 2):
                seed += 1
                # the microphone re-placed between repeats: a slightly different direct sound
                ir = position_ir(T60, dist, dr + (1.0 if rep == 2 else 0.0), seed)
                fname = f"{zone.split()[0]}_{name.replace(' ', '')}_r{rep}.flac"
                sf.write(OUT / fname, ir, FS, subtype="PCM_16")
                if noise is None:
                    lines.append(f"{zone},{name},{rep},{fname},,office_noise.flac,{CALIBRATION_DB:g},"
                                 f"{level + offset:g}")
                else:
                    lines.append(f"{zone},{name},{rep},{fname},{noise},,,{level + offset:g}")
    sf.write(OUT / "office_noise.flac", office_noise(), FS, subtype="PCM_16")
    (OUT / "survey.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()


#: The sweep of the demo recording: ``envpredict testsignal sweep sweep.wav --seconds 15
#: --repeats 1 --rate 32000 --f2 14000`` writes the same signal (the generator has no
#: random part).
SWEEP_ARGS = dict(f1_hz=40.0, f2_hz=14000.0, seconds=15.0, repeats=1, fs=32000)


def sweep_recording():
    """The demo sweep played in the waiting hall and recorded at row F (32 kHz): the
    hall's impulse response (demo_pairs/waiting_hall_ir.wav) plus steady noise 60 dB
    below the recording's peak."""
    from scipy.signal import fftconvolve, resample_poly

    from envpredict.sinesweep import sweep_signal, sweep_spec

    spec = sweep_spec(**SWEEP_ARGS)
    x = sweep_signal(spec)
    ir, fs_ir = sf.read(OUT.parent / "waiting_hall_ir.wav")
    ir = resample_poly(ir, 2, 3)  # 48 kHz -> 32 kHz
    lead = np.zeros(int(0.4 * SWEEP_ARGS["fs"]))  # the recorder started before the player
    y = fftconvolve(np.concatenate([lead, x]), ir)[: lead.size + x.size]
    y *= 0.5 / np.max(np.abs(y))
    y += 10 ** (-60 / 20) * 0.5 * np.random.default_rng(77).standard_normal(y.size)
    sf.write(OUT / "row_F_sweep.flac", y, SWEEP_ARGS["fs"], subtype="PCM_16")


if __name__ == "__main__" and "--sweep" in __import__("sys").argv:
    sweep_recording()
