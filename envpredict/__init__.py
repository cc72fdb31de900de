"""envpredict: speech intelligibility from envelope modulation.

The public API is imported lazily so that ``import envpredict`` (and the CLI's
``--help``) stay fast; ``envpredict.sti_from_ir`` etc. load their modules on first use.

Naming
------
Each job has an array-level function that takes samples (``x, fs``) or numbers, and
a file-level one that takes paths, checks every option before it reads any audio,
and returns the same result: its name is the array function's with ``_file`` or
``_files`` at the end (``sti_from_ir`` / ``sti_from_ir_file``, ``snr_sweep`` /
``snr_sweep_files``, ``compare_conditions`` / ``compare_conditions_file``), or
``X_from_file(s)`` where the array function reads ``X_from_recording(s)`` or
``X_indices``. Two file-level names stand for their job as a whole: ``predict_file``
(``predict_scores`` and ``add_predictions`` on a table) and ``run_batch``. Readers of
a stored result are ``read_X``; generators of a test signal are ``X_signal(s)``, and their file-level writers
``write_X_signal(s)``.
Results are frozen dataclasses named ``...Result`` with ``to_dict()``. The command
line calls the file-level functions.

Public names, by job
--------------------
Impulse response (indirect STI, ISO 3382-1 decay figures)
    sti_from_ir, sti_from_ir_file, IrResult, sti_from_mtf, StiResult,
    qualification_band, decay_figures, reverberation_time, mid_frequency,
    mtf_from_ir, octave_bands
Audio
    load_audio, validate_signal, resolve_calibration, write_wav,
    octave_band_levels, octave_band_levels_file
Direct method (test signals and their recordings)
    stipa_signal, full_sti_signals, full_sti_plan, write_stipa_signal,
    StipaSignalResult, write_full_sti_signals, FullStiSignalsResult,
    stipa_from_recording, stipa_from_file, full_sti_from_recordings,
    full_sti_from_files, DirectResult
Impulse response by swept sine
    sweep_spec, exponential_sweep, sweep_signal, write_sweep_signal,
    SweepSignalResult, deconvolve_sweep, deconvolve_sweep_file, DeconvolutionResult
Clean/degraded pairs
    stoi, estoi, correlation_indices, CorrelationResult, pair_indices,
    pair_from_files, PairResult, speech_sti
Two ears (better ear per octave band)
    ir_ears, ir_ears_file, stipa_ears, stipa_ears_file, pair_ears, pair_ears_file,
    better_ear_sti, EarsResult
Envelope-power index
    sepsm, SepsmResult
Inspection of a recording
    inspect_signal, inspect_file, InspectResult, yin_f0, F0Track
Index-to-score mappings
    fit_mapping, fit_mapping_file, ScoreMapping, mapping_from_dict, read_mapping,
    published_mapping, published_mapping_names, predict_scores, add_predictions, predict_file
Active speech level (ITU-T P.56 method B)
    active_speech_level, ActiveLevel
SNR sweeps and the SRT
    snr_sweep, snr_sweep_files, snr_sweep_sentences, SweepResult
Stimuli of a listening test
    write_stimuli, write_stimuli_files, StimuliResult
Corpora
    run_batch, read_results, compare_conditions, compare_conditions_file,
    compare_all_pairs, compare_all_pairs_file
Site surveys
    run_survey, SurveyResult, summarise_survey, parse_requirement
Design stage (prediction from a room model)
    predict_design, predict_design_file, DesignResult, read_scene
Listeners with hearing loss
    parse_audiogram, read_audiogram, age_audiogram, Audiogram
Reports
    write_report
Demo
    rate_demo_site, DemoResult
Errors
    EnvpredictError, InputError, ComputationError
"""

from __future__ import annotations

import importlib
from typing import Any

__version__ = "0.1.0"

# public name -> module that defines it (add one line per public function)
_API: dict[str, str] = {
    # impulse response -> STI and decay figures
    "sti_from_ir": "envpredict.indirect",
    "sti_from_ir_file": "envpredict.indirect",
    "IrResult": "envpredict.indirect",
    "sti_from_mtf": "envpredict.sti",
    "StiResult": "envpredict.sti",
    "qualification_band": "envpredict.sti",
    "decay_figures": "envpredict.decay",
    "reverberation_time": "envpredict.decay",
    "mid_frequency": "envpredict.decay",
    "mtf_from_ir": "envpredict.modulation",
    "octave_bands": "envpredict.bands",
    # audio
    "load_audio": "envpredict.audio",
    "octave_band_levels": "envpredict.audio",
    "octave_band_levels_file": "envpredict.audio",
    "validate_signal": "envpredict.audio",
    "resolve_calibration": "envpredict.audio",
    "write_wav": "envpredict.audio",
    # direct method: test signals and their recordings
    "stipa_signal": "envpredict.signals",
    "full_sti_signals": "envpredict.signals",
    "full_sti_plan": "envpredict.signals",
    "write_stipa_signal": "envpredict.signals",
    "StipaSignalResult": "envpredict.signals",
    "write_full_sti_signals": "envpredict.signals",
    "FullStiSignalsResult": "envpredict.signals",
    # impulse response by swept sine
    "sweep_spec": "envpredict.sinesweep",
    "exponential_sweep": "envpredict.sinesweep",
    "sweep_signal": "envpredict.sinesweep",
    "write_sweep_signal": "envpredict.sinesweep",
    "SweepSignalResult": "envpredict.sinesweep",
    "deconvolve_sweep": "envpredict.deconvolve",
    "deconvolve_sweep_file": "envpredict.deconvolve",
    "DeconvolutionResult": "envpredict.deconvolve",
    "stipa_from_recording": "envpredict.direct",
    "full_sti_from_recordings": "envpredict.direct",
    "DirectResult": "envpredict.direct",
    "stipa_from_file": "envpredict.direct",
    "full_sti_from_files": "envpredict.direct",
    # clean/degraded pairs
    "stoi": "envpredict.correlation",
    "estoi": "envpredict.correlation",
    "correlation_indices": "envpredict.correlation",
    "CorrelationResult": "envpredict.correlation",
    "pair_indices": "envpredict.pair",
    "pair_from_files": "envpredict.pair",
    "PairResult": "envpredict.pair",
    "speech_sti": "envpredict.pair",
    # two ears
    "ir_ears": "envpredict.binaural",
    "ir_ears_file": "envpredict.binaural",
    "stipa_ears": "envpredict.binaural",
    "stipa_ears_file": "envpredict.binaural",
    "pair_ears": "envpredict.binaural",
    "pair_ears_file": "envpredict.binaural",
    "better_ear_sti": "envpredict.binaural",
    "EarsResult": "envpredict.binaural",
    # envelope-power index
    "sepsm": "envpredict.envpower",
    "SepsmResult": "envpredict.envpower",
    # inspection of a recording
    "inspect_signal": "envpredict.timescales",
    "inspect_file": "envpredict.timescales",
    "InspectResult": "envpredict.timescales",
    "yin_f0": "envpredict.pitch",
    "F0Track": "envpredict.pitch",
    # index -> score mappings
    "fit_mapping": "envpredict.mapping",
    "fit_mapping_file": "envpredict.mapping",
    "ScoreMapping": "envpredict.mapping",
    "mapping_from_dict": "envpredict.mapping",
    "read_mapping": "envpredict.mapping",
    "published_mapping": "envpredict.mapping",
    "published_mapping_names": "envpredict.mapping",
    "predict_scores": "envpredict.mapping",
    "add_predictions": "envpredict.mapping",
    "predict_file": "envpredict.mapping",
    # active speech level
    "active_speech_level": "envpredict.speechlevel",
    "ActiveLevel": "envpredict.speechlevel",
    # SNR sweeps
    "snr_sweep": "envpredict.sweep",
    "snr_sweep_files": "envpredict.sweep",
    "snr_sweep_sentences": "envpredict.sweep",
    "SweepResult": "envpredict.sweep",
    # stimuli
    "write_stimuli": "envpredict.stimuli",
    "write_stimuli_files": "envpredict.stimuli",
    "StimuliResult": "envpredict.stimuli",
    # corpora: batches, result tables, comparisons
    "run_batch": "envpredict.batch",
    "run_survey": "envpredict.survey",
    "SurveyResult": "envpredict.survey",
    "summarise_survey": "envpredict.survey",
    "parse_requirement": "envpredict.survey",
    "read_results": "envpredict.tables",
    "compare_conditions": "envpredict.stats",
    "compare_conditions_file": "envpredict.stats",
    # design stage: prediction from a room model
    "predict_design": "envpredict.design",
    "predict_design_file": "envpredict.design",
    "DesignResult": "envpredict.design",
    "read_scene": "envpredict.roommodel",
    # listeners with hearing loss (audiograms, ISO 7029 age presets)
    "parse_audiogram": "envpredict.hearing",
    "read_audiogram": "envpredict.tables",
    "age_audiogram": "envpredict.hearing",
    "Audiogram": "envpredict.hearing",
    "compare_all_pairs": "envpredict.stats",
    "compare_all_pairs_file": "envpredict.stats",
    # reports
    "write_report": "envpredict.report",
    # the bundled demo site
    "rate_demo_site": "envpredict.demo",
    "DemoResult": "envpredict.demo",
    # errors
    "EnvpredictError": "envpredict.exceptions",
    "InputError": "envpredict.exceptions",
    "ComputationError": "envpredict.exceptions",
}

__all__ = sorted(_API) + ["__version__"]


def __getattr__(name: str) -> Any:
    mod = _API.get(name)
    if mod is None:
        raise AttributeError(f"module 'envpredict' has no attribute {name!r}")
    value = getattr(importlib.import_module(mod), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return __all__
