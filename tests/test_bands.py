"""Octave filterbank (IEC 61260-1 base-2 edges) and envelopes.

References: the filter definition of IEC 61260-1:2014 (base-2 octave edges fc/sqrt(2),
fc*sqrt(2); -3 dB at the edges for a Butterworth prototype) and filters designed here
with scipy.signal.butter from those edges, independently of the tool's factory.
"""

import numpy as np
import pytest
from scipy.signal import butter, sosfilt, sosfiltfilt, sosfreqz

from envpredict.bands import (
    EnvelopeStream,
    bandpass_sos,
    check_butterworth,
    check_filterbank,
    envelope_delays,
    lowpass_sos,
    octave_bands,
    octave_filterbank,
    octave_sos,
)
from envpredict.exceptions import ComputationError, InputError

# IEC 60268-16:2011, 5.1: the seven octave bands of the STI
CENTRES = (125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0)


def design(fc, fs, order=3):
    """Band-pass from the IEC 61260-1 base-2 edges, designed here."""
    return butter(order, [fc / 2 ** 0.5, fc * 2 ** 0.5], btype="bandpass", fs=fs, output="sos")


@pytest.mark.parametrize("fs", [24000, 44100, 48000, 96000])
def test_band_response_at_centre_and_edges(fs):
    # IEC 61260-1: 0 dB at the centre and -3 dB at the base-2 band edges fc/sqrt(2),
    # fc*sqrt(2) for a Butterworth prototype (zero-phase filtering squares the magnitude:
    # -6 dB at the edges)
    for fc, sos in zip(CENTRES, octave_sos(fs)):
        f = np.array([fc, fc / 2 ** 0.5, fc * 2 ** 0.5])
        _, h = sosfreqz(sos, worN=f, fs=fs)
        db = 20 * np.log10(np.abs(h))
        assert db[0] == pytest.approx(0.0, abs=0.1)
        assert db[1] == pytest.approx(-3.01, abs=0.05) and db[2] == pytest.approx(-3.01, abs=0.05)


def test_band_rejection_one_octave_away():
    # IEC 61260-1 class 1 requires >= 16-18 dB attenuation at one octave from the centre for
    # an octave filter (from memory); a 6th-order Butterworth band pass gives about 18 dB
    fs = 48000
    for fc, sos in zip(CENTRES[1:-1], octave_sos(fs)[1:-1]):
        _, h = sosfreqz(sos, worN=np.array([fc / 2, fc * 2]), fs=fs)
        assert np.all(20 * np.log10(np.abs(h)) < -16)


@pytest.mark.parametrize("fs", [24000, 48000])
def test_filterbank_equals_butterworth_designed_here(fs):
    # the factory's filters have the response of 3rd-order Butterworth prototypes on the
    # base-2 edges, designed here (compared as frequency responses, 20 Hz .. Nyquist)
    f = np.geomspace(20, 0.49 * fs, 400)
    for fc, sos in zip(CENTRES, octave_filterbank(fs).sos):
        _, h = sosfreqz(sos, worN=f, fs=fs)
        _, want = sosfreqz(design(fc, fs), worN=f, fs=fs)
        assert np.allclose(h, want, rtol=0, atol=1e-9)


def test_top_band_near_nyquist_options():
    # 16 kHz: the 8 kHz band (5657-11314 Hz) reaches Nyquist. "highpass": realised as a
    # 3rd-order Butterworth high-pass at its lower edge (-3 dB at 5657 Hz); "omit": left
    # out; "refuse": the rate is refused. 11025 Hz: the band's lower edge is beyond 98 %
    # of Nyquist too, so it is absent even with "highpass".
    hp = octave_filterbank(16000, beyond_nyquist="highpass")
    assert hp.partial.tolist() == [False] * 6 + [True] and hp.present.all()
    _, h = sosfreqz(hp.sos[-1], worN=np.array([8000 / 2 ** 0.5, 7000.0]), fs=16000)
    assert 20 * np.log10(abs(h[0])) == pytest.approx(-3.01, abs=0.05)
    assert 20 * np.log10(abs(h[1])) == pytest.approx(0.0, abs=0.1)
    _, want = sosfreqz(butter(3, 8000 / 2 ** 0.5, "highpass", fs=16000, output="sos"), worN=512, fs=16000)
    assert np.allclose(sosfreqz(hp.sos[-1], worN=512, fs=16000)[1], want, atol=1e-9)
    om = octave_filterbank(16000, beyond_nyquist="omit")
    assert om.present.tolist() == [True] * 6 + [False] and om.sos[-1] is None and not om.partial.any()
    low = octave_filterbank(11025, beyond_nyquist="highpass")
    assert low.present.tolist() == [True] * 6 + [False]
    with pytest.raises(InputError, match="8 kHz octave"):
        octave_filterbank(16000)


def test_two_passes_have_the_zero_phase_magnitude():
    # two causal passes in cascade: |H|^2, the magnitude of forward-backward filtering
    fs = 24000
    one, two = octave_filterbank(fs), octave_filterbank(fs, passes=2)
    for s1, s2 in zip(one.sos, two.sos):
        _, h1 = sosfreqz(s1, worN=256, fs=fs)
        _, h2 = sosfreqz(s2, worN=256, fs=fs)
        assert np.allclose(h2, h1 ** 2, atol=1e-12)


def test_cached_filters_are_read_only():
    # the factory caches its arrays: nobody may change them in place
    bank = octave_filterbank(48000)
    assert bank is octave_filterbank(48000)
    for arr in (*bank.sos, bank.present, bank.partial, lowpass_sos(48000, 50.0), octave_sos(48000)[0]):
        assert not arr.flags.writeable
    with pytest.raises(ValueError):
        bank.sos[3][0, 0] = 0.0
    x = np.random.default_rng(0).standard_normal(4800)
    assert np.allclose(octave_bands(x, 48000)[3], sosfiltfilt(design(1000.0, 48000), x, padtype=None), atol=1e-12)


def test_octave_bands_equal_scipy_filtering():
    # octave_bands = forward-backward (no padding) or forward filtering with the filters
    # designed here
    fs = 24000
    x = np.random.default_rng(3).standard_normal(fs)
    zp, causal = octave_bands(x, fs), octave_bands(x, fs, zero_phase=False)
    for k, fc in enumerate(CENTRES):
        assert np.allclose(zp[k], sosfiltfilt(design(fc, fs), x, padtype=None), atol=1e-12)
        assert np.allclose(causal[k], sosfilt(design(fc, fs), x), atol=1e-12)


def reference_envelopes(x, fs, *, passes=1, cutoff=50.0, rate=200.0, top="bandpass", clip=True):
    """Causal band -> square -> low-pass -> keep every q-th sample, whole signal, with
    filters designed here (4th-order Butterworth low-pass; q = floor(fs / rate))."""
    lp = butter(4, cutoff, "lowpass", fs=fs, output="sos")
    q = int(fs // rate)
    out = []
    for fc in CENTRES:
        lo, hi = fc / 2 ** 0.5, fc * 2 ** 0.5
        if hi >= 0.98 * fs / 2 and top == "highpass":
            sos = butter(3, lo, "highpass", fs=fs, output="sos")
        else:
            sos = design(fc, fs)
        y = x
        for _ in range(passes):
            y = sosfilt(sos, y)
        e = sosfilt(lp, y * y)[::q]
        out.append(np.maximum(e, 0) if clip else e)
    return np.array(out)


@pytest.mark.parametrize("options, ref", [
    ({}, {}),
    ({"band_passes": 2}, {"passes": 2}),
    ({"cutoff_hz": 12.5, "target_hz": 100.0, "beyond_nyquist": "highpass", "clip_negative": False},
     {"cutoff": 12.5, "rate": 100.0, "top": "highpass", "clip": False}),
])
def test_envelope_stream_equals_whole_signal_reference(options, ref):
    # the streamed envelopes (blocks of 7777 samples) equal the whole-signal computation
    # written here, for the direct method's and the speech-based STI's options. Noise
    # bursts of 0.4 s with gaps: the low-pass rings below zero after each burst
    rng = np.random.default_rng(1)
    fs = 24000 if "beyond_nyquist" not in options else 16000
    t = np.arange(fs * 3) / fs
    x = rng.standard_normal(t.size) * ((t % 0.8) < 0.4)
    s = EnvelopeStream(fs, **options)
    parts = np.concatenate([s.process(x[i:i + 7777]) for i in range(0, x.size, 7777)], axis=1)
    want = reference_envelopes(x, fs, **ref)
    assert parts.shape == want.shape
    assert ref.get("clip", True) or np.any(want < 0)  # the no-clipping option matters here
    assert np.allclose(parts, want, rtol=1e-9, atol=1e-12)


def test_envelope_stream_absent_band_is_nan():
    s = EnvelopeStream(11025, target_hz=100.0, beyond_nyquist="highpass")
    e = s.process(np.random.default_rng(2).standard_normal(11025))
    assert np.all(np.isnan(e[-1])) and np.all(np.isfinite(e[:-1]))


def test_envelope_stream_recovers_modulation_depth():
    # intensity 1 + m cos(2 pi F t) on band noise: the envelope's relative modulation is m
    # (Houtgast & Steeneken's definition of modulation depth)
    rng = np.random.default_rng(2)
    fs = 24000
    t = np.arange(fs * 8) / fs
    carrier = sosfiltfilt(design(1000.0, fs), rng.standard_normal(t.size))
    x = carrier * np.sqrt(1 + 0.5 * np.cos(2 * np.pi * 2.0 * t))
    s = EnvelopeStream(fs)
    env = s.process(x)[3][int(s.rate):]  # skip the first second (filter start)
    tt = (np.arange(env.size) + int(s.rate)) / s.rate
    n = int(6 * s.rate)  # whole periods
    c = 2 * np.abs(np.sum(env[:n] * np.exp(-2j * np.pi * 2.0 * tt[:n]))) / np.sum(env[:n])
    assert c == pytest.approx(0.5, abs=0.05)


def test_filter_definition_check_refuses_a_wrong_band():
    # the check run beside the design: a band whose edges are 5 % off misses -3.01 dB there
    from dataclasses import replace

    bank = octave_filterbank(48000)
    wrong = design(1000.0 * 1.05, 48000)
    bad = replace(bank, sos=bank.sos[:3] + (wrong,) + bank.sos[4:])
    with pytest.raises(ComputationError, match="1000 Hz octave filter"):
        check_filterbank(bad)
    check_filterbank(bank)  # the real one passes


@pytest.mark.parametrize("passes", [1, 2])
def test_envelope_delays_match_a_measured_burst(passes):
    # a Gaussian tone burst at each band centre (sigma 0.15 s: a few Hz wide, well inside
    # the band): its intensity envelope peaks at t0 at the input; the streamed envelope
    # peaks one group delay later (band filter at fc plus envelope low-pass). Measured
    # here (parabolic peak) at a 1 kHz envelope rate, so that one envelope sample is 1 ms:
    # the stated delay agrees within one sample (rounding plus the peak estimate)
    fs, rate = 24000, 1000.0
    t = np.arange(3 * fs) / fs
    t0 = 1.5
    delays = envelope_delays(fs, band_passes=passes, target_hz=rate)
    for k, fc in enumerate(CENTRES):
        x = np.cos(2 * np.pi * fc * t) * np.exp(-(((t - t0) / 0.15) ** 2))
        env = EnvelopeStream(fs, band_passes=passes, target_hz=rate).process(x)[k]
        i = int(np.argmax(env))
        y0, y1, y2 = env[i - 1: i + 2]
        measured = i + 0.5 * (y0 - y2) / (y0 - 2 * y1 + y2) - t0 * rate
        assert abs(measured - delays[k]) <= 1.0, (fc, measured, delays[k])


def test_factory_runs_the_definition_check(monkeypatch):
    import envpredict.bands as bands

    seen = []
    monkeypatch.setattr(bands, "check_filterbank", lambda bank: seen.append(bank.fs))
    bands.octave_filterbank(47999, passes=3)  # a design not in the cache yet
    assert seen == [47999]


# --- envelope filters: low-pass and band-pass ------------------------------------------


def butterworth_power(f, fs, order, low=None, high=None):
    """|H|^2 of a digital Butterworth filter from the bilinear transform with pre-warped
    cut-offs, written out (Oppenheim & Schafer, Discrete-Time Signal Processing, 7.1):
    W = tan(pi f / fs); low-pass 1 / (1 + (W / Wc)^2n); band-pass, by the low-pass to
    band-pass substitution W -> (W^2 - Wl Wh) / (W (Wh - Wl)), 1 / (1 + (that)^2n)."""
    w = np.tan(np.pi * np.asarray(f, dtype=float) / fs)
    if low is None:
        x = w / np.tan(np.pi * high / fs)
    else:
        wl, wh = np.tan(np.pi * low / fs), np.tan(np.pi * high / fs)
        x = (w ** 2 - wl * wh) / (w * (wh - wl))
    return 1.0 / (1.0 + x ** (2 * order))


@pytest.mark.parametrize("fs", [8000, 16000, 48000])
def test_envelope_filters_have_the_butterworth_magnitude(fs):
    # the cached low-pass (50 Hz) and band-pass (50 Hz .. min(500 Hz, 0.45 fs)), order 4,
    # against the written-out Butterworth magnitude over the whole band
    f = np.geomspace(5.0, 0.49 * fs, 400)
    _, h = sosfreqz(lowpass_sos(fs, 50.0, 4), worN=f, fs=fs)
    np.testing.assert_allclose(np.abs(h) ** 2, butterworth_power(f, fs, 4, high=50.0), atol=1e-9)
    hi = min(500.0, 0.45 * fs)
    _, h = sosfreqz(bandpass_sos(fs, 50.0, hi, 4), worN=f, fs=fs)
    np.testing.assert_allclose(np.abs(h) ** 2, butterworth_power(f, fs, 4, low=50.0, high=hi), atol=1e-9)


def test_envelope_filters_are_cached_read_only_and_checked():
    sos = bandpass_sos(16000, 50.0, 500.0)
    assert sos is bandpass_sos(16000, 50.0, 500.0) and not sos.flags.writeable
    with pytest.raises(ValueError):
        sos[0, 0] = 0.0
    # the definition check: a band-pass whose upper cut-off is 5 % off misses -3.01 dB there
    wrong = butter(4, [50.0, 525.0], btype="bandpass", fs=16000, output="sos")
    with pytest.raises(ComputationError, match="band-pass filter at 16000 Hz"):
        check_butterworth(wrong, 16000, (50.0, 500.0), "band-pass")
    check_butterworth(sos, 16000, (50.0, 500.0), "band-pass")  # the real one passes


def test_envelope_filter_designs_run_the_definition_check(monkeypatch):
    import envpredict.bands as bands

    seen = []
    monkeypatch.setattr(bands, "check_butterworth", lambda sos, fs, edges, what: seen.append((what, edges)))
    bands.lowpass_sos(47999, 51.0)  # designs not in the cache yet
    bands.bandpass_sos(47999, 51.0, 499.0)
    assert seen == [("low-pass", (51.0,)), ("band-pass", (51.0, 499.0))]
