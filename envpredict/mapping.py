"""Index-to-score mappings: the psychometric function, its binomial fit, predicted scores.

* :class:`ScoreMapping` -- a psychometric function from an index value ``x`` (STOI,
  ESTOI, STI...) to the proportion of items correct,

      p(x) = guess + (1 - guess - lapse) * F(a + b * x),

  with ``F`` the logistic function ``1 / (1 + exp(-eta))`` (shape ``"logistic"``) or
  the standard normal distribution function ``Phi(eta)`` (shape ``"normal"``, the
  cumulative-normal alternative). ``a`` and ``b`` are the intercept and slope of the
  linear predictor; the same curve is described by ``x50 = -a / b`` (the index at
  which ``F = 1/2``, i.e. 50 % correct when guess = lapse = 0, otherwise half-way
  between the guess rate and 1 - lapse) and ``slope_at_x50 = (1 - guess - lapse) *
  F'(0) * b`` (proportion correct per index unit at ``x50``; ``F'(0)`` is 1/4 for the
  logistic and 1/sqrt(2 pi) for the normal). ``guess`` (e.g. 1/m for an m-alternative
  closed-set test) and ``lapse`` are fixed by the user, not fitted. This is a
  simplification: Wichmann & Hill (2001, Percept. Psychophys. 63(8)) show that
  ignoring lapses biases the fitted slope and fit the lapse rate inside a narrow
  range, which takes more trials near the ceiling than a small pilot has.
* :func:`fit_mapping` -- binomial maximum-likelihood fit of ``a, b`` to rows of
  (index value, number correct, number of trials), with Wald confidence intervals
  from the observed information (delta method for ``x50`` and ``slope_at_x50``), a
  profile-likelihood interval for ``x50``, deviance and Pearson chi-square goodness
  of fit, and refusals when the data cannot determine the curve. For guess = lapse
  = 0 the logistic fit is the binomial GLM with logit link and the normal fit the
  GLM with probit link (McCullagh & Nelder 1989, *Generalized Linear Models*, 2nd
  ed., ch. 4). :func:`fit_mapping_file` fits the columns of a scores table.
* :func:`predict_scores` -- the mapping applied to index values;
  :func:`add_predictions` / :func:`predict_file` add a predicted-score column to a
  results table.

The SNR sweep that uses a mapping to predict the speech reception threshold is in
:mod:`envpredict.sweep`. Tables are read and written by :mod:`envpredict.tables`;
this module parses no CSV.

A mapping is stored as a JSON object (MAP.json, :meth:`ScoreMapping.to_dict`;
:func:`read_mapping` reads one back):
``format`` ("envpredict-score-mapping"), ``version``, ``index``, ``shape``,
``formula``, ``guess``, ``lapse``, ``params`` (``a``, ``b``, ``x50``,
``slope_at_x50``), ``ci_level``, ``ci`` (one ``[low, high]`` per parameter),
``ci_profile`` (``{"x50": [low, high]}``), ``cov_ab``, ``n_points``, ``n_trials``,
``index_range``, ``fit`` (goodness of fit), ``interval_method``, ``dispersion``,
``dispersion_estimate``, ``ci_df``, ``listeners`` (each listener's fit, with its
``cov_ab``) and ``listener_spread``, ``source`` and ``notes``. Only ``index``,
``shape`` and ``params.a``/``params.b`` are needed to read one back; everything else
written is read back too, so a mapping written and read predicts the same scores with
the same intervals. ``MAP.json#NAME`` reads one listener's fit (:func:`read_mapping`).

The built-in published mappings (:func:`published_mapping`) are the two STOI logistics
of Taal et al. 2011. Published index-to-score fits belong to one speech corpus, one
listener group and one kind of processing, and a mapping used outside them predicts
the wrong score; fit your own with :func:`fit_mapping` on pilot data. No STI-to-score
relation is built in: none whose parameters could be checked against a published
text with its edition was found.
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping as MappingType
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from . import checks
from . import standards as std
from .exceptions import ComputationError, InputError
from .results import jsonable
from .tables import CORRECT_COLUMN, PREDICTED_COLUMN, TRIALS_COLUMN, cell_float, read_table, resolve_column

#: Shapes of the psychometric function: the name, F(eta), F'(eta) and F'(0).
SHAPES: tuple[str, ...] = ("logistic", "normal")

#: How the intervals of a fit treat overdispersion (see :func:`fit_mapping`); the first
#: is the default (judgement: intervals never narrower than the scatter of the pilot).
DISPERSIONS: tuple[str, ...] = ("quasi", "binomial")
DEFAULT_DISPERSION: str = std.MAPPING_DISPERSION

#: Format tag and version written into MAP.json files.
MAP_FORMAT: str = "envpredict-score-mapping"
MAP_VERSION: int = 1

#: Confidence level of every interval reported here (common practice, no source).
CI_LEVEL: float = 0.95

#: A fit needs at least this many distinct index values: two parameters plus one
#: degree of freedom for a goodness-of-fit check (common practice, no source).
MIN_DISTINCT_POINTS: int = 3

#: If the fitted linear predictor spans more than this over the data range, the
#: maximum-likelihood slope is running off to infinity (complete or quasi-complete
#: separation: the points jump from floor to ceiling with nothing between them).
#: 40 logits is a step from p = 2e-9 to 1 - 2e-9 (judgement: no real pilot is that steep).
MAX_ETA_SPAN: float = 40.0

#: Cochran's rule for the chi-square approximation: no more than 20 % of expected
#: counts below 5 (common practice, no source).
COCHRAN_MIN_EXPECTED: float = 5.0
COCHRAN_MAX_SHARE: float = 0.2

#: Guess + lapse must leave room for a curve (judgement).
MAX_GUESS_PLUS_LAPSE: float = 0.9

#: Numerical settings of the fit (not method constants). Trust-region Newton stops at a
#: gradient norm below FIT_GTOL or after FIT_MAXITER steps; the fit counts as converged
#: when every gradient component is below FIT_GRADIENT_TOL times the number of trials.
FIT_GTOL: float = 1e-10
FIT_MAXITER: int = 500
FIT_GRADIENT_TOL: float = 1e-5
#: Starting values: observed proportions are clipped to this range before the
#: link function, so that 0 % and 100 % rows give finite starting points.
START_CLIP: tuple[float, float] = (0.02, 0.98)
#: Fallback slope scale of the starting values when the data range is (nearly) zero.
MIN_START_RANGE: float = 1e-6
#: Probabilities are kept this far from 0 and 1 in the goodness-of-fit sums.
P_CLIP: float = 1e-15
#: Floor of probabilities in the log-likelihood derivatives (avoids 0/0).
P_FLOOR: float = 1e-300
#: Profile likelihood of x50: the slope is searched within this many log units of its
#: maximum-likelihood value, and the interval ends are sought up to this many data
#: ranges away from x50 (judgement: beyond that the data do not bound x50).
PROFILE_LOG_B_SPAN: float = 12.0
PROFILE_MAX_RANGES: float = 20.0
#: Solver tolerances of the profile (x50 units) and the smallest standard error used
#: for its first step.
PROFILE_XTOL: float = 1e-10
PROFILE_INNER_XTOL: float = 1e-9
PROFILE_MIN_VAR: float = 1e-24

#: Decimals of the predicted percent written into a table (0.01 %: far below any
#: listening test's resolution).
PREDICTED_DIGITS: int = 2

# ---------------------------------------------------------------------------
# Psychometric shapes
# ---------------------------------------------------------------------------

def _cdf(shape: str, eta: np.ndarray) -> np.ndarray:
    from scipy.special import expit, ndtr

    return expit(eta) if shape == "logistic" else ndtr(eta)


def _pdf(shape: str, eta: np.ndarray) -> np.ndarray:
    if shape == "logistic":
        from scipy.special import expit

        f = expit(eta)
        return f * (1.0 - f)
    return np.exp(-0.5 * eta * eta) / math.sqrt(2.0 * math.pi)


def _dpdf(shape: str, eta: np.ndarray) -> np.ndarray:
    """Derivative of the density, F''(eta)."""
    if shape == "logistic":
        from scipy.special import expit

        f = expit(eta)
        return f * (1.0 - f) * (1.0 - 2.0 * f)
    return -eta * np.exp(-0.5 * eta * eta) / math.sqrt(2.0 * math.pi)


def _ppf(shape: str, q: np.ndarray) -> np.ndarray:
    from scipy.special import logit, ndtri

    return logit(q) if shape == "logistic" else ndtri(q)


def _log_cdf_pair(shape: str, eta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """log F(eta) and log(1 - F(eta)), computed without underflow."""
    if shape == "logistic":
        return -np.logaddexp(0.0, -eta), -np.logaddexp(0.0, eta)
    from scipy.special import log_ndtr

    return log_ndtr(eta), log_ndtr(-eta)


def _pdf0(shape: str) -> float:
    return 0.25 if shape == "logistic" else 1.0 / math.sqrt(2.0 * math.pi)


def check_shape(shape: str) -> str:
    """Refuse unknown psychometric shapes.

    Raises
    ------
    InputError
        For a shape other than those of :data:`SHAPES`.
    """
    s = str(shape).strip().lower()
    if s not in SHAPES:
        raise InputError(f"unknown mapping shape '{shape}'", f"use one of {', '.join(SHAPES)}")
    return s


def check_dispersion(dispersion: str) -> str:
    """``"quasi"`` or ``"binomial"`` (see :func:`fit_mapping`).

    Raises
    ------
    InputError
        For anything else.
    """
    d = str(dispersion).strip().lower()
    if d not in DISPERSIONS:
        raise InputError(f"unknown dispersion '{dispersion}'", "use --dispersion quasi or --dispersion binomial")
    return d


def check_guess_lapse(guess: float, lapse: float) -> tuple[float, float]:
    """Refuse guess and lapse rates outside [0, 1) or leaving no room for a curve.

    Raises
    ------
    InputError
        For a guess or lapse rate outside [0, 1) or summing to 1 or more.
    """
    out = []
    for name, v in (("guess rate", guess), ("lapse rate", lapse)):
        try:
            f = float(v)
        except (TypeError, ValueError):
            raise InputError(f"{name} {v!r} is not a number", "give a proportion, e.g. 0.25") from None
        if not math.isfinite(f) or not 0.0 <= f < 1.0:
            raise InputError(f"{name} {v!r} is outside 0..1", "give a proportion, e.g. 0.25 for 4 alternatives")
        out.append(f)
    if out[0] + out[1] > MAX_GUESS_PLUS_LAPSE:
        raise InputError(
            f"guess rate {out[0]:g} plus lapse rate {out[1]:g} leaves no room for a psychometric curve",
            "give a guess rate of 1/alternatives and a small lapse rate (0 to 0.05)",
        )
    return out[0], out[1]


# ---------------------------------------------------------------------------
# The mapping
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class GoodnessOfFit:
    """Goodness of fit of a binomial psychometric fit.

    Attributes
    ----------
    log_likelihood : maximised binomial log-likelihood (with the binomial coefficients).
    deviance : 2 * (log L saturated - log L fitted).
    pearson_chi2 : sum of (k - n p)^2 / (n p (1 - p)).
    df : rows minus fitted parameters.
    deviance_p, pearson_p : upper-tail chi-square probabilities with ``df`` degrees of
        freedom (small p: the curve does not describe the data within binomial
        sampling error).
    approximate : True when Cochran's rule fails (many expected counts below 5), so
        the p-values are rough.
    """

    log_likelihood: float
    deviance: float
    pearson_chi2: float
    df: int
    deviance_p: float
    pearson_p: float
    approximate: bool

    def to_dict(self) -> dict:
        return jsonable({
            "log_likelihood": self.log_likelihood, "deviance": self.deviance,
            "pearson_chi2": self.pearson_chi2, "df": self.df, "deviance_p": self.deviance_p,
            "pearson_p": self.pearson_p, "approximate": self.approximate,
        })


@dataclass(frozen=True)
class ListenerFit:
    """The mapping fitted to one listener's rows (``error`` when it cannot be fitted);
    ``cov`` is the binomial covariance of (a, b), or ``None``."""

    listener: str
    n_points: int
    n_trials: int
    a: float | None = None
    b: float | None = None
    x50: float | None = None
    slope_at_x50: float | None = None
    error: str = ""
    cov: np.ndarray | None = None

    def to_dict(self) -> dict:
        return jsonable({"listener": self.listener, "n_points": self.n_points, "n_trials": self.n_trials,
                         "a": self.a, "b": self.b, "x50": self.x50, "slope_at_x50": self.slope_at_x50,
                         "cov_ab": None if self.cov is None else np.asarray(self.cov), "error": self.error or None})


def listener_spread(fits: Sequence[ListenerFit]) -> dict:
    """Mean and standard deviation over listeners of x50 and of the slope at x50 (the
    listeners that could be fitted), and how many were.

    Raises
    ------
    InputError
        If ``fits`` is not a list of :class:`ListenerFit`.
    """
    if isinstance(fits, (str, bytes)) or not isinstance(fits, Sequence) or not all(
            isinstance(f, ListenerFit) for f in fits):
        raise InputError("fits are not a list of listener fits", "pass the result of fit_listeners")
    ok = [f for f in fits if f.x50 is not None]
    out: dict[str, Any] = {"n_listeners": len(fits), "n_fitted": len(ok)}
    for key in ("x50", "slope_at_x50"):
        v = np.array([getattr(f, key) for f in ok], dtype=float)
        out[f"{key}_mean"] = float(v.mean()) if v.size else None
        out[f"{key}_sd"] = float(v.std(ddof=1)) if v.size > 1 else None
    return jsonable(out)


@dataclass(frozen=True)
class ScoreMapping:
    """A psychometric function from an index value to the proportion correct.

    ``p(x) = guess + (1 - guess - lapse) * F(a + b x)``, F logistic or standard normal
    (see the module docstring for the parameterisations).

    Attributes
    ----------
    index : name of the index the mapping takes (e.g. ``"stoi"``).
    shape : ``"logistic"`` or ``"normal"``.
    a, b : intercept and slope of the linear predictor ``eta = a + b x``.
    guess, lapse : fixed floor and ceiling losses (proportions).
    cov : 2x2 covariance of (a, b) from the observed information, or ``None``.
    n_points, n_trials : rows and total trials of the fitted data.
    index_range : (min, max) index value of the fitted data; predictions outside it
        are extrapolations.
    gof : goodness of fit, or ``None`` for a mapping not fitted here.
    profile_ci_x50 : profile-likelihood interval of ``x50`` (an end is ``None`` when
        the likelihood does not fall far enough on that side: the data do not bound it),
        or ``None`` for a mapping not fitted here.
    source : where the mapping came from (file, rows, method).
    notes : cautions about the fit.
    dispersion : factor the binomial covariance was multiplied by (1: binomial
        intervals; the Pearson chi-square / df when the quasi-binomial intervals were
        used). ``cov`` already includes it.
    dispersion_estimate : the Pearson chi-square / df of the fit, or ``None``.
    ci_df : degrees of freedom of the Student t quantile of the Wald intervals when the
        dispersion was estimated (quasi-binomial); ``None`` for the normal quantile.
    """

    index: str
    shape: str
    a: float
    b: float
    guess: float = 0.0
    lapse: float = 0.0
    cov: np.ndarray | None = None
    n_points: int = 0
    n_trials: int = 0
    index_range: tuple[float, float] | None = None
    gof: GoodnessOfFit | None = None
    profile_ci_x50: tuple[float | None, float | None] | None = None
    source: str = ""
    notes: tuple[str, ...] = field(default_factory=tuple)
    dispersion: float = 1.0
    dispersion_estimate: float | None = None
    ci_df: int | None = None
    listeners: tuple[ListenerFit, ...] = ()

    @property
    def interval_method(self) -> str:
        """``"quasi-binomial"`` when the intervals carry an estimated dispersion, else ``"binomial"``."""
        return "quasi-binomial" if self.ci_df is not None else "binomial"

    # -- the curve --------------------------------------------------------
    @property
    def span(self) -> float:
        """1 - guess - lapse: the range the curve can move over."""
        return 1.0 - self.guess - self.lapse

    @property
    def x50(self) -> float:
        """Index value where F = 1/2 (50 % correct when guess = lapse = 0)."""
        return -self.a / self.b

    @property
    def slope_at_x50(self) -> float:
        """dp/dx at ``x50``, proportion correct per index unit."""
        return self.span * _pdf0(self.shape) * self.b

    def proportion(self, x: Any) -> np.ndarray:
        """Predicted proportion correct at index value(s) ``x`` (NaN stays NaN)."""
        xa = np.asarray(x, dtype=float)
        return self.guess + self.span * _cdf(self.shape, self.a + self.b * xa)

    def percent(self, x: Any) -> np.ndarray:
        """Predicted percent correct at index value(s) ``x``."""
        return 100.0 * self.proportion(x)

    def derivative(self, x: Any) -> np.ndarray:
        """dp/dx at ``x``, proportion correct per index unit."""
        xa = np.asarray(x, dtype=float)
        return self.span * _pdf(self.shape, self.a + self.b * xa) * self.b

    def index_at(self, percent: float) -> float:
        """Index value at which the predicted score is ``percent`` % correct.

        Refuses targets the curve never reaches (at or below the guess rate, at or
        above 1 - lapse).
        """
        p = float(percent) / 100.0
        lo, hi = self.guess, 1.0 - self.lapse
        if not math.isfinite(p) or not lo < p < hi:
            raise InputError(
                f"target {percent:g} % is outside the range of the mapping "
                f"({100 * lo:g} % to {100 * hi:g} %, exclusive)",
                "choose a target between the guess rate and 100 % minus the lapse rate",
            )
        eta = float(_ppf(self.shape, np.array((p - self.guess) / self.span)))
        return (eta - self.a) / self.b

    # -- uncertainty ------------------------------------------------------
    def _z(self) -> float:
        return self.quantile()

    def quantile(self) -> float:
        """Two-sided quantile of the Wald intervals at :data:`CI_LEVEL`: standard normal,
        or Student t with :attr:`ci_df` degrees of freedom when the dispersion was
        estimated (McCullagh & Nelder 1989, sec. 4.5)."""
        from scipy.stats import norm, t

        q = 0.5 + CI_LEVEL / 2.0
        return float(norm.ppf(q) if self.ci_df is None else t.ppf(q, self.ci_df))

    def param_se(self) -> dict[str, float]:
        """Standard errors of a, b, x50 and slope_at_x50 (delta method), NaN if no cov."""
        if self.cov is None:
            return {k: math.nan for k in ("a", "b", "x50", "slope_at_x50")}
        c = np.asarray(self.cov, dtype=float)
        g = np.array([-1.0 / self.b, self.a / self.b ** 2])  # d x50 / d(a, b)
        var_x50 = float(g @ c @ g)
        k = self.span * _pdf0(self.shape)
        return {
            "a": math.sqrt(max(c[0, 0], 0.0)),
            "b": math.sqrt(max(c[1, 1], 0.0)),
            "x50": math.sqrt(max(var_x50, 0.0)),
            "slope_at_x50": abs(k) * math.sqrt(max(c[1, 1], 0.0)),
        }

    def params(self) -> dict[str, float]:
        return {"a": self.a, "b": self.b, "x50": self.x50, "slope_at_x50": self.slope_at_x50}

    def ci(self) -> dict[str, tuple[float, float] | None]:
        """Wald intervals at :data:`CI_LEVEL` for each parameter (None without cov)."""
        se = self.param_se()
        z = self._z()
        out: dict[str, tuple[float, float] | None] = {}
        for name, v in self.params().items():
            s = se[name]
            out[name] = None if not math.isfinite(s) else (v - z * s, v + z * s)
        return out

    def index_sd_at(self, percent: float) -> float:
        """Standard error of :meth:`index_at` from the parameter covariance (delta method)."""
        if self.cov is None:
            return math.nan
        x = self.index_at(percent)
        g = np.array([-1.0 / self.b, -x / self.b])  # x = (eta - a)/b
        return math.sqrt(max(float(g @ np.asarray(self.cov) @ g), 0.0))

    # -- serialisation ----------------------------------------------------
    def formula(self) -> str:
        f = "1/(1+exp(-eta))" if self.shape == "logistic" else "Phi(eta)"
        return f"p = guess + (1 - guess - lapse) * F(eta), eta = a + b*x, F(eta) = {f}"

    def to_dict(self) -> dict:
        """The MAP.json content (see :func:`mapping_from_dict` for the reverse)."""
        ci = self.ci()
        return jsonable({
            "format": MAP_FORMAT,
            "version": MAP_VERSION,
            "index": self.index,
            "shape": self.shape,
            "formula": self.formula(),
            "guess": self.guess,
            "lapse": self.lapse,
            "params": self.params(),
            "ci_level": CI_LEVEL,
            "ci": {k: (None if v is None else list(v)) for k, v in ci.items()},
            "ci_profile": None if self.profile_ci_x50 is None else {"x50": list(self.profile_ci_x50)},
            "cov_ab": None if self.cov is None else np.asarray(self.cov),
            "n_points": self.n_points,
            "n_trials": self.n_trials,
            "index_range": None if self.index_range is None else list(self.index_range),
            "fit": None if self.gof is None else self.gof.to_dict(),
            "interval_method": self.interval_method,
            "dispersion": self.dispersion,
            "dispersion_estimate": self.dispersion_estimate,
            "ci_df": self.ci_df,
            "listeners": [f.to_dict() for f in self.listeners] if self.listeners else None,
            "listener_spread": listener_spread(self.listeners) if self.listeners else None,
            "source": self.source,
            "cautions": [],
            "notes": list(self.notes),
        })


#: Largest magnitude of a mapping parameter or an index value accepted (judgement: a
#: fitted intercept or slope beyond it means a step function, which predicts 0 or 100 %
#: for every input and must not pass for a mapping; index values are 0..1 or dB).
MAX_PARAMETER: float = 1e6


def _num(d: MappingType, key: str, source: str, *, required: bool = True) -> float | None:
    v = d.get(key)
    if v is None:
        if required:
            raise InputError(f"mapping {source} has no '{key}'", "give a MAP.json written by 'envpredict fitmap'")
        return None
    try:
        f = float(v)
    except (TypeError, ValueError):
        raise InputError(f"mapping {source}: '{key}' is not a number ({v!r})",
                         "give a MAP.json written by 'envpredict fitmap'") from None
    if not math.isfinite(f) or abs(f) > MAX_PARAMETER:
        raise InputError(f"mapping {source}: '{key}' = {f:g} is not a finite number within "
                         f"±{MAX_PARAMETER:g}", "refit the mapping")
    return f


def mapping_from_dict(d: Any, source: str = "(dict)") -> ScoreMapping:
    """Rebuild a :class:`ScoreMapping` from its :meth:`ScoreMapping.to_dict` form.

    Only ``index``, ``shape``, ``params.a``, ``params.b``, ``guess`` and ``lapse`` are
    needed; ``cov_ab``, ``n_points``, ``index_range``, ``source`` and ``notes`` are read
    when present. Malformed content raises :class:`InputError` naming ``source``.

    Raises
    ------
    InputError
        For content that is not a mapping (missing or malformed fields).
    """
    fix = "give a MAP.json written by 'envpredict fitmap'"
    if not isinstance(d, dict):
        raise InputError(f"mapping {source} is not a JSON object", fix)
    if d.get("format") not in (None, MAP_FORMAT):
        raise InputError(f"mapping {source} has format {d.get('format')!r}, not {MAP_FORMAT!r}", fix)
    index = d.get("index")
    if not isinstance(index, str) or not index.strip():
        raise InputError(f"mapping {source} does not name its index", fix)
    shape = check_shape(d.get("shape", ""))
    params = d.get("params")
    if not isinstance(params, dict):
        raise InputError(f"mapping {source} has no 'params' object", fix)
    a = _num(params, "a", source)
    b = _num(params, "b", source)
    if b is None or b <= 0:
        raise InputError(f"mapping {source} has a slope b = {b} (must be > 0)", fix)
    prof = d.get("ci_profile")
    prof_x50 = None
    if isinstance(prof, dict) and isinstance(prof.get("x50"), list) and len(prof["x50"]) == 2:
        try:
            prof_x50 = tuple(None if v is None else float(v) for v in prof["x50"])
        except (TypeError, ValueError):
            raise InputError(f"mapping {source}: 'ci_profile.x50' is not two numbers", fix) from None
    guess, lapse = check_guess_lapse(_num(d, "guess", source, required=False) or 0.0,
                                     _num(d, "lapse", source, required=False) or 0.0)
    cov_arr = _cov_from(d.get("cov_ab"), source)
    rng = d.get("index_range")
    index_range = None
    if rng is not None:
        try:
            lo, hi = (float(v) for v in rng)
            index_range = (lo, hi)
        except (TypeError, ValueError):
            raise InputError(f"mapping {source}: 'index_range' is not two numbers", fix) from None
    notes = d.get("notes") or []
    dispersion = _num(d, "dispersion", source, required=False) or 1.0
    disp_est = _num(d, "dispersion_estimate", source, required=False)
    ci_df = _num(d, "ci_df", source, required=False)
    if dispersion <= 0 or (ci_df is not None and (ci_df < 1 or ci_df != int(ci_df))):
        raise InputError(f"mapping {source}: 'dispersion' or 'ci_df' is out of range", fix)
    return ScoreMapping(
        index=index.strip().lower(), shape=shape, a=float(a), b=float(b), guess=guess, lapse=lapse,
        cov=cov_arr, n_points=int(d.get("n_points") or 0), n_trials=int(d.get("n_trials") or 0),
        index_range=index_range, gof=_gof_from(d.get("fit"), source), profile_ci_x50=prof_x50,
        source=str(d.get("source") or source),
        notes=tuple(str(n) for n in notes) if isinstance(notes, list) else (),
        dispersion=float(dispersion), dispersion_estimate=disp_est, ci_df=None if ci_df is None else int(ci_df),
        listeners=_listeners_from(d.get("listeners"), source),
    )


def _cov_from(cov: Any, source: str) -> np.ndarray | None:
    """A finite 2x2 covariance of (a, b) from a MAP.json field (``None`` stays ``None``)."""
    if cov is None:
        return None
    fix = "give a MAP.json written by 'envpredict fitmap'"
    try:
        arr = np.asarray(cov, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"mapping {source}: 'cov_ab' is not a 2x2 matrix of numbers", fix) from None
    if arr.shape != (2, 2) or not np.all(np.isfinite(arr)):
        raise InputError(f"mapping {source}: 'cov_ab' is not a finite 2x2 matrix", fix)
    return arr


def _gof_from(fit: Any, source: str) -> GoodnessOfFit | None:
    """The goodness of fit of a MAP.json (``None`` when absent or incomplete)."""
    if not isinstance(fit, dict):
        return None
    keys = ("log_likelihood", "deviance", "pearson_chi2", "df", "deviance_p", "pearson_p")
    vals = {k: _num(fit, k, source, required=False) for k in keys}
    if any(v is None for v in vals.values()):
        return None
    return GoodnessOfFit(log_likelihood=vals["log_likelihood"], deviance=vals["deviance"],
                         pearson_chi2=vals["pearson_chi2"], df=int(vals["df"]), deviance_p=vals["deviance_p"],
                         pearson_p=vals["pearson_p"], approximate=bool(fit.get("approximate")))


def _listeners_from(items: Any, source: str) -> tuple[ListenerFit, ...]:
    """The per-listener fits of a MAP.json (``fitmap --listener``), as written."""
    if items is None:
        return ()
    fix = "give a MAP.json written by 'envpredict fitmap --listener'"
    if not isinstance(items, list) or not all(isinstance(f, dict) for f in items):
        raise InputError(f"mapping {source}: 'listeners' is not a list of objects", fix)
    out = []
    for f in items:
        name = f.get("listener")
        if not isinstance(name, str) or not name.strip():
            raise InputError(f"mapping {source}: a listener fit does not name its listener", fix)
        vals = {k: _num(f, k, source, required=False) for k in ("a", "b", "x50", "slope_at_x50")}
        if f.get("error") is None and (vals["a"] is None or vals["b"] is None or vals["b"] <= 0):
            raise InputError(f"mapping {source}: listener '{name}' has neither a curve (a, b > 0) nor an error",
                             fix)
        out.append(ListenerFit(listener=name, n_points=int(_num(f, "n_points", source, required=False) or 0),
                               n_trials=int(_num(f, "n_trials", source, required=False) or 0), **vals,
                               error=str(f.get("error") or ""), cov=_cov_from(f.get("cov_ab"), source)))
    return tuple(out)


def listener_mapping(mapping: ScoreMapping, listener: str) -> ScoreMapping:
    """One listener's own mapping from a group mapping fitted with listeners
    (``fitmap --listener``): the listener's ``a``, ``b`` and binomial covariance with the
    group's index, shape, guess, lapse and index range.

    Raises
    ------
    InputError
        If ``mapping`` is not a :class:`ScoreMapping`, holds no listener of that name
        (the error lists the ones it holds), or that listener has no curve of his or
        her own.
    """
    if not isinstance(mapping, ScoreMapping):
        raise InputError("mapping is not a ScoreMapping", "pass a mapping fitted with listeners")
    name = str(listener).strip()
    known = [f.listener for f in mapping.listeners]
    fit = next((f for f in mapping.listeners if f.listener == name), None)
    if fit is None:
        raise InputError(f"the mapping holds no listener '{name}'",
                         ("name one of its listeners: " + ", ".join(known)) if known else
                         "fit the mapping with fitmap --listener COLUMN, or use the group mapping")
    if fit.a is None or fit.b is None:
        raise InputError(f"listener '{name}' has no curve of his or her own ({fit.error})",
                         "use the group mapping, or another listener")
    return ScoreMapping(
        index=mapping.index, shape=mapping.shape, a=fit.a, b=fit.b, guess=mapping.guess, lapse=mapping.lapse,
        cov=fit.cov, n_points=fit.n_points, n_trials=fit.n_trials, index_range=mapping.index_range,
        source=f"listener '{name}' of {mapping.source}",
        notes=(f"the mapping of listener '{name}' alone (binomial intervals); the group mapping is the one for "
               "a panel",))


# ---------------------------------------------------------------------------
# Fitting
# ---------------------------------------------------------------------------

def _check_score_arrays(index_values: Any, correct: Any, trials: Any) -> tuple[np.ndarray, ...]:
    try:
        x = np.asarray(index_values, dtype=float).reshape(-1)
        k = np.asarray(correct, dtype=float).reshape(-1)
        n = np.asarray(trials, dtype=float).reshape(-1)
    except (TypeError, ValueError):
        raise InputError("index values, correct counts and trial counts must be numbers",
                         "pass three equal-length numeric sequences") from None
    if not x.size == k.size == n.size:
        raise InputError(f"{x.size} index values, {k.size} correct counts and {n.size} trial counts",
                         "pass one of each per row")
    if x.size == 0:
        raise InputError("no score rows", "give at least three rows of (index, correct, trials)")
    for name, v in (("index value", x), ("correct count", k), ("trial count", n)):
        bad = np.flatnonzero(~np.isfinite(v) | (np.abs(v) > MAX_PARAMETER))
        if bad.size:
            raise InputError(f"{name} of row {bad[0] + 1} is not a finite number within ±{MAX_PARAMETER:g}",
                             "repair the row")
    for name, v in (("correct count", k), ("trial count", n)):
        bad = np.flatnonzero((v != np.round(v)) | (v < 0))
        if bad.size:
            raise InputError(f"{name} of row {bad[0] + 1} is {v[bad[0]]:g}, not a whole number >= 0",
                             "give counts of items, not percentages")
    bad = np.flatnonzero(n == 0)
    if bad.size:
        raise InputError(f"row {bad[0] + 1} has 0 trials", "remove rows without trials")
    bad = np.flatnonzero(k > n)
    if bad.size:
        raise InputError(f"row {bad[0] + 1} has more correct ({k[bad[0]]:g}) than trials ({n[bad[0]]:g})",
                         "check the correct and trials columns")
    return x, k, n


def _negloglik(a: float, b: float, x, k, n, shape, guess, lapse) -> float:
    """Negative log-likelihood only (without binomial coefficients)."""
    eta = a + b * x
    if guess == 0.0 and lapse == 0.0:
        logp, log1mp = _log_cdf_pair(shape, eta)
    else:
        F = _cdf(shape, eta)
        s = 1.0 - guess - lapse
        with np.errstate(divide="ignore"):
            logp = np.log(guess + s * F)
            log1mp = np.log(lapse + s * (1.0 - F))
    with np.errstate(invalid="ignore"):
        terms = np.where(k > 0, k * logp, 0.0) + np.where(n - k > 0, (n - k) * log1mp, 0.0)
    return -float(np.sum(terms))


def _negloglik_parts(theta: np.ndarray, x, k, n, shape, guess, lapse):
    """Negative log-likelihood (without binomial coefficients), gradient and Hessian."""
    a, b = theta
    eta = a + b * x
    s = 1.0 - guess - lapse
    if guess == 0.0 and lapse == 0.0:
        logp, log1mp = _log_cdf_pair(shape, eta)
        p = np.exp(logp)
        q = np.exp(log1mp)
    else:
        F = _cdf(shape, eta)
        p = guess + s * F
        q = lapse + s * (1.0 - F)
        with np.errstate(divide="ignore"):
            logp = np.log(p)
            log1mp = np.log(q)
    nll = -float(np.sum(np.where(k > 0, k * logp, 0.0) + np.where(n - k > 0, (n - k) * log1mp, 0.0)))
    f = _pdf(shape, eta)
    df = _dpdf(shape, eta)
    tiny = P_FLOOR
    pp = np.maximum(p, tiny)
    qq = np.maximum(q, tiny)
    dL_dp = k / pp - (n - k) / qq
    d2L_dp2 = -k / pp ** 2 - (n - k) / qq ** 2
    dp_deta = s * f
    d2p_deta2 = s * df
    w1 = dL_dp * dp_deta
    grad = -np.array([np.sum(w1), np.sum(w1 * x)])
    w2 = d2L_dp2 * dp_deta ** 2 + dL_dp * d2p_deta2
    hess = -np.array([[np.sum(w2), np.sum(w2 * x)], [np.sum(w2 * x), np.sum(w2 * x * x)]])
    return nll, grad, hess


def _start(x, k, n, shape, guess, lapse) -> np.ndarray:
    """Starting values: weighted least squares on the transformed proportions."""
    p = (k + 0.5) / (n + 1.0)
    q = np.clip((p - guess) / (1.0 - guess - lapse), *START_CLIP)
    eta = _ppf(shape, q)
    w = n
    xm = np.sum(w * x) / np.sum(w)
    em = np.sum(w * eta) / np.sum(w)
    sxx = np.sum(w * (x - xm) ** 2)
    b = np.sum(w * (x - xm) * (eta - em)) / sxx if sxx > 0 else 1.0
    if not np.isfinite(b) or b <= 0:
        b = 1.0 / max(float(np.ptp(x)), MIN_START_RANGE)
    return np.array([em - b * xm, b])


def fit_mapping(
    index_values: Sequence[float] | np.ndarray,
    correct: Sequence[float] | np.ndarray,
    trials: Sequence[float] | np.ndarray,
    *,
    index: str = "index",
    shape: str = std.MAPPING_SHAPE,
    guess: float = std.MAPPING_GUESS,
    lapse: float = std.MAPPING_LAPSE,
    source: str = "",
    dispersion: str = DEFAULT_DISPERSION,
) -> ScoreMapping:
    """Fit a psychometric mapping from index values to scores by binomial maximum likelihood.

    Each row is an independent binomial observation: ``correct[i]`` items right out of
    ``trials[i]`` at index value ``index_values[i]``. The parameters ``a, b`` of
    ``p(x) = guess + (1 - guess - lapse) F(a + b x)`` maximise the binomial
    log-likelihood (``scipy.optimize.minimize``, trust-region with the exact Hessian).
    Their covariance is the inverse of the observed information (negative Hessian of
    the log-likelihood at the maximum); ``x50`` and ``slope_at_x50`` get delta-method
    intervals. Goodness of fit: deviance and Pearson chi-square against the saturated
    model with ``rows - 2`` degrees of freedom (McCullagh & Nelder 1989, sec. 4.4).

    Overdispersion: keywords of one sentence, sentences of one list and listeners are
    not independent trials, so pilot scores often scatter more than binomial sampling
    allows, and binomial intervals are then too narrow. With ``dispersion="quasi"``
    (the default) the dispersion is estimated as ``phi = Pearson chi-square / df``; when
    ``phi > 1`` the covariance is multiplied by ``phi``, the Wald intervals use the
    Student t quantile with ``df`` degrees of freedom and the profile-likelihood
    interval of x50 the criterion ``phi * t_df^2`` (quasi-binomial; McCullagh & Nelder
    1989, sec. 4.5.2 and 9.2.4; Williams 1982, Appl. Statist. 31(2)). ``phi <= 1`` leaves
    the binomial intervals (never narrower than binomial). ``dispersion="binomial"``
    keeps the binomial intervals whatever the scatter (a note then says they are too
    narrow). The mapping's :attr:`ScoreMapping.interval_method` says which was used.

    Parameters
    ----------
    index_values : index value per row (any real scale; STOI/ESTOI/STI lie in 0..1).
    correct, trials : whole-number counts per row, ``0 <= correct <= trials``, trials > 0.
    index : name of the index, stored in the mapping.
    shape : ``"logistic"`` or ``"normal"`` (cumulative normal).
    guess, lapse : fixed guess and lapse rates (proportions), guess + lapse <= 0.9.
    source : free text stored with the mapping (e.g. the file name).
    dispersion : ``"quasi"`` (default) or ``"binomial"``, see above.

    Returns
    -------
    ScoreMapping

    Raises
    ------
    InputError
        Malformed rows (non-integer or negative counts, correct > trials, NaN...).
    ComputationError
        The data cannot determine the curve: fewer than three distinct index values,
        every row at the floor or at the ceiling, no row between floor and ceiling
        (the slope runs off to infinity), a fitted curve that falls as the index rises,
        or a slope whose confidence interval includes zero.
    """
    from scipy.optimize import minimize
    from scipy.special import gammaln
    from scipy.stats import chi2
    from scipy.stats import t as student_t

    shape = check_shape(shape)
    guess, lapse = check_guess_lapse(guess, lapse)
    dispersion = check_dispersion(dispersion)
    x, k, n = _check_score_arrays(index_values, correct, trials)
    fix_more = "test more conditions, spread over the range from near-floor to near-ceiling scores"

    n_distinct = np.unique(x).size
    if n_distinct < MIN_DISTINCT_POINTS:
        raise ComputationError(
            f"only {n_distinct} distinct index value(s); a two-parameter curve with a goodness-of-fit "
            f"check needs at least {MIN_DISTINCT_POINTS}", fix_more)
    prop = k / n
    if np.all(k == n):
        raise ComputationError("every row is at the ceiling (100 % correct): the data cannot place the curve",
                               "add harder conditions (lower SNR) so that some scores fall below 100 %")
    if np.all(k == 0):
        raise ComputationError("every row is at the floor (0 % correct): the data cannot place the curve",
                               "add easier conditions (higher SNR) so that some scores rise above 0 %")
    if not np.any((k > 0) & (k < n)):
        raise ComputationError("no row lies between 0 % and 100 % correct: the slope of the curve cannot be "
                               "determined", "add conditions between the floor and the ceiling")
    if guess > 0 and np.all(prop <= guess):
        raise ComputationError(f"every row is at or below the guess rate ({100 * guess:g} %)",
                               "add easier conditions or check the guess rate")

    def fun(t):
        return _negloglik_parts(t, x, k, n, shape, guess, lapse)[0]

    def jac(t):
        return _negloglik_parts(t, x, k, n, shape, guess, lapse)[1]

    def hess(t):
        return _negloglik_parts(t, x, k, n, shape, guess, lapse)[2]

    t0 = _start(x, k, n, shape, guess, lapse)
    res = minimize(fun, t0, jac=jac, hess=hess, method="trust-exact",
                   options={"gtol": FIT_GTOL, "maxiter": FIT_MAXITER})
    a, b = (float(v) for v in res.x)
    eta_span = abs(b) * float(np.ptp(x))
    if not (np.all(np.isfinite(res.x)) and eta_span <= MAX_ETA_SPAN):
        raise ComputationError(
            "the scores jump from floor to ceiling with too little in between: the maximum-likelihood "
            "slope is not finite", "add conditions between the floor and the ceiling")
    nll, grad, h = _negloglik_parts(res.x, x, k, n, shape, guess, lapse)
    scale = max(1.0, float(np.sum(n)))
    if not np.all(np.abs(grad) <= FIT_GRADIENT_TOL * scale):
        raise ComputationError("the fit did not converge", "check the data; " + fix_more)
    if b <= 0:
        raise ComputationError(
            f"the fitted curve falls as {index} rises (slope b = {b:.3g})",
            "check that the index and score columns belong together; the index should rise with intelligibility")
    try:
        cov = np.linalg.inv(h)
    except np.linalg.LinAlgError:
        cov = None
    if cov is None or not np.all(np.isfinite(cov)) or cov[0, 0] <= 0 or cov[1, 1] <= 0:
        raise ComputationError("the observed information is singular: the data cannot determine both parameters",
                               fix_more)
    from scipy.stats import norm

    z = float(norm.ppf(0.5 + CI_LEVEL / 2.0))
    se_b = math.sqrt(cov[1, 1])
    if b - z * se_b <= 0:
        raise ComputationError(
            f"the slope is not distinguishable from zero (b = {b:.3g} +- {z * se_b:.3g}, "
            f"{100 * CI_LEVEL:g} % interval)", "test more trials per condition or a wider range of conditions")

    # goodness of fit
    s = 1.0 - guess - lapse
    p_hat = guess + s * _cdf(shape, a + b * x)
    p_hat = np.clip(p_hat, P_CLIP, 1 - P_CLIP)
    with np.errstate(divide="ignore", invalid="ignore"):
        t1 = np.where(k > 0, k * np.log(k / (n * p_hat)), 0.0)
        t2 = np.where(n - k > 0, (n - k) * np.log((n - k) / (n * (1 - p_hat))), 0.0)
    deviance = float(2.0 * np.sum(t1 + t2))
    pearson = float(np.sum((k - n * p_hat) ** 2 / (n * p_hat * (1 - p_hat))))
    dof = int(x.size - 2)
    log_binom = float(np.sum(gammaln(n + 1) - gammaln(k + 1) - gammaln(n - k + 1)))
    expected = np.concatenate([n * p_hat, n * (1 - p_hat)])
    approximate = bool(np.mean(expected < COCHRAN_MIN_EXPECTED) > COCHRAN_MAX_SHARE)
    gof = GoodnessOfFit(
        log_likelihood=log_binom - float(nll), deviance=deviance, pearson_chi2=pearson, df=dof,
        deviance_p=float(chi2.sf(deviance, dof)) if dof > 0 else math.nan,
        pearson_p=float(chi2.sf(pearson, dof)) if dof > 0 else math.nan,
        approximate=approximate,
    )
    phi_hat = pearson / dof if dof > 0 else None
    quasi = dispersion == "quasi" and phi_hat is not None and phi_hat > 1.0
    factor = float(phi_hat) if quasi else 1.0
    notes = []
    if dof > 0 and min(gof.deviance_p, gof.pearson_p) < 1.0 - CI_LEVEL:
        if quasi:
            notes.append(
                f"the points scatter more than binomial sampling allows (Pearson p = {gof.pearson_p:.3g}): "
                f"listeners or items differ; the intervals are widened by the estimated dispersion "
                f"(Pearson chi-square / df = {factor:.3g}, quasi-binomial)")
        else:
            notes.append(
                f"the points scatter more than binomial sampling allows (Pearson p = {gof.pearson_p:.3g}): "
                "listeners or items differ; the confidence intervals are too narrow (binomial intervals were "
                "asked for: the quasi-binomial ones widen them)")
    if approximate:
        notes.append("many expected counts are below 5: the chi-square p-values are approximate")
    if guess > 0 and np.any(prop < guess):
        notes.append(f"some scores lie below the guess rate ({100 * guess:g} %): check the guess rate")
    if not np.any(prop < 0.5 * (1 + guess - lapse)) or not np.any(prop > 0.5 * (1 + guess - lapse)):
        notes.append("all scores lie on one side of the curve's midpoint: x50 is an extrapolation")
    ci_df = dof if quasi else None
    crit = None if not quasi else factor * float(student_t.ppf(0.5 + CI_LEVEL / 2.0, dof)) ** 2
    cov = cov * factor
    if quasi and b - float(student_t.ppf(0.5 + CI_LEVEL / 2.0, dof)) * math.sqrt(cov[1, 1]) <= 0:
        notes.append("with the estimated dispersion the slope's interval includes zero: this pilot does not "
                     "establish how the score rises with the index (test more items or listeners per condition)")
    prof = _profile_interval_x50(x, k, n, shape, guess, lapse, a, b, float(nll), cov, crit=crit)
    if prof[0] is None or prof[1] is None:
        notes.append("the profile-likelihood interval of x50 is open on one side: the data do not bound it")
    return ScoreMapping(
        index=str(index).strip().lower() or "index", shape=shape, a=a, b=b, guess=guess, lapse=lapse,
        cov=cov, n_points=int(x.size), n_trials=int(np.sum(n)),
        index_range=(float(np.min(x)), float(np.max(x))), gof=gof,
        source=source or f"binomial maximum-likelihood fit to {x.size} rows",
        notes=tuple(notes), profile_ci_x50=prof, dispersion=factor, dispersion_estimate=phi_hat, ci_df=ci_df,
    )


def _profile_interval_x50(x, k, n, shape, guess, lapse, a, b, nll_min, cov,
                          crit: float | None = None) -> tuple[float | None, float | None]:
    """Profile-likelihood interval of x50 at :data:`CI_LEVEL` (``crit``: the criterion of
    the likelihood-ratio statistic, default the chi-square(1) quantile).

    With eta = b (x - x50), the profile of x50 maximises the likelihood over b > 0 at
    each fixed x50; the interval holds the x50 whose likelihood-ratio statistic
    2 (log L_max - log L_profile) stays below the chi-square(1) quantile
    (Venzon & Moolgavkar 1988, Appl. Statist. 37(1); McCullagh & Nelder 1989, 7.2).
    """
    from scipy.optimize import brentq, minimize_scalar
    from scipy.stats import chi2

    crit = float(chi2.ppf(CI_LEVEL, 1)) if crit is None else float(crit)
    x50_hat = -a / b
    log_b = math.log(b)

    def prof_nll(x50: float) -> float:
        def f(lb: float) -> float:
            bb = math.exp(lb)
            return _negloglik(-bb * x50, bb, x, k, n, shape, guess, lapse)

        r = minimize_scalar(f, bounds=(log_b - PROFILE_LOG_B_SPAN, log_b + PROFILE_LOG_B_SPAN),
                            method="bounded", options={"xatol": PROFILE_INNER_XTOL})
        return float(r.fun)

    def g(x50: float) -> float:
        return 2.0 * (prof_nll(x50) - nll_min) - crit

    se = math.sqrt(max(float(np.array([-1 / b, a / b ** 2]) @ cov @ np.array([-1 / b, a / b ** 2])), PROFILE_MIN_VAR))
    span = max(float(np.ptp(x)), se)
    ends: list[float | None] = []
    for direction in (-1.0, 1.0):
        step = se
        inner, outer = x50_hat, None
        while step <= PROFILE_MAX_RANGES * span:
            cand = x50_hat + direction * step
            if g(cand) > 0:
                outer = cand
                break
            inner = cand
            step *= 2.0
        if outer is None:
            ends.append(None)
        else:
            ends.append(float(brentq(g, min(inner, outer), max(inner, outer), xtol=PROFILE_XTOL)))
    return ends[0], ends[1]


# ---------------------------------------------------------------------------
# Rows of a table (read by envpredict.tables; this module parses no CSV)
# ---------------------------------------------------------------------------

def scores_from_rows(
    rows: Sequence[tuple[int, MappingType[str, Any]]],
    header: Sequence[str],
    *,
    index: str,
    correct: str = CORRECT_COLUMN,
    trials: str = TRIALS_COLUMN,
    source: str = "scores",
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Index values, correct counts and trial counts from parsed table rows.

    ``rows`` are ``(line_number, {column: text})`` pairs as read from a CSV file;
    errors name ``source``, the line and the column. Counts must be whole numbers.
    (:func:`listener_labels` reads a listener column of the same rows.)

    Raises
    ------
    InputError
        For rows that are not (line, mapping) pairs, a missing column, or cells that are
        not numbers or whole counts.
    """
    if isinstance(rows, (str, bytes)) or not isinstance(rows, Sequence) or not all(
            isinstance(r, tuple) and len(r) == 2 and isinstance(r[1], MappingType) for r in rows):
        raise InputError("rows are not (line, row) pairs", "pass rows as read by envpredict.tables.read_table")
    index, correct, trials = (resolve_column(header, c, source) for c in (index, correct, trials))
    if not rows:
        raise InputError(f"{source} has a header but no rows", "add one row per tested condition")
    xs, ks, ns = [], [], []
    for line, row in rows:
        x = cell_float(row, index, line, source)
        kk = cell_float(row, correct, line, source)
        nn = cell_float(row, trials, line, source)
        for col, v in ((correct, kk), (trials, nn)):
            if v != round(v) or v < 0:
                raise InputError(f"{source}, row {line}, column '{col}': {v:g} is not a whole number >= 0",
                                 "give counts of items, not percentages")
        if nn == 0:
            raise InputError(f"{source}, row {line}, column '{trials}': 0 trials", "remove rows without trials")
        if kk > nn:
            raise InputError(f"{source}, row {line}: {kk:g} correct out of {nn:g} trials",
                             f"check the '{correct}' and '{trials}' columns")
        xs.append(x)
        ks.append(kk)
        ns.append(nn)
    return np.array(xs), np.array(ks), np.array(ns)


def listener_labels(rows: Sequence[tuple[int, MappingType[str, Any]]], header: Sequence[str], column: str,
                    source: str = "scores") -> list[str]:
    """The listener of each row (a blank cell is refused, naming the row).

    Raises
    ------
    InputError
        For a column that is not in ``header``, rows that are not (line, mapping) pairs,
        or a blank cell.
    """
    col = resolve_column(header, column, source)
    if isinstance(rows, (str, bytes)) or not isinstance(rows, Sequence) or not all(
            isinstance(r, tuple) and len(r) == 2 and isinstance(r[1], MappingType) for r in rows):
        raise InputError("rows are not (line, row) pairs", "pass the rows of read_table")
    out = []
    for line, row in rows:
        v = str(row.get(col) or "").strip()
        if not v:
            raise InputError(f"{source}, row {line}, column '{col}' is blank", "name the listener of every row")
        out.append(v)
    return out


def fit_listeners(x: np.ndarray, k: np.ndarray, n: np.ndarray, labels: Sequence[str], **options) -> tuple[
        ListenerFit, ...]:
    """:func:`fit_mapping` per listener (rows grouped by ``labels``, in order of first
    appearance); a listener whose rows cannot determine a curve gets the reason in
    ``error`` instead of parameters.

    Raises
    ------
    InputError
        For values, counts or labels that are not one per row, or options
        :func:`fit_mapping` refuses for every fit (the shape, guess or lapse).
    """
    x = checks.array(x, "index values", min_size=0, finite=False)
    k = checks.array(k, "numbers correct", min_size=0, finite=False)
    n = checks.array(n, "numbers of trials", min_size=0, finite=False)
    if isinstance(labels, (str, bytes)) or not isinstance(labels, Sequence):
        raise InputError("listener labels are not a list", "pass one label per row")
    if not (x.size == k.size == n.size == len(labels)):
        raise InputError(f"{x.size} values, {k.size} counts, {n.size} trials and {len(labels)} labels",
                         "give one of each per row")
    if "shape" in options:
        options["shape"] = check_shape(options["shape"])
    if "guess" in options or "lapse" in options:
        options["guess"], options["lapse"] = check_guess_lapse(options.get("guess", std.MAPPING_GUESS),
                                                               options.get("lapse", std.MAPPING_LAPSE))
    out = []
    lab = np.asarray([str(v) for v in labels], dtype=object)
    for name in dict.fromkeys(lab):
        sel = lab == name
        try:
            m = fit_mapping(x[sel], k[sel], n[sel], dispersion="binomial", **options)
        except (ComputationError, InputError) as e:
            out.append(ListenerFit(listener=str(name), n_points=int(sel.sum()), n_trials=int(n[sel].sum()),
                                   error=e.what))
            continue
        out.append(ListenerFit(listener=str(name), n_points=int(sel.sum()), n_trials=int(n[sel].sum()), a=m.a,
                               b=m.b, x50=m.x50, slope_at_x50=m.slope_at_x50, cov=m.cov))
    return tuple(out)


def predict_scores(values: Any, mapping: ScoreMapping) -> np.ndarray:
    """Predicted percent correct for index value(s) ``values`` (NaN where a value is NaN).

    Raises
    ------
    InputError
        For values that are not numbers.
    """
    if not isinstance(mapping, ScoreMapping):
        raise InputError("mapping is not a ScoreMapping", "fit one with fit_mapping or load a MAP.json")
    try:
        x = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise InputError("index values must be numbers", "pass numbers (NaN for missing)") from None
    return mapping.percent(x)


@dataclass(frozen=True)
class PredictedTable:
    """Rows of a results table with a predicted-score column added.

    Attributes
    ----------
    header : column names, with ``column`` (and ``flag_column``) appended.
    rows : list of ``{column: text}`` dictionaries.
    column : name of the added predicted-percent column.
    flag_column : name of the added column marking extrapolated predictions.
    index_column : the column the predictions were computed from.
    n_rows, n_predicted, n_blank, n_extrapolated : counts.
    """

    header: list[str]
    rows: list[dict[str, str]]
    column: str
    flag_column: str
    index_column: str
    n_rows: int
    n_predicted: int
    n_blank: int
    n_extrapolated: int

    def csv_text(self) -> str:
        """The table with its added columns, as CSV text."""
        from .tables import table_text

        return table_text(self.header, self.rows)

    def to_dict(self) -> dict:
        return jsonable({
            "column": self.column, "flag_column": self.flag_column, "index_column": self.index_column,
            "n_rows": self.n_rows, "n_predicted": self.n_predicted, "n_blank": self.n_blank,
            "n_extrapolated": self.n_extrapolated,
            "header": list(self.header), "rows": self.rows,
            "cautions": [], "notes": [],
        })


def add_predictions(
    rows: Sequence[tuple[int, MappingType[str, Any]]],
    header: Sequence[str],
    mapping: ScoreMapping,
    *,
    index_column: str | None = None,
    column: str = PREDICTED_COLUMN,
    source: str = "results",
    digits: int = PREDICTED_DIGITS,
) -> PredictedTable:
    """Add a predicted percent-correct column to parsed result rows.

    A blank (or NaN) index cell -- e.g. a row whose computation failed -- gets a blank
    prediction; text that is not a number is refused with the row and column. Index
    values outside the range of the data the mapping was fitted on are marked
    ``extrapolated`` in ``column + "_note"``.

    Raises
    ------
    InputError
        For rows that are not (line, mapping) pairs, a ``mapping`` that is not a
        :class:`ScoreMapping`, a missing or existing column, or index cells that are not numbers.
    """
    if isinstance(rows, (str, bytes)) or not isinstance(rows, Sequence) or not all(
            isinstance(r, tuple) and len(r) == 2 and isinstance(r[1], MappingType) for r in rows):
        raise InputError("rows are not (line, row) pairs", "pass rows as read by envpredict.tables.read_table")
    if not isinstance(mapping, ScoreMapping):
        raise InputError("mapping is not a ScoreMapping", "pass the result of fit_mapping or read_mapping")
    if index_column is not None:
        index_column = checks.text(index_column, "index column")
    digits = checks.number(digits, "decimals", lo=0, hi=17, integer=True)
    col = resolve_column(header, index_column or mapping.index, source)
    flag = f"{column}_note"
    for c in (column, flag):
        if c in header:
            raise InputError(f"{source} already has a column '{c}'", "choose another name for the predicted column")
    lo, hi = mapping.index_range if mapping.index_range is not None else (-math.inf, math.inf)
    out_rows: list[dict[str, str]] = []
    n_pred = n_blank = n_ext = 0
    for line, row in rows:
        x = cell_float(row, col, line, source, blank_ok=True)
        new = {h: ("" if row.get(h) is None else str(row.get(h))) for h in header}
        if math.isnan(x):
            new[column] = ""
            new[flag] = "no index value"
            n_blank += 1
        else:
            new[column] = f"{float(mapping.percent(x)):.{digits}f}"
            ext = not lo <= x <= hi
            new[flag] = "extrapolated" if ext else ""
            n_ext += int(ext)
            n_pred += 1
        out_rows.append(new)
    return PredictedTable(header=list(header) + [column, flag], rows=out_rows, column=column, flag_column=flag,
                          index_column=col, n_rows=len(out_rows), n_predicted=n_pred, n_blank=n_blank,
                          n_extrapolated=n_ext)




# ---------------------------------------------------------------------------
# Files: MAP.json, scores tables, results tables
# ---------------------------------------------------------------------------

#: Where the built-in mappings' parameters come from (the numbers live in standards).
TAAL2011_SOURCE: str = (
    "Taal, Hendriks, Heusdens, Jensen, 'An algorithm for intelligibility prediction of time-frequency weighted "
    "noisy speech', IEEE Trans. ASLP 19(7), 2011: logistic f(d) = 100/(1 + exp(a d + b)) fitted to their "
    "listening test; parameters read from a secondary transcription of the paper")


#: Why no STI-to-score mapping is built in (said wherever a mapping name is refused).
NO_STI_MAPPING: str = ("no STI-to-score mapping is built in: no published relation's parameters could be checked "
                       "against the printed text; fit one to pilot scores with fitmap --index sti")


def published_mapping_names() -> tuple[str, ...]:
    """Names of the built-in published mappings (usable wherever a MAP.json is).

    Raises
    ------
    Nothing: the names are fixed.
    """
    return tuple(sorted(std.TAAL2011_MAPPINGS))


def published_mapping(name: str) -> ScoreMapping:
    """A built-in published mapping by name (:func:`published_mapping_names`).

    * ``taal2011-ieee``, ``taal2011-dantale``: STOI to % words correct, the logistics
      Taal et al. (2011) fitted for IEEE and Dantale II sentences,
      ``p = 1 / (1 + exp(a d + b))`` (:data:`envpredict.standards.TAAL2011_MAPPINGS`),
      i.e. ``eta = -b - a d`` in this module's form. They carry no covariance (the
      paper gives none): a sweep with them has no mapping interval.

    Raises
    ------
    InputError
        For a name that is not built in (the error lists the known ones).

    References
    ----------
    C. H. Taal, R. C. Hendriks, R. Heusdens, J. Jensen, "An algorithm for
    intelligibility prediction of time-frequency weighted noisy speech", IEEE Trans.
    ASLP 19(7) (2011) 2125-2136.
    """
    key = str(name).strip().lower()
    if key not in std.TAAL2011_MAPPINGS:
        raise InputError(f"no mapping file or built-in mapping named '{name}'",
                         f"give a MAP.json or one of the built-in mappings: {', '.join(published_mapping_names())} "
                         f"({NO_STI_MAPPING})")
    index, a_paper, b_paper, material = std.TAAL2011_MAPPINGS[key]
    return ScoreMapping(
        index=index, shape="logistic", a=-b_paper, b=-a_paper, source=f"{key}: {material}; {TAAL2011_SOURCE}",
        notes=(f"built-in published mapping '{key}' ({material}); its parameters were read from a secondary "
               "transcription of Taal et al. 2011, not checked against the printed paper",
               "a published mapping holds for its own test material, talkers and listeners: "
               "a pilot with your material (fitmap) is the better mapping"),
    )


def _is_mapping_name(path: str | os.PathLike) -> bool:
    """A bare word (no folder, no suffix) that is not an existing file names a built-in mapping."""
    from pathlib import Path

    if not isinstance(path, (str, os.PathLike)) or "\x00" in str(path):
        return False  # not a name: checks.path refuses it with its own message
    p = Path(path)
    return not p.exists() and p.parent == Path(".") and p.suffix == "" and bool(str(p).strip())


#: Separates a MAP.json from the name of one of its listeners in ``--map MAP.json#NAME``.
LISTENER_SEPARATOR: str = "#"


def read_mapping(path: str | os.PathLike, listener: str | None = None) -> ScoreMapping:
    """Read a mapping file (MAP.json, as written by ``envpredict fitmap``), or a built-in
    published mapping by name (:func:`published_mapping`).

    A MAP.json written by ``fitmap --listener`` holds the group fit and each listener's:
    the group's is read (with its intervals and the listeners' fits and spread), or one
    listener's (:func:`listener_mapping`) when ``listener`` names it or the path ends in
    ``#NAME`` (``MAP.json#L03``; an existing file whose name holds ``#`` wins).

    Parameters
    ----------
    path : the JSON file, or the name of a built-in mapping (e.g. ``"taal2011-ieee"``);
        an existing file of that name wins.
    listener : name of one listener of the file, or ``None`` for the group.

    Raises
    ------
    InputError
        A missing file, a folder, invalid JSON, content that is not a mapping, a bare
        name that is not built in (the error lists the known ones), or a listener the
        file does not hold (the error lists the ones it holds).
    """
    p = checks.path(path, "mapping")
    text = str(path)
    if listener is None and LISTENER_SEPARATOR in text and not p.exists():
        head, _, name = text.rpartition(LISTENER_SEPARATOR)
        if head and name.strip():
            return read_mapping(head, listener=name)
    m = _read_mapping(p, path)
    return m if listener is None else listener_mapping(m, listener)


def _read_mapping(p, path: str | os.PathLike) -> ScoreMapping:
    import json

    if _is_mapping_name(p):
        return published_mapping(str(path))
    if not p.exists():
        raise InputError(f"mapping '{p}' does not exist",
                         "check the path, write one with 'envpredict fitmap', or name a built-in mapping: "
                         + ", ".join(published_mapping_names()))
    if p.is_dir():
        raise InputError(f"mapping '{p}' is a folder", "give the path of a MAP.json file")
    try:
        d = json.loads(p.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as e:
        raise InputError(f"mapping '{p}' is not valid JSON ({getattr(e, 'msg', e)})",
                         "give a MAP.json written by 'envpredict fitmap'") from None
    except (ValueError, RecursionError):  # a number of thousands of digits, nesting thousands deep
        raise InputError(f"mapping '{p}' is not a mapping file (numbers or nesting beyond any MAP.json)",
                         "give a MAP.json written by 'envpredict fitmap'") from None
    except OSError as e:
        raise InputError(f"mapping '{p}' cannot be read ({e.strerror})", "check its permissions") from None
    return mapping_from_dict(d, source=f"'{p}'")


@dataclass(frozen=True)
class ScoreData:
    """The rows of a scores table a mapping was fitted on.

    Attributes
    ----------
    index_values, correct, trials : one value per row (counts are whole numbers).
    fitted_percent : the fitted mapping's percent correct at each row's index value
        (set by :func:`fit_mapping_file`).
    """

    index_values: np.ndarray
    correct: np.ndarray
    trials: np.ndarray
    fitted_percent: np.ndarray | None = None

    @property
    def observed_percent(self) -> np.ndarray:
        """Percent correct of each row."""
        return 100.0 * self.correct / self.trials


#: Points of the fitted curve drawn in a fit report, and how far past the data it runs
#: (share of the data's index range on each side; judgement).
FIT_CURVE_POINTS: int = 101
FIT_CURVE_MARGIN: float = 0.1


def fit_report_data(mapping: ScoreMapping, data: ScoreData) -> dict:
    """What a fit report draws, computed here (the report draws and computes nothing):
    the fitted curve over the data's index range (and a margin) with its pointwise band
    at :data:`CI_LEVEL` (delta method on eta = a + b x with the mapping's covariance and
    quantile, mapped through F), each row's observed percent with its exact binomial
    (Clopper-Pearson) interval (``scipy.stats.binomtest``), and the Pearson residuals
    ``(k - n p) / sqrt(n p (1 - p))``.

    Raises
    ------
    InputError
        If ``mapping`` is not a :class:`ScoreMapping` or ``data`` not a :class:`ScoreData`.
    """
    if not isinstance(mapping, ScoreMapping):
        raise InputError("mapping is not a ScoreMapping", "pass the result of fit_mapping")
    if not isinstance(data, ScoreData):
        raise InputError("data are not ScoreData", "pass the rows the mapping was fitted on")
    from scipy.stats import binomtest

    x = np.asarray(data.index_values, dtype=float)
    lo, hi = float(x.min()), float(x.max())
    pad = FIT_CURVE_MARGIN * (hi - lo)
    grid = np.linspace(lo - pad, hi + pad, FIT_CURVE_POINTS)
    out: dict[str, Any] = {"index": mapping.index, "curve_index": grid, "curve_percent": mapping.percent(grid),
                           "band_low": None, "band_high": None, "ci_level": CI_LEVEL,
                           "interval_method": mapping.interval_method}
    if mapping.cov is not None:
        c = np.asarray(mapping.cov, dtype=float)
        se = np.sqrt(np.maximum(c[0, 0] + 2 * grid * c[0, 1] + grid * grid * c[1, 1], 0.0))
        eta = mapping.a + mapping.b * grid
        q = mapping.quantile()
        out["band_low"] = 100.0 * (mapping.guess + mapping.span * _cdf(mapping.shape, eta - q * se))
        out["band_high"] = 100.0 * (mapping.guess + mapping.span * _cdf(mapping.shape, eta + q * se))
    k, n = np.asarray(data.correct, dtype=int), np.asarray(data.trials, dtype=int)
    cis = [binomtest(int(ki), int(ni)).proportion_ci(confidence_level=CI_LEVEL, method="exact") for ki, ni in zip(k, n)]
    p = np.clip(mapping.proportion(x), P_CLIP, 1 - P_CLIP)
    out.update({
        "index_values": x, "correct": k, "trials": n, "observed_percent": 100.0 * k / n,
        "observed_low": np.array([100.0 * c.low for c in cis]),
        "observed_high": np.array([100.0 * c.high for c in cis]),
        "fitted_percent": 100.0 * p, "pearson_residual": (k - n * p) / np.sqrt(n * p * (1 - p)),
    })
    return jsonable({key: (np.round(v, 4) if isinstance(v, np.ndarray) and v.dtype.kind == "f" else v)
                     for key, v in out.items()})


def fit_mapping_file(
    path: str | os.PathLike,
    *,
    index: str,
    correct: str = CORRECT_COLUMN,
    trials: str = TRIALS_COLUMN,
    shape: str = std.MAPPING_SHAPE,
    guess: float = std.MAPPING_GUESS,
    lapse: float = std.MAPPING_LAPSE,
    dispersion: str = DEFAULT_DISPERSION,
    listener: str | None = None,
) -> tuple[ScoreMapping, ScoreData]:
    """Fit a mapping (:func:`fit_mapping`) to the columns of a scores table (CSV).

    The shape and the guess and lapse rates are checked before the file is read.

    Parameters
    ----------
    path : CSV file with one row per tested condition.
    index : column holding the index value; also the index name stored in the mapping.
    correct, trials : columns holding the number of items correct and presented.
    shape, guess, lapse, dispersion : as for :func:`fit_mapping`.
    listener : column naming the listener of each row, or ``None``. With it the group
        mapping is fitted to all rows (the quasi-binomial intervals then take the
        between-listener scatter into account), each listener is fitted on his or her
        own rows (binomial), and the mapping carries ``listeners`` and the spread of
        x50 and of the slope across them (:func:`listener_spread`).

    Returns
    -------
    mapping : the fitted :class:`ScoreMapping` (its ``source`` names the file and columns).
    data : the fitted rows (:class:`ScoreData`).

    Raises
    ------
    InputError
        For a scores file that cannot be read or is malformed, a missing column, or counts
        that are not whole numbers.
    ComputationError
        If the fit does not converge.
    """
    from pathlib import Path

    shape = check_shape(shape)
    guess, lapse = check_guess_lapse(guess, lapse)
    dispersion = check_dispersion(dispersion)
    header, rows = read_table(path, "scores file")
    x, k, n = scores_from_rows(rows, header, index=index, correct=correct, trials=trials,
                               source=f"scores file '{path}'")
    labels = None if listener is None else listener_labels(rows, header, listener, source=f"scores file '{path}'")
    m = fit_mapping(x, k, n, index=index, shape=shape, guess=guess, lapse=lapse, dispersion=dispersion,
                    source=f"binomial maximum-likelihood fit to {len(rows)} rows of '{Path(path).name}' "
                           f"(columns {index}, {correct}, {trials})")
    if labels is not None:
        from dataclasses import replace

        fits = fit_listeners(x, k, n, labels, index=index, shape=shape, guess=guess, lapse=lapse)
        m = replace(m, listeners=fits, notes=m.notes + tuple(
            f"listener {f.listener}: no curve of his or her own ({f.error})" for f in fits if f.error))
    return m, ScoreData(index_values=x, correct=k, trials=n, fitted_percent=m.percent(x))


def predict_file(
    path: str | os.PathLike,
    mapping: ScoreMapping | str | os.PathLike,
    *,
    index_column: str | None = None,
    column: str = PREDICTED_COLUMN,
    out: str | os.PathLike | None = None,
) -> PredictedTable:
    """Add a predicted percent-correct column to a results table file (:func:`add_predictions`).

    Parameters
    ----------
    path : results CSV (e.g. written by ``envpredict batch``).
    mapping : a :class:`ScoreMapping`, or the path of a MAP.json file.
    index_column : column holding the index (default: the mapping's index name).
    column : name of the added column (not empty, not already in the table).
    out : write the table with the added columns to this CSV file, atomically (may be
        ``path`` itself); ``None`` writes nothing (see :meth:`PredictedTable.csv_text`).

    Returns
    -------
    PredictedTable

    Raises
    ------
    InputError
        For a results file or mapping that cannot be read or is malformed, a missing index
        column, an existing or empty ``column``, or an ``out`` that cannot be written.
    ComputationError
        If ``out`` cannot be written (a full disk).
    """
    from .tables import write_table

    if not str(column).strip():
        raise InputError("--name is empty", "give a column name")
    m = mapping if isinstance(mapping, ScoreMapping) else read_mapping(mapping)
    path = checks.path(path, "results file")
    header, rows = read_table(path, "results file")
    tab = add_predictions(rows, header, m, index_column=index_column, column=str(column).strip(),
                          source=f"results file '{path}'")
    if out is not None:
        write_table(out, tab.header, tab.rows)
    return tab
