"""envpredict: speech intelligibility from envelope modulation.

The public API is imported lazily so that ``import envpredict`` (and the CLI's
``--help``) stay fast; ``envpredict.sti_from_ir`` etc. load their modules on first use.

Main entry points
-----------------
sti_from_ir(ir, fs, ...)          STI (indirect method) + ISO 3382-1 decay figures
sti_from_mtf(mtf, ...)            STI from any modulation transfer matrix
decay_figures(bands, fs, t0)      EDT, T20, T30, C50, C80, D50 per octave band
load_audio(path, channel)         one channel of an audio file, validated
"""

from __future__ import annotations

import importlib
from typing import Any

__version__ = "0.1.0"

# public name -> module that defines it (add one line per public function)
_API: dict[str, str] = {
    "sti_from_ir": "envpredict.indirect",
    "IrResult": "envpredict.indirect",
    "sti_from_mtf": "envpredict.sti",
    "StiResult": "envpredict.sti",
    "qualification_band": "envpredict.sti",
    "decay_figures": "envpredict.decay",
    "reverberation_time": "envpredict.decay",
    "mtf_from_ir": "envpredict.modulation",
    "octave_bands": "envpredict.bands",
    "load_audio": "envpredict.audio",
    "validate_signal": "envpredict.audio",
    "fit_mapping": "envpredict.predict",
    "ScoreMapping": "envpredict.predict",
    "mapping_from_dict": "envpredict.predict",
    "snr_sweep": "envpredict.predict",
    "SweepResult": "envpredict.predict",
    "predict_scores": "envpredict.predict",
    "add_predictions": "envpredict.predict",
    "EnvpredictError": "envpredict.exceptions",
    "InputError": "envpredict.exceptions",
    "ComputationError": "envpredict.exceptions",
    "stipa_signal": "envpredict.signals",
    "full_sti_signals": "envpredict.signals",
    "full_sti_plan": "envpredict.signals",
    "stipa_from_recording": "envpredict.direct",
    "full_sti_from_recordings": "envpredict.direct",
    "DirectResult": "envpredict.direct",
    "stipa_from_file": "envpredict.direct",
    "full_sti_from_files": "envpredict.direct",
    "stoi": "envpredict.correlation",
    "estoi": "envpredict.correlation",
    "correlation_indices": "envpredict.correlation",
    "CorrelationResult": "envpredict.correlation",
    "pair_indices": "envpredict.pair",
    "pair_from_files": "envpredict.pair",
    "PairResult": "envpredict.pair",
    "speech_sti": "envpredict.pair",
    "run_batch": "envpredict.batch",
    "read_results": "envpredict.batch",
    "compare_conditions": "envpredict.stats",
    "inspect_signal": "envpredict.timescales",
    "inspect_file": "envpredict.timescales",
    "InspectResult": "envpredict.timescales",
    "write_report": "envpredict.report",
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
