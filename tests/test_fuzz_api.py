"""Property tests over the pair and direct-method APIs (HOUSE.md invariants).

Random lengths, rates, levels, DC and silence give a result or a documented error
(InputError / ComputationError), nothing else. STI-family indices stay in [0, 1];
STOI and ESTOI are means of correlations and stay in [-1, 1] (Taal 2011; Jensen 2016:
for unrelated signals they can dip slightly below 0). More reverberation never raises
STOI/ESTOI or the speech-based STI (Houtgast & Steeneken: reverberation flattens the envelope).
"""

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.signal import fftconvolve

from envpredict.direct import stipa_from_recording
from envpredict.exceptions import EnvpredictError
from envpredict.pair import pair_indices

from conftest import noise_decay
from test_bad_input import speechlike

SETTINGS = dict(max_examples=20, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@settings(**SETTINGS)
@given(
    seconds=st.floats(0.0, 2.5),
    fs=st.sampled_from([8000, 10000, 11025, 16000, 22050, 44100]),
    level=st.floats(1e-8, 0.5),
    dc=st.floats(-0.3, 0.3),
    noise=st.floats(0.0, 2.0),
    silent=st.sampled_from(["none", "clean", "degraded"]),
    seed=st.integers(0, 500),
)
def test_pair_gives_result_or_documented_error(seconds, fs, level, dc, noise, silent, seed):
    rng = np.random.default_rng(seed)
    n = int(seconds * fs)
    x = level * (speechlike(max(seconds, 0.01), fs, seed)[:n] + dc)
    y = x + level * noise * 0.2 * rng.standard_normal(n)
    if silent == "clean":
        x = np.zeros(n)
    elif silent == "degraded":
        y = np.zeros(n)
    try:
        r = pair_indices(x, y, fs)
    except EnvpredictError as e:
        assert e.what and "\n" not in e.one_line()
        return
    assert -1.0 <= r.stoi <= 1.0 and -1.0 <= r.estoi <= 1.0
    assert r.ssti is None or 0.0 <= r.ssti <= 1.0


@settings(max_examples=8, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(T=st.floats(0.2, 1.0), factor=st.floats(1.5, 3.0), seed=st.integers(0, 100))
def test_more_reverberation_never_raises_pair_indices(T, factor, seed):
    fs = 16000
    x = speechlike(4.0, fs, seed)
    h1 = noise_decay(T, fs=fs, seconds=2.0, seed=seed)
    h2 = noise_decay(T * factor, fs=fs, seconds=2.0, seed=seed)
    y1 = fftconvolve(x, h1)[: x.size]
    y2 = fftconvolve(x, h2)[: x.size]
    a = pair_indices(x, y1, fs, align=False)
    b = pair_indices(x, y2, fs, align=False)
    # tolerance 0.01: the random fine structure of one noise decay (common practice, no source)
    assert b.stoi <= a.stoi + 0.01 and b.estoi <= a.estoi + 0.01
    if a.ssti is not None and b.ssti is not None:
        assert b.ssti <= a.ssti + 0.01


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    seconds=st.floats(0.0, 12.0),
    fs=st.sampled_from([16000, 24000, 44100]),
    level=st.floats(1e-8, 0.5),
    dc=st.floats(-0.3, 0.3),
    kind=st.sampled_from(["noise", "tone", "zeros", "speech"]),
    seed=st.integers(0, 500),
)
def test_stipa_gives_result_or_documented_error(seconds, fs, level, dc, kind, seed):
    rng = np.random.default_rng(seed)
    n = int(seconds * fs)
    t = np.arange(n) / fs
    x = {"noise": rng.standard_normal(n), "tone": np.sin(2 * np.pi * 1000 * t), "zeros": np.zeros(n),
         "speech": speechlike(max(seconds, 0.01), fs, seed)[:n]}[kind]
    x = level * (x + dc)
    try:
        r = stipa_from_recording(x, fs)
    except EnvpredictError as e:
        assert e.what and "\n" not in e.one_line()
        return
    assert 0.0 <= r.sti.sti <= 1.0
