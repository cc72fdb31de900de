"""Tests of envpredict.sweep: SNR sweeps, SRT and its interval, parse_snr_range, the
``sweep`` command and sweep.snr_sweep_files.

External references: scipy.stats (Student t and normal quantiles, binomial simulation),
statsmodels (binomial GLM covariance for the delta-method interval), and the package's
own STOI only as the index inside the sweep (itself checked against pystoi elsewhere).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import soundfile as sf
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import stats
from scipy.special import expit, logit

from envpredict.exceptions import ComputationError, InputError
from envpredict.mapping import ScoreMapping, fit_mapping
from envpredict.sweep import parse_snr_range, snr_sweep

from cli_for_tests import run_cli
from signals_for_tests import gated_harmonic_complex, simulated_counts as simulate

sm = pytest.importorskip("statsmodels.api")

FS = 16000


# ---------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------

def power_index(clean, degraded, fs):
    """A simple deterministic index for the sweep machinery: SNR of (degraded - clean)
    mapped to 0..1, rising with the SNR (not a published index; test scaffolding)."""
    e = degraded - clean
    snr = 10 * np.log10(np.mean(clean ** 2) / np.mean(e ** 2))
    return float(expit(snr / 8.0))


# ---------------------------------------------------------------------------
# SNR sweep
# ---------------------------------------------------------------------------

@pytest.fixture(scope="module")
def signals():
    clean = gated_harmonic_complex(3.0, FS, seed=0)
    noise = np.random.default_rng(7).standard_normal(int(10 * FS)) * 0.05
    return clean, noise


def test_parse_snr_range():
    assert parse_snr_range("-15:15:5").tolist() == [-15, -10, -5, 0, 5, 10, 15]
    assert parse_snr_range("0:1:0.25").tolist() == [0, 0.25, 0.5, 0.75, 1.0]
    for bad in ("1:2", "5:0:1", "0:10:0", "a:b:c", "0:1:2"):
        with pytest.raises(InputError):
            parse_snr_range(bad)


def test_sweep_mixes_at_the_stated_snr(signals):
    # long-term reference, speech-level convention: 10 log10(sum clean^2 / sum noise part^2)
    # equals the SNR asked for, and the noise part is a contiguous piece of the noise recording
    clean, noise = signals
    seen = []

    def probe(c, d, fs):
        seen.append(d - c)
        return power_index(c, d, fs)

    res = snr_sweep(clean, noise, FS, snr_db=[-6, 0, 6], index="probe", n_segments=3,
                    index_functions={"probe": probe}, snr_reference="long-term")
    assert res.to_dict()["snr_reference"] == "long-term"
    assert len(seen) == 9
    snrs = [10 * np.log10(np.sum(clean ** 2) / np.sum(e ** 2)) for e in seen]
    assert snrs == pytest.approx([-6, 0, 6] * 3, abs=1e-9)
    offs = [round(o * FS) for o in res.segment_offsets_s]
    assert offs == [0, (noise.size - clean.size) // 2, noise.size - clean.size]
    e = seen[3]  # second segment, -6 dB
    seg = noise[offs[1]: offs[1] + clean.size]
    assert np.corrcoef(e, seg)[0, 1] == pytest.approx(1.0, abs=1e-12)
    # mixture convention: the mixture is rescaled to the speech level
    seen.clear()
    snr_sweep(clean, noise, FS, snr_db=[-6, 0], index="probe", n_segments=2, level="mixture",
              snr_reference="long-term", index_functions={"probe": lambda c, d, fs: seen.append(d) or 0.5})
    for d in seen:
        assert np.mean(d ** 2) == pytest.approx(np.mean(clean ** 2), rel=1e-12)


def test_the_active_reference_scales_the_noise_to_the_active_speech_level():
    # Tone bursts of 1 s every 4 s: ITU-T P.56 method B counts each burst and its 0.2 s
    # hangover as active (the envelope's rise and fall, T = 0.03 s, move this by < 0.1 s),
    # so the activity factor is 1.2 / 4 and the active SNR puts the noise
    # 10 log10(4 / 1.2) dB above where the long-term SNR puts it, at every SNR.
    t = np.arange(FS) / FS
    clean = np.tile(np.concatenate([0.1 * np.sin(2 * np.pi * 500 * t), np.zeros(3 * FS)]), 3)
    noise = np.random.default_rng(2).standard_normal(2 * clean.size) * 0.05
    parts = {}
    for ref in ("active", "long-term"):
        seen = []
        res = snr_sweep(clean, noise, FS, snr_db=[-6, 0, 6], index="probe", n_segments=2, snr_reference=ref,
                        index_functions={"probe": lambda c, d, fs: seen.append(d - c) or 0.5})
        parts[ref] = np.array([np.mean(e ** 2) for e in seen])
        d = res.to_dict()
        assert d["snr_reference"] == ref and ref in ("active", "long-term")
        assert d["activity_factor"] == pytest.approx(1.2 / 4, abs=0.1 / 4)
        assert d["speech_active_level_db"] - d["speech_long_term_level_db"] == pytest.approx(
            -10 * np.log10(d["activity_factor"]), abs=0.01)
    ratio_db = 10 * np.log10(parts["active"] / parts["long-term"])
    assert ratio_db == pytest.approx(np.full(6, 10 * np.log10(4 / 1.2)), abs=10 * np.log10(1.3 / 1.2))
    assert np.ptp(ratio_db) < 1e-9  # one factor for every SNR and segment
    with pytest.raises(InputError):
        snr_sweep(clean, noise, FS, snr_db=[-6, 0], index="probe", n_segments=1, snr_reference="peak",
                  index_functions={"probe": lambda c, d, fs: 0.5})


def test_sweep_targets_and_interval_from_segments(signals):
    clean, noise = signals
    m = ScoreMapping(index="probe", shape="logistic", a=-8.0, b=16.0)
    res = snr_sweep(clean, noise, FS, snr_db=np.arange(-12, 13, 3.0), index="probe", mapping=m,
                    targets=[20, 50, 80], n_segments=4, index_functions={"probe": power_index})
    d = res.to_dict()
    for key in ("snr_db", "index", "predicted_percent", "targets"):
        assert key in d
    for t in d["targets"]:
        assert {"percent", "snr_db", "ci_low", "ci_high"} <= set(t)
        seg = np.array(t["segment_snr_db"], dtype=float)
        # Student-t interval over the per-segment crossings (scipy.stats.t)
        half = stats.t.ppf(0.975, seg.size - 1) * seg.std(ddof=1) / math.sqrt(seg.size)
        assert t["ci_low"] == pytest.approx(t["snr_db"] - half, abs=1e-9)
        assert t["ci_high"] == pytest.approx(t["snr_db"] + half, abs=1e-9)
    snrs = [t["snr_db"] for t in d["targets"]]
    assert snrs == sorted(snrs)
    assert d["srt_db"] == d["targets"][1]["snr_db"]


def test_sweep_srt_equals_inverse_mapping_on_interpolated_index_curve(signals):
    # A mapping fitted on simulated pilot scores; independently of the sweep code the
    # SRT is the SNR at which the linearly interpolated mean STOI curve reaches the
    # STOI value where the fitted logistic gives 50 % (logit(0.5) = 0).
    clean, noise = signals
    x = np.linspace(0.4, 0.95, 7)
    n = np.full(x.size, 50)
    m = fit_mapping(x, simulate(-11.0, 17.0, x, n, seed=2), n, index="stoi")
    res = snr_sweep(clean, noise, FS, snr_db=np.arange(-21, 10, 3.0), index="stoi", mapping=m,
                    targets=[20, 50, 80], n_segments=3)
    assert np.all(np.diff(res.index) > 0)
    for t in res.targets:
        x_t = (logit(t.percent / 100.0) - m.a) / m.b
        expect = np.interp(x_t, res.index, res.snr_db)
        assert t.snr_db == pytest.approx(expect, abs=1e-9)
        # predicted score at that SNR through the interpolated curve is the target
        assert 100 * expit(m.a + m.b * np.interp(t.snr_db, res.snr_db, res.index)) == pytest.approx(t.percent)
        # slope at the target: central difference of the predicted curve
        h = 1e-4

        def pred(s):
            return 100 * expit(m.a + m.b * np.interp(s, res.snr_db, res.index))

        assert t.slope_percent_per_db == pytest.approx((pred(t.snr_db + h) - pred(t.snr_db - h)) / (2 * h), rel=1e-3)
    assert res.predicted_percent == pytest.approx(100 * expit(m.a + m.b * res.index))
    # interval from the mapping's uncertainty: delta method on x_t = (logit(p) - a) / b
    # with statsmodels' covariance of (a, b), mapped through the interpolated curve
    glm = sm.GLM(np.c_[simulate(-11.0, 17.0, x, n, seed=2), n - simulate(-11.0, 17.0, x, n, seed=2)],
                 sm.add_constant(x), family=sm.families.Binomial()).fit()
    a, b = glm.params
    cov = np.asarray(glm.cov_params())
    t = res.targets[1]
    x_t = -a / b
    grad = np.array([-1 / b, -x_t / b])
    half = stats.norm.ppf(0.975) * math.sqrt(grad @ cov @ grad)
    assert t.map_ci_low == pytest.approx(np.interp(x_t - half, res.index, res.snr_db), abs=1e-4)
    assert t.map_ci_high == pytest.approx(np.interp(x_t + half, res.index, res.snr_db), abs=1e-4)


def test_sweep_with_impulse_response(signals):
    # reverberation lowers the index at every SNR (same noise segments)
    clean, noise = signals
    rng = np.random.default_rng(4)
    t = np.arange(int(0.8 * FS)) / FS
    ir = rng.standard_normal(t.size) * np.exp(-6.91 * t / 0.8)  # T60 = 0.8 s exponential decay
    ir[0] = 5.0
    kw = {"snr_db": [-6, 0, 6, 12], "index": "stoi", "n_segments": 2}
    dry = snr_sweep(clean, noise, FS, **kw)
    wet = snr_sweep(clean, noise, FS, ir=ir, **kw)
    assert wet.reverberant and not dry.reverberant
    assert np.all(wet.index < dry.index)


def test_sweep_index_values_match_reference_stoi(signals):
    # the sweep's STOI at each SNR and segment equals pystoi (reference implementation
    # of Taal 2011) on the mixture rebuilt here by the stated speech-level convention
    # (long-term SNR reference)
    from pystoi import stoi as reference_stoi

    clean, noise = signals
    res = snr_sweep(clean, noise, FS, snr_db=[-10, 0], index="stoi", n_segments=2, snr_reference="long-term")
    for j, off in enumerate(res.segment_offsets_s):
        o = round(off * FS)
        seg = noise[o: o + clean.size]
        for i, s in enumerate(res.snr_db):
            g = np.sqrt(np.sum(clean ** 2) / (np.sum(seg ** 2) * 10 ** (s / 10)))
            ref = reference_stoi(clean, clean + g * seg, FS)
            assert res.index_segments[i, j] == pytest.approx(ref, abs=2e-3)


def test_sweep_ssti_uses_speech_based_sti(signals):
    from envpredict.pair import speech_sti

    clean, noise = signals
    res = snr_sweep(clean, noise, FS, snr_db=[-5, 5], index="ssti", n_segments=1, snr_reference="long-term")
    seg = noise[: clean.size]
    g = np.sqrt(np.sum(clean ** 2) / (np.sum(seg ** 2) * 10 ** 0.5))
    assert res.index[1] == pytest.approx(speech_sti(clean, clean + g * seg, FS), abs=1e-12)
    assert res.index[1] > res.index[0]


def test_sweep_processing_chain(signals):
    # the chain sees each mixture, the index sees the chain's output; a chain that
    # halves the level leaves STOI unchanged (STOI is scale-invariant, Taal 2011)
    clean, noise = signals
    seen_in, seen_idx = [], []

    def chain(y, fs):
        seen_in.append(y.copy())
        return 0.5 * y

    def probe(c, d, fs):
        seen_idx.append(d)
        return power_index(c, 2 * d, fs)

    snr_sweep(clean, noise, FS, snr_db=[0, 6], index="probe", n_segments=1, process=chain,
              index_functions={"probe": probe})
    assert len(seen_in) == 2
    for y, d in zip(seen_in, seen_idx):
        assert d == pytest.approx(0.5 * y)
    kw = {"snr_db": [-6, 0, 6], "index": "stoi", "n_segments": 1}
    plain = snr_sweep(clean, noise, FS, **kw)
    halved = snr_sweep(clean, noise, FS, process=lambda y, fs: 0.5 * y, **kw)
    assert halved.index == pytest.approx(plain.index, abs=1e-9)
    with pytest.raises(ComputationError, match="processing chain"):
        snr_sweep(clean, noise, FS, process=lambda y, fs: y[:-10], **kw)


def test_sweep_refusals(signals):
    clean, noise = signals
    m = ScoreMapping(index="estoi", shape="logistic", a=-8.0, b=16.0)
    with pytest.raises(InputError, match="shorter than the speech"):
        snr_sweep(clean, noise[: clean.size // 2], FS, index="stoi")
    with pytest.raises(InputError, match="takes 'estoi'"):
        snr_sweep(clean, noise, FS, index="stoi", mapping=m)
    with pytest.raises(InputError, match="outside the range"):
        snr_sweep(clean, noise, FS, index="estoi", mapping=m, targets=[100])
    with pytest.raises(InputError, match="unknown index"):
        snr_sweep(clean, noise, FS, index="sii")
    with pytest.raises(InputError, match="different segments"):
        snr_sweep(clean, noise[: clean.size + 2], FS, index="stoi", n_segments=5)
    with pytest.raises(InputError, match="increasing"):
        snr_sweep(clean, noise, FS, snr_db=[3, 0], index="stoi")


def test_sweep_target_outside_range_is_reported_not_invented(signals):
    clean, noise = signals
    m = ScoreMapping(index="probe", shape="logistic", a=-8.0, b=16.0)
    res = snr_sweep(clean, noise, FS, snr_db=[20, 25, 30], index="probe", mapping=m, targets=[50],
                    n_segments=2, index_functions={"probe": power_index})
    t = res.targets[0]
    assert t.snr_db is None and t.ci_low is None and "lowest SNR" in t.note
    res = snr_sweep(clean, noise, FS, snr_db=[-30, -25], index="probe", mapping=m, targets=[50],
                    n_segments=2, index_functions={"probe": power_index})
    assert res.targets[0].snr_db is None and "highest SNR" in res.targets[0].note


MONO_MAP = ScoreMapping(index="stoi", shape="logistic", a=-11.0, b=17.0)


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    seed=st.integers(0, 10_000),
    start=st.floats(-25.0, 5.0),
    step=st.floats(2.0, 6.0),
    count=st.integers(3, 6),
    coloured=st.booleans(),
    level=st.sampled_from(["speech", "mixture"]),
)
def test_predicted_score_never_falls_as_snr_rises_in_stationary_noise(signals, seed, start, step, count,
                                                                      coloured, level):
    # property (stationary Gaussian noise, white or low-pass coloured): more SNR never
    # lowers the predicted score
    from scipy.signal import butter, sosfilt

    clean, _ = signals
    noise = np.random.default_rng(seed).standard_normal(clean.size + FS // 2)
    if coloured:
        noise = sosfilt(butter(2, 1000, fs=FS, output="sos"), noise)
    snrs = start + step * np.arange(count)
    res = snr_sweep(clean, noise, FS, snr_db=snrs, index="stoi", mapping=MONO_MAP, n_segments=2, level=level)
    assert np.all(np.diff(res.predicted_percent) >= -1e-9)
    assert np.all(np.diff(res.index_segments, axis=0) >= -1e-9)

# ---------------------------------------------------------------------------
# CLI: sweep
# ---------------------------------------------------------------------------

def test_cli_sweep(tmp_path, capsys, signals):
    # a mapping file as fitmap writes it (the mapping of the hypothesis test below)
    mp = tmp_path / "map.json"
    mp.write_text(json.dumps(MONO_MAP.to_dict()))
    clean, noise = signals
    cw, nw = tmp_path / "clean.wav", tmp_path / "noise.wav"
    sf.write(cw, clean, FS, subtype="FLOAT")
    sf.write(nw, noise, FS, subtype="FLOAT")
    code, out, err = run_cli(["sweep", str(cw), str(nw), "--map", str(mp), "--snr=-18:6:6", "--segments", "2",
                              "--target", "20", "--target", "50", "--json"], capsys)
    assert code == 0, err
    s = json.loads(out)
    assert s["snr_db"] == [-18, -12, -6, 0, 6]
    assert s["index"] == "stoi" and len(s["stoi"]) == len(s["predicted_percent"]) == 5
    assert [t["percent"] for t in s["targets"]] == [20, 50]
    assert s["srt_db"] == s["targets"][1]["snr_db"]
    assert s["snr_reference"] == "active" and s["inputs"]["snr_reference"] == "active"
    assert 0 < s["activity_factor"] <= 1
    code, out, err = run_cli(["sweep", str(cw), str(nw), "--snr", "-6:6:6", "--segments", "2"], capsys)
    assert code == 0, err
    assert "no mapping" in out and "activity factor" in out and "SNR reference: SNR = active" in out
    # the earlier convention on request: the same mixtures as snr_sweep with the long-term reference
    code, out, err = run_cli(["sweep", str(cw), str(nw), "--snr", "-6:6:6", "--segments", "2",
                              "--snr-reference", "long-term", "--json"], capsys)
    assert code == 0, err
    lt = json.loads(out)
    assert lt["snr_reference"] == "long-term"
    api = snr_sweep(clean, noise, FS, snr_db=[-6, 0, 6], n_segments=2, snr_reference="long-term")
    assert lt["stoi"] == pytest.approx(api.to_dict()["stoi"], abs=2e-5)  # FLOAT files vs float64 arrays


def test_cli_sweep_refusals(tmp_path, capsys):
    code, _out, err = run_cli(["sweep", "a.wav", "b.wav", "--snr", "5:0:1"], capsys)
    assert code == 2 and "FROM < TO" in err
    code, _out, err = run_cli(["sweep", "a.wav", "b.wav", "--target", "50"], capsys)
    assert code == 2 and "needs a mapping" in err
    code, _out, err = run_cli(["sweep", "a.wav", "b.wav", "--snr-reference", "peak"], capsys)
    assert code == 2 and "SNR reference" in err

# ---------------------------------------------------------------------------
# File-level function sweep.snr_sweep_files
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("kw,what", [
    ({"snr_db": "0:10"}, "FROM:TO:STEP"),
    ({"targets": [50.0]}, "--target needs a mapping"),
    ({"index": "pesq"}, "unknown index"),
    ({"level": "loud"}, "level convention"),
    ({"n_segments": 0}, "--segments"),
    ({"snr_reference": "peak"}, "SNR reference"),
])
def test_snr_sweep_files_checks_options_before_reading(tmp_path, kw, what):
    from envpredict.sweep import snr_sweep_files

    with pytest.raises(InputError, match=what):
        snr_sweep_files(tmp_path / "no_clean.wav", tmp_path / "no_noise.wav", **kw)


def test_snr_sweep_files_equals_snr_sweep(tmp_path, signals):
    from envpredict.sweep import snr_sweep_files

    clean, noise = signals
    cw, nw = tmp_path / "clean.wav", tmp_path / "noise.wav"
    sf.write(cw, clean, FS, subtype="DOUBLE")
    sf.write(nw, noise, FS, subtype="DOUBLE")
    a = snr_sweep(clean, noise, FS, snr_db=[-6, 0, 6], n_segments=2)
    b = snr_sweep_files(cw, nw, snr_db="-6:6:6", n_segments=2)
    assert b.to_dict() == a.to_dict()


# ---------------------------------------------------------------------------
# --process MODULE:FUNCTION
# ---------------------------------------------------------------------------

CHAIN_SOURCE = '''
import numpy as np

def same(x, fs):
    return x

def hiss(x, fs):
    return x + 0.02 * np.random.default_rng(0).standard_normal(x.size)

def broken(x, fs):
    raise ValueError("no model loaded")
'''


def test_process_from_the_command_line_gives_the_benefit(tmp_path, capsys, signals):
    from envpredict.sweep import snr_sweep_files

    (tmp_path / "chain.py").write_text(CHAIN_SOURCE)
    clean, noise = signals
    cw, nw, mp = tmp_path / "clean.wav", tmp_path / "noise.wav", tmp_path / "map.json"
    sf.write(cw, clean, FS, subtype="DOUBLE")
    sf.write(nw, noise, FS, subtype="DOUBLE")
    mp.write_text(json.dumps(MONO_MAP.to_dict()))
    base = ["sweep", str(cw), str(nw), "--map", str(mp), "--snr=-18:6:6", "--segments", "2", "--json"]
    code, out, err = run_cli(base + ["--process", f"{tmp_path / 'chain.py'}:same"], capsys)
    assert code == 0, err
    same = json.loads(out)
    assert same["processed"] and same["inputs"]["process"].endswith("chain.py:same")
    t = same["targets"][0]
    assert t["benefit_db"] == 0.0 and t["unprocessed_snr_db"] == t["snr_db"]
    # a chain that adds noise: the benefit is the SRT of the plain sweep minus the SRT with the chain,
    # each from its own API run
    code, out, err = run_cli(base + ["--process", f"{tmp_path / 'chain.py'}:hiss"], capsys)
    assert code == 0, err
    t = json.loads(out)["targets"][0]
    plain = snr_sweep_files(cw, nw, mapping=mp, snr_db="-18:6:6", n_segments=2).targets[0].snr_db
    ns = {}
    exec(CHAIN_SOURCE, ns)  # noqa: S102 -- the test's own chain, run here as the API user would
    with_chain = snr_sweep(clean, noise, FS, snr_db=[-18, -12, -6, 0, 6], mapping=MONO_MAP, n_segments=2,
                           process=ns["hiss"]).targets[0].snr_db
    assert t["unprocessed_snr_db"] == pytest.approx(plain, abs=1e-9)
    assert t["benefit_db"] == pytest.approx(plain - with_chain, abs=1e-9) and t["benefit_db"] < 0


@pytest.mark.parametrize("spec,what", [
    ("nosuchmodule_xyz:f", "cannot be imported"),
    ("CHAIN:missing", "is not a function"),
    ("CHAIN:broken", "raised ValueError: no model loaded"),
    ("justaname", "is not MODULE:FUNCTION"),
])
def test_cli_process_refusals(tmp_path, capsys, signals, spec, what):
    (tmp_path / "chain.py").write_text(CHAIN_SOURCE)
    clean, noise = signals
    cw, nw = tmp_path / "clean.wav", tmp_path / "noise.wav"
    sf.write(cw, clean, FS, subtype="FLOAT")
    sf.write(nw, noise, FS, subtype="FLOAT")
    code, out, err = run_cli(["sweep", str(cw), str(nw), "--snr=-6:0:6", "--segments", "1", "--process",
                              spec.replace("CHAIN", str(tmp_path / "chain.py"))], capsys)
    assert code == 2 and what in err and out == ""
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err


# ---------------------------------------------------------------------------
# Many sentences
# ---------------------------------------------------------------------------

def _sentences():
    from signals_for_tests import speech_like

    # different lengths and levels: each sentence is mixed at its own active level
    return [speech_like(2.0 + 0.3 * i, FS, seed=20 + i) * (0.5 + 0.2 * i) for i in range(5)]


def test_many_sentences_spread_and_intervals(signals):
    from envpredict.sweep import snr_sweep_sentences

    _clean, noise = signals
    sents = _sentences()
    m = ScoreMapping(index="probe", shape="logistic", a=-8.0, b=16.0, cov=np.array([[0.5, -0.8], [-0.8, 1.5]]))
    kw = {"snr_db": np.arange(-12, 13, 3.0), "index": "probe", "n_segments": 3,
          "index_functions": {"probe": power_index}}
    res = snr_sweep_sentences(sents, noise, FS, mapping=m, names=[f"s{i}" for i in range(5)], **kw)
    single = [snr_sweep(x, noise, FS, mapping=m, **kw) for x in sents]
    per = np.stack([r.index_segments for r in single])  # (sentence, snr, segment)
    np.testing.assert_allclose(res.index, per.mean(axis=(0, 2)), atol=1e-12)
    np.testing.assert_allclose(res.sentence_sd, per.mean(axis=2).std(axis=0, ddof=1), atol=1e-12)
    np.testing.assert_allclose(res.index_sd, per.mean(axis=0).std(axis=1, ddof=1), atol=1e-12)
    d = res.to_dict()
    assert d["n_sentences"] == 5 and d["sentences"] == ["s0", "s1", "s2", "s3", "s4"]
    assert len(d["sentence_activity_factors"]) == 5
    t = res.targets[0]
    x_t = (logit(0.5) - m.a) / m.b  # the index at 50 %
    snr = res.snr_db
    # crossings by linear interpolation (np.interp on rising curves), interval by scipy.stats.t
    sent_x = [np.interp(x_t, c, snr) for c in per.mean(axis=2)]
    seg_x = [np.interp(x_t, c, snr) for c in per.mean(axis=0).T]
    assert t.snr_db == pytest.approx(np.interp(x_t, res.index, snr), abs=1e-9)
    se_sent = np.std(sent_x, ddof=1) / np.sqrt(5)
    se_seg = np.std(seg_x, ddof=1) / np.sqrt(3)
    assert t.sentence_sd_db == pytest.approx(np.std(sent_x, ddof=1), abs=1e-9)
    assert t.sentence_ci_high - t.snr_db == pytest.approx(stats.t.ppf(0.975, 4) * se_sent, abs=1e-9)
    assert t.ci_high - t.snr_db == pytest.approx(stats.t.ppf(0.975, 2) * se_seg, abs=1e-9)
    v = se_sent ** 2 + se_seg ** 2
    df = v ** 2 / (se_sent ** 4 / 4 + se_seg ** 4 / 2)  # Welch-Satterthwaite
    assert t.combined_ci_high - t.snr_db == pytest.approx(stats.t.ppf(0.975, df) * np.sqrt(v), abs=1e-9)
    assert t.total_ci_high - t.snr_db > t.combined_ci_high - t.snr_db
    with pytest.raises(InputError):
        snr_sweep_sentences(sents[:1], noise, FS, **kw)


def test_sentence_folder_and_list_from_files(tmp_path, capsys, signals):
    from envpredict.sweep import sentence_files, snr_sweep_files

    _clean, noise = signals
    folder = tmp_path / "sentences"
    folder.mkdir()
    sents = _sentences()[:3]
    for i, x in enumerate(sents):
        sf.write(folder / f"s{i}.wav", x, FS, subtype="DOUBLE")
    sf.write(folder / "s9.wav", sents[0][::2], FS // 2, subtype="DOUBLE")  # another rate: resampled
    (folder / "notes.txt").write_text("not audio")
    nw = tmp_path / "noise.wav"
    sf.write(nw, noise, FS, subtype="DOUBLE")
    assert [p.name for p in sentence_files(folder)] == ["s0.wav", "s1.wav", "s2.wav", "s9.wav"]
    lst = tmp_path / "list.txt"
    lst.write_text("# my sentences\nsentences/s0.wav\n\nsentences/s2.wav\n")
    assert sentence_files(lst) == [tmp_path / "sentences/s0.wav", tmp_path / "sentences/s2.wav"]
    res = snr_sweep_files(folder, nw, snr_db="-6:6:6", n_segments=2)
    assert res.to_dict()["n_sentences"] == 4
    assert any("s9.wav" in n and "resampled from 8000 Hz" in n for n in res.notes)
    code, out, err = run_cli(["sweep", str(lst), str(nw), "--snr=-6:6:6", "--segments", "2"], capsys)
    assert code == 0, err
    assert "2 sentences" in out and "SD over sentences" in out
    (folder / "s5.wav").write_bytes(b"RIFF broken")
    code, out, err = run_cli(["sweep", str(folder), str(nw), "--snr=-6:6:6", "--segments", "2"], capsys)
    assert code == 2 and "s5.wav" in err and len(err.strip().splitlines()) == 1


# ---------------------------------------------------------------------------
# envelope-power index (sEPSM) in the sweep
# ---------------------------------------------------------------------------

#: Jørgensen & Dau 2011 (JASA 130(3):1475-1487), Fig. 6 reference condition: SRT of CLUE
#: sentences in stationary speech-shaped noise, unprocessed, about -3.5 dB SNR (long-term
#: levels). From memory (the paper could not be checked here): used only with a wide
#: tolerance, since the model's k was fitted to CLUE sentences and this test speaks
#: synthetic sentences.
PAPER_SRT_DB = -3.5


@pytest.fixture(scope="module")
def demo_sentence():
    from envpredict._data import demo_dir
    from signals_for_tests import speech_shaped_noise

    x, fs = sf.read(demo_dir() / "corpus" / "s01_clean.wav")
    return x, np.concatenate([speech_shaped_noise(x, 2), speech_shaped_noise(x, 3)]), fs


def _ideal_observer_by_hand(snr_env_db, k=1.2 ** 0.5, q=0.5, sigma_s=0.6, m=8000):
    """Green & Birdsall's m-alternative observer written out (Jørgensen & Dau 2011, eqs. 8-10)."""
    u = stats.norm.ppf(1 - 1 / m)
    mu, sn = u + 0.577 / u, 1.28255 / u
    return 100 * stats.norm.cdf((k * (10 ** (np.asarray(snr_env_db) / 10)) ** q - mu) / np.hypot(sigma_s, sn))


def test_sweep_sepsm_srt_is_where_the_ideal_observer_crosses_50(demo_sentence):
    # the sweep's SNR_env per SNR equals the index of the mixture and the scaled noise
    # segment (envpower.sepsm, mixed here by hand at the long-term SNR); the SRT is where
    # the observer's percent correct, linear in SNR_env dB between the swept SNRs, crosses 50 %
    from envpredict.envpower import sepsm

    x, noise, fs = demo_sentence
    snrs = np.arange(-12.0, 4.0, 3.0)
    res = snr_sweep(x, noise, fs, snr_db=snrs, index="sepsm", n_segments=1, snr_reference="long-term")
    seg = noise[: x.size]
    for i in (0, 3):
        nz = seg * math.sqrt(np.mean(x ** 2) / np.mean(seg ** 2) / 10 ** (snrs[i] / 10))
        assert res.index[i] == pytest.approx(sepsm(x + nz, nz, fs).snr_env_db, abs=1e-9)
    assert res.predicted_percent == pytest.approx(_ideal_observer_by_hand(res.index), abs=1e-6)
    # the SNR_env the observer needs for 50 %: d' = mu_N, SNR_env = (mu_N / k)^(1/q)
    u = stats.norm.ppf(1 - 1 / 8000)
    x50 = 10 * math.log10(((u + 0.577 / u) / 1.2 ** 0.5) ** 2)
    assert res.targets[0].index == pytest.approx(x50, abs=1e-9)
    i = int(np.flatnonzero(res.index >= x50)[0]) - 1
    by_hand = snrs[i] + (x50 - res.index[i]) * 3.0 / (res.index[i + 1] - res.index[i])
    assert res.srt_db == pytest.approx(by_hand, abs=1e-9)
    d = res.to_dict()
    assert d["index"] == "sepsm" and d["srt_db"] == pytest.approx(res.srt_db)
    assert d["sepsm"]["snr_env_db"] == pytest.approx(np.round(res.index, 3))
    assert np.asarray(d["sepsm"]["band_snr_env_db"]).shape == (snrs.size, len(d["sepsm"]["bands_hz"]))
    assert d["mapping"]["kind"] == "ideal observer"
    assert any("specific to that material" in n for n in d["notes"])
    # near the paper's SRT for unprocessed sentences in speech-shaped noise (from memory;
    # 3 dB: the synthetic talker is not the CLUE material the observer was fitted to)
    assert abs(res.srt_db - PAPER_SRT_DB) < 3.0, res.srt_db


def _spectral_subtraction(alpha: float, speech_power: float, noise_shape: np.ndarray, nper: int = 512):
    """Power spectral subtraction with over-subtraction factor ``alpha`` (Berouti, Schwartz
    & Makhoul 1979, ICASSP): |S|^2 = max(|Y|^2 - alpha |N|^2, 0), |N|^2 the noise's
    long-term power spectrum (its shape known, its level the input's mean power minus the
    speech's: the oracle noise estimate of Jørgensen & Dau 2011's simulation)."""
    from scipy.signal import istft, stft

    def chain(y, fs):
        _, _, spec = stft(y, fs, nperseg=nper)
        pn = noise_shape * max(float(np.mean(y ** 2)) - speech_power, 1e-12)
        py = np.abs(spec) ** 2
        ps = np.maximum(py - alpha * pn, 0.0)
        return istft(spec * np.sqrt(ps / np.maximum(py, 1e-30)), fs, nperseg=nper)[1][: y.size]

    return chain


def test_spectral_subtraction_raises_the_sepsm_srt_while_the_speech_based_sti_rises(demo_sentence):
    # Jørgensen & Dau 2011: listeners' SRT rises with the over-subtraction factor and the
    # sEPSM follows, while the STI family predicts a benefit. The processed noise alone
    # comes from phase inversion inside the sweep. Here, on a synthetic sentence with the
    # oracle noise estimate: the predicted SRT rises over alpha = 1 -> 4 and lies above the
    # unprocessed one at alpha = 4, while the normalised-covariance speech-based STI is
    # higher than unprocessed at the SNRs below the unprocessed SRT (-12 to -6 dB; above
    # them the two are within 0.02 and the chain's speech loss shows). (Not asserted, because it does not
    # hold here: at alpha <= 1 the sEPSM predicts a small benefit, where the paper
    # reports the SRT rising already from 0.5, from memory.)
    from scipy.signal import stft

    x, noise, fs = demo_sentence
    _, _, nn = stft(noise / np.sqrt(np.mean(noise ** 2)), fs, nperseg=512)
    shape = np.mean(np.abs(nn) ** 2, axis=1, keepdims=True)
    kw = {"n_segments": 1, "snr_reference": "long-term"}
    low = [-12.0, -9.0, -6.0]  # below the unprocessed SRT, where the chain is judged
    srt, ssti = {}, {}
    for alpha in (None, 1.0, 4.0):
        chain = None if alpha is None else _spectral_subtraction(alpha, float(np.mean(x ** 2)), shape)
        res = snr_sweep(x, noise, fs, index="sepsm", process=chain, snr_db=np.arange(-12.0, 1.0, 3.0), **kw)
        srt[alpha] = res.srt_db
        ssti[alpha] = snr_sweep(x, noise, fs, index="ssti", process=chain, snr_db=low, **kw).index
        if alpha is not None:
            assert any("phase inversion" in n for n in res.notes)
    assert srt[None] is not None and srt[1.0] is not None and srt[4.0] is not None, srt
    assert srt[4.0] > srt[1.0] + 1.0 and srt[4.0] > srt[None] + 1.0, srt
    assert np.all(ssti[4.0] > ssti[None]), (ssti[4.0], ssti[None])


def test_sweep_sepsm_refusals_and_files(tmp_path, demo_sentence, capsys):
    x, noise, fs = demo_sentence
    with pytest.raises(InputError, match="outside the range of the ideal observer"):
        snr_sweep(x, noise, fs, index="sepsm", targets=[100.0])
    with pytest.raises(ComputationError, match="noise alone .* is silent"):
        # a chain that returns the same output for speech + noise and speech - noise
        snr_sweep(x, noise, fs, snr_db=[0, 3], index="sepsm", n_segments=1, process=lambda y, f: np.ones_like(y))
    sf.write(tmp_path / "c.wav", x, fs)
    sf.write(tmp_path / "n.wav", noise, fs)
    args = ["sweep", tmp_path / "c.wav", tmp_path / "n.wav", "--index", "sepsm", "--snr=-9:-3:3", "--segments", "1"]
    code, out, err = run_cli(args + ["--target", "50", "--target", "80", "--json"], capsys)
    assert code == 0, err
    d = json.loads(out)
    assert d["sepsm"]["snr_env_db"] and len(d["targets"]) == 2 and d["srt_db"] is not None
    code, out, err = run_cli(args, capsys)
    assert code == 0 and "Predicted SRT" in out, err


def test_sweep_sepsm_through_a_linear_chain_equals_the_plain_sweep(demo_sentence):
    # phase inversion is exact for a linear chain, and the envelope power is normalised
    # by its DC (Jørgensen & Dau 2011, eq. 2), so a gain changes no SNR_env: the chain's
    # predicted benefit is 0 dB
    x, noise, fs = demo_sentence
    kw = {"snr_db": [-9.0, -6.0, -3.0], "index": "sepsm", "n_segments": 1, "snr_reference": "long-term"}
    plain = snr_sweep(x, noise, fs, **kw)
    gained = snr_sweep(x, noise, fs, process=lambda y, f: 0.25 * y, **kw)
    assert gained.index == pytest.approx(plain.index, abs=1e-6)
    assert gained.srt_db == pytest.approx(plain.srt_db, abs=1e-6)
