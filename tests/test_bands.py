"""Octave filterbank (IEC 61260-1 base-2 edges) and envelopes."""

import numpy as np
import pytest
from scipy.signal import sosfreqz

from envpredict import standards as std
from envpredict.bands import EnvelopeStream, octave_bands, octave_sos


@pytest.mark.parametrize("fs", [24000, 44100, 48000, 96000])
def test_band_response_at_centre_and_edges(fs):
    # IEC 61260-1: 0 dB at the centre and about -3 dB at the base-2 band edges for a
    # Butterworth prototype (zero-phase filtering squares the magnitude: -6 dB at the edges)
    for fc, sos in zip(std.OCTAVE_BANDS_HZ, octave_sos(fs)):
        f = np.array([fc, fc / 2 ** 0.5, fc * 2 ** 0.5])
        _, h = sosfreqz(sos, worN=f, fs=fs)
        db = 20 * np.log10(np.abs(h))
        assert db[0] == pytest.approx(0.0, abs=0.1)
        assert db[1] == pytest.approx(-3.01, abs=0.2) and db[2] == pytest.approx(-3.01, abs=0.2)


def test_band_rejection_one_octave_away():
    # IEC 61260-1 class 1 requires >= 16-18 dB attenuation at one octave from the centre for
    # an octave filter (from memory); a 6th-order Butterworth band pass gives about 18 dB
    fs = 48000
    for fc, sos in zip(std.OCTAVE_BANDS_HZ[1:-1], octave_sos(fs)[1:-1]):
        _, h = sosfreqz(sos, worN=np.array([fc / 2, fc * 2]), fs=fs)
        assert np.all(20 * np.log10(np.abs(h)) < -16)


def test_envelope_stream_is_block_independent():
    rng = np.random.default_rng(1)
    fs = 24000
    x = rng.standard_normal(fs * 3)
    whole = EnvelopeStream(fs).process(x)
    s = EnvelopeStream(fs)
    parts = np.concatenate([s.process(x[i:i + 7777]) for i in range(0, x.size, 7777)], axis=1)
    assert parts.shape == whole.shape
    assert np.allclose(parts, whole, rtol=1e-9, atol=1e-12)


def test_envelope_stream_recovers_modulation_depth():
    # intensity 1 + m cos(2 pi F t) on band noise: the envelope's relative modulation is m
    # (Houtgast & Steeneken's definition of modulation depth)
    rng = np.random.default_rng(2)
    fs = 24000
    t = np.arange(fs * 8) / fs
    carrier = octave_bands(rng.standard_normal(t.size), fs)[3]
    x = carrier * np.sqrt(1 + 0.5 * np.cos(2 * np.pi * 2.0 * t))
    s = EnvelopeStream(fs)
    env = s.process(x)[3][int(s.rate):]  # skip the first second (filter start)
    tt = (np.arange(env.size) + int(s.rate)) / s.rate
    n = int(6 * s.rate)  # whole periods
    c = 2 * np.abs(np.sum(env[:n] * np.exp(-2j * np.pi * 2.0 * tt[:n]))) / np.sum(env[:n])
    assert c == pytest.approx(0.5, abs=0.05)
