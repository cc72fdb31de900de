"""The exponential sine sweep (envpredict.sinesweep) against Farina's definition.

References outside the package:
* the sweep's instantaneous frequency f(t) = f1 exp(t ln(f2/f1) / T) (Farina 2000, AES
  preprint 5093, eq. 4; Mueller & Massarani 2001, JAES 49(6), sec. 4.1), read from the
  generated samples by scipy.signal.hilbert;
* the time per octave T ln 2 / ln(f2/f1), read from the same instantaneous frequency;
* the peak level (-3 dBFS) and the half-Hann fades by their definition.
"""

from __future__ import annotations

import json
import os

import numpy as np
import pytest
import soundfile as sf

from cli_for_tests import run_cli
from envpredict.exceptions import InputError
from envpredict.sinesweep import (exponential_sweep, read_sweep_parameters, sweep_signal, sweep_spec,
                                  write_sweep_signal)

FS = 32000


@pytest.fixture(scope="module")
def spec():
    return sweep_spec(FS, 40, 15000, 8.0, repeats=2, tail_s=1.0)


def instantaneous_frequency(x: np.ndarray, fs: int) -> np.ndarray:
    from scipy.signal import hilbert

    phase = np.unwrap(np.angle(hilbert(x)))
    return np.diff(phase) * fs / (2 * np.pi)


def test_instantaneous_frequency_follows_farina(spec):
    x = exponential_sweep(spec)
    f_inst = instantaneous_frequency(x, FS)
    t = (np.arange(f_inst.size) + 0.5) / FS
    f_ref = 40.0 * np.exp(t * np.log(15000 / 40) / 8.0)
    inner = (t > 0.5) & (t < 7.5)  # away from the fades and the analytic signal's end effects
    assert np.max(np.abs(f_inst[inner] / f_ref[inner] - 1)) < 0.005
    # one octave takes T ln 2 / ln(f2/f1) seconds: from 500 to 1000 Hz here
    t500, t1000 = t[inner][np.searchsorted(f_inst[inner], 500)], t[inner][np.searchsorted(f_inst[inner], 1000)]
    assert abs((t1000 - t500) - 8.0 * np.log(2) / np.log(15000 / 40)) < 2e-3
    assert abs(spec.seconds_per_octave - 8.0 * np.log(2) / np.log(15000 / 40)) < 1e-12


def test_level_fades_and_repeats(spec):
    x = exponential_sweep(spec)
    assert x.size == 8 * FS
    assert abs(np.max(np.abs(x)) - 10 ** (-3 / 20)) < 2e-3  # peak -3 dBFS
    # half-Hann fade-in over 0.1 s: the envelope at 0.025 s is sin^2(pi/8) = 0.146 of the peak
    from scipy.signal import hilbert

    env = np.abs(hilbert(x))
    assert abs(env[int(0.025 * FS)] / 10 ** (-3 / 20) - np.sin(np.pi / 8) ** 2) < 0.03
    assert abs(x[0]) < 1e-4 and abs(x[-1]) < 1e-3
    played = sweep_signal(spec)
    assert played.size == 2 * 9 * FS
    assert np.array_equal(played[: 8 * FS], x) and np.array_equal(played[9 * FS: 17 * FS], x)
    assert not np.any(played[8 * FS: 9 * FS]) and not np.any(played[17 * FS:])


def test_the_response_kept_fits_before_the_second_harmonic(spec):
    """The k-th harmonic's response lies T ln k / ln(f2/f1) before the linear one (Farina 2000,
    sec. 3): the response kept (plus the part before the arrival) fits in that gap."""
    assert abs(spec.harmonic_advance_s(2) - spec.seconds_per_octave) < 1e-12
    assert abs(spec.harmonic_advance_s(3) - 8.0 * np.log(3) / np.log(15000 / 40)) < 1e-12
    assert 0.79 <= spec.ir_seconds <= spec.harmonic_advance_s(2) - 0.025 + 1e-12


def test_written_with_its_parameters(tmp_path, spec):
    old = os.umask(0o027)
    try:
        res = write_sweep_signal(tmp_path / "s.wav", spec)
    finally:
        os.umask(old)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.json", "s.wav"]  # nothing else (no .part)
    for p in tmp_path.iterdir():
        assert (p.stat().st_mode & 0o777) == 0o640
    x, fs = sf.read(tmp_path / "s.wav")
    assert fs == FS and np.max(np.abs(x - sweep_signal(spec))) < 2 ** -22  # 24-bit PCM
    d = json.loads((tmp_path / "s.json").read_text())
    assert (d["f1_hz"], d["f2_hz"], d["seconds"], d["repeats"], d["tail_s"]) == (40, 15000, 8, 2, 1)
    assert read_sweep_parameters(tmp_path / "s.wav", fs, x.size) == spec
    assert res.to_dict()["parameter_file"] == str(tmp_path / "s.json")


def test_cli_json_is_to_dict_plus_inputs(tmp_path, capsys):
    out = tmp_path / "sweep.wav"
    code, text, err = run_cli(["testsignal", "sweep", out, "--rate", "32000", "--f2", "15000", "--seconds", "8",
                               "--tail", "1", "--repeats", "1", "--json"], capsys)
    assert code == 0, err
    d = json.loads(text)
    assert d.pop("inputs")["out_file"] == str(out)
    other = tmp_path / "other"
    other.mkdir()
    api = write_sweep_signal(other / "sweep.wav", sweep_spec(32000, 40, 15000, 8, repeats=1, tail_s=1)).to_dict()
    assert {k: v for k, v in d.items() if k not in ("file", "parameter_file", "notes")} == \
        {k: v for k, v in api.items() if k not in ("file", "parameter_file", "notes")}
    code, text, _ = run_cli(["testsignal", "sweep", tmp_path / "plain.wav"], capsys)
    assert code == 0 and "keeps 1.65 s of impulse response" in text  # the defaults: 15 s, 40 Hz-20 kHz


BAD = [
    (["--seconds", "3"], "error: sweep of 3 s from 40 to 20000 Hz is too short for the lowest band: it spends 0.33 s "
     "per octave, and the impulse response kept before the second harmonic's response must be at least 0.79 s "
     "(0.63 Hz modulation) — make it 8 s or longer (--seconds)"),
    (["--f1", "100"], "error: sweep is flat only from 112 Hz; the 125 Hz band needs the sweep from 62.5 Hz — start "
     "it at 56 Hz or lower (--f1) with a short fade-in"),
    (["--rate", "16000", "--f2", "7000"], "error: sweep has sample rate 16000 Hz; the 8 kHz octave band needs more "
     "than 22627 Hz — use a recording made at 44100 or 48000 Hz (upsampling cannot add the missing band)"),
    (["--rate", "24000", "--f2", "20000"], "error: sweep ends at 20000 Hz, above 11400 Hz (0.95 x the Nyquist "
     "frequency at 24000 Hz) — end it at 11400 Hz or lower, or use a higher sample rate"),
    (["--f2", "12000"], "error: sweep is flat only up to 10691 Hz; the 8 kHz band needs the sweep up to 11314 Hz — "
     "end it at 12699 Hz or higher (--f2) with a short fade-out (at 44.1 or 48 kHz)"),
    (["--tail", "0.5"], "error: sweep's silent tail of 0.5 s is shorter than the 0.79 s of impulse response the STI "
     "needs — give a tail of 1 s or more (--tail), longer than the room's reverberation"),
    (["--repeats", "0"], "error: repeats 0 is outside 1..32 — give a whole number from 1 to 32"),
]


@pytest.mark.parametrize("opts,message", BAD, ids=[" ".join(b[0]) for b in BAD])
def test_bad_sweeps_are_refused_in_one_line(tmp_path, capsys, opts, message):
    code, text, err = run_cli(["testsignal", "sweep", tmp_path / "s.wav"] + opts, capsys)
    assert code == 2 and text == ""
    assert err.strip() == message
    assert list(tmp_path.iterdir()) == []  # nothing written


def test_shortest_sweep_follows_the_harmonic_spacing():
    """The second harmonic's response lies T ln 2 / ln(f2/f1) before the linear one; with
    0.79 s + 25 ms to keep, 40 Hz - 20 kHz needs T >= 0.819 x ln 500 / ln 2 = 7.34 s."""
    t_min = (1 / (2 * 0.63) + 0.025) * np.log(20000 / 40) / np.log(2)
    sweep_spec(48000, 40, 20000, t_min + 0.01)
    with pytest.raises(InputError, match="too short for the lowest band"):
        sweep_spec(48000, 40, 20000, t_min - 0.01)
