"""Predicted listening-test scores: index-to-score mappings, fitting, SNR sweeps, SRT.

Three pieces, each a pure function on arrays (no file I/O, no printing):

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
  ed., ch. 4).
* :func:`snr_sweep` -- mixes noise with clean speech at a list of SNRs (several noise
  segments per SNR, optionally after convolving the speech with an impulse
  response), computes an index per mixture and, with a mapping, the predicted score;
  reports the SNR at target scores (the predicted speech reception threshold, SRT, at
  50 % by default) with a confidence interval from the spread over noise segments,
  and the slope of the predicted psychometric function at each target in %/dB.

A mapping is stored as a JSON object (MAP.json, :meth:`ScoreMapping.to_dict`):
``format`` ("envpredict-score-mapping"), ``version``, ``index``, ``shape``,
``formula``, ``guess``, ``lapse``, ``params`` (``a``, ``b``, ``x50``,
``slope_at_x50``), ``ci_level``, ``ci`` (one ``[low, high]`` per parameter),
``ci_profile`` (``{"x50": [low, high]}``), ``cov_ab``, ``n_points``, ``n_trials``,
``index_range``, ``fit`` (goodness of fit), ``source`` and ``notes``. Only
``index``, ``shape`` and ``params.a``/``params.b`` are needed to read one back.

No built-in mapping is shipped. Published index-to-score fits belong to one speech
corpus, one listener group and one kind of processing, and a mapping used outside
them predicts the wrong score; fit your own with :func:`fit_mapping` on pilot data.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from collections.abc import Mapping as MappingType
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .exceptions import ComputationError, InputError
from .results import jsonable

#: Shapes of the psychometric function: the name, F(eta), F'(eta) and F'(0).
SHAPES: tuple[str, ...] = ("logistic", "normal")

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

#: Sweep limits: number of SNR points and noise segments (judgement: beyond these a
#: sweep is a mistake in the options, not a plan).
MAX_SNR_POINTS: int = 401
MAX_SEGMENTS: int = 100

#: Index names the sweep knows how to compute with the package's own code.
SWEEP_INDICES: tuple[str, ...] = ("stoi", "estoi", "ssti", "ssti_regression")

#: A fall of the mean index smaller than this between neighbouring SNRs is numerical
#: noise, not a reversal worth a note (judgement).
MONOTONE_TOLERANCE: float = 1e-6


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
    """Refuse unknown psychometric shapes."""
    s = str(shape).strip().lower()
    if s not in SHAPES:
        raise InputError(f"unknown mapping shape '{shape}'", f"use one of {', '.join(SHAPES)}")
    return s


def check_guess_lapse(guess: float, lapse: float) -> tuple[float, float]:
    """Refuse guess and lapse rates outside [0, 1) or leaving no room for a curve."""
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
        from scipy.stats import norm

        return float(norm.ppf(0.5 + CI_LEVEL / 2.0))

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
            "source": self.source,
            "notes": list(self.notes),
        })


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
    if not math.isfinite(f):
        raise InputError(f"mapping {source}: '{key}' is not finite", "refit the mapping")
    return f


def mapping_from_dict(d: Any, source: str = "(dict)") -> ScoreMapping:
    """Rebuild a :class:`ScoreMapping` from its :meth:`ScoreMapping.to_dict` form.

    Only ``index``, ``shape``, ``params.a``, ``params.b``, ``guess`` and ``lapse`` are
    needed; ``cov_ab``, ``n_points``, ``index_range``, ``source`` and ``notes`` are read
    when present. Malformed content raises :class:`InputError` naming ``source``.
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
    cov = d.get("cov_ab")
    cov_arr = None
    if cov is not None:
        try:
            cov_arr = np.asarray(cov, dtype=float)
        except (TypeError, ValueError):
            raise InputError(f"mapping {source}: 'cov_ab' is not a 2x2 matrix of numbers", fix) from None
        if cov_arr.shape != (2, 2) or not np.all(np.isfinite(cov_arr)):
            raise InputError(f"mapping {source}: 'cov_ab' is not a finite 2x2 matrix", fix)
    rng = d.get("index_range")
    index_range = None
    if rng is not None:
        try:
            lo, hi = (float(v) for v in rng)
            index_range = (lo, hi)
        except (TypeError, ValueError):
            raise InputError(f"mapping {source}: 'index_range' is not two numbers", fix) from None
    notes = d.get("notes") or []
    return ScoreMapping(
        index=index.strip().lower(), shape=shape, a=float(a), b=float(b), guess=guess, lapse=lapse,
        cov=cov_arr, n_points=int(d.get("n_points") or 0), n_trials=int(d.get("n_trials") or 0),
        index_range=index_range, gof=None, profile_ci_x50=prof_x50, source=str(d.get("source") or source),
        notes=tuple(str(n) for n in notes) if isinstance(notes, list) else (),
    )


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
        bad = np.flatnonzero(~np.isfinite(v))
        if bad.size:
            raise InputError(f"{name} of row {bad[0] + 1} is not a finite number", "repair the row")
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
    tiny = 1e-300
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
    q = np.clip((p - guess) / (1.0 - guess - lapse), 0.02, 0.98)
    eta = _ppf(shape, q)
    w = n
    xm = np.sum(w * x) / np.sum(w)
    em = np.sum(w * eta) / np.sum(w)
    sxx = np.sum(w * (x - xm) ** 2)
    b = np.sum(w * (x - xm) * (eta - em)) / sxx if sxx > 0 else 1.0
    if not np.isfinite(b) or b <= 0:
        b = 1.0 / max(float(np.ptp(x)), 1e-6)
    return np.array([em - b * xm, b])


def fit_mapping(
    index_values: Sequence[float] | np.ndarray,
    correct: Sequence[float] | np.ndarray,
    trials: Sequence[float] | np.ndarray,
    *,
    index: str = "index",
    shape: str = "logistic",
    guess: float = 0.0,
    lapse: float = 0.0,
    source: str = "",
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

    Parameters
    ----------
    index_values : index value per row (any real scale; STOI/ESTOI/STI lie in 0..1).
    correct, trials : whole-number counts per row, ``0 <= correct <= trials``, trials > 0.
    index : name of the index, stored in the mapping.
    shape : ``"logistic"`` or ``"normal"`` (cumulative normal).
    guess, lapse : fixed guess and lapse rates (proportions), guess + lapse <= 0.9.
    source : free text stored with the mapping (e.g. the file name).

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

    shape = check_shape(shape)
    guess, lapse = check_guess_lapse(guess, lapse)
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
                   options={"gtol": 1e-10, "maxiter": 500})
    a, b = (float(v) for v in res.x)
    eta_span = abs(b) * float(np.ptp(x))
    if not (np.all(np.isfinite(res.x)) and eta_span <= MAX_ETA_SPAN):
        raise ComputationError(
            "the scores jump from floor to ceiling with too little in between: the maximum-likelihood "
            "slope is not finite", "add conditions between the floor and the ceiling")
    nll, grad, h = _negloglik_parts(res.x, x, k, n, shape, guess, lapse)
    scale = max(1.0, float(np.sum(n)))
    if not np.all(np.abs(grad) <= 1e-5 * scale):
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
    p_hat = np.clip(p_hat, 1e-15, 1 - 1e-15)
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
    notes = []
    if dof > 0 and min(gof.deviance_p, gof.pearson_p) < 1.0 - CI_LEVEL:
        notes.append(
            f"the points scatter more than binomial sampling allows (Pearson p = {gof.pearson_p:.3g}): "
            "listeners or items differ; the confidence intervals are too narrow")
    if approximate:
        notes.append("many expected counts are below 5: the chi-square p-values are approximate")
    if guess > 0 and np.any(prop < guess):
        notes.append(f"some scores lie below the guess rate ({100 * guess:g} %): check the guess rate")
    if not np.any(prop < 0.5 * (1 + guess - lapse)) or not np.any(prop > 0.5 * (1 + guess - lapse)):
        notes.append("all scores lie on one side of the curve's midpoint: x50 is an extrapolation")
    prof = _profile_interval_x50(x, k, n, shape, guess, lapse, a, b, float(nll), cov)
    if prof[0] is None or prof[1] is None:
        notes.append("the profile-likelihood interval of x50 is open on one side: the data do not bound it")
    return ScoreMapping(
        index=str(index).strip().lower() or "index", shape=shape, a=a, b=b, guess=guess, lapse=lapse,
        cov=cov, n_points=int(x.size), n_trials=int(np.sum(n)),
        index_range=(float(np.min(x)), float(np.max(x))), gof=gof,
        source=source or f"binomial maximum-likelihood fit to {x.size} rows",
        notes=tuple(notes), profile_ci_x50=prof,
    )


def _profile_interval_x50(x, k, n, shape, guess, lapse, a, b, nll_min, cov) -> tuple[float | None, float | None]:
    """Profile-likelihood interval of x50 at :data:`CI_LEVEL`.

    With eta = b (x - x50), the profile of x50 maximises the likelihood over b > 0 at
    each fixed x50; the interval holds the x50 whose likelihood-ratio statistic
    2 (log L_max - log L_profile) stays below the chi-square(1) quantile
    (Venzon & Moolgavkar 1988, Appl. Statist. 37(1); McCullagh & Nelder 1989, 7.2).
    """
    from scipy.optimize import brentq, minimize_scalar
    from scipy.stats import chi2

    crit = float(chi2.ppf(CI_LEVEL, 1))
    x50_hat = -a / b
    log_b = math.log(b)

    def prof_nll(x50: float) -> float:
        def f(lb: float) -> float:
            bb = math.exp(lb)
            return _negloglik(-bb * x50, bb, x, k, n, shape, guess, lapse)

        r = minimize_scalar(f, bounds=(log_b - 12.0, log_b + 12.0), method="bounded",
                            options={"xatol": 1e-9})
        return float(r.fun)

    def g(x50: float) -> float:
        return 2.0 * (prof_nll(x50) - nll_min) - crit

    se = math.sqrt(max(float(np.array([-1 / b, a / b ** 2]) @ cov @ np.array([-1 / b, a / b ** 2])), 1e-24))
    span = max(float(np.ptp(x)), se)
    ends: list[float | None] = []
    for direction in (-1.0, 1.0):
        step = se
        inner, outer = x50_hat, None
        while step <= 20.0 * span:  # look up to 20 data ranges away (judgement)
            cand = x50_hat + direction * step
            if g(cand) > 0:
                outer = cand
                break
            inner = cand
            step *= 2.0
        if outer is None:
            ends.append(None)
        else:
            ends.append(float(brentq(g, min(inner, outer), max(inner, outer), xtol=1e-10)))
    return ends[0], ends[1]


# ---------------------------------------------------------------------------
# Rows of a table (the CSV reading itself is the caller's job)
# ---------------------------------------------------------------------------

def _cell_float(row: MappingType[str, Any], column: str, line: int, source: str, *,
                blank_ok: bool = False) -> float:
    v = row.get(column)
    text = "" if v is None else str(v).strip()
    if text == "":
        if blank_ok:
            return math.nan
        raise InputError(f"{source}, row {line}, column '{column}': empty cell", "fill in the value or remove the row")
    try:
        f = float(text)
    except ValueError:
        raise InputError(f"{source}, row {line}, column '{column}': '{text}' is not a number",
                         "give a plain number (decimal point, no units or % sign)") from None
    if not math.isfinite(f):
        if blank_ok:
            return math.nan
        raise InputError(f"{source}, row {line}, column '{column}': '{text}' is not finite", "repair the row")
    return f


def _resolve_column(header: Sequence[str], name: str, source: str) -> str:
    """The header entry called ``name`` (exact, else the one case-insensitive match)."""
    if name in header:
        return name
    near = [h for h in header if h.lower() == name.lower()]
    if len(near) == 1:
        return near[0]
    have = ", ".join(h for h in header if h) or "(none)"
    raise InputError(f"{source} has no column '{name}' (columns: {have})",
                     "name the column with the matching option, or add it to the file")


def scores_from_rows(
    rows: Sequence[tuple[int, MappingType[str, Any]]],
    header: Sequence[str],
    *,
    index: str,
    correct: str = "correct",
    trials: str = "trials",
    source: str = "scores",
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Index values, correct counts and trial counts from parsed table rows.

    ``rows`` are ``(line_number, {column: text})`` pairs as read from a CSV file;
    errors name ``source``, the line and the column. Counts must be whole numbers.
    """
    index, correct, trials = (_resolve_column(header, c, source) for c in (index, correct, trials))
    if not rows:
        raise InputError(f"{source} has a header but no rows", "add one row per tested condition")
    xs, ks, ns = [], [], []
    for line, row in rows:
        x = _cell_float(row, index, line, source)
        kk = _cell_float(row, correct, line, source)
        nn = _cell_float(row, trials, line, source)
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


def predict_scores(values: Any, mapping: ScoreMapping) -> np.ndarray:
    """Predicted percent correct for index value(s) ``values`` (NaN where a value is NaN)."""
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

    def to_dict(self) -> dict:
        return jsonable({
            "column": self.column, "flag_column": self.flag_column, "index_column": self.index_column,
            "n_rows": self.n_rows, "n_predicted": self.n_predicted, "n_blank": self.n_blank,
            "n_extrapolated": self.n_extrapolated,
        })


def add_predictions(
    rows: Sequence[tuple[int, MappingType[str, Any]]],
    header: Sequence[str],
    mapping: ScoreMapping,
    *,
    index_column: str | None = None,
    column: str = "predicted_percent",
    source: str = "results",
    digits: int = 2,
) -> PredictedTable:
    """Add a predicted percent-correct column to parsed result rows.

    A blank (or NaN) index cell -- e.g. a row whose computation failed -- gets a blank
    prediction; text that is not a number is refused with the row and column. Index
    values outside the range of the data the mapping was fitted on are marked
    ``extrapolated`` in ``column + "_note"``.
    """
    col = _resolve_column(header, index_column or mapping.index, source)
    flag = f"{column}_note"
    for c in (column, flag):
        if c in header:
            raise InputError(f"{source} already has a column '{c}'", "choose another name for the predicted column")
    lo, hi = mapping.index_range if mapping.index_range is not None else (-math.inf, math.inf)
    out_rows: list[dict[str, str]] = []
    n_pred = n_blank = n_ext = 0
    for line, row in rows:
        x = _cell_float(row, col, line, source, blank_ok=True)
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
# SNR sweep
# ---------------------------------------------------------------------------

def parse_snr_range(text: str) -> np.ndarray:
    """``"FROM:TO:STEP"`` in dB -> increasing array of SNRs including TO when on the grid."""
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
    count = math.floor((hi - lo) / step + 1e-9) + 1
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
    the swept range.
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

    def to_dict(self) -> dict:
        return jsonable({
            "percent": self.percent, "index_value": self.index, "snr_db": self.snr_db, "ci_low": self.ci_low,
            "ci_high": self.ci_high, "segment_sd_db": self.segment_sd_db,
            "segment_snr_db": list(self.segment_snr_db),
            "slope_percent_per_db": self.slope_percent_per_db,
            "map_ci_low": self.map_ci_low, "map_ci_high": self.map_ci_high, "note": self.note or None,
        })


@dataclass(frozen=True)
class SweepResult:
    """Index (and predicted score) against SNR, and the SNRs at target scores.

    Attributes
    ----------
    snr_db : swept SNRs, dB, increasing.
    index_name : the index computed.
    index : mean index over noise segments at each SNR.
    index_segments : (n_snr, n_segments) index per SNR and noise segment.
    index_sd : standard deviation over segments at each SNR.
    predicted_percent : mapping applied to the mean index, or ``None`` without a mapping.
    targets : one :class:`SweepTarget` per requested percent (empty without a mapping).
    level : ``"speech"`` or ``"mixture"`` (see :func:`snr_sweep`).
    segment_offsets_s : start of each noise segment in the noise signal, seconds.
    reverberant : whether the speech went through an impulse response.
    processed : whether the mixtures went through a processing chain.
    fs : sample rate, Hz.
    duration_s : length of each mixture, seconds.
    mapping : the mapping's MAP.json content, or ``None``.
    notes : cautions.
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

    @property
    def srt_db(self) -> float | None:
        """Predicted SRT: the SNR of the 50 % target, if requested and reached."""
        for t in self.targets:
            if abs(t.percent - 50.0) < 1e-9:
                return t.snr_db
        return None

    def to_dict(self) -> dict:
        srt = next((t for t in self.targets if abs(t.percent - 50.0) < 1e-9), None)
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
            "n_segments": len(self.segment_offsets_s),
            "segment_offsets_s": self.segment_offsets_s,
            "reverberant": self.reverberant,
            "processed": self.processed,
            "fs": self.fs,
            "duration_s": self.duration_s,
            "mapping": self.mapping,
            "notes": list(self.notes),
        })


LEVEL_CONVENTIONS: dict[str, str] = {
    "speech": ("SNR = 10 log10(mean speech power / mean noise power) over the length of the speech; the "
               "speech (after the impulse response, if any) stays at its level and each noise segment is "
               "scaled to give the SNR"),
    "mixture": ("SNR defined as for 'speech', then each mixture is rescaled to the speech's RMS level, so "
                "the presentation level stays constant as the SNR changes"),
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


def _processed(process: Callable[[np.ndarray, int], np.ndarray], mix: np.ndarray, fs: int,
               snr: float) -> np.ndarray:
    out = np.asarray(process(mix, fs), dtype=float).reshape(-1)
    if out.shape != mix.shape or not np.all(np.isfinite(out)):
        raise ComputationError(
            f"the processing chain returned {out.size} samples (or non-finite values) for a "
            f"{mix.size}-sample mixture at {snr:g} dB SNR",
            "make it return a finite signal of the same length, time-aligned with its input")
    return out


def snr_sweep(
    clean: np.ndarray,
    noise: np.ndarray,
    fs: int,
    *,
    snr_db: Sequence[float] | np.ndarray = tuple(range(-15, 16, 3)),
    index: str = "stoi",
    mapping: ScoreMapping | None = None,
    targets: Sequence[float] = (50.0,),
    ir: np.ndarray | None = None,
    n_segments: int = 5,
    level: str = "speech",
    index_functions: MappingType[str, Callable[[np.ndarray, np.ndarray, int], float]] | None = None,
    process: Callable[[np.ndarray, int], np.ndarray] | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> SweepResult:
    """Predicted index and score against SNR, and the SNR at target scores.

    For each SNR and each of ``n_segments`` noise segments (evenly spaced starts in
    ``noise``; the same segments at every SNR, so the curves differ only by the SNR),
    the speech -- ``clean``, or ``clean`` convolved with ``ir`` from its onset
    (ISO 3382-1 A.3.2 onset, so the speech is not delayed) and cut to the length of
    ``clean`` -- is mixed with the segment at the SNR (see :data:`LEVEL_CONVENTIONS`)
    and the index is computed between ``clean`` and the mixture. The mean index over
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
    index : ``"stoi"``, ``"estoi"``, ``"ssti"`` or a key of ``index_functions``.
    mapping : a :class:`ScoreMapping` for the same index, or ``None`` (index only).
    targets : target scores, percent (used only with a mapping).
    ir : impulse response at ``fs`` applied to the speech, or ``None``.
    n_segments : number of noise segments per SNR (1 gives no interval).
    level : ``"speech"`` or ``"mixture"`` level convention.
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
    """
    from scipy.signal import fftconvolve
    from scipy.stats import t as student_t

    from .audio import check_rate, validate_signal
    from .decay import onset_index

    fs = check_rate(fs, "clean speech")
    x = validate_signal(clean, fs, name="clean speech", min_seconds=1.0)
    nz = validate_signal(noise, fs, name="noise", allow_clipping=True)
    funcs = dict(index_functions) if index_functions is not None else default_index_functions()
    name = str(index).strip().lower()
    if name not in funcs:
        raise InputError(f"unknown index '{index}' for the sweep", f"use one of {', '.join(sorted(funcs))}")
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

    f = funcs[name]
    total = snrs.size * offsets.size
    vals = np.empty((snrs.size, offsets.size))
    done = 0
    for j, o in enumerate(offsets):
        seg = nz[o:o + L]
        p_noise = float(np.mean(seg * seg))
        if p_noise <= 0:
            raise InputError(f"noise segment at {o / fs:.2f} s is silent", "give a noise without silent stretches")
        for i, s in enumerate(snrs):
            g = math.sqrt(p_speech / (p_noise * 10.0 ** (s / 10.0)))
            mix = speech + g * seg
            if level == "mixture":
                mix = mix * math.sqrt(p_speech / float(np.mean(mix * mix)))
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
    predicted = None if mapping is None else mapping.percent(mean)
    tq = float(student_t.ppf(0.5 + CI_LEVEL / 2.0, offsets.size - 1)) if offsets.size > 1 else math.nan

    from scipy.stats import norm

    z_map = float(norm.ppf(0.5 + CI_LEVEL / 2.0))
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
                seg_sd = float(np.std(seg_srts, ddof=1))
                half = tq * seg_sd / math.sqrt(offsets.size)
                lo, hi = srt - half, srt + half
        m_lo = m_hi = None
        if srt is not None and mapping.cov is not None:
            half_x = z_map * mapping.index_sd_at(pct)
            m_lo = _crossing(snrs, mean, xt - half_x)[0]
            m_hi = _crossing(snrs, mean, xt + half_x)[0]
            if m_lo is None or m_hi is None:
                m_lo = m_hi = None
        out_targets.append(SweepTarget(
            percent=pct, index=float(xt), snr_db=srt, ci_low=lo, ci_high=hi, segment_sd_db=seg_sd,
            segment_snr_db=tuple(seg_srts), slope_percent_per_db=slope, map_ci_low=m_lo, map_ci_high=m_hi,
            note=note))
    if mapping is None:
        notes.append("no mapping: give one (fitted with fitmap) to get predicted scores and target SNRs")
    elif mapping.index_range is not None:
        lo_r, hi_r = mapping.index_range
        if np.any((mean < lo_r) | (mean > hi_r)):
            notes.append(f"part of the curve lies outside the index range the mapping was fitted on "
                         f"({lo_r:.3g} to {hi_r:.3g}): those predictions are extrapolations")
    return SweepResult(
        snr_db=snrs, index_name=name, index=mean, index_segments=vals, index_sd=sd,
        predicted_percent=predicted, targets=tuple(out_targets), level=level,
        segment_offsets_s=tuple(float(o) / fs for o in offsets), reverberant=ir is not None,
        processed=process is not None, fs=fs,
        duration_s=L / fs, mapping=None if mapping is None else mapping.to_dict(), notes=tuple(notes),
    )
