"""Active speech level by ITU-T P.56 method B (envpredict.speechlevel).

The checks follow from the method's definition in ITU-T Rec. P.56 (12/2011), method B,
with its published constants written here (not read from the package): envelope time
constant T = 0.03 s, hangover H = 0.2 s, margin M = 15.9 dB.

* A signal of constant level is active throughout; only the envelope's rise at the start
  is lost: q(t)/q_final = 1 - exp(-t/T)(1 + t/T) for a two-stage smoother, which passes
  the threshold (about 0.18 of q_final at a margin of 15.9 dB for a sine) after about
  0.85 T = 25 ms.
* A tone burst of length t_on in a period P is active for t_on + H per period, give or
  take the envelope's rise (25 ms) and its fall to the threshold
  (exp(-u)(1 + u) = 0.18 at u = 3.15, i.e. 95 ms): within 0.1 s per period.
* Digital silence inserted into speech leaves the active level (the speech's own) in
  place, and lowers the long-term level by 10 log10(total / original length) (the mean
  square over a longer signal with the same energy).
"""

from __future__ import annotations

import numpy as np
import pytest

from envpredict.exceptions import ComputationError, InputError
from envpredict.speechlevel import active_speech_level
from signals_for_tests import speech_like

#: ITU-T P.56 (12/2011) method B constants, written from the Recommendation.
T_S, H_S = 0.03, 0.2
#: Envelope rise to the threshold plus its fall below it, s (see the module docstring).
EDGE_S = 0.1

FS = 16000


def tone(seconds: float, amplitude: float = 0.1, f: float = 500.0, fs: int = FS) -> np.ndarray:
    t = np.arange(int(round(seconds * fs))) / fs
    return amplitude * np.sin(2 * np.pi * f * t)


@pytest.mark.parametrize("kind", ["sine", "noise"])
def test_a_constant_level_signal_is_active_throughout(kind):
    seconds = 8.0
    x = tone(seconds) if kind == "sine" else 0.05 * np.random.default_rng(0).standard_normal(int(seconds * FS))
    lev = active_speech_level(x, FS)
    # activity 100 % less the envelope's rise at the start (about 0.85 T = 25 ms)
    assert 1.0 - 2 * 0.85 * T_S / seconds <= lev.activity_factor <= 1.0
    # active and long-term level then agree, and equal the RMS level of the signal
    rms_db = 10 * np.log10(np.mean(x ** 2))
    assert lev.long_term_level_db == pytest.approx(rms_db, abs=1e-9)
    assert lev.active_level_db == pytest.approx(rms_db, abs=0.05)


@pytest.mark.parametrize("on_s,off_s", [(1.0, 1.0), (0.5, 2.0), (2.0, 3.0), (3.0, 1.0)])
def test_a_tone_burst_pattern_gives_the_activity_its_duty_cycle_implies(on_s, off_s):
    period = on_s + off_s
    n_periods = 4
    burst = np.concatenate([tone(on_s), np.zeros(int(round(off_s * FS)))])
    x = np.tile(burst, n_periods)
    lev = active_speech_level(x, FS)
    expected = min(on_s + H_S, period) / period  # the burst and its hangover
    assert lev.activity_factor == pytest.approx(expected, abs=EDGE_S / period)
    # the active level is the tone's own level (the hangover adds silence to its count)
    tone_db = 20 * np.log10(0.1 / np.sqrt(2))
    assert lev.active_level_db == pytest.approx(tone_db - 10 * np.log10(expected * period / on_s),
                                                abs=10 * np.log10(1 + EDGE_S / on_s))


def test_inserted_digital_silence_keeps_the_active_level():
    x = speech_like(10.0, FS, seed=2)
    gap = np.zeros(3 * FS)
    half = x.size // 2
    y = np.concatenate([gap, x[:half], gap, x[half:], gap])
    a, b = active_speech_level(x, FS), active_speech_level(y, FS)
    assert b.active_level_db == pytest.approx(a.active_level_db, abs=0.3)
    # the long-term level drops by 10 log10(total / original) (same energy over a longer time)
    drop = 10 * np.log10(y.size / x.size)
    assert a.long_term_level_db - b.long_term_level_db == pytest.approx(drop, abs=1e-9)
    # and the activity falls with it: the active time stays within 0.3 dB
    active_a, active_b = a.activity_factor * x.size, b.activity_factor * y.size
    assert 10 * np.log10(active_b / active_a) == pytest.approx(0.0, abs=0.3)
    assert b.activity_factor < a.activity_factor


def test_the_demo_like_speech_is_less_than_fully_active():
    lev = active_speech_level(speech_like(10.0, FS, seed=0), FS)
    assert 0.5 < lev.activity_factor < 0.98
    assert lev.active_level_db > lev.long_term_level_db


@pytest.mark.parametrize("gain_db", [-31.7, -6.0, 3.3, 20.0])
def test_a_gain_shifts_both_levels_by_the_gain(gain_db):
    x = speech_like(6.0, FS, seed=1)
    a = active_speech_level(x, FS)
    b = active_speech_level(x * 10 ** (gain_db / 20), FS)
    assert b.active_level_db - a.active_level_db == pytest.approx(gain_db, abs=1e-6)
    assert b.activity_factor == pytest.approx(a.activity_factor, abs=1e-9)


def test_the_result_says_what_it_is():
    d = active_speech_level(tone(2.0), FS).to_dict()
    assert d["method"].startswith("ITU-T P.56")
    assert set(d) >= {"active_level_db", "long_term_level_db", "activity_factor", "cautions", "notes"}


def test_bad_input_is_refused():
    with pytest.raises(InputError):
        active_speech_level(np.zeros(FS), FS)
    with pytest.raises(InputError):
        active_speech_level(tone(0.1), FS)
    with pytest.raises(InputError):
        active_speech_level(np.full(FS, np.nan), FS)


def test_a_lone_click_has_no_active_level():
    x = np.zeros(2 * FS)
    x[FS] = 1.0
    x[FS + 1] = -1.0
    with pytest.raises(ComputationError):
        active_speech_level(x, FS)
