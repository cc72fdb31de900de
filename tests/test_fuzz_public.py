"""Every public function raises only the documented errors (issue 12, item 5).

The contract (``envpredict.exceptions``): a public function returns a result or raises
:class:`~envpredict.exceptions.InputError` (bad input) or
:class:`~envpredict.exceptions.ComputationError` (no trustworthy number), each with a
one-line ``what`` -- never a ``ValueError``, ``TypeError``, ``IndexError``,
``ZeroDivisionError``, ``MemoryError``, ``LinAlgError`` or a soundfile error, and never a
huge allocation.

"Public" is every name in ``envpredict.__all__`` and every function without a leading
underscore in the modules listed in README "How the code is organised"
(:data:`MODULES`); ``test_every_public_function_has_a_strategy`` fails when one is added
without a strategy here, so the suite stays complete.

Each function gets a strategy that mostly draws valid, varied input (plausible lengths,
rates, levels, DC, noise) and, in a share of the examples, spoils one argument with a
hostile value: empty, NaN/inf, the wrong number of dimensions, the wrong type, negative,
and huge sizes (fs = 1e12, seconds = 1e9) that would allocate hundreds of GiB. While the
examples run, the process's address space is capped a few GiB above its current size
(:func:`memory_cap`), so a huge allocation fails at once as a ``MemoryError`` (counted as
a leak) instead of swapping the machine; an example that runs longer than
:data:`EXAMPLE_SECONDS` fails too. After the run, each test checks that at least
``share`` of its examples reached the computation (returned a result), so a strategy
that is refused most of the time is noticed.
"""

from __future__ import annotations

import contextlib
import errno
import importlib
import inspect
import json
import math
import os
import resource
import signal
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st
from signals_for_tests import harmonic_syllables, noise_decay

import envpredict
from envpredict.exceptions import EnvpredictError

# README "How the code is organised" (the cli/ package is not an API: it calls these)
MODULES = (
    "standards", "exceptions", "results", "outputs", "bands", "audio", "modulation", "sti", "cautions",
    "decay", "correlation", "pitch", "signals", "tables", "mapping", "indirect", "direct", "pair",
    "timescales", "sweep", "stats", "batch", "refcases", "demo", "report", "checks", "labels", "sinesweep",
    "deconvolve", "survey",
    "envpower", "speechlevel", "stimuli", "roommodel", "design", "binaural", "hearing",
)

EXAMPLE_SECONDS = 30  # one example longer than this is a hang (a huge length accepted)
MEMORY_HEADROOM = 3 * 2**30  # address space allowed above the size at the start of a test

NAN, INF = float("nan"), float("inf")


def public_functions() -> dict[str, object]:
    """``module.name`` -> function, for every public function of :data:`MODULES` and of
    ``envpredict.__all__``."""
    out = {}
    for m in MODULES:
        mod = importlib.import_module(f"envpredict.{m}")
        for name, obj in vars(mod).items():
            fn = inspect.unwrap(obj) if callable(obj) else None  # functools.lru_cache etc. included
            if not name.startswith("_") and inspect.isfunction(fn) and fn.__module__ == mod.__name__:
                out[f"{m}.{name}"] = obj
    for name in envpredict.__all__:
        obj = getattr(envpredict, name)
        if inspect.isfunction(obj):
            out[f"{obj.__module__.split('.')[-1]}.{name}"] = obj
    return out


# ---------------------------------------------------------------------------
# Files: markers resolved against one folder of fixture files per module
# ---------------------------------------------------------------------------


class P(str):
    """A file of the fixture folder (resolved by :func:`materialize`)."""


class Out(str):
    """A fresh output path in the fixture folder's ``out`` folder."""


_FOLDER: list[Path] = []
_COUNTER = [0]


def materialize(v):
    if isinstance(v, Out):
        _COUNTER[0] += 1
        return str(_FOLDER[0] / "out" / f"{_COUNTER[0]}_{v}")
    if isinstance(v, P):
        return str(_FOLDER[0] / v) if str(v) else ""
    if isinstance(v, list):
        return [materialize(a) for a in v]
    if isinstance(v, tuple):
        return tuple(materialize(a) for a in v)
    if isinstance(v, dict):
        return {k: materialize(a) for k, a in v.items()}
    if isinstance(v, np.ndarray):
        return v.copy()
    return v


def _write_wav(path: Path, x, fs, subtype="PCM_24"):
    import soundfile as sf

    sf.write(path, x, fs, subtype=subtype)


@pytest.fixture(scope="module", autouse=True)
def fixture_folder(tmp_path_factory):
    return build_fixture_folder(tmp_path_factory.mktemp("fuzz"))


def build_fixture_folder(d: Path) -> Path:
    """Write the input files the strategies name (:class:`P`) into ``d``."""
    (d / "out").mkdir()
    _write_wav(d / "ir.wav", ir_array(48000, 1.2, 0.6, 1), 48000)
    _write_wav(d / "ir_stereo.wav", np.stack([ir_array(48000, 1.2, 0.6, 1)] * 2, axis=1), 48000)
    _write_wav(d / "stipa.wav", stipa_recording(24000, 16.0), 24000)
    _write_wav(d / "stipa_stereo.wav", np.stack([stipa_recording(24000, 16.0)] * 2, axis=1), 24000)
    _write_wav(d / "clean.wav", speech(16000, 2.0, 1), 16000)
    _write_wav(d / "degraded.wav", speech(16000, 2.0, 1) + 0.003 * np.random.default_rng(2).standard_normal(32000),
               16000)
    _write_wav(d / "speech.wav", speech(16000, 3.0, 2), 16000)
    _write_wav(d / "degraded_stereo.wav", np.stack([speech(16000, 2.0, 1), 0.5 * speech(16000, 2.0, 1)], axis=1),
               16000)
    _write_wav(d / "noise.wav", 0.05 * np.random.default_rng(3).standard_normal(16000 * 12), 16000)
    _write_wav(d / "calibrator.wav", 0.5 * np.sin(2 * np.pi * 1000 * np.arange(96000) / 48000), 48000)
    _write_wav(d / "silent.wav", np.zeros(48000), 48000)
    (d / "garbage.wav").write_bytes(bytes(range(256)) * 40)
    (d / "empty.wav").write_bytes(b"")
    (d / "folder").mkdir()
    (d / "text.txt").write_text("not a table\n\x00\x01", encoding="latin-1")
    rng = np.random.default_rng(4)
    lines = ["index,correct,trials"] + [f"{v:.3f},{int(round(20 / (1 + math.exp(-12 * (v - 0.5)))))},20"
                                        for v in np.linspace(0.2, 0.8, 9)]
    (d / "scores.csv").write_text("\n".join(lines) + "\n")
    rows = ["item,condition,sti"] + [f"u{i},{c},{0.5 + 0.02 * i + (0.05 if c == 'b' else 0) + 0.01 * rng.random():.4f}"
                                     for i in range(8) for c in ("a", "b")]
    (d / "results.csv").write_text("\n".join(rows) + "\n")
    from envpredict.mapping import fit_mapping

    m = fit_mapping(np.linspace(0.2, 0.8, 9), [1, 2, 4, 7, 10, 13, 16, 18, 19], [20] * 9, index="sti")
    (d / "mapping.json").write_text(json.dumps(m.to_dict()))
    (d / "manifest.csv").write_text("ir,condition\nir.wav,a\nmissing.wav,b\n")
    (d / "pairs.csv").write_text("clean,degraded\nclean.wav,degraded.wav\n")
    (d / "recordings").mkdir()
    _write_wav(d / "recordings" / "r.wav", stipa_recording(24000, 16.0), 24000)
    _write_wav(d / "noise24k.wav", noise24k(0), 24000)
    from envpredict.sinesweep import write_sweep_signal

    write_sweep_signal(d / "sweep.wav", short_spec())
    for bad, text in (("badsweep", "{"), ("hugesweep", json.dumps({**short_spec().to_dict(), "fs": 1e400}))):
        (d / f"{bad}.wav").write_bytes((d / "sweep.wav").read_bytes())
        (d / f"{bad}.json").write_text(text)
    _write_wav(d / "sweep_rec.wav", sweep_recording(0.3, 0.5, 0), SWEEP_FS)
    (d / "survey.csv").write_text("ir,zone,position\nir.wav,hall,p1\nir.wav,hall,p2\nir.wav,foyer,p1\n")
    (d / "about.txt").write_text("# record\nproject: Pier 4\noperator: K. Lind\n")
    (d / "about.json").write_text(json.dumps({"project": "Pier 4", "site": None}))
    (d / "about_bad.json").write_text("[1, 2]")
    # added with the design, corpus and listening-test work
    (d / "scene.json").write_text(json.dumps(SCENE))
    (d / "scene.toml").write_text('[room]\nvolume_m3 = 500\nrt_s = 0.8\n[[sources]]\nposition_m = [0, 0, 3]\n'
                                  'level_1m_dba = 80\n[[listeners]]\nposition_m = [4, 0, 1.2]\n')
    (d / "sentences").mkdir()
    for i in range(2):
        _write_wav(d / "sentences" / f"s{i}.wav", speech(10000, 1.5, i), 10000)
    (d / "sentences.txt").write_text("# two sentences\nsentences/s0.wav\n\nsentences/s1.wav\n")
    _write_wav(d / "noise10k.wav", 0.05 * np.random.default_rng(6).standard_normal(10000 * 10), 10000)
    (d / "gain.py").write_text("def half(x, fs):\n    return 0.5 * x\n\n\ndef broken(x, fs):\n    return 1 / 0\n")
    (d / "pairs_cond.csv").write_text("clean,degraded,condition\nclean.wav,degraded.wav,a\nclean.wav,clean.wav,a\n"
                                      "clean.wav,degraded.wav,b\n")
    (d / "audiogram.csv").write_text("frequency_hz,hearing_level_db\n250,20\n500,25\n1000,30\n2000,45\n4000,60\n"
                                     "8000,70\n")
    (d / "audiogram_bad.csv").write_text("frequency_hz,hearing_level_db\n1000,30\n")
    _FOLDER[:] = [d]
    return d


# ---------------------------------------------------------------------------
# Valid material (cached; every example gets a copy)
# ---------------------------------------------------------------------------


@lru_cache(maxsize=32)
def ir_array(fs: int, seconds: float, T: float, seed: int) -> np.ndarray:
    return noise_decay(T, fs=fs, seconds=seconds, seed=seed)


@lru_cache(maxsize=32)
def speech(fs: int, seconds: float, seed: int) -> np.ndarray:
    return harmonic_syllables(seconds, fs, seed)


@lru_cache(maxsize=4)
def stipa_recording(fs: int, seconds: float) -> np.ndarray:
    from envpredict.signals import stipa_signal

    return 0.3 * stipa_signal(seconds, fs, seed=5)


@lru_cache(maxsize=8)
def band_irs(fs: int, T: float) -> np.ndarray:
    from envpredict.bands import octave_bands

    return octave_bands(ir_array(fs, 1.2, T, 1), fs)


@lru_cache(maxsize=4)
def ir_result(fs: int = 48000):
    from envpredict.indirect import sti_from_ir

    return sti_from_ir(ir_array(fs, 1.2, 0.6, 1), fs)


@lru_cache(maxsize=2)
def env_pair():
    from envpredict.correlation import tf_envelopes

    x = speech(10000, 2.0, 1)
    y = x + 0.01 * np.random.default_rng(1).standard_normal(x.size)
    return tf_envelopes(lambda a, b: x[a:b], lambda a, b: y[a:b], x.size)


def scaled(base, *, level=(1e-4, 0.9), dc=(-0.05, 0.05)):
    """An array strategy from ``base`` (a strategy of arrays) with a random level and DC."""
    return st.tuples(base, st.floats(*level), st.floats(*dc)).map(lambda t: t[1] * (t[0] / np.max(np.abs(t[0]))) + t[2]
                                                                   if t[0].size and np.max(np.abs(t[0])) > 0 else t[0])


IR = st.builds(ir_array, st.just(48000), st.sampled_from([0.9, 1.2]), st.sampled_from([0.3, 0.6, 1.5]),
               st.integers(0, 3))
SPEECH_FS = st.sampled_from([10000, 16000, 22050])

# ---------------------------------------------------------------------------
# Hostile values, by kind of argument
# ---------------------------------------------------------------------------


def _bad_arrays():
    return st.sampled_from([
        np.zeros(0), np.full(4800, NAN), np.full(4800, INF), np.zeros((3, 4, 5)), np.zeros(3), np.zeros((0, 7)),
        np.array(["a", "b"]), np.ones(4800, dtype=complex), np.ones(4800, dtype=bool), "abc", None, 3.0,
        [0.1, 0.2], np.ones((2, 4800)), np.zeros(4800), np.full(4800, 1e300),
    ])


BAD_ARRAY = _bad_arrays()
BAD_RATE = st.sampled_from([0, -48000, NAN, INF, 1e12, 0.5, 1.0, "48000", None, True, 2**63, 47999.5, 100])
BAD_REAL = st.sampled_from([NAN, INF, -INF, -1.0, 0.0, 1e300, -1e300, 1e9, "1", None, [1.0]])
BAD_INT = st.sampled_from([-1, 0, 2**40, 1.5, NAN, "3", None, True, 10**30])
BAD_TEXT = st.sampled_from(["", "x" * 300, "no such", 3, None, b"bytes", "\x00", "$\\frac$", "<!--"])
BAD_PATH = st.sampled_from([P("missing.wav"), P(""), P("folder"), P("garbage.wav"), P("empty.wav"),
                            P("text.txt"), "a\x00b", P("x" * 300), 3, None, P("folder/missing/x.wav")])
BAD_ANY = st.sampled_from([None, NAN, -1, "x", [], {}, 1e300, np.zeros(0)])

BAD_BY_NAME = {
    **dict.fromkeys(["x", "ir", "clean", "degraded", "noise", "band", "e", "env", "band_irs", "band_signals",
                     "reference", "data", "curve_db", "t", "mtf", "m", "mti", "raw", "floor", "values", "d", "psd",
                     "freqs", "x_env", "y_env", "kept_idx", "dft_frames", "level_db", "index_values", "correct",
                     "trials", "sos"], BAD_ARRAY),
    **dict.fromkeys(["fs", "fs_in", "fs_out", "fs_env", "fs_degraded"], BAD_RATE),
    **dict.fromkeys(["seconds", "level_dba", "speech_level_dba", "max_delay_s", "chunk_s", "block_seconds",
                     "calibration_db", "calibrator_level", "segment_s", "excerpt_s", "target_hz", "cutoff_hz",
                     "f0_min_hz", "f0_max_hz", "threshold", "voicing_threshold", "window_s", "hop_s", "lo", "hi",
                     "hi_db", "lo_db", "nominal_depth", "guess", "lapse", "confidence", "sti", "value",
                     "requirement", "start_s", "duration_s", "width_octaves", "depth", "f", "f1", "f2",
                     "modulation_hz_value"], BAD_REAL),
    **dict.fromkeys(["n", "t0", "seed", "channel", "digits", "n_samples", "chunk_frames", "n_segments", "order",
                     "n_resamples", "stride", "chunk", "frames_total", "minimum", "step", "workers", "near",
                     "line", "calibrator_channel"], BAD_INT),
    **dict.fromkeys(["talker", "kind", "shape", "index", "method", "by", "baseline", "name", "text", "column",
                     "level", "what", "source", "ci_method", "id_contains", "title", "spec", "option"], BAD_TEXT),
    **dict.fromkeys(["path", "folder", "clean_path", "degraded_path", "calibrator", "paths", "manifest", "out",
                     "target", "a", "b"], BAD_PATH),
    "noise_db": st.sampled_from(["1;2;3", "a;b;c;d;e;f;g", [NAN] * 7, [1e300] * 7, [40.0] * 3, "", 3, "1e309;" * 7]),
    "modulation_hz": st.sampled_from([(), (NAN,), (-1.0,), (0.0,), (1e12,), "abc", None, ((1.0,),)]),
}


# ---------------------------------------------------------------------------
# The registry
# ---------------------------------------------------------------------------


@dataclass
class Case:
    valid: dict  # argument -> strategy of valid values
    examples: int = 12
    share: float = 0.5  # share of examples that must reach the computation
    bad: dict = field(default_factory=dict)  # argument -> hostile strategy (None: never spoiled)
    call: object = None  # callable(fn, kwargs) when a plain call is not the way to use it
    check: object = None  # callable(result) -> an extra assertion on a result


CASES: dict[str, Case] = {}


def case(fname: str, /, examples_: int = 12, share_: float = 0.5, bad_: dict | None = None, call_=None,
         check_=None, **valid) -> None:
    """Register the strategy of function ``fname`` ("module.name"): ``valid`` maps each
    argument to a strategy of valid values; the options end in ``_`` (see :class:`Case`)."""
    CASES[fname] = Case(valid, examples_, share_, bad_ or {}, call_, check_)


@st.composite
def arguments(draw, c: Case):
    spoilable = [k for k in c.valid if c.bad.get(k, BAD_BY_NAME.get(k, BAD_ANY)) is not None]
    # one argument in about 1 + 3 x (number of arguments) examples is spoiled
    which = draw(st.sampled_from([None] * (3 * len(spoilable) + 2) + spoilable)) if spoilable else None
    # a draw that changes nothing: hypothesis runs each distinct example once, so without
    # it a function with few valid inputs would be tried mostly with spoiled ones
    draw(st.integers(0, 2**16))
    out = {}
    for k, s in c.valid.items():
        out[k] = draw(c.bad.get(k, BAD_BY_NAME.get(k, BAD_ANY)) if k == which else s)
    return out


def J(v):
    return st.just(v)


def S(*v):
    return st.sampled_from(v)


# --- results, outputs ----------------------------------------------------------

JSONISH = st.recursive(
    st.one_of(st.none(), st.booleans(), st.integers(-10**6, 10**6), st.floats(allow_nan=True), st.text(max_size=8),
              st.builds(np.float64, st.floats()), st.builds(np.int64, st.integers(-10, 10)),
              st.lists(st.floats(), max_size=4).map(np.array)),
    lambda c: st.one_of(st.lists(c, max_size=4), st.dictionaries(st.text(max_size=4), c, max_size=4),
                        st.tuples(c, c)),
    max_leaves=12,
)
case("results.jsonable", value=JSONISH, digits=st.one_of(st.none(), st.integers(1, 8)), bad_={"value": None})
case("results.round_significant", x=st.one_of(st.floats(), st.lists(st.floats(), max_size=5).map(np.array)),
     digits=st.integers(1, 10))
case("outputs.current_umask")
OUTPATH = S(Out("a.json"), Out("b.wav"), Out("c.csv"))
case("outputs.resolve_output", path=OUTPATH)
case("outputs.same_path", a=S(P("ir.wav"), P("clean.wav"), Out("x")), b=S(P("ir.wav"), P("speech.wav")))
case("outputs.check_output_file", path=OUTPATH, inputs=S(None, [P("ir.wav")], [None, P("clean.wav")]),
     option=S("--out", "output"))
case("outputs.check_output_folder", path=S(Out("rep"), Out("r2")), inputs=S(None, [P("ir.wav")]))
case("outputs.check_inputs_outside", folder=S(Out("rep"), P("out")), inputs=S(None, [P("ir.wav")], []))
case("outputs.check_distinct", out=S(None, Out("a.json")), folder=S(None, Out("rep")))
case("outputs.stale_temporaries", target=OUTPATH)
case("outputs.remove_stale_temporaries", target=OUTPATH)
case("outputs.output_error", e=st.builds(OSError, S(errno.ENOSPC, errno.EACCES, errno.EROFS, errno.ENOTDIR,
                                                   errno.EISDIR, errno.EIO, 0), S("x", "")),
     path=OUTPATH, bad_={"e": BAD_ANY})
case("outputs.atomic_write_bytes", path=OUTPATH, data=st.binary(max_size=64))
case("outputs.atomic_write_text", path=OUTPATH, text=st.text(max_size=64))


def _enter(fn, kw):
    with fn(**kw) as tmp:
        (Path(tmp) / "f.txt").write_text("x")
    return True


case("outputs.atomic_directory", path=S(Out("d1"), Out("d2")), replaceable=S(None, lambda p: None), call_=_enter)

# --- bands -----------------------------------------------------------------------

CENTRES = st.lists(st.sampled_from([63.0, 125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0]), min_size=1,
                   max_size=7, unique=True).map(lambda v: tuple(sorted(v)))
case("bands.min_rate_for_octaves", centres=CENTRES,
     bad_={"centres": S((), (NAN,), (-1.0,), (0.0,), "abc", None, (1e300,))})
case("bands.check_rate_for_octaves", fs=S(22050, 24000, 44100, 48000, 96000), name=S("input", "ir"))


def _filterbank(fn, kw):
    from envpredict.bands import octave_filterbank

    return fn(octave_filterbank(kw["fs"]))


case("bands.check_filterbank", fs=S(24000, 44100, 48000, 96000), call_=_filterbank, examples_=4)
case("bands.octave_filterbank", fs=S(16000, 24000, 48000, 96000), order=S(2, 3), passes=S(1, 2),
     beyond_nyquist=S("highpass", "omit", "refuse"), share_=0.4)
case("bands.octave_sos", fs=S(24000, 44100, 48000, 96000), order=S(2, 3, 4))
case("bands.octave_bands", x=scaled(IR), fs=J(48000), zero_phase=st.booleans())


def _butterworth(fn, kw):
    from scipy.signal import butter

    fs, lo, hi = kw["fs"], kw["lo"], kw["hi"]
    sos = butter(3, [lo, hi], "bandpass", fs=fs, output="sos")
    return fn(sos, fs, (lo, hi), "band")


case("bands.check_butterworth", fs=S(16000, 48000), lo=S(100.0, 500.0), hi=S(1000.0, 4000.0), call_=_butterworth,
     bad_={"fs": None, "lo": None, "hi": None})
case("bands.lowpass_sos", fs=S(16000, 48000), cutoff_hz=S(50.0, 100.0), order=S(2, 4))
case("bands.bandpass_sos", fs=S(16000, 48000), low_hz=S(100.0, 500.0), high_hz=S(1000.0, 4000.0), order=S(2, 4),
     bad_={"low_hz": BAD_REAL, "high_hz": S(1e9, -1.0, NAN, None, 50.0)})
case("bands.envelope_delays", fs=S(24000, 48000), band_passes=S(1, 2), cutoff_hz=S(50.0, 100.0),
     target_hz=S(200.0, 400.0), bad_={"band_passes": BAD_INT})
case("bands.envelope_rate", fs=S(8000, 16000, 44100, 48000, 96000), target_hz=st.floats(100.0, 1000.0))
case("bands.intensity_envelopes", band_signals=st.builds(band_irs, S(24000, 48000), S(0.3, 1.0)).map(lambda a: a),
     fs=J(48000), cutoff_hz=st.floats(20.0, 100.0), target_hz=st.floats(150.0, 400.0),
     bad_={"fs": S(0, -1, NAN, 1e12, "x")})

# --- audio -------------------------------------------------------------------------

case("audio.audio_files_in", folder=S(P("recordings"), P(".")))
case("audio.check_wav_path", path=S(Out("a.wav"), Out("b.WAV")), bad_={"path": S(Out("a.mp3"), P("folder"), 3, None,
                                                                               "a\x00b.wav", P("text.txt"))})
case("audio.write_wav", path=S(Out("w.wav")), x=scaled(IR), fs=S(16000, 48000), subtype=S("PCM_16", "PCM_24", "FLOAT"),
     bad_={"subtype": S("MP3", "", None, 3)})
WAV_IN = S(P("ir.wav"), P("clean.wav"), P("speech.wav"), P("ir_stereo.wav"))
case("audio.audio_info", path=WAV_IN, name=S("input", "ir"))
case("audio.pick_channel", data=st.builds(lambda n, c: np.ones((100, c)) if c else np.ones(100), S(1, 2), S(0, 1, 2)),
     channel=S(None, 0), name=S("x"), source=S("file.wav"))
case("audio.load_audio", path=S(P("ir.wav"), P("clean.wav"), P("speech.wav")), channel=S(None, 0),
     check=st.booleans(), bad_={"channel": S(-1, 5, 1.5, "0", 2**40)})
case("audio.check_rate", fs=S(8000, 16000, 44100, 48000, 48000.0, np.int64(16000)), name=S("input"))
case("audio.as_mono_array", x=scaled(IR), fs=S(24000, 48000))
case("audio.validate_signal", x=scaled(IR), fs=S(24000, 48000), allow_clipping=st.booleans(),
     min_seconds=S(0.0, 0.5))
case("audio.is_clipped", x=scaled(IR))
RES_FS = S(8000, 16000, 22050, 44100, 48000)
case("audio.resample", x=st.builds(speech, S(16000), S(1.0), S(1)), fs_in=J(16000), fs_out=RES_FS)
case("audio.usable_cores")
case("audio.resample_ratio", fs_in=RES_FS, fs_out=RES_FS)
_DELAYED = st.builds(lambda d: np.concatenate([np.zeros(d), speech(16000, 1.0, 1)])[:16000], st.integers(0, 800))
case("audio.estimate_delay", reference=st.builds(speech, J(16000), J(1.0), J(1)), x=_DELAYED, fs=J(16000),
     max_delay_s=st.floats(0.05, 1.0), near=S(0, 100), excerpt_s=S(None, 0.5, 2.0))
case("audio.zero_lag_correlation", reference=st.builds(speech, J(16000), J(1.0), J(1)), x=_DELAYED, fs=J(16000),
     excerpt_s=S(None, 0.5))
case("audio.rms_dbfs", x=scaled(IR))
case("audio.true_peak", x=scaled(IR), bad_={"x": BAD_ARRAY})
case("audio.as_source", x=scaled(IR), fs=S(24000, 48000))
case("audio.calibration_from_tone",
     x=st.builds(lambda a, f: a * np.sin(2 * np.pi * f * np.arange(48000) / 48000), st.floats(0.01, 0.9),
                 S(1000.0, 1003.0, 997.0)),
     fs=J(48000), level_db=st.floats(80.0, 124.0), bad_={"level_db": BAD_REAL})
case("audio.check_calibration_db", value=st.one_of(st.none(), st.floats(60.0, 140.0)))


def _calibration(fn, kw):
    how = kw.pop("how")
    if how == "offset":
        return fn(calibration_db=kw["calibration_db"])
    if how == "calibrator":
        return fn(calibrator=kw["calibrator"], calibrator_level=kw["calibrator_level"], channel=kw["channel"])
    return fn()


case("audio.resolve_calibration", how=S("offset", "calibrator", "none"), calibration_db=st.floats(60.0, 140.0),
     calibrator=S(P("calibrator.wav")), calibrator_level=st.floats(90.0, 124.0), channel=S(None, 0),
     call_=_calibration, bad_={"how": None, "channel": S(-1, 3, 1.5, "0")})

# --- modulation ----------------------------------------------------------------------

MOD_F = np.array([0.63, 1.0, 1.6, 2.5, 4.0, 6.3, 10.0, 12.5])
case("modulation.project", x=st.builds(lambda n, b: np.abs(np.random.default_rng(n).standard_normal((b, n))),
                                       S(200, 2000), S(1, 7)),
     freqs=J(MOD_F), fs=S(100.0, 200.0), stride=S(1, 2), offset=S(0.0, 0.5), chunk=S(64, 65536))
case("modulation.mtf_from_ir", band_irs=st.builds(band_irs, J(48000), S(0.3, 0.6, 1.5)), fs=J(48000),
     modulation_hz=S((0.63, 1.0, 2.0, 4.0, 8.0, 12.5), (1.0,)), lengths=J(None), examples_=8)
case("modulation.whole_periods", n=st.integers(100, 10**6), fs_env=S(100.0, 200.0, 250.0), f=S(0.63, 1.0, 12.5))
_ENV = st.builds(lambda s: 1 + 0.5 * np.cos(2 * np.pi * 1.6 * np.arange(int(40 * 200)) / 200)
                 + 0.05 * np.abs(np.random.default_rng(s).standard_normal(8000)), st.integers(0, 5))
case("modulation.envelope_noise_floor", e=_ENV, fs_env=J(200.0), freqs=J((1.6,)), exclude_hz=J((1.6, 3.2)))
case("modulation.noise_corrected_depth", raw=st.lists(st.floats(0, 1), min_size=2, max_size=28)
     .map(lambda v: np.array(v[: len(v) // 2 * 2]).reshape(2, -1)),
     floor=st.lists(st.floats(0, 0.2), min_size=2, max_size=2).map(np.array))
_ENVS = st.builds(lambda s: np.stack([1 + 0.5 * np.cos(2 * np.pi * 1.6 * np.arange(8000) / 200)] * 2)
                  + 0.05 * np.abs(np.random.default_rng(s).standard_normal((2, 8000))), st.integers(0, 5))
case("modulation.modulation_depths", env=_ENVS, fs_env=J(200.0), freqs=J(np.array([[1.6, 3.2], [1.6, 3.2]])),
     exclude_hz=J((1.6, 3.2)))
case("modulation.mtf_from_test_signal", env=_ENVS, fs_env=J(200.0), freqs=J(np.array([[1.6, 3.2], [1.6, 3.2]])),
     nominal_depth=S(0.55, 1.0), exclude_hz=S(None, (1.6, 3.2)))
case("modulation.mtf_from_pair_ncm", clean_envelopes=st.builds(lambda: env_pair()[0]),
     degraded_envelopes=st.builds(lambda: env_pair()[1]), return_correlation=st.booleans())
case("modulation.mtf_from_pair_regression", clean_envelopes=st.builds(lambda: env_pair()[0]),
     degraded_envelopes=st.builds(lambda: env_pair()[1]))

# --- sti, cautions -------------------------------------------------------------------

STI_VALUE = st.floats(0.0, 1.0)
# --- hearing (issue 17) --------------------------------------------------------------

AUDIOGRAM_TEXT = S("250:20,500:25,1000:30,2000:45,4000:60,8000:70", "125:0;250:0;500:0;1000:0;2000:0;4000:0;8000:0",
                   "250:10, 500:15, 1000:20, 2000:40, 4000:50, 6000:55", "125:-10,500:0,2000:30,8000:120")
BAD_AUDIOGRAM = S("", "250", "250:x", "255:20,500:20", "250:121,4000:20", "1000:30", "250:20,250:30", 3, None,
                  "250:nan,500:1,1000:1,2000:1,4000:1,8000:1", "a:b:c")
AUDIOGRAM = st.builds(lambda t: __import__("envpredict.hearing", fromlist=["x"]).parse_audiogram(t), AUDIOGRAM_TEXT)
HL = st.floats(-10.0, 120.0)
case("hearing.parse_audiogram", text=AUDIOGRAM_TEXT, source=S("audiogram", "a.csv"), bad_={"text": BAD_AUDIOGRAM})
case("hearing.audiogram_from_points", frequencies_hz=J([125, 250, 500, 1000, 2000, 4000, 8000]),
     hearing_level_db=st.lists(HL, min_size=7, max_size=7),
     bad_={"frequencies_hz": S([], [130.0] * 7, [NAN] * 7, "abc", None, [125.0] * 7, [250, 4000]),
           "hearing_level_db": S([], [NAN] * 7, [200.0] * 7, "abc", None, [1e400] * 7)})
case("hearing.audiogram_from_rows", rows=st.lists(st.tuples(S("250", "500", "1000", "2000", "4000", "8000"),
                                                         st.floats(-10, 120).map(str)), min_size=6, max_size=6,
                                                unique_by=lambda r: r[0]), source=S("a.csv"), share_=0.3,
     bad_={"rows": S([], [("x", "1")], [("250",)], None, 3, [["250", "1", "2"]])})
case("hearing.check_sex", sex=S("f", "m", "F", "male", "female"))
case("hearing.iso7029_median_db", age=st.floats(18.0, 80.0), sex=S("f", "m"),
     frequencies_hz=S((125.0, 4000.0), (1000.0,), (125.0, 250.0, 500.0, 750.0, 1000.0, 1500.0, 2000.0)),
     bad_={"frequencies_hz": S((130.0,), (NAN,), "abc", None, (1e400,))})
case("hearing.age_audiogram", age=st.floats(18.0, 80.0), sex=S("f", "m"))
case("hearing.listener_audiogram", audiogram=st.one_of(S(None), AUDIOGRAM_TEXT, AUDIOGRAM), age=J(None), sex=J(None),
     bad_={"audiogram": BAD_AUDIOGRAM, "age": S(17.0, 90.0, NAN, "x", 60.0), "sex": S("x", "f", 3)})
case("hearing.reception_threshold_db", audiogram=st.one_of(S(None), AUDIOGRAM), bad_={"audiogram": S("x", 3, [1.0])})
case("hearing.band_threshold_spl_db", audiogram=AUDIOGRAM, bad_={"audiogram": S("x", 3, None)})
case("hearing.threshold_noise_band_db", audiogram=AUDIOGRAM, bad_={"audiogram": S("x", 3, None)})
case("hearing.threshold_noise", audiogram=AUDIOGRAM, n=S(1, 100, 16000), fs=S(8000, 16000, 48000),
     calibration_db=st.floats(60.0, 130.0), seed=st.integers(0, 100),
     bad_={"n": S(0, -1, 10**15, NAN, "x", None), "fs": S(0, -1, 1e12, NAN), "seed": S(-1, 1.5, "x", None)})
case("hearing.inaudible_bands_hz", speech_db=st.lists(st.floats(-20.0, 120.0), min_size=7, max_size=7),
     audiogram=st.one_of(S(None), AUDIOGRAM),
     bad_={"speech_db": S([], [1.0] * 6, "abc", None), "audiogram": S("x", 3)})
case("hearing.audiogram_summary", audiogram=st.one_of(S(None), AUDIOGRAM),
     speech_db=S(None, [60.0, 63.0, 61.0, 55.0, 49.0, 43.0, 37.0]),
     bad_={"speech_db": S([], [1.0] * 6, "abc"), "audiogram": S("x", 3)})
case("tables.read_audiogram", path=S(P("audiogram.csv")),
     bad_={"path": S(P("audiogram_bad.csv"), P("results.csv"), P("missing.csv"), P("folder"), 3, None, "")})
case("tables.load_audiogram", value=st.one_of(S(None, "", P("audiogram.csv")), AUDIOGRAM_TEXT, AUDIOGRAM),
     base=S(None), bad_={"value": st.one_of(BAD_AUDIOGRAM, S(P("audiogram_bad.csv"), P("text.txt"))), "base": None})
case("sti.table_array", values=S((1.0, 2.0), ((1.0, 2.0), (3.0, 4.0)), (0.5,)))
case("sti.check_talker", talker=S("male", "female"))
case("sti.check_speech_level", level_dba=st.floats(30.0, 110.0))
case("sti.parse_noise_levels", text=S(None, "40;40;40;40;40;40;40", "30,35,40,45,40,35,30", [40.0] * 7,
                                       (20.0, 25, 30, 35, 30, 25, 20)))
case("sti.speech_band_levels", level_dba=st.floats(30.0, 110.0), talker=S("male", "female"))
case("sti.masking_factor", level_db=st.lists(st.floats(-20, 140), min_size=7, max_size=7).map(np.array))
case("sti.transmission_index", m=st.lists(st.floats(0, 1), min_size=1, max_size=14).map(np.array))
case("sti.combine_bands", mti=st.lists(st.floats(0, 1), min_size=7, max_size=7).map(np.array),
     talker=S("male", "female"))
case("sti.verdict_decimals", value=STI_VALUE, requirement=S(0.5, 0.45, 0.62), minimum=S(2, 3))
case("sti.format_index", value=STI_VALUE, requirement=S(0.5, 0.45), minimum=S(2, 3))
case("sti.qualification_band", sti=STI_VALUE, check_=lambda r: isinstance(r, str))
case("sti.subjective_rating", sti=STI_VALUE)
case("sti.sti_from_mtf", mtf=st.builds(lambda s: np.random.default_rng(s).uniform(0.05, 1.0, (7, 14)),
                                       st.integers(0, 20)),
     noise_db=S(None, [40.0] * 7, np.linspace(50, 20, 7)), speech_level_dba=st.floats(40, 90),
     talker=S("male", "female"), auditory=st.booleans(), bad_={"auditory": None})
case("cautions.below_target", sti=STI_VALUE)


def _sti_for_listener(text):
    from envpredict.hearing import parse_audiogram
    from envpredict.sti import sti_from_mtf

    return sti_from_mtf(np.full((7, 14), 0.7), audiogram=None if text is None else parse_audiogram(text))


case("cautions.listener_cautions", result=st.one_of(S(None), AUDIOGRAM_TEXT).map(_sti_for_listener),
     bad_={"result": S(None, "x", 3, {})})
case("hearing.check_auditory", audiogram=st.one_of(S(None), AUDIOGRAM), auditory=J(True),
     bad_={"audiogram": S("x", 3), "auditory": S(False, None, "yes", 1)})

# --- decay -----------------------------------------------------------------------------

_E = st.builds(lambda fs, T: (band_irs(fs, T)[3] ** 2), J(48000), S(0.3, 0.6, 1.5))


def _floor(fn, kw):
    """``fn(e, fs, floor, ...)`` with the floor of a valid ``e`` (None for a spoiled one)."""
    from envpredict.decay import find_noise_floor

    e = kw.pop("e")
    fl = find_noise_floor(e, 48000) if isinstance(e, np.ndarray) and e.ndim == 1 and e.size > 100 else None
    return fn(e, floor=fl, **kw)


case("decay.onset_index", x=scaled(IR))
case("decay.impulse_shape", x=scaled(IR), fs=J(48000))
case("decay.check_impulse_response", x=scaled(IR), fs=J(48000), label=S("the input"))
case("decay.find_noise_floor", e=_E, fs=J(48000), fc=S(None, 1000.0))
case("decay.schroeder_curve", e=_E, fs=J(48000), fc=S(None, 1000.0), step=S(1, 4), call_=_floor)
case("decay.noise_energy", e=_E, fs=J(48000), fc=S(None, 1000.0), call_=_floor)
case("decay.tail_energy", e=_E, fs=J(48000), fc=S(None, 1000.0), call_=_floor)
_CURVE = st.builds(lambda T, n: -60 / T * np.arange(n) / 1000.0, S(0.3, 1.0, 2.0), S(1000, 3000))
case("decay.fit_decay_range", curve_db=_CURVE, fs=J(1000.0), hi_db=S(-5.0, 0.0), lo_db=S(-25.0, -35.0))
case("decay.fit_decay_time", curve_db=_CURVE, fs=J(1000.0), hi_db=S(-5.0, 0.0), lo_db=S(-25.0, -35.0))
case("decay.band_decay", band=st.builds(lambda T: band_irs(48000, T)[3], S(0.3, 0.6, 1.5)), fs=J(48000), t0=S(0, 10),
     fc=S(None, 1000.0))
case("decay.decay_figures", band_irs=st.builds(band_irs, J(48000), S(0.3, 0.6, 1.5)), fs=J(48000), t0=S(0, 10),
     keep_curves=st.booleans(), examples_=8)
case("decay.reverberation_time", x=scaled(IR), fs=J(48000), kind=S("t30", "t20", "edt"), examples_=10)
case("decay.mid_frequency", values=st.lists(st.one_of(st.none(), st.floats(0.1, 3.0)), min_size=7, max_size=7),
     share_=0.3)


def _notes(fn, kw):
    return fn(ir_result().decay, kw["name"])


case("decay.mid_frequency_notes", name=S("t30", "t20", "edt", "c50"), call_=_notes)

# --- correlation ------------------------------------------------------------------------


def _reader(arr):
    return lambda a, b: arr[a:b]


_SPEECH10K = st.builds(speech, J(10000), S(1.0, 2.0), st.integers(0, 3))
case("correlation.analysis_window")
case("correlation.third_octave_matrix")
case("correlation.band_envelopes", dft_frames=st.builds(lambda k, n: np.abs(np.random.default_rng(k).standard_normal(
    (k, n))), st.integers(1, 50), S(256, 512)))
case("correlation.frame_count", n_samples=st.integers(0, 10**7))
case("correlation.frame_energies_db", x_read=_SPEECH10K.map(_reader), n_samples=S(10000, 5000),
     chunk_frames=S(16, 4096), bad_={"x_read": S(None, 3), "n_samples": BAD_INT})
case("correlation.tf_envelopes", clean_read=_SPEECH10K.map(_reader), degraded_read=_SPEECH10K.map(_reader),
     n_samples=S(10000), chunk_frames=S(16, 4096), bad_={"clean_read": S(None, 3), "degraded_read": S(None, 3)})
case("correlation.segment_scores", x_env=st.builds(lambda: env_pair()[0]), y_env=st.builds(lambda: env_pair()[1]),
     which=S(("stoi_band_segment",), ("stoi_band_segment", "estoi_band_segment")),
     bad_={"which": S(("nope",), (), None)})
case("correlation.correlation_from_envelopes", x_env=st.builds(lambda: env_pair()[0]),
     y_env=st.builds(lambda: env_pair()[1]), kept_idx=st.builds(lambda: env_pair()[2]),
     frames_total=st.builds(lambda: env_pair()[3]))
case("correlation.stoi_estoi_stream", clean_read=_SPEECH10K.map(_reader), degraded_read=_SPEECH10K.map(_reader),
     n_samples=S(10000), bad_={"clean_read": S(None, 3), "degraded_read": S(None, 3)})
_PAIR = st.builds(lambda fs, s, seed, n: (speech(fs, s, seed), speech(fs, s, seed)
                                          + n * np.random.default_rng(seed).standard_normal(int(s * fs)), fs),
                  SPEECH_FS, S(1.0, 1.5), st.integers(0, 3), st.floats(0.0, 0.05))


def _pair_call(fn, kw):
    """``fn(clean, degraded, fs, ...)`` from a drawn pair; a spoiled ``pair`` is used as
    both signals, a spoiled ``fs`` replaces the pair's rate."""
    p, fs = kw.pop("pair"), kw.pop("fs")
    if isinstance(p, tuple):
        return fn(p[0], p[1], p[2] if fs == "ok" else fs, **kw)
    return fn(p, p, 16000 if fs == "ok" else fs, **kw)


for _n in ("correlation.correlation_indices", "correlation.stoi", "correlation.estoi"):
    case(_n, pair=_PAIR, fs=J("ok"), call_=_pair_call, bad_={"pair": BAD_ARRAY, "fs": BAD_RATE})
# the speech-based STI needs a common part of at least 3 s
case("pair.speech_sti", pair=st.builds(lambda fs, seed, n: (speech(fs, 3.2, seed), speech(fs, 3.2, seed)
                                                            + n * np.random.default_rng(seed).standard_normal(
                                                                int(3.2 * fs)), fs),
                                       SPEECH_FS, st.integers(0, 2), st.floats(0.0, 0.05)),
     fs=J("ok"), call_=_pair_call, bad_={"pair": BAD_ARRAY, "fs": BAD_RATE}, examples_=8)

# --- pitch --------------------------------------------------------------------------------

case("pitch.check_f0_range", f0_min_hz=st.floats(40, 100), f0_max_hz=st.floats(200, 600))
case("pitch.yin_f0", x=st.builds(speech, J(16000), S(0.5, 1.0), st.integers(0, 3)), fs=J(16000),
     f0_min_hz=st.floats(50, 90), f0_max_hz=st.floats(250, 500), threshold=st.floats(0.05, 0.3),
     window_s=S(0.03, 0.04), hop_s=S(0.01, 0.005))

# --- signals --------------------------------------------------------------------------------

case("signals.check_seed", seed=st.integers(0, 2**31))
case("signals.check_generation", fs=S(24000, 44100, 48000), seconds=S(None, 1.0, 30.0, 3600.0))
case("signals.octave_band_noise", n=S(1000, 24000), fs=S(24000, 48000),
     rng=st.integers(0, 5).map(np.random.default_rng), width_octaves=st.floats(0.1, 1.0), bad_={"rng": S(None, 3)})
_T = st.builds(lambda n: np.arange(n) / 1000.0, S(10, 1000))
case("signals.stipa_envelope", t=_T, f1=S(1.6, 1.0), f2=S(8.0, 5.0), depth=st.floats(0.0, 1.0))
case("signals.full_sti_envelope", t=_T, f=S(0.63, 12.5), depth=st.floats(0.0, 1.0))
case("signals.is_loopable", n=st.integers(1, 10**6), fs=S(24000, 48000), freqs=S((1.6, 8.0), (0.63,), ()),
     bad_={"freqs": S(None, (0.0,), (NAN,), "x")})
case("signals.stipa_signal", seconds=st.floats(15.0, 16.0), fs=S(24000, 32000), seed=st.integers(0, 100),
     bad_={"seconds": S(1e9, 1e6, 0.0, -1.0, NAN, INF, "1", None, 1e-6)}, examples_=4)
case("signals.full_sti_plan")
case("signals.full_sti_signal", modulation_hz=S(0.63, 4.0, 12.5), seconds=st.floats(0.5, 2.0), fs=S(24000, 48000),
     seed=st.integers(0, 10), bad_={"modulation_hz": BAD_REAL, "seconds": S(1e9, 0.0, -1.0, NAN, INF, None)})


def _first_signal(fn, kw):
    return next(iter(fn(**kw)))


case("signals.full_sti_signals", fs=S(24000), seed=st.integers(0, 10), call_=_first_signal, examples_=2)
case("signals.write_stipa_signal", path=S(Out("s.wav")), seconds=st.floats(15.0, 16.0), fs=S(24000),
     seed=st.integers(0, 5), bad_={"seconds": S(1e9, 1e6, 0.0, -1.0, NAN, INF, None), "path": BAD_PATH}, examples_=4)
# Writing the 14 signals takes about 20 s: only refusals here (test_signals writes the set).
case("signals.write_full_sti_signals", folder=BAD_PATH, fs=S(1e12, 0, NAN, "x", 8000), seed=S(0, -1), share_=0.0,
     bad_={"folder": None, "fs": None, "seed": None}, examples_=8)

# --- tables ---------------------------------------------------------------------------------

CSVS = S(P("scores.csv"), P("results.csv"), P("manifest.csv"))
case("tables.read_text", path=CSVS, what=S("scores", "results"))
CSV_TEXT = st.one_of(S("a,b\n1,2\n", "a,b\n1,2", "x\n\"q\n", ""), st.text(max_size=40))


def _on_error(line, e):
    from envpredict.exceptions import InputError

    return InputError(f"line {line}: {e}", "fix it")


case("tables.iter_records", text=CSV_TEXT, on_error=J(_on_error), strict=st.booleans(), bad_={"on_error": None},
     call_=lambda fn, kw: list(fn(**kw)))
case("tables.parse_lines", text=CSV_TEXT, path=S(P("results.csv")))
case("tables.read_results", path=CSVS)
case("tables.read_table", path=CSVS, what=S("scores"))
case("tables.cell_number", v=st.one_of(st.text(max_size=10), st.floats(), st.none(), S("1e309", "nan", "-0")),
     bad_={"v": None})
case("tables.cell_float", row=st.fixed_dictionaries({"a": st.one_of(S("1.5", "0", ""), st.text(max_size=5))}),
     column=S("a"), line=S(2), source=S("f.csv"), blank_ok=st.booleans(), share_=0.3)
case("tables.resolve_column", header=S(["a", "B", "c"]), name=S("a", "b", "C"), source=S("f.csv"), share_=0.3)
case("tables.format_cell", v=st.one_of(st.floats(), st.text(max_size=5), st.none(), st.integers()),
     column=S(None, "sti", "delay_ms", "t30_mid", "rating", "nope"), bad_={"v": None, "column": S(3, ["sti"])})
case("tables.csv_line", cells=st.lists(st.text(max_size=5), max_size=4))
case("tables.table_text", header=S(["a", "b"]), rows=st.lists(st.fixed_dictionaries({"a": st.text(max_size=4),
                                                                                        "b": S("1", "")}),
                                                                  max_size=3))
case("tables.write_table", path=S(Out("t.csv")), header=S(["a", "b"]),
     rows=st.lists(st.fixed_dictionaries({"a": S("x", "y"), "b": S("1", "")}), max_size=3))

# --- mapping --------------------------------------------------------------------------------

_X9 = np.linspace(0.2, 0.8, 9)
_C9 = np.array([1, 2, 4, 7, 10, 13, 16, 18, 19])


@lru_cache(maxsize=2)
def score_mapping():
    from envpredict.mapping import fit_mapping

    return fit_mapping(_X9, _C9, [20] * 9, index="sti")


case("mapping.check_shape", shape=S("logistic", "normal"))
case("mapping.check_guess_lapse", guess=st.floats(0, 0.4), lapse=st.floats(0, 0.1))
case("mapping.mapping_from_dict", d=st.builds(lambda: score_mapping().to_dict()), source=S("(dict)"),
     bad_={"d": st.one_of(BAD_ANY, S({"index": "sti"}, {"shape": "x", "params": {"a": 1e308, "b": NAN}}))})
case("mapping.fit_mapping", index_values=st.builds(lambda s: _X9 + 0.01 * s, st.integers(0, 3)), correct=J(_C9),
     trials=J(np.full(9, 20)), shape=S("logistic", "normal"), guess=S(0.0, 0.1), lapse=S(0.0, 0.02))
_ROWS = st.builds(lambda: [(i + 2, {"index": f"{v:.3f}", "correct": str(c), "trials": "20"})
                           for i, (v, c) in enumerate(zip(_X9, _C9))])
case("mapping.scores_from_rows", rows=_ROWS, header=J(["index", "correct", "trials"]), index=S("index"))
case("mapping.predict_scores", values=st.lists(st.floats(0, 1), max_size=5), mapping=st.builds(score_mapping),
     bad_={"mapping": S(None, 3)})
case("mapping.add_predictions", rows=_ROWS, header=J(["index", "correct", "trials"]), mapping=st.builds(score_mapping),
     index_column=S("index", "INDEX"), bad_={"mapping": S(None, 3)})
case("mapping.read_mapping", path=S(P("mapping.json")), listener=S(None), bad_={"listener": S("x", 3, "")})
case("mapping.fit_mapping_file", path=S(P("scores.csv")), index=S("index"), shape=S("logistic", "normal"))
case("mapping.predict_file", path=S(P("scores.csv")), mapping=S(P("mapping.json")), index_column=S("index", "Index"),
     out=S(None, Out("pred.csv")))
_LABELS9 = ["L1", "L2", "L3"] * 3


def _listener_fits():
    from envpredict.mapping import fit_listeners

    return fit_listeners(np.concatenate([_X9] * 2), np.concatenate([_C9] * 2), np.full(18, 20), _LABELS9 * 2)


case("mapping.fit_listeners", x=st.builds(lambda s: np.concatenate([_X9] * 2) + 0.01 * s, st.integers(0, 3)),
     k=J(np.concatenate([_C9] * 2)), n=J(np.full(18, 20)), labels=S(_LABELS9 * 2, ["a"] * 9 + ["b"] * 9),
     bad_={"labels": S(None, "abc", ["a"] * 3, 3)}, examples_=6)
case("mapping.listener_spread", fits=st.builds(_listener_fits), bad_={"fits": S(None, "x", [1, 2], [None])},
     examples_=4)


def _with_listeners():
    from dataclasses import replace

    return replace(score_mapping(), listeners=_listener_fits())


case("mapping.listener_mapping", mapping=st.builds(_with_listeners), listener=S("L1", "L2", "L3"),
     bad_={"mapping": S(None, 3, "x"), "listener": S("L9", "", None, 3)}, examples_=6)
case("mapping.listener_labels",
     rows=st.builds(lambda: [(i + 2, {"index": "0.5", "who": f"L{i % 3}"}) for i in range(6)]),
     header=J(["index", "who"]), column=S("who", "WHO"),
     bad_={"rows": S(None, "x", [1, 2], [(2, {"who": ""})])})


def _report_data(fn, kw):
    from envpredict.mapping import ScoreData

    return fn(kw["mapping"], ScoreData(index_values=_X9, correct=_C9, trials=np.full(9, 20)) if kw["data"] else None)


case("mapping.fit_report_data", mapping=st.builds(score_mapping), data=S(True), call_=_report_data,
     bad_={"mapping": S(None, 3, "m"), "data": S(False)}, examples_=4)

# --- indirect, direct, pair, timescales -----------------------------------------------------

case("indirect.sti_from_ir", ir=scaled(IR), fs=J(48000), noise_db=S(None, [40.0] * 7, "30;30;30;30;30;30;30"),
     speech_level_dba=st.floats(50, 80), talker=S("male", "female"), examples_=10,
     bad_={"fs": S(0, -1, NAN, 1e12, "x", None, 16000)})
case("indirect.sti_from_ir_file", path=S(P("ir.wav"), P("ir_stereo.wav")), channel=S(None, 0),
     speech_level_dba=st.floats(50, 80), examples_=8)
case("direct.find_usable_part", x=scaled(st.builds(stipa_recording, J(24000), J(16.0))), fs=J(24000),
     min_seconds=S(1.0, 8.0))
case("direct.check_block_seconds", value=st.floats(5.0, 60.0))
case("direct.stipa_from_recording", x=scaled(st.builds(stipa_recording, J(24000), J(16.0)), dc=(-0.01, 0.01)),
     fs=J(24000), calibration_db=S(None, 120.0), noise_db=J(None), talker=S("male", "female"),
     examples_=6, bad_={"fs": S(0, NAN, 1e12, "x", None)})
case("direct.stipa_from_file", path=S(P("stipa.wav")), calibration_db=S(None, 100.0), examples_=5)


def _full(fn, kw):
    rec = kw.pop("recordings")
    return fn(rec, **kw)


case("direct.full_sti_from_recordings",
     recordings=S([(stipa_recording(24000, 16.0), 24000, "r.wav")], [], [(np.zeros(10), 24000, "z")]),
     talker=S("male"), share_=0.0, examples_=3, bad_={"recordings": S(None, 3, [(None, None, None)])})
case("direct.recording_paths", paths=S(P("recordings"), [P("stipa.wav")], P("stipa.wav")))
case("direct.full_sti_from_files", paths=S(P("recordings"), [P("stipa.wav")]), share_=0.0, examples_=3)
case("pair.pair_indices", pair=_PAIR, fs=J("ok"), align=st.booleans(), max_delay_s=S(0.2, 1.0), call_=_pair_call,
     bad_={"pair": BAD_ARRAY, "fs": BAD_RATE}, examples_=8)
case("pair.pair_from_files", clean_path=S(P("clean.wav")), degraded_path=S(P("degraded.wav"), P("clean.wav")),
     align=st.booleans(), examples_=6)
# --- binaural (two ears) -------------------------------------------------------------


def _ears_call(fn, kw):
    """``fn(left, right, fs, ...)`` from one drawn signal (the right ear a scaled copy); a
    spoiled ``x`` is used as both ears, or the right ear cut short (different lengths)."""
    x, fs = kw.pop("x"), kw.pop("fs")
    if isinstance(x, np.ndarray) and x.ndim == 1 and x.size > 10 and kw.pop("cut", False):
        return fn(x, 0.5 * x[:-7], fs, **kw)
    kw.pop("cut", None)
    return fn(x, 0.5 * x if isinstance(x, np.ndarray) else x, fs, **kw)


def _pair_ears_call(fn, kw):
    p, fs = kw.pop("pair"), kw.pop("fs")
    if isinstance(p, tuple):
        return fn(p[0], p[1], 0.7 * p[1], p[2] if fs == "ok" else fs, **kw)
    return fn(p, p, p, 16000 if fs == "ok" else fs, **kw)


_STI_RESULT = st.builds(lambda m: __import__("envpredict").sti_from_mtf(np.full((7, 14), m)), st.floats(0.0, 1.0))
case("binaural.better_ear_bands", left=st.lists(st.floats(0, 1), min_size=7, max_size=7),
     right=st.lists(st.floats(0, 1), min_size=7, max_size=7))
case("binaural.better_ear_sti", left=_STI_RESULT, right=_STI_RESULT,
     bad_={"left": S(None, 3, "x", np.zeros(7)), "right": S(None, 3, "x", np.zeros(7))})
case("binaural.check_ears", left=st.builds(lambda n: np.ones(n), st.integers(1, 50)),
     right=st.builds(lambda n: np.ones(n), st.integers(1, 50)), share_=0.0)
case("binaural.two_channels", path=S(P("ir_stereo.wav"), P("ir.wav")), name=S("recording"), share_=0.3)
case("binaural.ir_ears", x=scaled(IR), fs=J(48000), cut=st.booleans(), call_=_ears_call, share_=0.3, examples_=6,
     bad_={"fs": S(0, -1, NAN, 1e12, "x", None, 16000), "cut": None})
case("binaural.ir_ears_file", path=S(P("ir_stereo.wav"), P("ir.wav")), speech_level_dba=st.floats(50, 80),
     share_=0.3, examples_=5)
case("binaural.stipa_ears", x=st.builds(stipa_recording, J(24000), J(16.0)), fs=J(24000), cut=st.booleans(),
     call_=_ears_call, share_=0.3, examples_=4, bad_={"fs": S(0, NAN, 1e12, "x", None), "cut": None})
case("binaural.stipa_ears_file", path=S(P("stipa_stereo.wav"), P("stipa.wav")), share_=0.3, examples_=3)
case("binaural.pair_ears", pair=_PAIR, fs=J("ok"), align=st.booleans(), call_=_pair_ears_call,
     bad_={"pair": BAD_ARRAY, "fs": BAD_RATE}, share_=0.3, examples_=5)
case("binaural.pair_ears_file", clean_path=S(P("clean.wav")), degraded_path=S(P("degraded_stereo.wav"),
                                                                             P("degraded.wav")),
     align=st.booleans(), share_=0.3, examples_=4)
case("timescales.usable_bands", fs=S(8000, 16000, 44100, 48000))
case("timescales.modulation_band_edges")
_ENV1 = st.builds(lambda s, n: 1 + 0.5 * np.cos(2 * np.pi * 4 * np.arange(n) / 100.0)
                  + 0.1 * np.random.default_rng(s).random(n), st.integers(0, 3), S(1000, 3000))
case("timescales.envelope_spectrum", env=_ENV1, fs_env=J(100.0), segment_s=S(8.0, 4.0))


def _mod_idx(fn, kw):
    from envpredict.timescales import envelope_spectrum

    f, p = envelope_spectrum(kw["env"], 100.0)
    return fn(f if kw["ok"] else kw["env"], p)


case("timescales.modulation_indices", env=_ENV1, ok=S(True, True, True, False), call_=_mod_idx, bad_={"ok": None})
case("timescales.spectral_peak", freqs=J(np.linspace(0, 50, 101)),
     psd=st.builds(lambda s: np.random.default_rng(s).random(101), st.integers(0, 5)), lo=S(1.0, 2.0), hi=S(8.0, 20.0))
case("timescales.inspect_signal", x=scaled(st.builds(speech, J(16000), S(2.0, 3.0), st.integers(0, 2))), fs=J(16000),
     f0_min_hz=S(50.0, 70.0), f0_max_hz=S(300.0, 500.0), examples_=8)
case("timescales.inspect_file", path=S(P("speech.wav")), start_s=S(0.0, 0.5), duration_s=S(None, 2.0), examples_=6)

# --- sweep, stats, batch --------------------------------------------------------------------

case("sweep.parse_snr_range", text=S("-15:15:3", "0:10:5", "-5,0,5", "3"), share_=0.3)
case("sweep.default_index_functions")
case("sweep.snr_sweep", clean=st.builds(speech, J(10000), J(1.5), st.integers(0, 2)),
     noise=st.builds(lambda s: 0.05 * np.random.default_rng(s).standard_normal(10000 * 10), st.integers(0, 2)),
     fs=J(10000), snr_db=S((-5.0, 0.0, 5.0), (0.0, 10.0)), index=S("stoi", "estoi", "sepsm"), n_segments=S(1, 2),
     examples_=6)
case("sweep.snr_sweep_files", clean=S(P("clean.wav")), noise=S(P("noise.wav")), snr_db=S("-5:5:5", [0.0, 5.0]),
     n_segments=S(1, 2), examples_=5)
case("stats.bootstrap_mean_ci", d=st.lists(st.floats(-1, 1), min_size=3, max_size=12).map(np.array),
     confidence=S(0.9, 0.95), n_resamples=S(200, 500), method=S("BCa", "percentile"))
case("stats.holm", p_values=st.lists(st.one_of(st.none(), st.floats(0, 1)), max_size=6),
     bad_={"p_values": S(None, [NAN], [2.0], "x", [-1.0])})
case("stats.wilcoxon_p", d=st.lists(st.floats(-1, 1), min_size=0, max_size=12).map(np.array))
case("stats.default_pair_on", columns=S(("item", "condition", "sti"), ("clean", "condition", "stoi")),
     by=S("condition"), index=S("sti", "stoi"))
_CROWS = st.builds(lambda s: [{"item": f"u{i}", "condition": c,
                               "sti": 0.5 + 0.03 * i + (0.04 if c == "b" else 0) + 0.01 * ((i * 7 + s) % 5)}
                              for i in range(8) for c in ("a", "b")], st.integers(0, 5))
case("stats.compare_conditions", rows=_CROWS, by=S("condition"), baseline=S("a", "b"), index=S(None, "sti"),
     pair_on=S(None, "item"), n_resamples=S(200, 500))
case("stats.compare_conditions_file", path=S(P("results.csv")), by=S("condition"), baseline=S("a", "b"),
     n_resamples=S(200, 500))
case("batch.read_manifest", path=S(P("manifest.csv"), P("pairs.csv")), speech_level_dba=st.floats(50, 80))


def _job(fn, kw):
    from envpredict.batch import read_manifest

    m = read_manifest(_FOLDER[0] / kw["which"])
    job = dict(m.jobs[0])
    job.update(kw["extra"])
    out = fn(job) if fn.__name__ == "score_row" else fn([job])[0]
    assert "internal failure" not in out["error"], out["error"]
    return out


for _n in ("batch.score_row", "batch.score_rows"):
    case(_n, which=S("manifest.csv", "pairs.csv"), extra=S({}, {"channel": 0}, {"talker": "female"}), call_=_job,
         bad_={"which": None, "extra": S({"channel": 5}, {"noise_db": "x"}, {"speech_level_dba": NAN},
                                        {"ir": "garbage.wav"})}, examples_=6)
case("batch.start_workers_early", examples_=1)
case("batch.run_batch", manifest=S(P("manifest.csv"), P("pairs.csv")), out=S(Out("res.csv")), workers=J(1),
     examples_=4, bad_={"workers": S(0, -1, 1.5, "x", 10**9)})

# --- refcases, demo, report -------------------------------------------------------------------

case("refcases.case_files", folder=S(None))
case("refcases.load_cases", folder=S(None))


def _first_case(fn, kw):
    from envpredict.refcases import load_cases

    c = next(c for c in load_cases() if c["method"] == kw["method"])
    return fn(c["input"]) if fn.__name__ == "synthesize" else fn(c)


case("refcases.synthesize", method=S("ir"), call_=_first_case, bad_={"method": None}, examples_=2)
case("refcases.run_case", method=S("ir"), call_=_first_case, bad_={"method": None}, examples_=2)
case("refcases.select_cases", id_contains=S(None, "decay", "T0.5"), method=S(None, "ir"))
case("refcases.summary", outcomes=S([]), bad_={"outcomes": S(None, 3, [None])})
case("refcases.run_cases", id_contains=S("decay_T0.5"), method=S("ir"), examples_=2)


def _run_all(fn, kw):
    d = _FOLDER[0] / "cases"
    d.mkdir(exist_ok=True)
    from envpredict._data import reference_dir

    src = reference_dir() / "decay_T0.5s.json"  # installed or in a source checkout
    (d / "decay_T0.5s.json").write_text(src.read_text() if kw["ok"] else "{")
    return fn(d)


case("refcases.run_all", ok=st.booleans(), call_=_run_all, bad_={"ok": None}, examples_=2, share_=0.3)
case("demo.read_scenario", folder=S(None))
case("demo.rate_demo_site", examples_=1)
case("report.num", d=S({"a": {"b": 1.25}}, {"a": {"b": None}}, {"a": 1}), path=S("a.b"), spec=S(".2f", ".3f"),
     unit=S("", " s"), share_=0.3)
case("report.txt", v=st.one_of(st.text(max_size=8), st.none(), st.floats()), bad_={"v": None})


def _render(fn, kw):
    from envpredict.report import Page

    d = ir_result().to_dict()
    d.update(kw["extra"])
    return fn("ir", d, Page(()), settings={}, title=kw["title"], version="0", created="now")


case("report.render_html", extra=S({}, {"sti": {"sti": NAN}}), title=S("T", "<!--", "$\\frac$"), call_=_render,
     bad_={"extra": None}, examples_=3, share_=0.3)


def _report(fn, kw):
    d = ir_result().to_dict()
    d.update(kw["extra"])
    return fn(kw["kind"], d, kw["folder"], title=kw["title"])


case("report.write_report", kind=S("ir"), extra=S({}, {"inputs": {"a": "<!--"}}), folder=S(Out("rep")),
     title=S(None, "T", "$x$"), call_=_report, bad_={"extra": S({"sti": "x"}, {"decay": None}, {"bands_hz": [1]})},
     examples_=4)
case("report.check_report_folder", folder=S(Out("rep"), P("out")), inputs=S(None, [P("ir.wav")]),
     out=S(None, Out("x.json")))
case("report.figure_names", folder=S(P("out"), P(".")))


def _page(fn, kw):
    d = ir_result().to_dict()
    d.update(kw["extra"])
    return fn(kw["kind"], d)


case("report.build_page", kind=S("ir"), extra=S({}, {"requirement": 0.5}), call_=_page,
     bad_={"kind": S("nope", None), "extra": S({"sti": "x"}, {"bands_hz": [1]})}, examples_=3)


def _page_of(fn, kw):
    from envpredict.report import Cell, Figure, Page, Table

    page = kw["page"]
    if page == "built":
        page = Page([("STI", Cell("0.50"))], [Figure("f", "c", b"", ["T30, s"])], [Table("t", ["band", "MTI"], [])])
    return fn(page)


case("report.page_labels", page=S("built"), call_=_page_of, bad_={"page": S(None, "x", 3)})
case("report.page_glossary", page=S("built"), call_=_page_of, bad_={"page": S(None, "x", 3)})

# --- added with the design, corpus and listening-test work -------------------------------------

case("audio.find_delay", reference=st.builds(speech, J(16000), J(1.0), J(1)), x=_DELAYED, fs=J(16000),
     max_delay_s=st.floats(0.05, 1.0), near=S(0, 100), excerpt_s=S(None, 0.5), method=S("gcc-phat", "waveform"),
     curve=st.booleans(), bad_={"curve": None})


@lru_cache(maxsize=8)
def delay_curve(d: int, fs: int = 16000):
    from envpredict.audio import find_delay

    x = speech(16000, 1.0, 1)
    return find_delay(x, np.concatenate([np.zeros(d), x])[:16000], fs, 0.1, curve=True)[1]


case("audio.pooled_delay", curves=st.lists(st.builds(delay_curve, st.integers(0, 200)), min_size=1, max_size=3),
     bad_={"curves": S([], None, 3, [None], "x", [1.0, 2.0])})


def _plan(fn, kw):
    from envpredict.batch import Alignment, read_manifest

    m = read_manifest(_FOLDER[0] / kw["which"])
    al = kw["alignment"]
    return fn(m, m.jobs, Alignment(**al) if isinstance(al, dict) else al)


case("batch.plan_delays", which=S("pairs_cond.csv", "pairs.csv", "manifest.csv"),
     alignment=S(None, {}, {"per_row": True}, {"fixed_delay_ms": 5.0}, {"align": False}, {"max_delay_s": 0.5}),
     call_=_plan, examples_=6,
     bad_={"which": None, "alignment": S(3, "x", {"max_delay_s": NAN}, {"fixed_delay_ms": "x"},
                                         {"per_row": True, "fixed_delay_ms": 1.0}, {"condition_column": "nope"},
                                         {"max_delay_s": -1.0}, {"condition_column": 3})})
SCENE = {
    "room": {"dimensions_m": [10, 8, 3], "rt_s": [0.9, 0.8, 0.7, 0.7, 0.6, 0.6, 0.5]}, "noise_db": 40,
    "sources": [{"name": "LS1", "position_m": [1, 1, 2.5], "aim_m": [5, 4, 1.2], "level_1m_dba": 85, "q": 4},
                {"name": "LS2", "position_m": [9, 7, 2.5], "level_1m_db": [80, 80, 78, 76, 72, 68, 64], "q": 2,
                 "delay_ms": 10}],
    "listeners": [{"name": "P1", "position_m": [5, 4, 1.2]}, {"position_m": [2, 6, 1.2]}],
    "grid": {"x_m": [0.5, 9.5], "y_m": [0.5, 7.5], "z_m": 1.2, "step_m": 1.0},
}


def _scene_variant(k: int) -> dict:
    d = json.loads(json.dumps(SCENE))
    if k == 1:
        d["room"] = {"volume_m3": 240, "surfaces": [{"area_m2": 200, "absorption": 0.2},
                                                    {"area_m2": 50, "absorption": [0.1, 0.2, 0.3, 0.4, 0.5, 0.5, 0.5]}],
                     "rt_formula": "eyring", "field": "revised"}
    elif k == 2:
        d["sources"][0]["off_axis_db"] = {"angles_deg": [0, 90, 180], "attenuation_db": [0, 6, [12] * 7]}
        del d["grid"]
    elif k == 3:
        del d["listeners"]
    return d


SCENES = st.builds(_scene_variant, st.integers(0, 3))
BAD_SCENE = st.one_of(BAD_ANY, S({}, {"room": 3}, {"room": {"volume_m3": NAN, "rt_s": 1}},
                                 {**SCENE, "noise_db": [1e309] * 7},
                                 {**SCENE, "grid": {**SCENE["grid"], "step_m": 1e-6}},
                                 {**SCENE, "sources": [{"position_m": [5, 4, 1.2], "level_1m_dba": 80}]},
                                 {**SCENE, "listeners": [{"position_m": ["a", 1, 1]}]}, {**SCENE, "extra": 1}))


@lru_cache(maxsize=4)
def scene(k: int = 0):
    from envpredict.roommodel import parse_scene

    return parse_scene(_scene_variant(k))


SCENE_OBJ = st.builds(scene, S(0, 1, 2))
ROOM = SCENE_OBJ.map(lambda s: s.room)
SOURCE = st.builds(lambda k, i: scene(k).sources[i], S(0, 1, 2), S(0, 1))
POINTS = st.builds(lambda s, n: np.random.default_rng(s).uniform([0.5, 0.5, 1.0], [9.5, 7.5, 2.0], (n, 3)),
                   st.integers(0, 5), S(1, 10))
BAD_OBJ = S(None, 3, "x", {}, np.zeros(3))


def _grid_sti(fn, kw):
    s = kw["scene"]
    grid = getattr(s, "grid", None) if isinstance(kw["grid"], str) and kw["grid"] == "own" else kw["grid"]
    return fn(s, grid, talker=kw["talker"], auditory=kw["auditory"])


case("design.grid_sti", scene=st.builds(scene, S(0, 1)), grid=S("own"), talker=S("male", "female"),
     auditory=st.booleans(), call_=_grid_sti, bad_={"scene": BAD_OBJ, "grid": BAD_OBJ, "auditory": S(None, "x")})
case("design.predict_design", scene=st.one_of(SCENES, SCENE_OBJ), talker=S("male", "female"), auditory=st.booleans(),
     requirement=S(None, 0.5, 0.62), engine=S("statistical", "Statistical"),
     bad_={"scene": BAD_SCENE, "engine": S("nope", None, 3), "auditory": S(None, "x")}, examples_=10)
case("design.predict_design_file", path=S(P("scene.json"), P("scene.toml")), talker=S("male", "female"),
     requirement=S(None, 0.5), engine=S("statistical"), examples_=6)
case("roommodel.parse_scene", d=SCENES, talker=S("male", "female"), bad_={"d": BAD_SCENE})
case("roommodel.read_scene", path=S(P("scene.json"), P("scene.toml")), talker=S("male", "female"))
case("roommodel.critical_distance", room=ROOM, source=SOURCE, bad_={"room": BAD_OBJ, "source": BAD_OBJ})
case("roommodel.directivity_gain", source=SOURCE, cos_theta=st.lists(st.floats(-1, 1), min_size=1, max_size=9)
     .map(np.array), bad_={"source": BAD_OBJ, "cos_theta": BAD_ARRAY})
case("roommodel.source_terms", room=ROOM, source=SOURCE, points=POINTS,
     bad_={"room": BAD_OBJ, "source": BAD_OBJ, "points": BAD_ARRAY})
case("roommodel.modulation_transfer", room=ROOM, sources=SCENE_OBJ.map(lambda s: s.sources), points=POINTS,
     modulation_hz=S((0.63, 1.0, 2.0, 4.0, 8.0, 12.5), (1.0,)),
     bad_={"room": BAD_OBJ, "sources": S(None, (), 3, (None,)), "points": BAD_ARRAY})
case("roommodel.reverberant_transfer", rt_s=st.lists(st.floats(0.1, 5.0), min_size=7, max_size=7).map(np.array),
     modulation_hz=S((0.63, 1.0, 2.0, 4.0, 8.0, 12.5), (1.0,)), bad_={"rt_s": BAD_ARRAY})
case("roommodel.level_dba", band_db=st.lists(st.one_of(st.floats(0, 120), S(-INF)), min_size=7, max_size=7)
     .map(np.array), bad_={"band_db": BAD_ARRAY})
case("roommodel.image_absorption", room=ROOM, bad_={"room": BAD_OBJ}, share_=0.3)
# a small room with a short decay: a few seconds per response
case("roommodel.image_source_ir", scene=st.builds(scene, S(0, 2)), point=S(np.array([5.0, 4.0, 1.2]),
                                                                           np.array([2.0, 6.0, 1.5])),
     fs=S(24000), bad_={"scene": BAD_OBJ, "point": S(None, np.zeros(2), np.array([NAN] * 3), np.array([50.0, 1, 1]),
                                                     "x")}, examples_=3)
case("envpower.ideal_observer", snr_env=st.one_of(st.floats(0, 1e3), st.lists(st.floats(0, 1e3), min_size=1,
                                                                               max_size=5).map(np.array)),
     k=S(1.0, math.sqrt(1.2)), q=S(0.5, 1.0), sigma_s=S(0.6, 1.0), m=S(8000.0, 50.0),
     bad_={"snr_env": S(NAN, -1.0, "x", None, np.array([NAN]), INF), "k": BAD_REAL, "q": BAD_REAL,
           "sigma_s": BAD_REAL, "m": S(1.0, 0.5, NAN, "x", None)})
case("envpower.modulation_weights", freqs_hz=st.lists(st.floats(0, 500), min_size=1, max_size=50).map(np.array),
     modulation_hz=S((1.0, 2.0, 4.0, 8.0, 16.0, 32.0, 64.0), (1.0, 4.0)), q=S(1.0, 0.5),
     bad_={"freqs_hz": BAD_ARRAY, "modulation_hz": S((), (NAN,), (-1.0,), (0.0,), "abc", None), "q": BAD_REAL})
_SEPSM_X = st.builds(lambda s, n: speech(16000, n, s) + 0.02 * np.random.default_rng(s).standard_normal(int(n * 16000)),
                     st.integers(0, 1), S(1.0, 1.5))
case("envpower.envelope_powers", x=_SEPSM_X, fs=J(16000), bands_hz=S(None, (250.0, 1000.0, 4000.0)),
     bad_={"bands_hz": S((), (NAN,), (-1.0,), "x", (1e9,))}, examples_=6)


def _sepsm(fn, kw):
    """``fn(speech + noise, noise, ...)`` with a noise made to fit the drawn speech; a
    spoiled speech or noise is passed as it is."""
    x, nz = kw.pop("mixture"), kw.pop("noise")
    ok = isinstance(x, np.ndarray) and x.dtype.kind == "f" and x.ndim == 1
    if isinstance(nz, str) and nz == "made":
        nz = 0.02 * np.random.default_rng(0).standard_normal(x.size) if ok else x
        return fn(x + nz if ok else x, nz, **kw)
    return fn(x, nz, **kw)


case("envpower.sepsm", mixture=st.builds(speech, J(16000), S(1.0, 1.5), st.integers(0, 1)), noise=J("made"),
     fs=J(16000), k=S(math.sqrt(1.2)), m=S(8000.0, 50.0), call_=_sepsm, examples_=6,
     bad_={"mixture": BAD_ARRAY, "k": BAD_REAL, "m": S(1.0, NAN, None)})
case("speechlevel.p56_envelope", x=st.builds(speech, J(16000), S(0.5, 1.0), st.integers(0, 2)), fs=S(8000, 16000))
case("speechlevel.active_speech_level", x=scaled(st.builds(speech, J(16000), S(1.0, 2.0), st.integers(0, 2))),
     fs=S(16000, 22050))
case("mapping.check_dispersion", dispersion=S("quasi", "binomial"))
case("mapping.published_mapping_names")
case("mapping.published_mapping", name=S("taal2011-ieee", "taal2011-dantale"))
case("pair.pair_delay_curve", clean_path=S(P("clean.wav")), degraded_path=S(P("degraded.wav"), P("clean.wav")),
     channel=S(None, 0), max_delay_s=S(0.2, 1.0), delay_method=S("gcc-phat", "waveform"), examples_=6,
     bad_={"delay_method": BAD_TEXT})
case("pair.common_delay", pairs=S([(P("clean.wav"), P("degraded.wav"), None)],
                                  [(P("clean.wav"), P("degraded.wav"), None), (P("clean.wav"), P("clean.wav"), 0)],
                                  [(P("clean.wav"), P("degraded.wav"), None),
                                   (P("clean.wav"), P("missing.wav"), None)]),
     max_delay_s=S(0.2, 1.0), delay_method=S("gcc-phat", "waveform"), examples_=6,
     bad_={"pairs": S(None, 3, [], [None], [(1, 2)], "x", [(P("missing.wav"), P("clean.wav"), None)]),
           "delay_method": BAD_TEXT})
_MIX = st.builds(lambda s: speech(16000, 1.0, s) + 0.01 * np.random.default_rng(s).standard_normal(16000),
                 st.integers(0, 3))
case("pair.phase_inversion_split", mixture=_MIX, inverted=_MIX, bad_={"mixture": BAD_ARRAY, "inverted": BAD_ARRAY})
_CROWS3 = st.builds(lambda s: [{"item": f"u{i}", "condition": c,
                                "sti": 0.5 + 0.03 * i + 0.04 * "abc".index(c) + 0.01 * ((i * 7 + s) % 5)}
                               for i in range(8) for c in "abc"], st.integers(0, 5))
case("stats.compare_all_pairs", rows=_CROWS3, by=S("condition"), index=S(None, "sti"), pair_on=S(None, "item"),
     n_resamples=S(200, 500), confidence=S(0.9, 0.95), ci_method=S("BCa", "percentile"),
     bad_={"rows": S(None, 3, [], [None], [{"condition": "a"}], "x")})
case("stats.compare_all_pairs_file", path=S(P("results.csv")), by=S("condition"), n_resamples=S(200, 500),
     examples_=6)
case("stats.effect_size_dz", d=st.lists(st.floats(-1, 1), min_size=0, max_size=12).map(np.array),
     confidence=S(0.9, 0.95))
_SPEECH_DB = st.lists(st.floats(20, 90), min_size=7, max_size=7).map(np.array)
case("sti.band_factors", speech_db=st.one_of(_SPEECH_DB, _SPEECH_DB.map(lambda v: np.stack([v, v - 10]))),
     noise_db=S(None, np.full(7, 40.0), np.linspace(50, 20, 7)), auditory=st.booleans(),
     bad_={"speech_db": BAD_ARRAY, "noise_db": S(np.zeros(3), [NAN] * 7, "x", np.zeros((2, 7))),
           "auditory": S(None, "x", 1.5)})
case("sti.combine_bands_many", mti=st.builds(lambda s, n: np.random.default_rng(s).random((n, 7)),
                                             st.integers(0, 9), S(1, 5)),
     talker=S("male", "female"))
case("sti.sti_many", mtf=st.builds(lambda s: np.random.default_rng(s).uniform(0.05, 1.0, (3, 7, 14)),
                                   st.integers(0, 9)),
     speech_db=st.builds(lambda s: np.random.default_rng(s).uniform(40, 80, (3, 7)), st.integers(0, 5)),
     noise_db=S(None, np.full(7, 40.0)), talker=S("male", "female"), auditory=st.booleans(),
     bad_={"speech_db": BAD_ARRAY, "noise_db": S(np.zeros(3), "x"), "auditory": S(None, "x")})
case("stimuli.check_stimuli_folder", folder=S(Out("stim"), Out("stim2"), P("recordings"), P("ir.wav")), share_=0.3)


@lru_cache(maxsize=1)
def small_sweep():
    from envpredict.sweep import snr_sweep

    return snr_sweep(speech(10000, 1.5, 0), 0.05 * np.random.default_rng(0).standard_normal(100000), 10000,
                     snr_db=(-5.0, 0.0, 5.0), index="stoi", n_segments=1)


case("stimuli.stimulus_snrs", sweep=S(None, "sweep"), chosen=S(None, [0.0, 5.0], (-3.0,)),
     call_=lambda fn, kw: fn(small_sweep() if kw["sweep"] == "sweep" else kw["sweep"], kw["chosen"]),
     bad_={"sweep": S(3, "x", [1.0]), "chosen": S("x", [NAN], 3, [None], [INF], [1e300])}, share_=0.3)
_NOISE10K = st.builds(lambda s: 0.05 * np.random.default_rng(s).standard_normal(10000 * 10), st.integers(0, 2))
case("stimuli.write_stimuli", folder=S(Out("stim")), clean=st.builds(speech, J(10000), J(1.5), st.integers(0, 2)),
     noise=_NOISE10K, fs=J(10000), snr_db=S([-5.0, 0.0, 5.0], (3.0,)), ir=S(None, ir_array(48000, 0.3, 0.2, 1)[::5]),
     snr_reference=S("active", "long-term"), level=S("speech", "mixture"), presentation_level_db=S(-30.0, -6.0),
     scale_to_fit=S(True, True, False), seed=S(0, 7), name=S("stimulus", "s"),
     process=S(None, None, lambda m, fs: np.tanh(m)), examples_=8,
     bad_={"snr_db": S([], [NAN], "x", None, [1e300], list(range(1000))), "presentation_level_db": BAD_REAL,
           "snr_reference": BAD_TEXT, "scale_to_fit": S(None, "x"),
           "process": S(3, "nope", "no_such_module_x:f", lambda m, fs: m[:10], lambda m, fs: 1 / 0)})
case("stimuli.write_stimuli_files", folder=S(Out("stimf")), clean=S(P("clean.wav")), noise=S(P("noise.wav")),
     snr_db=S([0.0, 5.0]), ir=S(None, P("ir.wav")), channel=S(None, 0), examples_=5,
     bad_={"clean": BAD_PATH, "noise": BAD_PATH, "ir": BAD_PATH, "snr_db": S([], [NAN], "x", None)})
case("sweep.check_snr_reference", snr_reference=S("active", "long-term", "long_term", "longterm"))


def _process(fn, kw):
    f = fn(kw["spec"])
    return f(np.ones(100), 16000) if kw["call"] else f


case("sweep.load_process", spec=S(P("gain.py:half"), P("gain.py:broken")), call=st.booleans(), call_=_process,
     bad_={"spec": S("", "nope", "os:nope", P("gain.py"), P("gain.py:"), "no_such_module_x:f", 3, None,
                     P("missing.py:f"), P("text.txt:f")), "call": None}, share_=0.3)
case("sweep.read_at_one_rate", clean=S(P("speech.wav"), P("sentences"), [P("clean.wav"), P("speech.wav")]),
     noise=S(P("noise.wav"), P("noise10k.wav")), ir=S(None, P("ir.wav")), channel=S(None),
     bad_={"clean": BAD_PATH, "noise": BAD_PATH, "ir": BAD_PATH}, examples_=8)
case("sweep.sentence_files", clean=S(P("sentences"), P("sentences.txt"), [P("clean.wav"), P("speech.wav")],
                                     P("clean.wav")),
     bad_={"clean": BAD_PATH})
case("sweep.snr_sweep_sentences", sentences=st.builds(lambda a, b: [speech(10000, 1.5, a), speech(10000, 1.5, b)],
                                                      S(0, 1), S(2, 3)),
     noise=_NOISE10K, fs=J(10000), snr_db=S((-5.0, 0.0, 5.0), (0.0, 10.0)), index=S("stoi", "estoi"),
     n_segments=S(1, 2), names=S(None, ["a", "b"]), examples_=5,
     bad_={"sentences": S(None, [], [np.zeros(3)], [speech(10000, 1.5, 0)], "x", [None, None]),
           "names": S(["a"], 3, [None, None])})

# cheap functions: more examples, so each hostile value is met
for _n in ("roommodel.critical_distance", "roommodel.directivity_gain", "roommodel.source_terms",
           "roommodel.modulation_transfer", "roommodel.reverberant_transfer", "roommodel.level_dba",
           "roommodel.image_absorption", "roommodel.parse_scene", "envpower.ideal_observer",
           "envpower.modulation_weights", "pair.phase_inversion_split", "stats.effect_size_dz", "sti.band_factors",
           "sti.combine_bands_many", "sti.sti_many", "stimuli.stimulus_snrs", "sweep.sentence_files",
           "speechlevel.p56_envelope", "mapping.check_dispersion", "sweep.check_snr_reference"):
    CASES[_n].examples = 30

# --- checks (the boundary checks themselves) ---------------------------------------------------

_NUM = st.one_of(st.floats(0.0, 10.0), st.integers(0, 10))
_BAD_NUM = S(NAN, INF, -INF, "1", None, True, [1.0], 10**400, -(10**400), np.zeros(0))
case("checks.path", value=S("a.wav", P("ir.wav"), Path("x.csv")), what=S("input"), fix=S("", "give it"),
     bad_={"value": BAD_PATH, "what": None, "fix": None})
case("checks.number", value=_NUM, what=S("x"), lo=S(-INF, 0.0), hi=S(INF, 10.0), integer=st.booleans(),
     bad_={"value": _BAD_NUM, "what": None, "lo": None, "hi": None, "integer": None}, share_=0.4)
case("checks.optional_number", value=st.one_of(st.none(), _NUM), what=S("x"),
     bad_={"value": _BAD_NUM, "what": None})
case("checks.flag", value=st.booleans(), what=S("x"), bad_={"what": None})
case("checks.text", value=st.text(max_size=5), what=S("x"), bad_={"what": None})
case("checks.choice", value=S("a", "b"), what=S("x"), options=J(("a", "b")), bad_={"what": None, "options": None})
case("checks.sample_rate", fs=S(8000, 48000, 44100.0, "16000", np.int64(16000)), name=S("x"),
     bad_={"fs": st.one_of(BAD_RATE, S(10**400, np.zeros(3), [48000])), "name": None})
case("checks.array", x=st.lists(st.floats(-1, 1), min_size=1, max_size=10).map(np.array), what=S("x"),
     ndim=S(1, (1, 2)), min_size=S(1), finite=st.booleans(),
     bad_={"what": None, "ndim": None, "min_size": None, "finite": None})
case("checks.samples", n=st.integers(0, 10**6), what=S("x"), lo=J(0),
     bad_={"n": st.one_of(BAD_INT, S(10**400)), "what": None, "lo": None})

# --- labels -------------------------------------------------------------------------------------

_FC = st.floats(8.0, 25000.0)
_BAD_FC = S(0.0, -1.0, NAN, INF, "x", None, [1000.0], np.zeros(0), 10**400)
case("labels.nominal_frequency", fc=_FC, bad_={"fc": _BAD_FC})
case("labels.band_label", fc=_FC, unit=st.booleans(), bad_={"fc": _BAD_FC, "unit": None})
case("labels.header", key=S("sti", "t30_mid", "decay_range_db", "stoi"),
     bad_={"key": S("", "nope", None, 3, ["sti"])})
case("labels.term", key=S("sti", "t30", "p_holm", "envelope_noise_depth"), bad_={"key": S("", "nope", None, 3)})
case("labels.name", key=S("stoi", "sti", "my_score"), bad_={"key": S(None, 3, ["stoi"])})
case("labels.show", key=S("sti", "t30", "c50", "stoi"), value=st.one_of(st.none(), st.floats(allow_nan=True)),
     decimals=S(None, 0, 3), bad_={"key": S("", "nope", None), "decimals": S(-1, 10, "x")})
case("labels.known_label", text=st.one_of(S("T30, s", "band", "STI (image engine)", "1.6k", "range dB"),
                                          st.text(max_size=30)), bad_={"text": S(None, 3, ["x"])})
case("labels.key_of", text=st.one_of(S("noise depth", "T30, s", "1.6k"), st.text(max_size=30)),
     bad_={"text": S(None, 3)})
case("labels.glossary", labels=st.lists(st.one_of(S("band", "T30, s", "p (Holm)"), st.text(max_size=12)),
                                        max_size=6), bad_={"labels": S(None, "T30, s", 3)})
case("labels.column_notes", headers=st.lists(st.one_of(S("noise depth", "MTI", "band, Hz"), st.text(max_size=12)),
                                             max_size=6), bad_={"headers": S(None, "MTI", 3)})
case("labels.significant_decimals", value=st.one_of(st.none(), st.floats(allow_nan=True)), digits=S(4, 1, 9),
     bad_={"digits": S(0, 10, "x", None)})
case("labels.uncertainty_decimals", uncertainty=st.one_of(st.none(), st.floats(allow_nan=True)),
     decimals=S(2, 0, 6), bad_={"decimals": S(-1, 7, "x", None)})
case("labels.rating_text", rating=S("G", "A+", None, ""), subjective=S("fair", None),
     bad_={"rating": S(3, ["G"]), "subjective": S(3)})

# --- sinesweep, deconvolve ---------------------------------------------------------------------
# The shortest sweep accepted at 32 kHz: 50 Hz to 13 kHz (8 octaves) needs 6.6 s for its
# 0.82 s of response before the second harmonic's (sinesweep.check_sweep).

SWEEP_FS = 32000


@lru_cache(maxsize=8)
def short_spec(fs: int = SWEEP_FS, seconds: float = 6.6, repeats: int = 1):
    from envpredict.sinesweep import sweep_spec

    return sweep_spec(fs, 50.0, 13000.0, seconds, repeats=repeats, tail_s=1.0)


@lru_cache(maxsize=4)
def played_sweep(seconds: float = 6.6, repeats: int = 1) -> np.ndarray:
    from envpredict.sinesweep import sweep_signal

    return sweep_signal(short_spec(SWEEP_FS, seconds, repeats))


@lru_cache(maxsize=8)
def sweep_recording(offset_s: float, T: float, seed: int, repeats: int = 1) -> np.ndarray:
    """The played sweep through a short noise decay (reverberation time ``T``), after
    ``offset_s`` of silence, with a little noise."""
    from scipy.signal import fftconvolve

    h = noise_decay(T, fs=SWEEP_FS, seconds=0.4, seed=seed)
    y = fftconvolve(played_sweep(6.6, repeats), h)
    y = np.r_[np.zeros(int(offset_s * SWEEP_FS)), y, np.zeros(SWEEP_FS // 2)]
    y = 0.4 * y / np.max(np.abs(y))
    return y + 1e-4 * np.random.default_rng(seed).standard_normal(y.size)


def _bad_spec():
    from envpredict.sinesweep import SweepSpec

    def spec(**kw):
        base = dict(fs=SWEEP_FS, f1_hz=50.0, f2_hz=13000.0, seconds=6.6, fade_in_s=0.1, fade_out_s=0.02, repeats=1,
                    tail_s=1.0)
        return SweepSpec(**{**base, **kw})

    return S(None, 3, "spec", {}, spec(f1_hz=0.0), spec(f1_hz=NAN), spec(seconds=1e9), spec(fs=0), spec(repeats=0),
             spec(repeats=2**40), spec(f2_hz=-1.0), spec(fs="x"), spec(tail_s=INF), spec(seconds=0.0),
             spec(fade_in_s=-1.0), spec(fs=1e12))


BAD_SPEC = st.deferred(_bad_spec)
SPEC = st.builds(short_spec, J(SWEEP_FS), S(6.6, 7.0), S(1, 2))
case("sinesweep.sweep_spec", fs=S(32000, 44100, 48000), f1_hz=S(40.0, 50.0), f2_hz=S(13000.0, 15000.0),
     seconds=S(7.0, 8.0, 10.0), repeats=S(1, 2), tail_s=S(1.0, 2.0),
     bad_={"f1_hz": BAD_REAL, "f2_hz": BAD_REAL, "seconds": st.one_of(BAD_REAL, S(10**400)), "repeats": BAD_INT,
           "tail_s": BAD_REAL})
case("sinesweep.check_sweep", spec=SPEC, name=S("sweep"), bad_={"spec": BAD_SPEC, "name": None})
case("sinesweep.exponential_sweep", spec=SPEC, bad_={"spec": BAD_SPEC})
case("sinesweep.sweep_signal", spec=SPEC, bad_={"spec": BAD_SPEC}, examples_=8)
case("sinesweep.parameter_path", path=S("a.wav", P("sweep.wav"), Out("s.wav")))
case("sinesweep.write_sweep_signal", path=S(Out("sw.wav")), spec=SPEC, bad_={"spec": BAD_SPEC}, examples_=6)
case("sinesweep.read_sweep_parameters", path=S(P("sweep.wav")), fs=J(SWEEP_FS),
     frames=st.builds(lambda: played_sweep().size), name=S("sweep"),
     bad_={"path": st.one_of(BAD_PATH, S(P("badsweep.wav"), P("hugesweep.wav"))), "frames": BAD_INT, "name": None})


def _inverse(fn, kw):
    spec = kw["spec"]
    sweep = kw["sweep"] if kw["sweep"] is not None else _one_sweep(spec)
    n_fft = kw["n_fft"] if kw["n_fft"] != "ok" else kw["factor"] * (sweep.size if hasattr(sweep, "size") else 1)
    return fn(sweep, kw["fs"], spec, n_fft)


def _one_sweep(spec):
    from envpredict.sinesweep import exponential_sweep

    try:
        return exponential_sweep(spec)
    except EnvpredictError:
        return np.zeros(10)


case("deconvolve.inverse_filter", sweep=J(None), fs=S(SWEEP_FS, 48000), spec=st.builds(short_spec), n_fft=J("ok"),
     factor=S(1, 2), call_=_inverse, examples_=8,
     bad_={"sweep": BAD_ARRAY, "spec": BAD_SPEC, "n_fft": BAD_INT, "factor": None})
case("deconvolve.deconvolve_sweep",
     recording=st.builds(sweep_recording, S(0.0, 0.3, 1.0), S(0.2, 0.5), st.integers(0, 2)), fs=J(SWEEP_FS),
     sweep=st.builds(played_sweep), sweep_fs=J(SWEEP_FS), spec=st.builds(short_spec), max_offset_s=S(2.0, 5.0),
     bad_={"recording": BAD_ARRAY, "sweep": BAD_ARRAY, "sweep_fs": BAD_RATE, "spec": BAD_SPEC}, examples_=8,
     # the sweep found where it was put (within 2 ms), the response finite
     check_=lambda r: np.all(np.isfinite(r.ir)) and min(abs(r.offset_s - o) for o in (0.0, 0.3, 1.0)) < 0.002)
case("deconvolve.deconvolve_sweep_file", recording=S(P("sweep_rec.wav")), sweep=S(P("sweep.wav")),
     out=S(None, Out("h.wav")), channel=S(None, 0), sweep_rate=J(None), max_offset_s=S(2.0, 5.0),
     bad_={"recording": BAD_PATH, "sweep": st.one_of(BAD_PATH, S(P("badsweep.wav"), P("ir.wav"))),
           "sweep_rate": S(0, -1, NAN, "x", 1e12, 8000), "max_offset_s": S(NAN, INF, -1.0, 0.0, 1e300, "x", None)},
     examples_=6)

# --- survey ---------------------------------------------------------------------------------------

REQS = S((), ("mean>=0.5",), ("min >= 0.45", "mean-sd>0.4"), ["max>=0.6", "mean>0.55"])
case("survey.parse_requirement", text=S("mean>=0.50", "min >= 0.45", "mean-sd>0.5", "max>=0.6", "mean >= 1"))
_SROWS = st.lists(st.fixed_dictionaries({"zone": S("hall", "foyer"), "position": S("p1", "p2", "p3"),
                                         "row": st.integers(1, 40),
                                         "sti": st.one_of(st.floats(0.0, 1.0), S(None, "", "0.52"))}),
                  min_size=0, max_size=8)
case("survey.summarise_survey", rows=_SROWS, requirements=REQS,
     bad_={"rows": S(None, 3, "x", [None], [{}], [{"zone": "a", "position": "p", "row": 1, "sti": "x"}],
                     [{"zone": "a", "position": "p", "row": "x", "sti": 0.5}],
                     [{"zone": "a", "position": "p", "row": 1, "sti": NAN}],
                     [{"zone": "a", "position": "p", "row": 1, "sti": 1.5}],
                     [{"zone": "a", "position": "p", "row": 1, "sti": [0.5]}]),
           "requirements": S(None, 3, "mean>=0.5", [3], ["mean>=2"], [None])})
case("survey.check_survey_columns", columns=S(("zone", "position", "ir"), ["zone", "position", "stipa", "repeat"],
                                              ("zone", "ir"), ("zone", "position", "clean", "degraded")),
     where=S("survey"), share_=0.3, bad_={"columns": S(None, 3, 1e300, [None, 3], np.zeros(0)), "where": None})
case("survey.check_survey_outputs", survey=S(P("survey.csv")),
     outputs=S({"--out": Out("r.csv")}, {"--out": Out("r.csv"), "--zones-csv": Out("z.csv"), "--positions-csv": None}),
     inputs=S((), [P("ir.wav")]),
     bad_={"survey": BAD_PATH, "outputs": S(None, 3, {"--out": 3}, {"--out": P("survey.csv")}, [Out("r.csv")]),
           "inputs": S(None, 3, [None], [3])})
case("survey.run_survey", survey=S(P("survey.csv")), out=S(Out("sr.csv")), requirements=REQS, workers=J(1),
     bad_={"survey": st.one_of(BAD_PATH, S(P("results.csv"))), "requirements": S(["x"], [None], 3),
           "workers": S(0, -1, 1.5, "x")}, examples_=3)


@lru_cache(maxsize=1)
def survey_result():
    from envpredict.survey import SurveyResult, summarise_survey

    rows = [{"zone": z, "position": p, "row": i, "sti": 0.5 + 0.01 * i} for i, (z, p) in
            enumerate([("hall", "p1"), ("hall", "p2"), ("foyer", "p1")], start=1)]
    pos, zones = summarise_survey(rows, ["mean>=0.5"])
    return SurveyResult(index="sti", survey="s.csv", results="r.csv", requirements=("mean >= 0.5",), positions=pos,
                        zones=zones, rows=3, failed_rows=0)


case("survey.write_survey_tables", result=st.builds(survey_result), positions_csv=S(None, Out("p.csv")),
     zones_csv=S(None, Out("z.csv")), bad_={"result": S(None, 3, {}, "x"), "positions_csv": BAD_PATH,
                                            "zones_csv": BAD_PATH})

# --- further functions of audio, modulation, outputs, report, signals, sti, demo -------------------


@lru_cache(maxsize=4)
def noise24k(seed: int) -> np.ndarray:
    return 0.05 * np.random.default_rng(seed).standard_normal(6 * 24000)


case("audio.octave_band_levels", x=scaled(st.builds(noise24k, st.integers(0, 2)), level=(1e-3, 0.9)), fs=J(24000),
     calibration_db=st.floats(80.0, 130.0), bad_={"calibration_db": BAD_REAL}, examples_=6)
case("audio.octave_band_levels_file", path=S(P("noise24k.wav")), channel=S(None, 0),
     calibration_db=st.floats(80.0, 130.0), bad_={"calibration_db": BAD_REAL}, examples_=5)
_RATIOS = S((5, 8), (2, 1), (1, 2), (160, 147), (3, 1))
case("audio.polyphase", x=st.builds(speech, J(16000), S(0.3, 1.0), st.integers(0, 2)), ratio=_RATIOS,
     call_=lambda fn, kw: fn(kw["x"], *kw["ratio"]) if isinstance(kw["ratio"], tuple) else fn(kw["x"], kw["ratio"], 1),
     bad_={"ratio": S((0, 1), (1, 0), (-1, 2), (1.5, 2), ("2", 1), (None, 1), (True, 1), (2**40, 1), (1, 2**40),
                      (NAN, 1), 3.0)})


@lru_cache(maxsize=4)
def drifting_envelopes(ppm: float, seconds: float) -> np.ndarray:
    t = np.arange(int(seconds * 200)) / 200.0
    f = np.array([[1.6, 8.0], [2.5, 12.5]])
    return np.stack([1 + 0.5 * np.cos(2 * np.pi * fk[0] * (1 + ppm * 1e-6) * t)
                     + 0.5 * np.cos(2 * np.pi * fk[1] * (1 + ppm * 1e-6) * t) for fk in f])


case("modulation.clock_offset", env=st.builds(drifting_envelopes, S(0.0, 500.0, -2000.0), S(12.0, 20.0)),
     fs_env=J(200.0), freqs=J(np.array([[1.6, 8.0], [2.5, 12.5]])),
     bad_={"fs_env": S(0, -1.0, NAN, INF, 1e-300, "x", None, 1e12), "freqs": st.one_of(BAD_ARRAY, S(np.ones((5, 2))))},
     check_=lambda r: math.isfinite(r.ppm))


def _atomic(fn, kw):
    with fn(kw["path"]) as fh:
        fh.write(kw["data"])
    return True


case("outputs.atomic_file", path=OUTPATH, data=st.binary(max_size=64), call_=_atomic, bad_={"data": None})
case("report.names_only", d=st.one_of(JSONISH, st.builds(lambda: {"inputs": {"ir": "/a/b/ir.wav", "n": 3},
                                                                  "survey": "x/y/s.csv"})))
case("report.read_about", path=S(None, P("about.txt"), P("about.json")), items=S((), ["project=Pier 4"],
                                                                                    ("operator=K. Lind",)),
     bad_={"path": st.one_of(BAD_PATH, S(P("about_bad.json"), P("scores.csv"))),
           "items": S(None, 3, "x", [3], ["nope=1"], ["project"], [None])})


def _block(fn, kw):
    sig = fn(**kw)
    return next(iter(sig.blocks(4096)))


case("signals.full_sti_test_signal", modulation_hz=S(0.63, 4.0, 12.5), seconds=st.floats(0.5, 2.0),
     fs=S(24000, 48000), seed=st.integers(0, 10), call_=_block,
     bad_={"modulation_hz": BAD_REAL, "seconds": S(1e9, 0.0, -1.0, NAN, INF, None)})
case("signals.stipa_test_signal", seconds=st.floats(15.0, 16.0), fs=S(24000, 32000), seed=st.integers(0, 100),
     call_=_block, bad_={"seconds": S(1e9, 1e6, 0.0, -1.0, NAN, INF, "1", None, 1e-6)}, examples_=6)
case("sti.a_weighted_level", band_db=st.lists(st.floats(0.0, 120.0), min_size=7, max_size=7),
     bad_={"band_db": st.one_of(BAD_ARRAY, S([60.0] * 6, [NAN] * 7, ["a"] * 7, [1e300] * 7))})
case("sti.check_requirement", value=S(None, 0.5, 0.45, 1.0, "0.6"), bad_={"value": st.one_of(BAD_REAL, S(10**400))})
case("sti.parse_speech_levels", text=S(None, "60,63,61,55,49,43,37", "60;63;61;55;49;43;37", [60.0] * 7,
                                       (60, 63, 61, 55, 49, 43, 37)),
     bad_={"text": S("1;2;3", "a;b;c;d;e;f;g", [NAN] * 7, [1e300] * 7, "", 3, "1e309;" * 7, [None] * 7)})
case("demo.demo_survey_path")
case("demo.copy_demo", folder=S(Out("demo1"), Out("demo2")), examples_=2,
     bad_={"folder": S(P("recordings"), P("ir.wav"), P("folder/missing/x"), 3, None, "", "a\x00b")})


# ---------------------------------------------------------------------------
# The tests
# ---------------------------------------------------------------------------


def test_every_public_function_has_a_strategy():
    names = set(public_functions())
    missing, stale = sorted(names - set(CASES)), sorted(set(CASES) - names)
    assert not missing, f"public functions without a strategy in {__name__}: {missing}"
    assert not stale, f"strategies for functions that are gone: {stale}"


#: Public functions that raise nothing: no argument, or any value is taken (score_row
#: turns every failure of a row into the row's error text).
NEVER_RAISES = frozenset({
    "audio.usable_cores", "batch.score_row", "batch.score_rows", "batch.start_workers_early",
    "correlation.analysis_window", "correlation.third_octave_matrix", "demo.demo_survey_path",
    "outputs.current_umask", "report.names_only", "report.num",
    "report.txt", "signals.full_sti_plan", "sweep.default_index_functions", "tables.cell_number", "tables.format_cell",
    "timescales.modulation_band_edges",
})


def test_every_public_function_documents_its_errors():
    # numpydoc: a "Raises" section names the documented errors a function can raise
    undocumented = sorted(n for n, f in public_functions().items()
                          if n not in NEVER_RAISES and "Raises" not in (inspect.getdoc(f) or ""))
    assert not undocumented, f"public functions without a Raises section: {undocumented}"


@contextlib.contextmanager
def memory_cap():
    """Cap the address space a few GiB above its size now (a huge allocation then fails
    at once); restore the previous limit after."""
    soft, hard = resource.getrlimit(resource.RLIMIT_AS)
    with open("/proc/self/statm") as f:
        size = int(f.read().split()[0]) * os.sysconf("SC_PAGE_SIZE")
    cap = size + MEMORY_HEADROOM
    resource.setrlimit(resource.RLIMIT_AS, (cap if hard == resource.RLIM_INFINITY else min(cap, hard), hard))
    try:
        yield
    finally:
        resource.setrlimit(resource.RLIMIT_AS, (soft, hard))


class Hang(Exception):
    pass


def _alarm(signum, frame):
    raise Hang(f"one example ran longer than {EXAMPLE_SECONDS} s")


@pytest.mark.parametrize("name", sorted(CASES))
def test_only_documented_errors(name):
    fn = public_functions()[name]
    c = CASES[name]
    seen = {"run": 0, "reached": 0}

    @settings(max_examples=c.examples, deadline=None, suppress_health_check=list(HealthCheck))
    @given(arguments(c))
    def run(kw):
        kw = materialize(kw)
        seen["run"] += 1
        old = signal.signal(signal.SIGALRM, _alarm)
        signal.alarm(EXAMPLE_SECONDS)
        try:
            with memory_cap():
                out = c.call(fn, kw) if c.call else fn(**kw)
        except EnvpredictError as e:
            assert e.what and "\n" not in e.one_line(), f"not one line: {e.one_line()!r}"
            event("refused")
            return
        finally:
            signal.alarm(0)
            signal.signal(signal.SIGALRM, old)
        event("reached the computation")
        seen["reached"] += 1
        if c.check:
            assert c.check(out)

    run()
    assert seen["reached"] >= c.share * seen["run"], (
        f"{name}: only {seen['reached']} of {seen['run']} examples reached the computation")


@pytest.mark.parametrize("value", [NAN, 1.5, -0.1, INF, "x", None])
@pytest.mark.parametrize("fn", ["qualification_band", "subjective_rating"])
def test_an_index_outside_0_1_has_no_rating(fn, value):
    # IEC 60268-16:2011 Table F.1 rates an STI of 0..1; NaN once read 'U' and 1.5 'A+'
    with pytest.raises(envpredict.InputError):
        getattr(importlib.import_module("envpredict.sti"), fn)(value)


def test_a_huge_resampling_is_refused_before_it_allocates():
    # fs_in = True (1 Hz) once asked scipy for a 5.7 GiB array; a 2**63 Hz rate for more
    from envpredict.audio import resample

    for fs_in, fs_out in ((True, 48000), (16000, 2**63), (16000, 1e12)):
        with memory_cap(), pytest.raises(envpredict.InputError):
            resample(np.zeros(16000), fs_in, fs_out)


def _huge_calls():
    """Calls whose arguments ask for hundreds of GiB (or run for days): each must be
    refused at the boundary, before any allocation."""
    from envpredict import audio, correlation, modulation, signals, stats, timescales

    x = speech(16000, 1.0, 1)
    rows = [{"item": f"u{i}", "c": c, "sti": 0.5 + 0.01 * i + (0.02 if c == "b" else 0)}
            for i in range(4) for c in ("a", "b")]
    return {
        "stipa_signal(seconds=1e9)": lambda: signals.stipa_signal(1e9, 48000),
        "stipa_signal(fs=1e12)": lambda: signals.stipa_signal(20.0, 1e12),
        "write_stipa_signal(seconds=1e9)": lambda: signals.write_stipa_signal(
            str(_FOLDER[0] / "out" / "huge.wav"), 1e9, 48000),
        "full_sti_signal(seconds=1e9)": lambda: signals.full_sti_signal(4.0, 1e9, 48000),
        "octave_band_noise(n=2**40)": lambda: signals.octave_band_noise(2**40, 48000, np.random.default_rng(0)),
        "resample(fs_out=2**63)": lambda: audio.resample(x, 16000, 2**63),
        "estimate_delay(max_delay_s=1e9)": lambda: audio.estimate_delay(x, x, 16000, 1e9),
        "bootstrap_mean_ci(n_resamples=2**40)": lambda: stats.bootstrap_mean_ci([0.1, 0.2, 0.3], n_resamples=2**40),
        "compare_conditions(n_resamples=2**40)": lambda: stats.compare_conditions(
            rows, by="c", baseline="a", n_resamples=2**40),
        "envelope_spectrum(segment_s=1e9)": lambda: timescales.envelope_spectrum(np.ones(1000), 100.0, 1e9),
        "frame_energies_db(n_samples=2**62)": lambda: correlation.frame_energies_db(lambda a, b: x[a:b], 2**62),
        "project(chunk=2**62)": lambda: modulation.project(np.ones(100), np.array([1.0]), 100.0, chunk=2**62),
    }


@pytest.mark.parametrize("name", sorted(_huge_calls()))
def test_huge_sizes_are_refused_before_they_allocate(name):
    old = signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(EXAMPLE_SECONDS)
    try:
        with memory_cap(), pytest.raises(envpredict.InputError):
            _huge_calls()[name]()
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


def _boundary_calls():
    """Hostile arguments that once escaped as TypeError, ValueError, AttributeError,
    OverflowError, IndexError or KeyError from the functions added after the first
    round (the hypothesis strategies above draw them only now and then)."""
    from envpredict import audio, checks, deconvolve, labels, mapping, modulation, report, sinesweep, sti, survey
    from envpredict.sinesweep import SweepSpec

    x = speech(16000, 0.3, 1)
    bad_spec = SweepSpec(fs=SWEEP_FS, f1_hz=0.0, f2_hz=13000.0, seconds=6.6, fade_in_s=0.1, fade_out_s=0.02,
                         repeats=1, tail_s=1.0)
    huge_spec = SweepSpec(fs=SWEEP_FS, f1_hz=50.0, f2_hz=13000.0, seconds=1e9, fade_in_s=0.1, fade_out_s=0.02,
                          repeats=1, tail_s=1.0)
    row = {"zone": "a", "position": "p", "row": 1, "sti": 0.5}
    return {
        "polyphase(a list)": lambda: audio.polyphase([0.1, 0.2, 0.3], 2, 1),
        "polyphase(2-D)": lambda: audio.polyphase(np.zeros((2, 100)), 2, 1),
        "polyphase(text array)": lambda: audio.polyphase(np.array(["a", "b"]), 2, 1),
        "polyphase(up=0)": lambda: audio.polyphase(x, 0, 1),
        "polyphase(up=1.5)": lambda: audio.polyphase(x, 1.5, 2),
        "polyphase(down=2**40)": lambda: audio.polyphase(x, 1, 2**40),
        "polyphase(up=2**40)": lambda: audio.polyphase(x, 2**40, 1),
        "clock_offset(fs_env=0)": lambda: modulation.clock_offset(np.ones((1, 4000)), 0, np.array([[4.0]])),
        "clock_offset(text)": lambda: modulation.clock_offset("abc", 200.0, np.array([[4.0]])),
        "clock_offset(fewer rows of freqs)": lambda: modulation.clock_offset(np.ones((2, 4000)), 200.0,
                                                                             np.array([[4.0]])),
        "exponential_sweep(None)": lambda: sinesweep.exponential_sweep(None),
        "exponential_sweep(f1=0)": lambda: sinesweep.exponential_sweep(bad_spec),
        "sweep_signal(seconds=1e9)": lambda: sinesweep.sweep_signal(huge_spec),
        "check_sweep(a dict)": lambda: sinesweep.check_sweep({"fs": 32000}),
        "write_sweep_signal(None)": lambda: sinesweep.write_sweep_signal(str(_FOLDER[0] / "out" / "n.wav"), None),
        "sweep_spec(seconds=10**400)": lambda: sinesweep.sweep_spec(32000, 50, 13000, 10**400),
        "sweep_spec(repeats=inf)": lambda: sinesweep.sweep_spec(32000, 50, 13000, 8.0, repeats=INF),
        "parameter_path('/')": lambda: sinesweep.parameter_path("/"),
        "parameter_path(3)": lambda: sinesweep.parameter_path(3),
        "read_sweep_parameters(fs=inf in its file)": lambda: sinesweep.read_sweep_parameters(
            _FOLDER[0] / "hugesweep.wav", SWEEP_FS, played_sweep().size),
        "inverse_filter(n_fft=2**40)": lambda: deconvolve.inverse_filter(np.ones(1000), SWEEP_FS, short_spec(), 2**40),
        "inverse_filter(spec=None)": lambda: deconvolve.inverse_filter(np.ones(1000), SWEEP_FS, None, 4096),
        "deconvolve_sweep_file(max_offset_s=inf)": lambda: deconvolve.deconvolve_sweep_file(
            _FOLDER[0] / "sweep_rec.wav", _FOLDER[0] / "sweep.wav", max_offset_s=INF),
        "a_weighted_level(6 levels)": lambda: sti.a_weighted_level([60.0] * 6),
        "a_weighted_level(text)": lambda: sti.a_weighted_level(["a"] * 7),
        "check_requirement(10**400)": lambda: sti.check_requirement(10**400),
        "parse_speech_levels(10**400)": lambda: sti.parse_speech_levels([10**400] * 7),
        "summarise_survey(no zone)": lambda: survey.summarise_survey([{"position": "p", "row": 1, "sti": 0.5}]),
        "summarise_survey(sti text)": lambda: survey.summarise_survey([{**row, "sti": "x"}]),
        "summarise_survey(row None)": lambda: survey.summarise_survey([None]),
        "summarise_survey(rows 3)": lambda: survey.summarise_survey(3),
        "summarise_survey(requirements None)": lambda: survey.summarise_survey([row], None),
        "check_survey_columns(None)": lambda: survey.check_survey_columns(None, "survey"),
        "check_survey_outputs(outputs None)": lambda: survey.check_survey_outputs(_FOLDER[0] / "survey.csv", None),
        "write_survey_tables(None)": lambda: survey.write_survey_tables(None),
        "nominal_frequency(0)": lambda: labels.nominal_frequency(0.0),
        "nominal_frequency(None)": lambda: labels.nominal_frequency(None),
        "header(unknown)": lambda: labels.header("nope"),
        "read_about(items=3)": lambda: report.read_about(items=3),
        "read_about(path=3)": lambda: report.read_about(3),
        "number(10**400)": lambda: checks.number(10**400, "x"),
        "number(10**5000, integer)": lambda: checks.number(10**5000, "x", integer=True),
        "sample_rate(10**400)": lambda: checks.sample_rate(10**400),
        "path(lone surrogate)": lambda: checks.path("\ud800", "x"),
        "listener_spread(None)": lambda: mapping.listener_spread(None),
        "listener_spread([1])": lambda: mapping.listener_spread([1]),
        "listener_labels(rows None)": lambda: mapping.listener_labels(None, ["who"], "who"),
        "fit_listeners(labels short)": lambda: mapping.fit_listeners(_X9, _C9, np.full(9, 20), ["a"] * 3),
        "fit_report_data(None)": lambda: mapping.fit_report_data(None, None),
    }


@pytest.mark.parametrize("name", sorted(_boundary_calls()))
def test_hostile_arguments_are_refused_at_the_boundary(name):
    old = signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(EXAMPLE_SECONDS)
    try:
        with memory_cap(), pytest.raises(envpredict.InputError):
            _boundary_calls()[name]()
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
