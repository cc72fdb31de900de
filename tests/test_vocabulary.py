"""One result vocabulary (shared/HOUSE.md, "One result vocabulary").

* Every result type of the package (a dataclass with ``to_dict()``, found by walking all
  modules) is built here from a small input, and its dictionary is plain JSON.
* The same thing has the same name and shape everywhere: ``bands_hz`` for band centres,
  ``modulation_hz`` per band with the shape of ``mtf``, ``index`` for an index's name,
  ``cautions`` (what the user must read) apart from ``notes`` (method details), and no
  synonyms (``input``, ``centre_hz``, ``index_name``, ``warnings`` ...).
* A command's ``--json`` is the API's ``to_dict()`` plus one ``inputs`` object.

The walk fails when a new result type appears without a factory here, so the rules
reach every result.
"""

from __future__ import annotations

import dataclasses
import importlib
import json
import pkgutil

import numpy as np
import pytest

import envpredict
from cli_for_tests import run_cli
from signals_for_tests import noise_decay

#: Keys that name a thing the vocabulary already has a name for.
SYNONYMS = {"input", "centre_hz", "center_hz", "index_name", "caution", "warnings", "warning", "frequencies_hz"}

#: Results a command prints as a whole: each carries both lists.
TOP_LEVEL = {"IrResult", "DirectResult", "PairResult", "InspectResult", "SweepResult", "ScoreMapping",
             "Comparison", "BatchSummary", "PredictedTable", "CorrelationResult", "F0Track", "DemoResult",
             "StipaSignalResult", "FullStiSignalsResult", "SurveyResult", "SweepSignalResult",
             "DeconvolutionResult", "DesignResult", "ActiveLevel", "StimuliResult", "EarsResult"}


# ---------------------------------------------------------------------------
# small inputs
# ---------------------------------------------------------------------------

def _speech_like(fs: int, seconds: float, seed: int = 0) -> np.ndarray:
    """A harmonic complex (F0 near 120 Hz) with a 4 Hz syllabic envelope and pauses."""
    t = np.arange(int(seconds * fs)) / fs
    ph = 2 * np.pi * np.cumsum(120 + 15 * np.sin(2 * np.pi * 0.3 * t)) / fs
    x = sum(np.cos(k * ph) / k for k in range(1, 30))
    env = (0.5 * (1 - np.cos(2 * np.pi * 4 * t))) ** 2 * (np.sin(2 * np.pi * 0.25 * t) > -0.6)
    rng = np.random.default_rng(seed)
    y = x * env + 0.001 * rng.standard_normal(t.size)
    return 0.1 * y / np.max(np.abs(y))


@pytest.fixture(scope="module")
def speech():
    fs = 16000
    clean = _speech_like(fs, 6.0)
    rng = np.random.default_rng(1)
    return clean, clean + 0.02 * rng.standard_normal(clean.size), fs


@pytest.fixture(scope="module")
def batch_summary(tmp_path_factory):
    import soundfile as sf

    d = tmp_path_factory.mktemp("vocab_batch")
    sf.write(d / "a.wav", noise_decay(0.6, seed=2), 48000, subtype="FLOAT")
    (d / "m.csv").write_text("ir,position\na.wav,front\n")
    return envpredict.run_batch(d / "m.csv", d / "out.csv", workers=1)


@pytest.fixture(scope="module")
def survey_result(tmp_path_factory):
    import soundfile as sf

    d = tmp_path_factory.mktemp("vocab_survey")
    sf.write(d / "a.wav", noise_decay(0.6, seed=2), 48000, subtype="FLOAT")
    sf.write(d / "b.wav", noise_decay(0.9, seed=3), 48000, subtype="FLOAT")
    (d / "s.csv").write_text("zone,position,ir\nhall,front,a.wav\nhall,back,b.wav\n")
    return envpredict.run_survey(d / "s.csv", d / "rows.csv", requirements=["mean>=0.5"], workers=1)


def _factories(speech, batch_summary, survey_result=None) -> dict:
    clean, degraded, fs = speech
    ir = noise_decay(0.8, seed=1)

    def mapping():
        x = np.array([0.45, 0.55, 0.65, 0.75, 0.85])
        return envpredict.fit_mapping(x, [8, 22, 48, 74, 90], [100] * 5, index="stoi")

    def comparison():
        rows = [{"condition": c, "item": str(i), "stoi": f"{0.6 + 0.01 * i - 0.05 * (c == 'b'):.3f}"}
                for i in range(6) for c in ("a", "b")]
        return envpredict.compare_conditions(rows, by="condition", baseline="a", index="stoi", pair_on="item",
                                             n_resamples=200)

    def pairwise():
        rows = [{"condition": c, "item": str(i), "stoi": f"{0.6 + 0.01 * i - 0.05 * (c == 'b') + 0.001 * (i % 3):.3f}"}
                for i in range(6) for c in ("a", "b", "c")]
        return envpredict.compare_all_pairs(rows, by="condition", index="stoi", pair_on="item", n_resamples=200)

    def stipa():
        x = envpredict.stipa_signal(15.0, 44100, seed=1)
        return envpredict.stipa_from_recording(x, 44100)

    def predicted():
        rows = [(line, {"stoi": v}) for line, v in ((2, "0.6"), (3, "0.7"))]  # (line number, row)
        return envpredict.add_predictions(rows, ["stoi"], mapping())

    def sweep_spec():
        return envpredict.sweep_spec(32000, 40, 15000, 8.0, repeats=1, tail_s=1.0)

    def deconvolution():
        played = envpredict.sweep_signal(sweep_spec())
        rec = np.convolve(played, noise_decay(0.3, fs=32000, seconds=0.5, seed=6))
        rec = 0.5 * rec / np.max(np.abs(rec)) + 1e-5 * np.random.default_rng(6).standard_normal(rec.size)
        return envpredict.deconvolve_sweep(rec, 32000, played, 32000, sweep_spec())

    def common_delay():
        import soundfile as sf

        from envpredict.pair import common_delay as pooled

        def write(d):
            sf.write(d / "c.wav", clean, fs, subtype="FLOAT")
            sf.write(d / "d.wav", np.concatenate([np.zeros(40), degraded]), fs, subtype="FLOAT")
            return pooled([(d / "c.wav", d / "d.wav", None), (d / "c.wav", d / "missing.wav", None)])
        return _in_tmp(write)

    from envpredict.audio import find_delay
    from envpredict.bands import octave_bands
    from envpredict.binaural import ir_ears as ears_ir
    from envpredict.refcases import run_cases

    return {
        "IrResult": lambda: envpredict.sti_from_ir(ir, 48000, noise_db=[40] * 7),
        "StiResult": lambda: envpredict.sti_from_mtf(np.full((7, 14), 0.6)),
        "DecayResult": lambda: envpredict.decay_figures(octave_bands(ir, 48000), 48000, 0),
        "DirectResult": stipa,
        "PairResult": lambda: envpredict.pair_indices(clean, degraded, fs),
        "CorrelationResult": lambda: envpredict.correlation_indices(clean, degraded, fs),
        "InspectResult": lambda: envpredict.inspect_signal(clean, fs),
        "SweepResult": lambda: envpredict.snr_sweep(clean, np.random.default_rng(3).standard_normal(3 * clean.size)
                                                    * 0.05, fs, snr_db=[-6, 0], n_segments=2),
        "ScoreMapping": mapping,
        "Comparison": comparison,
        "PairwiseComparison": pairwise,
        "BatchSummary": lambda: batch_summary,
        "PredictedTable": predicted,
        "F0Track": lambda: envpredict.yin_f0(clean, fs),
        "DemoResult": envpredict.rate_demo_site,
        "StipaSignalResult": lambda: _in_tmp(lambda d: envpredict.write_stipa_signal(d / "s.wav", 15.0, 24000)),
        "FullStiSignalsResult": lambda: _in_tmp(lambda d: envpredict.write_full_sti_signals(d / "full", 24000)),
        "ReferenceRun": lambda: run_cases(id_contains="decay_T0.3"),
        "SurveyResult": lambda: survey_result,
        "SweepSignalResult": lambda: _in_tmp(lambda d: envpredict.write_sweep_signal(d / "sweep.wav", sweep_spec())),
        "DeconvolutionResult": deconvolution,
        "DesignResult": lambda: envpredict.predict_design(
            {"room": {"volume_m3": 800, "rt_s": 1.2}, "noise_db": [45] * 7,
             "sources": [{"name": "LS1", "position_m": [1, 1, 3], "level_1m_dba": 80, "q": 2}],
             "listeners": [{"name": "P1", "position_m": [6, 4, 1.2]}],
             "grid": {"x_m": [0, 4], "y_m": [0, 3], "z_m": 1.2, "step_m": 1}}),
        "ActiveLevel": lambda: envpredict.active_speech_level(clean, fs),
        "StimuliResult": lambda: _in_tmp(lambda d: envpredict.write_stimuli(
            d / "st", clean, np.random.default_rng(3).standard_normal(2 * clean.size) * 0.05, fs, [-3, 3])),
        "DelayEstimate": lambda: find_delay(clean, degraded, fs, 0.1),
        "SepsmResult": lambda: envpredict.sepsm(degraded, degraded - clean, fs),
        "CommonDelay": common_delay,
        "EarsResult": lambda: ears_ir(ir, noise_decay(1.1, seed=3, seconds=ir.size / 48000), 48000),
        "Audiogram": lambda: envpredict.parse_audiogram("250:20,500:25,1000:30,2000:45,4000:60,8000:70"),
    }


def _in_tmp(write):
    """Call ``write(folder)`` in a temporary folder removed afterwards (the result stays)."""
    import pathlib
    import tempfile

    with tempfile.TemporaryDirectory() as d:
        return write(pathlib.Path(d))


def _result_types() -> dict[str, type]:
    """Every dataclass with a to_dict() defined in a module of the package."""
    found = {}
    for info in pkgutil.walk_packages(envpredict.__path__, "envpredict."):
        if ".cli" in info.name or info.name.endswith(("demo_pairs", "reference_cases")):
            continue
        mod = importlib.import_module(info.name)
        for name, obj in vars(mod).items():
            if (isinstance(obj, type) and dataclasses.is_dataclass(obj) and obj.__module__ == mod.__name__
                    and "to_dict" in vars(obj)):
                found[name] = obj
    return found


#: Parts of other results, built through their owner (checked inside the owner's dict).
PARTS = {"SstiBands", "GoodnessOfFit", "SweepTarget", "ConditionStats", "UsablePart", "FullStiSignalSpec",
         "CaseOutcome", "Check", "PositionSummary", "ZoneSummary", "RuleCheck", "SweepSpec", "DesignListener",
         "DesignGrid", "Stimulus", "Separation", "PairDifference", "ListenerFit"}


def test_every_result_type_has_a_factory(speech, batch_summary):
    types = set(_result_types())
    missing = types - set(_factories(speech, batch_summary)) - PARTS
    assert not missing, f"result types without a vocabulary check: {sorted(missing)}"


def test_every_public_result_class_has_to_dict():
    """Every dataclass the package exports (envpredict.__all__) is a result with to_dict()."""
    for name in envpredict.__all__:
        obj = getattr(envpredict, name)
        if isinstance(obj, type) and dataclasses.is_dataclass(obj):
            assert callable(getattr(obj, "to_dict", None)), f"{name} has no to_dict()"


def _walk(d, path=""):
    if isinstance(d, dict):
        for k, v in d.items():
            yield f"{path}{k}", k, v, d
            yield from _walk(v, f"{path}{k}.")
    elif isinstance(d, list):
        for i, v in enumerate(d):
            if isinstance(v, dict):
                yield from _walk(v, f"{path}{i}.")


@pytest.mark.parametrize("name", sorted(TOP_LEVEL | {"StiResult", "DecayResult"}))
def test_result_follows_the_vocabulary(name, speech, batch_summary, survey_result):
    d = _factories(speech, batch_summary, survey_result)[name]().to_dict()
    json.dumps(d, allow_nan=False)  # plain JSON: no NaN, no numpy types
    for path, key, value, parent in _walk(d):
        assert key not in SYNONYMS, f"{name}: '{path}' uses a synonym"
        if key == "mtf" and np.ndim(value) == 2:
            shape = np.shape(value)
            assert np.shape(parent.get("modulation_hz")) == shape, f"{name}: modulation_hz not per band at {path}"
            assert len(parent.get("bands_hz", [])) == shape[0], f"{name}: bands_hz does not follow mtf at {path}"
        if key == "index":
            assert isinstance(value, str), f"{name}: '{path}' must be the index's name"
    if name in TOP_LEVEL:
        assert isinstance(d.get("cautions"), list) and isinstance(d.get("notes"), list), name


# ---------------------------------------------------------------------------
# --json = to_dict() + inputs
# ---------------------------------------------------------------------------

def _cli_json(args, capsys) -> dict:
    code, out, err = run_cli(list(args) + ["--json"], capsys)
    assert code == 0, err
    d = json.loads(out)
    assert isinstance(d.get("inputs"), dict), f"{args[0]}: no inputs object"
    return d


def test_ir_json_is_to_dict_plus_inputs(write_wav, capsys):
    p = write_wav("hall.wav", noise_decay(0.7, seed=4), 48000)
    d = _cli_json(["ir", p, "--noise", "40,38,35,33,30,28,25", "--speech-level", "65"], capsys)
    x, fs = envpredict.load_audio(p)
    api = envpredict.sti_from_ir(x, fs, noise_db=[40, 38, 35, 33, 30, 28, 25], speech_level_dba=65).to_dict()
    assert d.pop("inputs")["impulse_response"] == str(p)
    assert d == api


def test_pair_json_is_to_dict_plus_inputs(write_wav, speech, capsys):
    clean, degraded, fs = speech
    pc, pd = write_wav("c.wav", clean, fs, "FLOAT"), write_wav("d.wav", degraded, fs, "FLOAT")
    d = _cli_json(["pair", pc, pd], capsys)
    inputs = d.pop("inputs")
    assert (inputs["clean"], inputs["degraded"]) == (str(pc), str(pd))
    assert d == envpredict.pair_from_files(pc, pd).to_dict()


def test_inspect_json_is_to_dict_plus_inputs(write_wav, speech, capsys):
    clean, _, fs = speech
    p = write_wav("c.wav", clean, fs, "FLOAT")
    d = _cli_json(["inspect", p], capsys)
    d.pop("inputs")
    assert d == envpredict.inspect_file(p).to_dict()


def test_stipa_json_is_to_dict_plus_inputs(write_wav, capsys):
    x = envpredict.stipa_signal(15.0, 44100, seed=2)
    p = write_wav("s.wav", 0.3 * x / np.max(np.abs(x)), 44100, "FLOAT")
    d = _cli_json(["stipa", p], capsys)
    d.pop("inputs")
    assert d == envpredict.stipa_from_file(p, name=p.name).to_dict()


@pytest.fixture(scope="module")
def corpus_files(tmp_path_factory, speech):
    """A small results table, pilot scores and a noise file for the table commands."""
    import soundfile as sf

    clean, _, fs = speech
    d = tmp_path_factory.mktemp("vocab_tables")
    rows = ["condition,item,stoi"] + [f"{c},{i},{0.6 + 0.01 * i - 0.05 * (c == 'b'):.3f}"
                                      for i in range(6) for c in ("a", "b")]
    (d / "results.csv").write_text("\n".join(rows) + "\n")
    (d / "pilot.csv").write_text("stoi,correct,trials\n0.45,8,100\n0.55,22,100\n0.65,48,100\n0.75,74,100\n"
                                 "0.85,90,100\n")
    sf.write(d / "clean.wav", clean, fs, subtype="FLOAT")
    sf.write(d / "noise.wav", 0.05 * np.random.default_rng(3).standard_normal(3 * clean.size), fs, subtype="FLOAT")
    return d


def test_compare_json_is_to_dict_plus_inputs(corpus_files, capsys):
    p = corpus_files / "results.csv"
    d = _cli_json(["compare", p, "--by", "condition", "--baseline", "a", "--pair-on", "item"], capsys)
    d.pop("inputs")
    assert d == envpredict.compare_conditions_file(p, by="condition", baseline="a", pair_on="item").to_dict()


def test_fitmap_and_predict_json_are_to_dict_plus_inputs(corpus_files, capsys):
    scores, results = corpus_files / "pilot.csv", corpus_files / "results.csv"
    d = _cli_json(["fitmap", scores, "--index", "stoi"], capsys)
    d.pop("inputs")
    m, _ = envpredict.fit_mapping_file(scores, index="stoi")
    assert d == m.to_dict()
    (corpus_files / "map.json").write_text(json.dumps(d))
    d = _cli_json(["predict", results, "--map", corpus_files / "map.json"], capsys)
    d.pop("inputs")
    assert d == envpredict.predict_file(results, corpus_files / "map.json").to_dict()


def test_sweep_json_is_to_dict_plus_inputs(corpus_files, capsys):
    c, n = corpus_files / "clean.wav", corpus_files / "noise.wav"
    d = _cli_json(["sweep", c, n, "--snr=-6:0:6", "--segments", "2"], capsys)
    d.pop("inputs")
    assert d == envpredict.snr_sweep_files(c, n, snr_db="-6:0:6", n_segments=2).to_dict()


def test_batch_json_is_to_dict_plus_inputs(tmp_path, capsys):
    import soundfile as sf

    sf.write(tmp_path / "a.wav", noise_decay(0.6, seed=5), 48000, subtype="FLOAT")
    manifest = tmp_path / "m.csv"
    manifest.write_text("ir,position\na.wav,front\n")
    d = _cli_json(["batch", manifest, "--out", tmp_path / "out.csv", "--workers", "1"], capsys)
    d.pop("inputs")
    api = envpredict.run_batch(manifest, tmp_path / "out2.csv", workers=1).to_dict()
    for timing in ("seconds", "rows_per_s"):  # wall-clock figures of two runs
        d.pop(timing), api.pop(timing)
    assert d == api
