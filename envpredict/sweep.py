"""SNR sweeps: predicted index and score against SNR, and the speech reception threshold.

:func:`snr_sweep` mixes noise with clean speech at a list of SNRs (several noise
segments per SNR, optionally after convolving the speech with an impulse response),
computes an index per mixture and, with a mapping (:mod:`envpredict.mapping`), the
predicted score; it reports the SNR at target scores (the predicted speech reception
threshold, SRT, at 50 % by default) with a confidence interval from the spread over
noise segments, and the slope of the predicted psychometric function at each target
in %/dB. :func:`snr_sweep_files` does the same from audio files (the options are
checked before the audio is read). Pure functions on arrays otherwise: no printing.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable, Sequence
from collections.abc import Mapping as MappingType
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from . import standards as std
from .exceptions import ComputationError, InputError
from .mapping import CI_LEVEL, ScoreMapping
from .results import jsonable
from .speechlevel import ActiveLevel, active_speech_level

#: Sweep limits: number of SNR points and noise segments (judgement: beyond these a
#: sweep is a mistake in the options, not a plan).
MAX_SNR_POINTS: int = 401
MAX_SEGMENTS: int = 100

#: Index names the sweep knows how to compute with the package's own code; the first
#: is the default.
SWEEP_INDICES: tuple[str, ...] = ("stoi", "estoi", "ssti", "ssti_regression", "sepsm")
DEFAULT_INDEX: str = SWEEP_INDICES[0]

#: Indices computed from the mixture and the noise alone (not from the clean speech):
#: the envelope-power index (:func:`envpredict.envpower.sepsm`). Its value in the sweep
#: is SNR_env in dB; without a mapping its scores come from the ideal observer of
#: Jørgensen & Dau 2011 (material-specific). With a processing chain the processed
#: noise alone is separated by phase inversion (Hagerman & Olofsson 2004): the chain is
#: run on speech + noise and on speech - noise.
NOISE_INDICES: tuple[str, ...] = ("sepsm",)

#: Default SNRs of a sweep, dB (:data:`envpredict.standards.SWEEP_SNR_FROM_DB` ...).
DEFAULT_SNR_RANGE: str = f"{std.SWEEP_SNR_FROM_DB:g}:{std.SWEEP_SNR_TO_DB:g}:{std.SWEEP_SNR_STEP_DB:g}"
DEFAULT_SNR_DB: tuple[float, ...] = tuple(
    std.SWEEP_SNR_FROM_DB + std.SWEEP_SNR_STEP_DB * i
    for i in range(int(round((std.SWEEP_SNR_TO_DB - std.SWEEP_SNR_FROM_DB) / std.SWEEP_SNR_STEP_DB)) + 1)
)

#: Shortest clean speech a sweep takes, s (STOI needs several of its 384 ms segments;
#: Taal 2011; judgement: 1 s).
MIN_SPEECH_S: float = 1.0

#: TO is on the FROM:TO:STEP grid when it lies within this many steps of a grid point
#: (rounding of decimal steps such as 0.1 dB).
GRID_SLACK: float = 1e-9

#: Two target percents closer than this are the same target (finds the SRT target).
SAME_TARGET_PERCENT: float = 1e-9

#: A fall of the mean index smaller than this between neighbouring SNRs is numerical
#: noise, not a reversal worth a note (judgement).
MONOTONE_TOLERANCE: float = 1e-6
# ---------------------------------------------------------------------------
# SNR sweep
# ---------------------------------------------------------------------------

def parse_snr_range(text: str) -> np.ndarray:
    """``"FROM:TO:STEP"`` in dB -> increasing array of SNRs including TO when on the grid.

    Raises
    ------
    InputError
        For text that is not a range ``start:stop:step`` or a list of numbers.
    """
    parts = str(text).split(":")
    fix = "give --snr FROM:TO:STEP in dB, e.g. --snr=-15:15:3"
    if len(parts) != 3:
        raise InputError(f"SNR range '{text}' is not FROM:TO:STEP", fix)
    try:
        lo, hi, step = (float(p) for p in parts)
    except ValueError:
        raise InputError(f"SNR range '{text}' holds something that is not a number", fix) from None
    if not all(math.isfinite(v) for v in (lo, hi, step)):
        raise InputError(f"SNR range '{text}' is not finite", fix)
    if step <= 0 or hi <= lo:
        raise InputError(f"SNR range '{text}' needs FROM < TO and STEP > 0", fix)
    count = math.floor((hi - lo) / step + GRID_SLACK) + 1
    if count < 2:
        raise InputError(f"SNR range '{text}' has fewer than two points", "use a smaller STEP")
    if count > MAX_SNR_POINTS:
        raise InputError(f"SNR range '{text}' has {count} points (at most {MAX_SNR_POINTS})", "use a larger STEP")
    return np.round(lo + step * np.arange(count), 10)


def _as_float(v: Any, name: str) -> float:
    for attr in (name, "value", "index"):
        if hasattr(v, attr) and not callable(getattr(v, attr)):
            v = getattr(v, attr)
            break
    return float(v)


def default_index_functions() -> dict[str, Callable[[np.ndarray, np.ndarray, int], float]]:
    """The package's own index functions, ``name -> f(clean, degraded, fs) -> float``.

    Imported lazily: ``stoi`` and ``estoi`` from :mod:`envpredict.correlation`
    (Taal 2011; Jensen 2016), ``ssti`` (speech-based STI) from :mod:`envpredict.pair`.
    """

    def _stoi(c, d, fs):
        from .correlation import stoi

        return _as_float(stoi(c, d, fs), "stoi")

    def _estoi(c, d, fs):
        from .correlation import estoi

        return _as_float(estoi(c, d, fs), "estoi")

    def _ssti(c, d, fs):
        # the mixtures are aligned by construction: no delay search
        from . import pair

        v = pair.speech_sti(c, d, fs)
        return _as_float(v, "ssti")

    def _ssti_regression(c, d, fs):
        from . import pair

        v = pair.pair_indices(c, d, fs, align=False).ssti_regression
        if v is None:
            raise ComputationError("the speech-based STI cannot be computed for these signals",
                                   "see the valid range in envpredict.pair_indices")
        return _as_float(v, "ssti_regression")

    return {"stoi": _stoi, "estoi": _estoi, "ssti": _ssti, "ssti_regression": _ssti_regression}


class _ObserverMapping:
    """The ideal observer of the envelope-power index as a mapping of SNR_env in dB.

    Duck-typed like :class:`~envpredict.mapping.ScoreMapping` for the sweep: ``percent``,
    ``index_at``, ``derivative`` (proportion per dB), no covariance. p = Phi((k s^q -
    mu_N) / sqrt(sigma_s^2 + sigma_N^2)) with s = 10^(x/10) (Jørgensen & Dau 2011;
    :func:`envpredict.envpower.ideal_observer`).
    """

    index = "sepsm"
    cov = None
    ci_df = None
    index_range = None

    def __init__(self) -> None:
        from scipy.stats import norm

        from .envpower import MATERIAL_NOTE

        self.k, self.q, self.sigma_s, self.m = std.SEPSM_K, std.SEPSM_Q, std.SEPSM_SIGMA_S, std.SEPSM_M
        u = float(norm.ppf(1.0 - 1.0 / self.m))
        self.mu = u + 0.577 / u
        self.sd = math.sqrt(self.sigma_s ** 2 + (1.28255 / u) ** 2)
        self.notes = (MATERIAL_NOTE,)

    def percent(self, x: Any) -> np.ndarray:
        from .envpower import ideal_observer

        return np.asarray(ideal_observer(10.0 ** (np.asarray(x, dtype=float) / 10.0), k=self.k, q=self.q,
                                         sigma_s=self.sigma_s, m=self.m))

    def derivative(self, x: Any) -> np.ndarray:
        from scipy.stats import norm

        s = 10.0 ** (np.asarray(x, dtype=float) / 10.0)
        z = (self.k * s ** self.q - self.mu) / self.sd
        # dp/dx = phi(z) * dz/ds * ds/dx, ds/dx = s ln(10) / 10
        return norm.pdf(z) * self.k * self.q * s ** self.q / self.sd * math.log(10.0) / 10.0

    def index_at(self, percent: float) -> float:
        from scipy.stats import norm

        p = float(percent) / 100.0
        floor = float(norm.cdf(-self.mu / self.sd))
        if not math.isfinite(p) or not floor < p < 1.0:
            raise InputError(f"target {percent:g} % is outside the range of the ideal observer "
                             f"({100 * floor:.2g} % to 100 %, exclusive)", "choose a target between them")
        d = self.sd * float(norm.ppf(p)) + self.mu
        return 10.0 * math.log10((d / self.k) ** (1.0 / self.q))

    def quantile(self) -> float:
        return math.nan

    def to_dict(self) -> dict:
        return {
            "index": "sepsm", "kind": "ideal observer",
            "formula": "p = Phi((k*SNR_env^q - mu_N) / sqrt(sigma_s^2 + sigma_N^2)), SNR_env = 10^(x/10)",
            "params": {"k": self.k, "q": self.q, "sigma_s": self.sigma_s, "m": self.m},
            "source": "Jørgensen & Dau 2011, JASA 130(3):1475-1487 (parameters from memory)",
            "index_range": None, "notes": list(self.notes),
        }


@dataclass(frozen=True)
class SweepTarget:
    """The SNR at which the predicted score reaches ``percent``.

    ``snr_db`` is where the mean index curve (linearly interpolated between the swept
    SNRs) reaches the index value the mapping gives for ``percent``; ``ci_low`` /
    ``ci_high`` is ``snr_db -+ t * sd / sqrt(n)`` over the per-segment crossings
    (Student t, ``n`` noise segments); ``slope_percent_per_db`` the slope of the
    predicted psychometric function there. ``map_ci_low`` / ``map_ci_high`` is the
    separate interval from the uncertainty of the mapping itself: the SNRs where the
    mean index curve reaches ``index -+ z * se`` (``se`` of the inverse mapping by the
    delta method from the fitted covariance); ``None`` without a covariance or when an
    end falls outside the swept range. ``None`` where the target is not reached inside
    the swept range. With a processing chain, ``unprocessed_snr_db`` is the same target's
    SNR without the chain (when it was swept too) and ``benefit_db`` the difference.
    With several sentences (:func:`snr_sweep_sentences`), ``sentence_ci_*`` is the
    interval from the spread of the per-sentence crossings, ``combined_ci_*`` the one
    from sentences and noise segments together (standard errors added in quadrature,
    Welch-Satterthwaite degrees of freedom) and ``total_ci_*`` adds the mapping's
    uncertainty.
    """

    percent: float
    index: float
    snr_db: float | None
    ci_low: float | None
    ci_high: float | None
    segment_sd_db: float | None
    segment_snr_db: tuple[float | None, ...]
    slope_percent_per_db: float | None
    map_ci_low: float | None = None
    map_ci_high: float | None = None
    note: str = ""
    unprocessed_snr_db: float | None = None
    sentence_sd_db: float | None = None
    sentence_ci_low: float | None = None
    sentence_ci_high: float | None = None
    combined_ci_low: float | None = None
    combined_ci_high: float | None = None
    total_ci_low: float | None = None
    total_ci_high: float | None = None

    def to_dict(self) -> dict:
        return jsonable({
            "percent": self.percent, "index_value": self.index, "snr_db": self.snr_db, "ci_low": self.ci_low,
            "ci_high": self.ci_high, "segment_sd_db": self.segment_sd_db,
            "segment_snr_db": list(self.segment_snr_db),
            "slope_percent_per_db": self.slope_percent_per_db,
            "map_ci_low": self.map_ci_low, "map_ci_high": self.map_ci_high, "note": self.note or None,
            "unprocessed_snr_db": self.unprocessed_snr_db, "benefit_db": self.benefit_db,
            "sentence_sd_db": self.sentence_sd_db, "sentence_ci_low": self.sentence_ci_low,
            "sentence_ci_high": self.sentence_ci_high, "combined_ci_low": self.combined_ci_low,
            "combined_ci_high": self.combined_ci_high, "total_ci_low": self.total_ci_low,
            "total_ci_high": self.total_ci_high,
        })

    @property
    def benefit_db(self) -> float | None:
        """Predicted benefit of the processing chain at this target, dB: the SNR the
        unprocessed mixtures need minus the SNR the processed ones need (``None`` unless
        both were found)."""
        if self.unprocessed_snr_db is None or self.snr_db is None:
            return None
        return self.unprocessed_snr_db - self.snr_db


@dataclass(frozen=True)
class SweepResult:
    """Index (and predicted score) against SNR, and the SNRs at target scores.

    Attributes
    ----------
    snr_db : swept SNRs, dB, increasing.
    index_name : the index computed.
    index : mean index over noise segments at each SNR (for ``"sepsm"``: SNR_env in dB,
        the mean of the segments' dB values).
    index_segments : (n_snr, n_segments) index per SNR and noise segment.
    index_sd : standard deviation over segments at each SNR.
    predicted_percent : mapping applied to the mean index, or ``None`` without a mapping.
    targets : one :class:`SweepTarget` per requested percent (empty without a mapping).
    level : ``"speech"`` or ``"mixture"`` (see :func:`snr_sweep`).
    snr_reference : ``"active"`` or ``"long-term"``: the speech level the SNR is
        referred to (see :data:`SNR_REFERENCES`).
    speech_level : the active and long-term level of the speech (ITU-T P.56 method B)
        and its activity factor, or ``None`` where P.56 finds no active level (only
        with the long-term reference).
    segment_offsets_s : start of each noise segment in the noise signal, seconds.
    reverberant : whether the speech went through an impulse response.
    processed : whether the mixtures went through a processing chain.
    fs : sample rate, Hz.
    duration_s : length of each mixture, seconds.
    mapping : the mapping's MAP.json content, or ``None``.
    notes : cautions.
    band_snr_env_db : with the envelope-power index, (n_snr, bands) SNR_env of each
        gammatone band (root sum of squares over its modulation filters), dB, mean over
        noise segments (and sentences); else ``None``.
    bands_hz : the gammatone bands of ``band_snr_env_db``.
    """

    snr_db: np.ndarray
    index_name: str
    index: np.ndarray
    index_segments: np.ndarray
    index_sd: np.ndarray
    predicted_percent: np.ndarray | None
    targets: tuple[SweepTarget, ...]
    level: str
    segment_offsets_s: tuple[float, ...]
    reverberant: bool
    processed: bool
    fs: int
    duration_s: float
    mapping: dict | None = None
    notes: tuple[str, ...] = field(default_factory=tuple)
    snr_reference: str = std.SWEEP_SNR_REFERENCE
    speech_level: ActiveLevel | None = None
    sentences: tuple[str, ...] = ()
    sentence_sd: np.ndarray | None = None
    sentence_activity: tuple[float | None, ...] = ()
    band_snr_env_db: np.ndarray | None = None
    bands_hz: tuple[float, ...] = ()

    @property
    def srt_db(self) -> float | None:
        """Predicted SRT: the SNR of the 50 % target (:data:`envpredict.standards.SRT_PERCENT`), if
        requested and reached."""
        for t in self.targets:
            if abs(t.percent - std.SRT_PERCENT) < SAME_TARGET_PERCENT:
                return t.snr_db
        return None

    def to_dict(self) -> dict:
        srt = next((t for t in self.targets if abs(t.percent - std.SRT_PERCENT) < SAME_TARGET_PERCENT), None)
        lev = self.speech_level
        d = self._dict(srt, lev)
        if self.index_name in NOISE_INDICES:
            d[self.index_name] = self._sepsm_dict()
        return d

    def _sepsm_dict(self) -> dict:
        """The ``sepsm`` object of the JSON: SNR_env in dB per SNR (as ``snr_env_db`` of a
        pair), the ideal observer's percent correct, and SNR_env per band."""
        from .envpower import MATERIAL_NOTE

        obs = _ObserverMapping()
        return jsonable({
            "index": "sepsm",
            "snr_env_db": np.round(self.index, 3),
            "percent_correct": np.round(obs.percent(self.index), 2),
            "bands_hz": self.bands_hz,
            "modulation_hz": std.SEPSM_MODULATION_HZ,
            "band_snr_env_db": None if self.band_snr_env_db is None else np.round(self.band_snr_env_db, 2),
            "method": "sEPSM (Jørgensen & Dau 2011, JASA 130(3):1475-1487)",
            "noise_alone": ("the noise segment as mixed" if not self.processed else
                            "separated by phase inversion: the chain's outputs for speech + noise (a) and speech - "
                            "noise (b), noise = (a - b)/2 (Hagerman & Olofsson 2004)"),
            "notes": [MATERIAL_NOTE],
        })

    def _dict(self, srt, lev) -> dict:
        return jsonable({
            "snr_db": self.snr_db,
            "index": self.index_name,
            self.index_name: np.round(self.index, 5),
            "index_sd": np.round(self.index_sd, 5),
            "index_segments": np.round(self.index_segments, 5),
            "predicted_percent": None if self.predicted_percent is None else np.round(self.predicted_percent, 3),
            "targets": [t.to_dict() for t in self.targets],
            "srt_db": None if srt is None else srt.snr_db,
            "slope_at_srt_percent_per_db": None if srt is None else srt.slope_percent_per_db,
            "level_convention": self.level,
            "level_convention_text": LEVEL_CONVENTIONS[self.level],
            "snr_reference": self.snr_reference,
            "snr_reference_text": SNR_REFERENCES[self.snr_reference],
            "activity_factor": None if lev is None else round(lev.activity_factor, 4),
            "speech_active_level_db": None if lev is None else round(lev.active_level_db, 2),
            "speech_long_term_level_db": None if lev is None else round(lev.long_term_level_db, 2),
            "n_sentences": max(1, len(self.sentences)),
            "sentences": list(self.sentences),
            "sentence_sd": None if self.sentence_sd is None else np.round(self.sentence_sd, 5),
            "sentence_activity_factors": [None if a is None else round(a, 4) for a in self.sentence_activity],
            "n_segments": len(self.segment_offsets_s),
            "segment_offsets_s": self.segment_offsets_s,
            "reverberant": self.reverberant,
            "processed": self.processed,
            "fs": self.fs,
            "duration_s": self.duration_s,
            "mapping": self.mapping,
            "cautions": [],
            "notes": list(self.notes),
        })


LEVEL_CONVENTIONS: dict[str, str] = {
    "speech": ("the speech (after the impulse response, if any) stays at its level and each noise segment is "
               "scaled to give the SNR"),
    "mixture": ("the noise is scaled as for 'speech', then each mixture is rescaled to the speech's RMS level, so "
                "the presentation level stays constant as the SNR changes"),
}

#: What the SNR is referred to. The default (:data:`envpredict.standards.SWEEP_SNR_REFERENCE`)
#: is the active speech level: speech tests set their levels that way (ITU-T P.56), and
#: the SNR then does not fall when a sentence has longer pauses. The long-term reference
#: is the convention of envpredict before it measured active levels.
SNR_REFERENCES: dict[str, str] = {
    "active": ("SNR = active speech level (ITU-T P.56 method B, pauses excluded) minus the noise segment's "
               "long-term level, over the length of the speech"),
    "long-term": ("SNR = 10 log10(mean speech power / mean noise power) over the length of the speech, "
                  "pauses included"),
}


def _crossing(snr: np.ndarray, curve: np.ndarray, level: float) -> tuple[float | None, int | None]:
    """First SNR where ``curve`` (linear between points) rises to ``level``, and its segment."""
    if curve[0] >= level:
        return None, None
    for i in range(curve.size - 1):
        c0, c1 = curve[i], curve[i + 1]
        if c0 < level <= c1:
            s = snr[i] + (level - c0) * (snr[i + 1] - snr[i]) / (c1 - c0)
            return float(s), i
    return None, None


def load_process(spec: str) -> Callable[[np.ndarray, int], np.ndarray]:
    """The processing chain named ``"MODULE:FUNCTION"`` (a module on the Python path or the
    current folder, or a ``path/to/file.py``), wrapped so that an exception it raises
    becomes one :class:`InputError` naming it.

    The function is called as ``FUNCTION(mixture, fs)`` and must return the processed
    mixture, of the same length and time-aligned (see :func:`snr_sweep`).

    Raises
    ------
    InputError
        For a ``spec`` that is not ``MODULE:FUNCTION``, a module or file that cannot be
        imported, a name that is not a function of it; the returned chain raises it for
        an exception of the function or an output that is not a mixture of the same length.
    """
    import importlib
    import importlib.util
    import sys
    from pathlib import Path

    fix = "give --process MODULE:FUNCTION, a function f(mixture, fs) -> processed mixture"
    text = str(spec).strip()
    mod_name, sep, func_name = text.rpartition(":")
    if not sep or not mod_name or not func_name.isidentifier():
        raise InputError(f"--process '{spec}' is not MODULE:FUNCTION", fix)
    try:
        if mod_name.endswith(".py") or "/" in mod_name or "\\" in mod_name:
            path = Path(mod_name)
            if not path.is_file():
                raise InputError(f"--process '{spec}': file '{path}' does not exist", fix)
            loader_spec = importlib.util.spec_from_file_location(f"envpredict_process_{path.stem}", path)
            module = importlib.util.module_from_spec(loader_spec)
            loader_spec.loader.exec_module(module)
        else:
            added = "" not in sys.path and os.getcwd() not in sys.path
            if added:
                sys.path.insert(0, os.getcwd())
            try:
                module = importlib.import_module(mod_name)
            finally:
                if added:
                    sys.path.remove(os.getcwd())
    except InputError:
        raise
    except Exception as e:  # noqa: BLE001 -- any failure of the user's module is reported in one line
        raise InputError(f"--process '{spec}' cannot be imported ({type(e).__name__}: {e})", fix) from None
    func = getattr(module, func_name, None)
    if not callable(func):
        raise InputError(f"--process '{spec}': '{func_name}' is not a function of '{mod_name}'", fix)

    def chain(mix: np.ndarray, fs: int) -> np.ndarray:
        try:
            return func(mix, fs)
        except Exception as e:  # noqa: BLE001 -- the user's chain failed: say so in one line
            raise InputError(f"the processing chain '{spec}' raised {type(e).__name__}: {e}",
                             "fix the function (it is called as FUNCTION(mixture, fs))") from None

    chain.spec = text  # the name results and manifests give the chain
    return chain


def _processed(process: Callable[[np.ndarray, int], np.ndarray], mix: np.ndarray, fs: int,
               snr: float) -> np.ndarray:
    out = np.asarray(process(mix, fs), dtype=float).reshape(-1)
    if out.shape != mix.shape or not np.all(np.isfinite(out)):
        raise ComputationError(
            f"the processing chain returned {out.size} samples (or non-finite values) for a "
            f"{mix.size}-sample mixture at {snr:g} dB SNR",
            "make it return a finite signal of the same length, time-aligned with its input")
    return out


def check_snr_reference(snr_reference: Any) -> str:
    """``"active"`` or ``"long-term"`` (``"long_term"`` and ``"longterm"`` accepted).

    Raises
    ------
    InputError
        For anything else.
    """
    ref = str(snr_reference).strip().lower().replace("_", "-")
    ref = "long-term" if ref == "longterm" else ref
    if ref not in SNR_REFERENCES:
        raise InputError(f"unknown SNR reference '{snr_reference}'", "use --snr-reference active or long-term")
    return ref


def _check_options(snr_db: Any, index: str, funcs: MappingType, level: str, n_segments: Any,
                   mapping: ScoreMapping | None, targets: Sequence[float]
                   ) -> tuple[np.ndarray, str, list[float], list[float]]:
    """Refuse bad sweep options (before any audio work); the SNRs, index name and targets."""
    name = str(index).strip().lower()
    if name not in funcs and name not in NOISE_INDICES:
        raise InputError(f"unknown index '{index}' for the sweep",
                         f"use one of {', '.join(sorted(set(funcs) | set(NOISE_INDICES)))}")
    if level not in LEVEL_CONVENTIONS:
        raise InputError(f"unknown level convention '{level}'", "use 'speech' or 'mixture'")
    try:
        snrs = np.asarray(snr_db, dtype=float).reshape(-1)
    except (TypeError, ValueError):
        raise InputError("SNRs must be numbers", "give a list of SNRs in dB") from None
    if snrs.size < 2 or not np.all(np.isfinite(snrs)) or np.any(np.diff(snrs) <= 0):
        raise InputError("the SNRs must be at least two finite values, strictly increasing",
                         "give e.g. --snr=-15:15:3")
    if snrs.size > MAX_SNR_POINTS:
        raise InputError(f"{snrs.size} SNR points (at most {MAX_SNR_POINTS})", "use a larger step")
    if not isinstance(n_segments, (int, np.integer)) or not 1 <= n_segments <= MAX_SEGMENTS:
        raise InputError(f"number of noise segments {n_segments!r} is outside 1..{MAX_SEGMENTS}",
                         "give e.g. 5 segments")
    if mapping is None and name in NOISE_INDICES:
        obs = _ObserverMapping()
        target_list = [float(t) for t in targets]
        return snrs, name, target_list, [obs.index_at(t) for t in target_list]
    if mapping is not None:
        if not isinstance(mapping, ScoreMapping):
            raise InputError("mapping is not a ScoreMapping", "fit one with fit_mapping or load a MAP.json")
        if mapping.index != name:
            raise InputError(f"the mapping takes '{mapping.index}' but the sweep computes '{name}'",
                             f"use --index {mapping.index} or a mapping fitted on {name}")
        target_list = [float(t) for t in targets]
        x_targets = [mapping.index_at(t) for t in target_list]  # refuses unreachable targets
    else:
        target_list, x_targets = [], []
    return snrs, name, target_list, x_targets


def snr_sweep(
    clean: np.ndarray,
    noise: np.ndarray,
    fs: int,
    *,
    snr_db: Sequence[float] | np.ndarray = DEFAULT_SNR_DB,
    index: str = DEFAULT_INDEX,
    mapping: ScoreMapping | None = None,
    targets: Sequence[float] = (std.SRT_PERCENT,),
    ir: np.ndarray | None = None,
    n_segments: int = std.SWEEP_SEGMENTS,
    level: str = std.SWEEP_LEVEL,
    snr_reference: str = std.SWEEP_SNR_REFERENCE,
    index_functions: MappingType[str, Callable[[np.ndarray, np.ndarray, int], float]] | None = None,
    process: Callable[[np.ndarray, int], np.ndarray] | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> SweepResult:
    """Predicted index and score against SNR, and the SNR at target scores.

    For each SNR and each of ``n_segments`` noise segments (evenly spaced starts in
    ``noise``; the same segments at every SNR, so the curves differ only by the SNR),
    the speech -- ``clean``, or ``clean`` convolved with ``ir`` from its onset
    (ISO 3382-1 A.3.2 onset, so the speech is not delayed) and cut to the length of
    ``clean`` -- is mixed with the segment at the SNR (see :data:`SNR_REFERENCES` and
    :data:`LEVEL_CONVENTIONS`) and the index is computed between ``clean`` and the mixture. The mean index over
    segments is mapped to a predicted score. For each target percent the mapping is
    inverted to an index value ``x_t`` and the SNR where the mean index curve, linear
    between the swept SNRs, first rises to ``x_t`` is reported; the same is done for
    each segment's curve, and the interval is ``snr -+ t_{0.975, n-1} * sd / sqrt(n)``.
    The slope at a target is ``100 * mapping'(x_t) * (index slope of that SNR step)``,
    in % per dB.

    Parameters
    ----------
    clean : clean speech, 1-D, at ``fs``. At least 1 s (STOI needs several 384 ms
        segments; Taal 2011).
    noise : noise recording at ``fs``, at least as long as ``clean`` (longer for
        independent segments).
    fs : sample rate, Hz.
    snr_db : SNRs to sweep, dB, strictly increasing, at least two.
    index : ``"stoi"``, ``"estoi"``, ``"ssti"``, ``"ssti_regression"``, ``"sepsm"`` or a key
        of ``index_functions``. ``"sepsm"`` is the envelope-power index
        (:func:`envpredict.envpower.sepsm`) of the mixture and the noise alone, known by
        construction (with ``process``: separated by phase inversion, the chain run on
        speech + noise and on speech - noise); its value is SNR_env in dB.
    mapping : a :class:`ScoreMapping` for the same index, or ``None`` (index only; for
        ``"sepsm"``, the ideal observer of Jørgensen & Dau 2011 with the parameters of
        their sentence material, so the SRT is where its percent correct crosses 50 %).
    targets : target scores, percent (used only with a mapping).
    ir : impulse response at ``fs`` applied to the speech, or ``None``.
    n_segments : number of noise segments per SNR (1 gives no interval).
    level : ``"speech"`` or ``"mixture"`` level convention.
    snr_reference : ``"active"`` (default) or ``"long-term"``: the speech level the SNR
        is referred to. ``"active"`` is the active speech level of ITU-T P.56 method B
        (:func:`envpredict.speechlevel.active_speech_level`), the level speech tests are
        set by: a researcher who mixes sentences and noise at a predicted SNR with the
        usual tools means this SNR. ``"long-term"`` (speech power over noise power with
        the pauses counted, envpredict's earlier convention) reads
        ``10 log10(1 / activity factor)`` dB higher for the same mixture. The noise's
        level is always its long-term level over the segment.
    index_functions : ``name -> f(clean, degraded, fs) -> float``; defaults to
        :func:`default_index_functions`.
    process : optional processing chain ``process(mixture, fs) -> output`` applied to
        each mixture before the index (e.g. a noise-reduction or hearing-device model);
        the output must keep the length and time alignment of the mixture. The
        predicted benefit of the chain in dB is the SRT without it minus the SRT with it.
    progress : optional callable ``progress(done, total)``.

    Returns
    -------
    SweepResult

    Raises
    ------
    InputError
        For signals refused by the input rule (not numeric, not one channel, empty, NaN/inf,
        silent, clipped, a rate outside the supported range), a noise too short for the segments,
        an unknown index or level,
        or an option out of range.
    ComputationError
        If no level of the sweep gives a number for the index, or (``"sepsm"`` through a
        chain) the chain's outputs for speech + noise and speech - noise are the same, so
        the processed noise alone is silent.
    """
    from scipy.signal import fftconvolve

    from .audio import check_rate, validate_signal
    from .decay import onset_index

    fs = check_rate(fs, "clean speech")
    x = validate_signal(clean, fs, name="clean speech", min_seconds=MIN_SPEECH_S)
    nz = validate_signal(noise, fs, name="noise", allow_clipping=True)
    funcs = dict(index_functions) if index_functions is not None else default_index_functions()
    snrs, name, target_list, x_targets = _check_options(snr_db, index, funcs, level, n_segments, mapping, targets)
    reference = check_snr_reference(snr_reference)
    noise_index = name in NOISE_INDICES and name not in funcs
    user_mapping = mapping
    if mapping is None and noise_index:
        mapping = _ObserverMapping()

    notes: list[str] = []
    speech = x
    if ir is not None:
        h = validate_signal(ir, fs, name="impulse response", allow_clipping=True)
        h = h[onset_index(h):]
        speech = fftconvolve(x, h)[: x.size]
    L = x.size
    if nz.size < L:
        raise InputError(f"the noise ({nz.size / fs:.2f} s) is shorter than the speech ({L / fs:.2f} s)",
                         "give a noise recording at least as long as the speech (longer for several segments)")
    room = nz.size - L
    offsets = np.unique(np.round(np.linspace(0, room, n_segments)).astype(int)) if n_segments > 1 \
        else np.array([0])
    if offsets.size < n_segments:
        raise InputError(
            f"the noise is only {nz.size / fs:.2f} s long: it does not hold {n_segments} different segments "
            f"of {L / fs:.2f} s", "give a longer noise recording or fewer segments")
    if n_segments > 1 and room < (n_segments - 1) * L:
        notes.append(f"the {n_segments} noise segments overlap (noise {nz.size / fs:.1f} s, speech "
                     f"{L / fs:.1f} s): the interval may understate the uncertainty")
    p_speech = float(np.mean(speech * speech))
    if p_speech <= 0:
        raise InputError("the speech after the impulse response is silent", "check the impulse response")
    speech_level = _speech_level(speech, fs, reference)
    p_ref = speech_level.active_mean_square if reference == "active" else p_speech

    f = funcs.get(name)
    total = snrs.size * offsets.size
    vals = np.empty((snrs.size, offsets.size))
    bands_db: list[list[np.ndarray]] = [[] for _ in snrs]
    bands_hz: tuple[float, ...] = ()
    done = 0
    for j, o in enumerate(offsets):
        seg = nz[o:o + L]
        p_noise = float(np.mean(seg * seg))
        if p_noise <= 0:
            raise InputError(f"noise segment at {o / fs:.2f} s is silent", "give a noise without silent stretches")
        for i, s in enumerate(snrs):
            g = math.sqrt(p_ref / (p_noise * 10.0 ** (s / 10.0)))
            alone = g * seg
            mix = speech + alone
            if level == "mixture":
                r = math.sqrt(p_speech / float(np.mean(mix * mix)))
                mix, alone = mix * r, alone * r
            if noise_index:
                if process is not None:
                    # phase inversion: the chain's output for speech - noise gives the noise alone
                    a = _processed(process, mix, fs, s)
                    b = _processed(process, mix - 2.0 * alone, fs, s)
                    mix, alone = a, 0.5 * (a - b)
                v, band, bands_hz = _sepsm_point(mix, alone, fs, s)
                bands_db[i].append(band)
            else:
                if process is not None:
                    mix = _processed(process, mix, fs, s)
                v = float(f(x, mix, fs))
            if not math.isfinite(v):
                raise ComputationError(f"the {name} of the mixture at {s:g} dB SNR is not a number",
                                       "check the signals (long silences?)")
            vals[i, j] = v
            done += 1
            if progress is not None:
                progress(done, total)

    mean = vals.mean(axis=1)
    sd = vals.std(axis=1, ddof=1) if offsets.size > 1 else np.zeros(snrs.size)
    falls = np.flatnonzero(np.diff(mean) < -MONOTONE_TOLERANCE)
    if falls.size:
        i = int(falls[0])
        notes.append(f"the mean {name} falls between {snrs[i]:g} and {snrs[i + 1]:g} dB SNR: the curve is not "
                     "monotonic (fluctuating noise?); target SNRs use the first crossing")
    predicted = None if mapping is None else np.asarray(mapping.percent(mean), dtype=float)
    z_map = mapping.quantile() if mapping is not None else math.nan
    out_targets = []
    for pct, xt in zip(target_list, x_targets):
        srt, i = _crossing(snrs, mean, xt)
        seg_srts = [_crossing(snrs, vals[:, j], xt)[0] for j in range(offsets.size)]
        note = ""
        lo = hi = seg_sd = slope = None
        if srt is None:
            if mean[0] >= xt:
                note = (f"{pct:g} % is exceeded already at the lowest SNR ({snrs[0]:g} dB): "
                        "lower FROM in the SNR range")
            else:
                note = (f"{pct:g} % is not reached up to the highest SNR ({snrs[-1]:g} dB gives "
                        f"{float(mapping.percent(mean[-1])):.1f} %): raise TO, or the score is limited "
                        "by something other than the noise")
        else:
            slope = float(100.0 * mapping.derivative(xt) * (mean[i + 1] - mean[i]) / (snrs[i + 1] - snrs[i]))
            if offsets.size < 2:
                note = "one noise segment: no interval"
            elif any(v is None for v in seg_srts):
                note = "some noise segments do not reach the target inside the swept range: no interval"
            else:
                seg_sd, half, _, _ = _mean_interval(seg_srts)
                lo, hi = srt - half, srt + half
        m_lo = m_hi = None
        if srt is not None and mapping.cov is not None:
            m_lo, m_hi = _mapping_interval(snrs, mean, xt, z_map * mapping.index_sd_at(pct))
        out_targets.append(SweepTarget(
            percent=pct, index=float(xt), snr_db=srt, ci_low=lo, ci_high=hi, segment_sd_db=seg_sd,
            segment_snr_db=tuple(seg_srts), slope_percent_per_db=slope, map_ci_low=m_lo, map_ci_high=m_hi,
            note=note))
    if noise_index and user_mapping is None:
        notes.append("scores from the ideal observer of the envelope-power index: " + mapping.notes[0])
    elif mapping is None:
        notes.append("no mapping: give one (fitted with fitmap) to get predicted scores and target SNRs")
    elif mapping.index_range is not None:
        lo_r, hi_r = mapping.index_range
        if np.any((mean < lo_r) | (mean > hi_r)):
            notes.append(f"part of the curve lies outside the index range the mapping was fitted on "
                         f"({lo_r:.3g} to {hi_r:.3g}): those predictions are extrapolations")
    if user_mapping is not None:
        notes.extend(f"mapping: {n}" for n in mapping.notes)
    if noise_index and process is not None:
        notes.append("the processed noise alone was separated by phase inversion (Hagerman & Olofsson 2004): "
                     "the chain ran on speech + noise and on speech - noise; exact for a linear chain, an "
                     "approximation for a nonlinear one")
    band_arr = None
    if noise_index:
        band_arr = np.stack([np.mean(np.stack(b), axis=0) for b in bands_db])
    return SweepResult(
        snr_db=snrs, index_name=name, index=mean, index_segments=vals, index_sd=sd,
        predicted_percent=predicted, targets=tuple(out_targets), level=level,
        segment_offsets_s=tuple(float(o) / fs for o in offsets), reverberant=ir is not None,
        processed=process is not None, fs=fs,
        duration_s=L / fs, mapping=None if mapping is None else mapping.to_dict(), notes=tuple(notes),
        snr_reference=reference, speech_level=speech_level, band_snr_env_db=band_arr, bands_hz=bands_hz,
    )


def _sepsm_point(mix: np.ndarray, alone: np.ndarray, fs: int, snr: float
                 ) -> tuple[float, np.ndarray, tuple[float, ...]]:
    """SNR_env in dB of one mixture, its per-band SNR_env in dB and the bands."""
    from .envpower import sepsm

    if float(np.max(np.abs(alone))) <= 0.0:
        raise ComputationError(f"the processed noise alone at {snr:g} dB SNR is silent",
                               "check the processing chain (does it remove all of the noise?)")
    r = sepsm(mix, alone, fs)
    with np.errstate(divide="ignore"):
        band = 10.0 * np.log10(np.sqrt(np.nansum(r.snr_env_bands ** 2, axis=1)))
    return r.snr_env_db, band, r.bands_hz


def _mean_interval(values: Sequence[float]) -> tuple[float, float, float, float]:
    """Of ``values`` (one SRT per noise segment or per sentence): their SD, the half-width
    of the Student-t interval (level :data:`CI_LEVEL`) of their mean, the squared standard
    error of the mean and its degrees of freedom."""
    from scipy.stats import t as student_t

    n = len(values)
    sd = float(np.std(values, ddof=1))
    se, df = sd / math.sqrt(n), float(n - 1)
    return sd, float(student_t.ppf(0.5 + CI_LEVEL / 2.0, df)) * se, se * se, df


def _mapping_interval(snrs: np.ndarray, mean: np.ndarray, index: float, half_x: float
                      ) -> tuple[float | None, float | None]:
    """The SNRs where the mean index curve reaches ``index`` -/+ ``half_x`` (the target's
    index moved by the mapping's uncertainty); ``(None, None)`` unless both are reached."""
    lo = _crossing(snrs, mean, index - half_x)[0]
    hi = _crossing(snrs, mean, index + half_x)[0]
    return (lo, hi) if lo is not None and hi is not None else (None, None)


def snr_sweep_sentences(
    sentences: Sequence[np.ndarray],
    noise: np.ndarray,
    fs: int,
    *,
    names: Sequence[str] | None = None,
    mapping: ScoreMapping | None = None,
    targets: Sequence[float] = (std.SRT_PERCENT,),
    progress: Callable[[int, int], None] | None = None,
    **options,
) -> SweepResult:
    """:func:`snr_sweep` over several sentences: the spread over sentences as well as
    over noise segments.

    Each sentence is swept on its own (its own active level, its own noise segments, as
    :func:`snr_sweep` with ``options``); the index per SNR is the mean over sentences and
    segments. ``index_sd`` is the standard deviation over noise segments of the
    sentence-averaged index, ``sentence_sd`` the standard deviation over sentences of
    the segment-averaged index. For each target, the SNR is where the grand mean curve
    reaches the target's index value; the per-sentence curves and the per-segment curves
    give crossings whose spreads make the sentence and segment intervals (Student t);
    their standard errors added in quadrature make the combined interval
    (Welch-Satterthwaite df), and adding the mapping's own standard error (from its
    interval in dB; infinite df, or the mapping's own with quasi-binomial intervals) the
    total one. The segments of different sentences are
    different stretches of the noise when the sentences differ in length: the segment
    spread then also holds some sentence-to-sentence variation (a note says so).

    Parameters
    ----------
    sentences : clean sentences, each 1-D at ``fs`` (at least two).
    noise : noise at ``fs``, at least as long as the longest sentence.
    fs : sample rate, Hz.
    names : a name per sentence (e.g. its file name), for the result.
    mapping, targets, progress : as for :func:`snr_sweep`.
    options : the other options of :func:`snr_sweep` (``snr_db``, ``index``, ``ir``,
        ``n_segments``, ``level``, ``snr_reference``, ``index_functions``, ``process``).

    Returns
    -------
    SweepResult
        with ``sentences``, ``sentence_sd`` and ``sentence_activity`` filled in, and the
        sentence, combined and total intervals in each target.

    Raises
    ------
    InputError
        For fewer than two sentences, sentences or a noise the one validation rule
        refuses, names that do not match the sentences, and as :func:`snr_sweep`.
    ComputationError
        As :func:`snr_sweep` (no index value at some SNR).
    """
    from scipy.stats import norm
    from scipy.stats import t as student_t

    if isinstance(sentences, (str, bytes, np.ndarray)) and np.ndim(sentences) < 2 or not isinstance(
            sentences, (Sequence, np.ndarray)):
        raise InputError("the sentences are not a list of signals", "give one 1-D array per sentence")
    if names is not None and (isinstance(names, (str, bytes)) or not isinstance(names, Sequence)):
        raise InputError("the names are not a list", "give one name per sentence")
    items = list(sentences)
    if len(items) < 2:
        raise InputError(f"{len(items)} sentence(s) given", "give at least two sentences (or sweep one with snr_sweep)")
    labels = [str(n) for n in names] if names is not None else [f"sentence {i + 1}" for i in range(len(items))]
    if len(labels) != len(items):
        raise InputError("names and sentences differ in number", "give one name per sentence")
    name = str(options.get("index", DEFAULT_INDEX)).strip().lower()
    custom = options.get("index_functions") is not None and name in options["index_functions"]
    scorer = _ObserverMapping() if mapping is None and name in NOISE_INDICES and not custom else mapping
    runs = []
    for i, x in enumerate(items):
        step = None if progress is None else (lambda done, total, i=i: progress(i * total + done, len(items) * total))
        runs.append(snr_sweep(x, noise, fs, mapping=mapping, targets=targets, progress=step, **options))
    first = runs[0]
    if any(r.index_segments.shape != first.index_segments.shape for r in runs):
        raise InputError("the sentences give different numbers of noise segments", "give a longer noise")
    vals = np.stack([r.index_segments for r in runs])  # (sentence, snr, segment)
    snrs, n_sent, n_seg = first.snr_db, vals.shape[0], vals.shape[2]
    mean = vals.mean(axis=(0, 2))
    seg_curves = vals.mean(axis=0)  # (snr, segment)
    sent_curves = vals.mean(axis=2)  # (sentence, snr)
    seg_sd = seg_curves.std(axis=1, ddof=1) if n_seg > 1 else np.zeros(snrs.size)
    sent_sd = sent_curves.std(axis=0, ddof=1)
    q = 0.5 + CI_LEVEL / 2.0
    notes = [f"{n_sent} sentences, each at its own level and with its own noise segments"]
    if len({r.duration_s for r in runs}) > 1 and n_seg > 1:
        notes.append("the sentences differ in length, so their noise segments are different stretches of the "
                     "noise: the segment spread also holds some of the sentence-to-sentence variation")
    out_targets = []
    for k, t0 in enumerate(first.targets):
        xt = t0.index
        srt, i = _crossing(snrs, mean, xt)
        seg_x = [_crossing(snrs, seg_curves[:, j], xt)[0] for j in range(n_seg)]
        sent_x = [_crossing(snrs, sent_curves[s_, :], xt)[0] for s_ in range(n_sent)]
        note = ""
        lo = hi = s_lo = s_hi = c_lo = c_hi = tot_lo = tot_hi = seg_sd_db = sent_sd_db = slope = None
        m_lo = m_hi = None
        if srt is None:
            note = t0.note or f"{t0.percent:g} % is not reached inside the swept range"
        else:
            slope = float(100.0 * scorer.derivative(xt) * (mean[i + 1] - mean[i]) / (snrs[i + 1] - snrs[i]))
            se2, dfs = [], []
            if n_seg > 1 and all(v is not None for v in seg_x):
                seg_sd_db, h, v2, df = _mean_interval(seg_x)
                lo, hi = srt - h, srt + h
                se2.append(v2)
                dfs.append(df)
            if all(v is not None for v in sent_x):
                sent_sd_db, h, v2, df = _mean_interval(sent_x)
                s_lo, s_hi = srt - h, srt + h
                se2.append(v2)
                dfs.append(df)
            else:
                note = "some sentences do not reach the target inside the swept range: no sentence interval"
            if len(se2) == 2 or (se2 and n_seg == 1):
                v = sum(se2)
                df = v * v / sum(a * a / d for a, d in zip(se2, dfs)) if all(d > 0 for d in dfs) else math.inf
                h = float(student_t.ppf(q, df)) * math.sqrt(v)
                c_lo, c_hi = srt - h, srt + h
                if scorer.cov is not None:
                    m_lo, m_hi = _mapping_interval(snrs, mean, xt, scorer.quantile() * scorer.index_sd_at(t0.percent))
                    if m_lo is not None:
                        m2 = ((m_hi - m_lo) / (2.0 * scorer.quantile())) ** 2
                        w = sum(a * a / d for a, d in zip(se2, dfs)) + (
                            0.0 if scorer.ci_df is None else m2 * m2 / scorer.ci_df)
                        df_t = (v + m2) ** 2 / w if w > 0 else math.inf
                        # Welch-Satterthwaite can give the sum more degrees of freedom than its
                        # parts; adding a variance must never narrow the interval, so the total
                        # keeps at most the combined interval's degrees of freedom.
                        df_t = min(df_t, df)
                        ht = float(student_t.ppf(q, df_t) if math.isfinite(df_t) else norm.ppf(q)) * math.sqrt(v + m2)
                        tot_lo, tot_hi = srt - ht, srt + ht
        out_targets.append(SweepTarget(
            percent=t0.percent, index=xt, snr_db=srt, ci_low=lo, ci_high=hi, segment_sd_db=seg_sd_db,
            segment_snr_db=tuple(seg_x), slope_percent_per_db=slope, map_ci_low=m_lo, map_ci_high=m_hi, note=note,
            sentence_sd_db=sent_sd_db, sentence_ci_low=s_lo, sentence_ci_high=s_hi, combined_ci_low=c_lo,
            combined_ci_high=c_hi, total_ci_low=tot_lo, total_ci_high=tot_hi))
    carried = [n for n in first.notes if n.startswith("mapping: ") or "extrapolation" in n or "overlap" in n]
    from dataclasses import replace

    return replace(
        first, index=mean, index_segments=seg_curves, index_sd=seg_sd,
        predicted_percent=None if scorer is None else np.asarray(scorer.percent(mean), dtype=float),
        targets=tuple(out_targets),
        band_snr_env_db=None if first.band_snr_env_db is None else np.mean(
            np.stack([r.band_snr_env_db for r in runs]), axis=0),
        duration_s=float(sum(r.duration_s for r in runs)), speech_level=None, sentences=tuple(labels),
        sentence_sd=sent_sd, sentence_activity=tuple(None if r.speech_level is None
                                                     else r.speech_level.activity_factor for r in runs),
        notes=tuple(notes + carried))


def _speech_level(speech: np.ndarray, fs: int, reference: str) -> ActiveLevel | None:
    """The speech's P.56 active level; ``None`` where it has none and the long-term
    reference does not need it."""
    try:
        return active_speech_level(speech, fs)
    except ComputationError as e:
        if reference == "active":
            raise ComputationError(f"the active speech level cannot be measured: {e.what}",
                                   "use --snr-reference long-term, or speech with active stretches") from None
        return None



def read_at_one_rate(clean, noise, ir, channel: int | None
                     ) -> tuple[list, list[np.ndarray], np.ndarray, np.ndarray | None, int, list[str]]:
    """The sentences (:func:`sentence_files`), the noise and the optional impulse response,
    read and brought to the first sentence's rate: ``(files, sentences, noise, ir, fs,
    notes)``, a note for each file that was resampled.

    Raises
    ------
    InputError
        For a file that is missing or unreadable (named in the message).
    """
    from .audio import load_audio, resample

    files = sentence_files(clean)
    x, fs = load_audio(files[0], channel, name="clean speech" if len(files) == 1 else f"sentence '{files[0]}'")
    notes = []
    xs = [x]
    for f in files[1:]:
        y, fs_y = load_audio(f, channel, name=f"sentence '{f}'")
        if fs_y != fs:
            notes.append(f"sentence '{f.name}' was resampled from {fs_y} Hz to {fs} Hz")
            y = resample(y, fs_y, fs)
        xs.append(y)
    nz, fs_n = load_audio(noise, channel, name="noise")
    if fs_n != fs:
        notes.append(f"the noise was resampled from {fs_n} Hz to {fs} Hz")
        nz = resample(nz, fs_n, fs)
    h = None
    if ir is not None:
        h, fs_h = load_audio(ir, channel, name="impulse response")
        if fs_h != fs:
            notes.append(f"the impulse response was resampled from {fs_h} Hz to {fs} Hz")
            h = resample(h, fs_h, fs)
    return files, xs, nz, h, int(fs), notes


def sentence_files(clean: str | os.PathLike | Sequence[str | os.PathLike]) -> list:
    """The clean-speech files of a sweep: a list of paths, the audio files of a folder
    (sorted by name), the paths listed in a text file (``.txt``/``.lst``: one per line,
    relative to the list's folder; blank lines and lines starting with ``#`` skipped), or
    one audio file.

    Raises
    ------
    InputError
        For something that is not a path or a list of paths, a folder without audio
        files, a list file that cannot be read or names no files, or no files at all.
    """
    from .audio import audio_files_in
    from .checks import path as checked_path

    if isinstance(clean, (list, tuple)):
        files = [checked_path(c, "clean-speech file") for c in clean]
    else:
        p = checked_path(clean, "clean speech")
        if p.is_dir():
            files = audio_files_in(p)
            if not files:
                raise InputError(f"folder '{p}' holds no audio files", "give a folder of WAV/FLAC/OGG sentences")
        elif p.suffix.lower() in (".txt", ".lst") and p.is_file():
            try:
                lines = p.read_text(encoding="utf-8").splitlines()
            except (OSError, UnicodeDecodeError) as e:
                raise InputError(f"sentence list '{p}' cannot be read ({e})", "give a UTF-8 text file") from None
            files = [p.parent / q.strip() for q in lines if q.strip() and not q.strip().startswith("#")]
            if not files:
                raise InputError(f"sentence list '{p}' names no files", "give one audio file per line")
        else:
            files = [p]
    if not files:
        raise InputError("no clean-speech files given", "give a file, a folder of sentences or a list")
    return files


def snr_sweep_files(
    clean: str | os.PathLike | Sequence[str | os.PathLike],
    noise: str | os.PathLike,
    *,
    ir: str | os.PathLike | None = None,
    snr_db: str | Sequence[float] | np.ndarray = DEFAULT_SNR_RANGE,
    index: str | None = None,
    mapping: ScoreMapping | str | os.PathLike | None = None,
    targets: Sequence[float] | None = None,
    n_segments: int = std.SWEEP_SEGMENTS,
    level: str = std.SWEEP_LEVEL,
    snr_reference: str = std.SWEEP_SNR_REFERENCE,
    channel: int | None = None,
    process: Callable[[np.ndarray, int], np.ndarray] | str | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> SweepResult:
    """:func:`snr_sweep` of audio files: clean speech, a noise recording and an optional IR.

    Every option is checked before the audio is read (a bad SNR range, index, mapping
    or target is refused without touching the files). The noise and the impulse
    response are resampled to the rate of the clean speech when theirs differs (a note
    says so).

    Parameters
    ----------
    clean, noise : audio files (WAV, FLAC, OGG); the noise at least as long as the speech.
        ``clean`` may also name several sentences (:func:`sentence_files`: a folder, a
        list file or a sequence of paths); they are swept by :func:`snr_sweep_sentences`,
        each at its own level, and resampled to the first one's rate where theirs
        differs (a note says so).
    ir : impulse-response file applied to the speech, or ``None``.
    snr_db : SNRs, dB: ``"FROM:TO:STEP"`` (:func:`parse_snr_range`) or a sequence.
    index : index to compute (:data:`SWEEP_INDICES`); default: the mapping's index, or
        :data:`DEFAULT_INDEX` without a mapping.
    mapping : a :class:`~envpredict.mapping.ScoreMapping`, the path of a MAP.json, or ``None``.
    targets : target scores, percent (default: the SRT, 50 %); they need a mapping, except
        for the envelope-power index (``"sepsm"``), whose default scores come from its
        ideal observer (material-specific).
    n_segments, level, snr_reference, progress : as for :func:`snr_sweep`.
    channel : channel of multi-channel files (0 = first).
    process : a processing chain ``f(mixture, fs)`` or its ``"MODULE:FUNCTION"`` name
        (:func:`load_process`). With a mapping, the sweep is also run without it, and
        each target gets its unprocessed SNR and the chain's predicted benefit in dB.

    Returns
    -------
    SweepResult

    Raises
    ------
    InputError
        For files that cannot be read, or as :func:`snr_sweep`.
    ComputationError
        As :func:`snr_sweep`.
    """
    from dataclasses import replace

    from .mapping import read_mapping

    snrs = parse_snr_range(snr_db) if isinstance(snr_db, str) else snr_db
    if level not in LEVEL_CONVENTIONS:
        raise InputError(f"unknown level convention '{level}'", "use --level speech or --level mixture")
    reference = check_snr_reference(snr_reference)
    chain = load_process(process) if isinstance(process, str) else process
    if not isinstance(n_segments, (int, np.integer)) or not 1 <= n_segments <= MAX_SEGMENTS:
        raise InputError(f"--segments {n_segments} is outside 1..{MAX_SEGMENTS}", "give e.g. --segments 5")
    m = mapping if mapping is None or isinstance(mapping, ScoreMapping) else read_mapping(mapping)
    name = (index or (m.index if m is not None else DEFAULT_INDEX)).strip().lower()
    if name not in SWEEP_INDICES:
        raise InputError(f"unknown index '{name}' for the sweep", f"use --index {', '.join(SWEEP_INDICES)}")
    if m is not None and m.index != name:
        where = "" if isinstance(mapping, ScoreMapping) else f" '{mapping}'"
        raise InputError(f"the mapping{where} takes '{m.index}' but --index is '{name}'",
                         f"use --index {m.index} or a mapping fitted on {name}")
    if m is None and targets and name not in NOISE_INDICES:
        raise InputError("--target needs a mapping", "give --map MAP.json (write one with 'envpredict fitmap')")
    target_list = list(targets) if targets else [std.SRT_PERCENT]
    _check_options(snrs, name, default_index_functions(), level, n_segments, m, target_list)

    files, xs, nz, h, fs, notes = read_at_one_rate(clean, noise, ir, channel)
    x = xs[0]
    kw = dict(snr_db=snrs, index=name, mapping=m, targets=target_list, ir=h, n_segments=n_segments, level=level,
              snr_reference=reference)
    if len(xs) > 1:
        names = [f.name for f in files]

        def sweep(process, prog):
            return snr_sweep_sentences(xs, nz, fs, names=names, process=process, progress=prog, **kw)
    else:
        def sweep(process, prog):
            return snr_sweep(x, nz, fs, process=process, progress=prog, **kw)

    if chain is not None and (m is not None or name in NOISE_INDICES):
        def first(done, total):
            if progress is not None:
                progress(done, 2 * total)

        def second(done, total):
            if progress is not None:
                progress(total + done, 2 * total)

        plain = sweep(None, first)
        res = sweep(chain, second)
        res = replace(res, targets=tuple(replace(t, unprocessed_snr_db=u.snr_db)
                                         for t, u in zip(res.targets, plain.targets)))
    else:
        res = sweep(chain, progress)
    if notes:
        res = replace(res, notes=tuple(notes) + res.notes)
    return res
