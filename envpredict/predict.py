"""Former home of the score mappings and the SNR sweep, kept so old imports still work.

The psychometric mapping (fit, intervals, goodness of fit, predicted scores) lives in
:mod:`envpredict.mapping`; the SNR sweep and the SRT in :mod:`envpredict.sweep`. New
code imports from those modules (or from the package: ``envpredict.fit_mapping``).
"""

from __future__ import annotations

from .mapping import (  # noqa: F401
    CI_LEVEL,
    COCHRAN_MAX_SHARE,
    COCHRAN_MIN_EXPECTED,
    MAP_FORMAT,
    MAP_VERSION,
    MAX_ETA_SPAN,
    MAX_GUESS_PLUS_LAPSE,
    MIN_DISTINCT_POINTS,
    SHAPES,
    GoodnessOfFit,
    PredictedTable,
    ScoreData,
    ScoreMapping,
    add_predictions,
    check_guess_lapse,
    check_shape,
    fit_mapping,
    fit_mapping_file,
    mapping_from_dict,
    predict_file,
    predict_scores,
    read_mapping,
    scores_from_rows,
)
from .sweep import (  # noqa: F401
    LEVEL_CONVENTIONS,
    MAX_SEGMENTS,
    MAX_SNR_POINTS,
    MONOTONE_TOLERANCE,
    SWEEP_INDICES,
    SweepResult,
    SweepTarget,
    default_index_functions,
    parse_snr_range,
    snr_sweep,
    snr_sweep_files,
)
