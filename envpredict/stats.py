"""Paired comparison of conditions in a results table: does condition B beat baseline A?

For every condition of a grouping column (``by``), the items scored under both that
condition and the baseline are matched on item columns (``pair_on``); the paired
differences d_i = index(condition, item i) - index(baseline, item i) give

* ``diff`` -- the mean paired difference;
* ``ci_low``, ``ci_high`` -- a bootstrap confidence interval of that mean (BCa by
  default: Efron 1987; Efron & Tibshirani 1993, ch. 14; or the percentile interval,
  ch. 13), from :data:`BOOTSTRAP_RESAMPLES` resamples of the items with the fixed
  seed :data:`BOOTSTRAP_SEED`, so the same table always gives the same interval;
* ``p_value`` -- the two-sided Wilcoxon signed-rank test of the differences
  (Wilcoxon 1945; ``scipy.stats.wilcoxon``, zero differences discarded, exact
  distribution for small samples without ties, normal approximation otherwise);
* ``p_holm`` -- the same p-values adjusted for testing several conditions against
  one baseline (Holm 1979 step-down), and a plain-words ``verdict``.

Matching (``pair_on``): by default an item is identified by all columns of the
table except the ``by`` column, the result columns written by ``envpredict batch``
(``row``, ``error`` and the index columns) and the per-condition input files
(``degraded``, ``ir``, ``inverted``); for a manifest ``clean,degraded,condition,talker`` that is
(``clean``, ``talker``). Give ``pair_on`` explicitly (one or more columns) when
other columns vary with the condition. Rows with an error or an empty index cell
are left out. Each item may appear only once per condition.

Beside each difference: the paired effect size d_z = mean(d)/sd(d) with its exact
interval from the noncentral t distribution (``effect_size``, ``effect_ci_low``,
``effect_ci_high``; Cumming & Finch 2001). :func:`compare_all_pairs` compares every pair
of conditions with the same statistics, Holm-adjusted over all pairs.

Sources: B. Efron, "Better bootstrap confidence intervals", JASA 82 (1987);
B. Efron, R. J. Tibshirani, *An Introduction to the Bootstrap*, Chapman & Hall
1993; F. Wilcoxon, "Individual comparisons by ranking methods", Biometrics
Bulletin 1 (1945); S. Holm, "A simple sequentially rejective multiple test
procedure", Scand. J. Statist. 6 (1979); G. Cumming, S. Finch, "A primer on the
understanding, use, and calculation of confidence intervals that are based on central
and noncentral distributions", Educ. Psychol. Meas. 61(4) (2001).
"""

from __future__ import annotations

import math
import os
import warnings
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

import numpy as np

from . import checks
from .exceptions import InputError
from .results import jsonable
from .tables import DEGRADED_COLUMN, ERROR_COLUMN, INVERTED_COLUMN, IR_COLUMN, RESULT_COLUMNS, cell_number

#: Bootstrap resamples. Efron & Tibshirani (1993, sec. 19.3) advise at least 1000 for
#: a percentile/BCa interval; 10000 keeps the Monte-Carlo error of the interval ends
#: below about 1 % of the interval width (judgement).
BOOTSTRAP_RESAMPLES: int = 10000
#: Fixed seed of the bootstrap generator (numpy PCG64): repeatable intervals.
BOOTSTRAP_SEED: int = 20240601
#: Confidence level of the interval (convention).
CONFIDENCE: float = 0.95
#: Significance level of the verdict (convention).
ALPHA: float = 0.05
#: Index columns tried, in this order, when none is named.
DEFAULT_INDICES: tuple[str, ...] = ("sti", "stoi")
#: Fewest bootstrap resamples accepted (judgement: below this even the percentile
#: interval's ends are mostly Monte-Carlo noise; Efron & Tibshirani 1993 advise 1000).
MIN_RESAMPLES: int = 100

#: Most bootstrap resamples: 100 times the default, 8 MB of resampled means; more
#: changes no printed digit and only costs time and memory (judgement).
MAX_RESAMPLES: int = 1_000_000


def _bootstrap_options(confidence: float, n_resamples: int, seed: int, method: str) -> tuple[float, int, int, str]:
    """Checked ``(confidence, n_resamples, seed, method)`` of :func:`bootstrap_mean_ci`.

    Raises
    ------
    InputError
        For a confidence outside (0, 1), a number of resamples outside
        :data:`MIN_RESAMPLES`..:data:`MAX_RESAMPLES`, a seed that is not a whole number
        from 0, or a method other than "BCa" and "percentile".
    """
    confidence = checks.number(confidence, "confidence", lo=0.0, hi=1.0, lo_open=True, hi_open=True,
                               fix="give e.g. 0.95")
    n_resamples = checks.number(n_resamples, "bootstrap resamples", integer=True, fix="use 1000 or more")
    if n_resamples < MIN_RESAMPLES:
        raise InputError(f"{n_resamples} bootstrap resamples are too few", "use 1000 or more")
    if n_resamples > MAX_RESAMPLES:
        raise InputError(f"{n_resamples} bootstrap resamples are too many (at most {MAX_RESAMPLES})",
                         f"use {BOOTSTRAP_RESAMPLES} (the default)")
    seed = checks.number(seed, "seed", lo=0, hi=2**63 - 1, integer=True)
    method = checks.text(method, "bootstrap method", fix="use BCa or percentile")
    return confidence, n_resamples, seed, method
#: Fewer matched items than this get a note that the interval and p-value are rough
#: (judgement).
FEW_ITEMS: int = 10
#: Index columns of the STI family, whose comparisons show the smallest meaningful
#: difference (:data:`envpredict.standards.STI_JND`).
STI_FAMILY: tuple[str, ...] = ("sti", "ssti", "ssti_regression")
#: Resampled values generated at once (memory bound of the bootstrap, judgement).
_CHUNK_VALUES: int = 2_000_000


def _norm_ppf(p: float) -> float:
    from scipy.special import ndtri

    return float(ndtri(p))


def _norm_cdf(z: float) -> float:
    from scipy.special import ndtr

    return float(ndtr(z))


def bootstrap_mean_ci(
    d: Sequence[float] | np.ndarray,
    *,
    confidence: float = CONFIDENCE,
    n_resamples: int = BOOTSTRAP_RESAMPLES,
    seed: int = BOOTSTRAP_SEED,
    method: str = "BCa",
) -> tuple[float, float]:
    """Bootstrap confidence interval of the mean of ``d``.

    Percentile interval: the ``(1-confidence)/2`` and ``(1+confidence)/2`` quantiles of
    the means of ``n_resamples`` resamples (with replacement, same size) of ``d``
    (Efron & Tibshirani 1993, ch. 13). BCa interval: the same bootstrap distribution
    read at quantiles corrected for bias z0 = Phi^-1(share of resampled means below
    the sample mean, ties counted half) and acceleration a from the jackknife,
    a = sum((m - m_i)^3) / (6 (sum((m - m_i)^2))^1.5) (Efron 1987; Efron & Tibshirani
    1993, eqs. 14.9-14.15).

    Parameters
    ----------
    d : the sample (e.g. paired differences), at least 2 finite values.
    confidence : in (0, 1).
    n_resamples : number of bootstrap resamples (>= 100).
    seed : seed of the numpy generator.
    method : ``"BCa"`` or ``"percentile"``.

    Returns
    -------
    (low, high). When all values are equal the interval is that value.

    Examples
    --------
    >>> lo, hi = bootstrap_mean_ci([0.05, 0.02, 0.06, 0.03, 0.04, 0.01, 0.05, 0.05])
    >>> round(lo, 3), round(hi, 3)
    (0.026, 0.049)

    Raises
    ------
    InputError
        For a sample that is not numbers, fewer than 2 finite values, or options refused
        (a confidence outside (0, 1), resamples outside :data:`MIN_RESAMPLES`..:data:`MAX_RESAMPLES`,
        an unknown method).
    """
    confidence, n_resamples, seed, method = _bootstrap_options(confidence, n_resamples, seed, method)
    d = checks.array(d, "sample", ndim=(0, 1), min_size=0, finite=False)
    x = np.asarray(d, dtype=float).ravel()
    if x.size < 2 or not np.all(np.isfinite(x)):
        raise InputError(f"a bootstrap interval needs at least 2 finite values ({x.size} given)",
                         "compare conditions with more matched items")
    if not 0.0 < confidence < 1.0:
        raise InputError(f"confidence {confidence} is outside (0, 1)", "give e.g. 0.95")
    if int(n_resamples) < MIN_RESAMPLES:
        raise InputError(f"{n_resamples} bootstrap resamples are too few", "use 1000 or more")
    m = method.lower()
    if m not in ("bca", "percentile"):
        raise InputError(f"unknown bootstrap method '{method}'", "use BCa or percentile")
    theta = float(np.mean(x))
    if np.ptp(x) == 0.0:
        return theta, theta
    n, B = x.size, int(n_resamples)
    rng = np.random.default_rng(seed)
    boot = np.empty(B)
    step = max(1, _CHUNK_VALUES // n)
    for s in range(0, B, step):
        k = min(step, B - s)
        idx = rng.integers(0, n, size=(k, n))
        boot[s:s + k] = x[idx].mean(axis=1)
    alpha = (1.0 - confidence) / 2.0
    lo_q, hi_q = alpha, 1.0 - alpha
    if m == "bca":
        share = (np.count_nonzero(boot < theta) + np.count_nonzero(boot <= theta)) / (2.0 * B)
        if 0.0 < share < 1.0:
            z0 = _norm_ppf(share)
            jack = (n * theta - x) / (n - 1)  # leave-one-out means
            dev = jack.mean() - jack
            den = 6.0 * float(np.sum(dev * dev)) ** 1.5
            a = float(np.sum(dev ** 3)) / den if den > 0 else 0.0
            qs = []
            for q in (alpha, 1.0 - alpha):
                zq = _norm_ppf(q)
                qs.append(_norm_cdf(z0 + (z0 + zq) / (1.0 - a * (z0 + zq))))
            lo_q, hi_q = qs
        # share 0 or 1: the sample mean lies outside the bootstrap distribution (tiny
        # samples); the bias correction is undefined and the percentile interval is used
    low, high = np.quantile(boot, [lo_q, hi_q])
    return float(low), float(high)


def holm(p_values: Sequence[float | None]) -> list[float | None]:
    """Holm (1979) step-down adjusted p-values; ``None`` entries stay ``None``.

    Examples
    --------
    >>> holm([0.01, 0.04, 0.03])
    [0.03, 0.06, 0.06]

    Raises
    ------
    InputError
        For p-values that are not numbers in [0, 1] (or None).
    """
    if isinstance(p_values, (str, bytes)) or not isinstance(p_values, Sequence) or not all(
            p is None or isinstance(p, (int, float)) and not isinstance(p, bool) and (0.0 <= p <= 1.0 or p != p)
            for p in p_values):
        raise InputError("p-values are not a list of numbers in [0, 1] (or None)", "pass the p-values of the tests")
    idx = [i for i, p in enumerate(p_values) if p is not None and math.isfinite(p)]
    out: list[float | None] = [None] * len(p_values)
    m = len(idx)
    running = 0.0
    for rank, i in enumerate(sorted(idx, key=lambda j: p_values[j])):
        running = max(running, min(1.0, (m - rank) * float(p_values[i])))
        out[i] = running
    return out


def wilcoxon_p(d: Sequence[float] | np.ndarray) -> float | None:
    """Two-sided Wilcoxon signed-rank p-value of paired differences (scipy.stats.wilcoxon).

    ``None`` when it is undefined (no non-zero difference).

    Raises
    ------
    InputError
        If ``d`` is not a 1-D array of numbers.
    """
    d = checks.array(d, "differences", min_size=0, finite=False)
    from scipy import stats

    x = np.asarray(d, dtype=float).ravel()
    if np.count_nonzero(x) == 0:
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            p = float(stats.wilcoxon(x).pvalue)
        except ValueError:
            return None
    return p if math.isfinite(p) else None


def effect_size_dz(d: Sequence[float] | np.ndarray, confidence: float = CONFIDENCE) -> tuple[float | None, ...]:
    """Paired effect size d_z = mean(d) / sd(d) (sd with n - 1) and its confidence interval.

    The interval inverts the noncentral t distribution: t = d_z sqrt(n) has n - 1 degrees
    of freedom and noncentrality delta sqrt(n); the ends are the deltas whose upper and
    lower tails put t at the chosen confidence (Cumming & Finch 2001). ``(None, None,
    None)`` for fewer than 2 differences or no spread.

    Raises
    ------
    InputError
        For differences that are not finite numbers, or a confidence outside (0, 1).

    Examples
    --------
    >>> dz, lo, hi = effect_size_dz([0.05, 0.02, 0.06, 0.03, 0.04, 0.01, 0.05, 0.05])
    >>> round(dz, 3), round(lo, 3), round(hi, 3)
    (2.244, 0.884, 3.568)
    """
    from scipy.optimize import brentq
    from scipy.stats import nct

    x = checks.array(d, "paired differences", ndim=(0, 1), min_size=0).ravel()
    confidence = checks.number(confidence, "confidence", lo=0.0, hi=1.0, lo_open=True, hi_open=True,
                               fix="give e.g. 0.95")
    n = x.size
    if n < 2:
        return None, None, None
    sd = float(np.std(x, ddof=1))
    if not sd > 0:
        return None, None, None
    dz = float(np.mean(x)) / sd
    t = dz * math.sqrt(n)
    df = n - 1
    alpha = 1.0 - confidence

    def cdf(nc: float) -> float:
        v = float(nct.cdf(t, df, nc))
        if not math.isfinite(v):  # far tails where scipy gives up: the limit
            v = 1.0 if nc < t else 0.0
        return v

    def end(q: float) -> float:
        # noncentrality at which P(T <= t) = q; the cdf falls as the noncentrality grows
        step = 2.0 + 0.5 * abs(t)
        lo, hi = t - step, t + step
        for _ in range(200):
            if cdf(lo) >= q:
                break
            lo -= step
        for _ in range(200):
            if cdf(hi) <= q:
                break
            hi += step
        return brentq(lambda nc: cdf(nc) - q, lo, hi, xtol=1e-10)

    return dz, end(1.0 - alpha / 2) / math.sqrt(n), end(alpha / 2) / math.sqrt(n)


@dataclass(frozen=True)
class ConditionStats:
    """One condition compared with the baseline.

    ``n``: matched items (for the baseline itself: its usable rows); ``n_rows``: usable
    rows of the condition; ``mean``: mean index over those rows; ``diff``: mean paired
    difference to the baseline over the matched items; ``ci_low``/``ci_high``:
    bootstrap interval of ``diff``; ``p_value``: Wilcoxon signed-rank; ``p_holm``:
    Holm-adjusted; ``verdict``: "higher", "lower", "no clear difference" or
    "baseline".
    """

    name: str
    n: int
    n_rows: int
    mean: float
    diff: float | None
    ci_low: float | None
    ci_high: float | None
    p_value: float | None
    p_holm: float | None
    verdict: str
    effect_size: float | None = None
    effect_ci_low: float | None = None
    effect_ci_high: float | None = None

    def to_dict(self) -> dict:
        return jsonable({
            "name": self.name, "n": self.n, "n_rows": self.n_rows, "mean": self.mean, "diff": self.diff,
            "ci_low": self.ci_low, "ci_high": self.ci_high, "p_value": self.p_value,
            "p_holm": self.p_holm, "verdict": self.verdict, "effect_size": self.effect_size,
            "effect_ci_low": self.effect_ci_low, "effect_ci_high": self.effect_ci_high,
        })


@dataclass(frozen=True)
class Comparison:
    """Result of :func:`compare_conditions`."""

    index: str
    by: str
    baseline: str
    pair_on: tuple[str, ...]
    conditions: tuple[ConditionStats, ...]
    ci_method: str = "BCa"
    n_resamples: int = BOOTSTRAP_RESAMPLES
    seed: int = BOOTSTRAP_SEED
    confidence: float = CONFIDENCE
    skipped_rows: int = 0  # rows without a usable index value (error or empty)
    notes: tuple[str, ...] = field(default=())
    #: Each item's index value per condition (for the per-item paired plot): ``(item
    #: label, {condition: value})``, items in order of first appearance.
    items: tuple[tuple[str, dict[str, float]], ...] = ()

    def to_dict(self) -> dict:
        return jsonable({
            "index": self.index, "by": self.by, "baseline": self.baseline, "pair_on": list(self.pair_on),
            "ci_method": self.ci_method, "n_resamples": self.n_resamples, "seed": self.seed,
            "confidence": self.confidence, "alpha": ALPHA, "skipped_rows": self.skipped_rows,
            "conditions": [c.to_dict() for c in self.conditions],
            "items": [{"item": name, "values": values} for name, values in self.items],
            "cautions": [], "notes": list(self.notes),
        })


def default_pair_on(columns: Sequence[str], by: str, index: str) -> tuple[str, ...]:
    """Item columns used when ``pair_on`` is not given (see the module docstring).

    Raises
    ------
    InputError
        If ``columns`` is not a list of names.
    """
    if isinstance(columns, (str, bytes)) or not isinstance(columns, Sequence) or not all(
            isinstance(c, str) for c in columns):
        raise InputError("columns are not a list of names", "pass the table's header")
    skip = set(RESULT_COLUMNS) | {by, index, DEGRADED_COLUMN, IR_COLUMN, INVERTED_COLUMN}
    return tuple(c for c in columns if c not in skip)


def _table_values(rows: Sequence[Mapping[str, Any]], *, by: str, index: str | None,
                  pair_on: str | Sequence[str] | None, columns: Sequence[str] | None
                  ) -> tuple[str, tuple[str, ...], dict[str, dict[tuple, float]], list[str], int]:
    """The index values of a results table per condition and item (the checks of
    :func:`compare_conditions`): ``(index, item keys, {condition: {item: value}},
    conditions in order of appearance, rows left out)``."""
    if isinstance(rows, (str, bytes, Mapping)) or not isinstance(rows, Sequence) or not all(
            isinstance(r, Mapping) for r in rows):
        raise InputError("the results are not a list of rows (column -> cell)",
                         "give the rows of a results table, e.g. from tables.read_results")
    if not rows:
        raise InputError("the results table has no rows", "score a manifest with 'envpredict batch' first")
    by = checks.text(by, "the condition column (--by)")
    if index is not None:
        index = checks.text(index, "the index column (--index)")
    if columns is not None and (isinstance(columns, (str, bytes)) or not isinstance(columns, Sequence)):
        raise InputError("columns are not a list of column names", "give the header of the results table")
    cols = list(columns) if columns is not None else list(rows[0].keys())
    if by not in cols:
        raise InputError(f"column '{by}' (--by) is not in the results", f"use one of: {', '.join(cols)}")
    if index is None:
        found = [c for c in DEFAULT_INDICES if c in cols and any(cell_number(r.get(c)) is not None for r in rows)]
        if not found:
            raise InputError("no index column (sti or stoi) with values in the results",
                             "name the column to compare with --index")
        if len(found) > 1:
            raise InputError(f"the results hold both {' and '.join(found)}",
                             "choose the index to compare with --index")
        index = found[0]
    if index not in cols:
        raise InputError(f"column '{index}' (--index) is not in the results", f"use one of: {', '.join(cols)}")
    if index == by:
        raise InputError(f"--index and --by are the same column '{by}'", "compare an index across conditions")
    if not any(cell_number(r.get(index)) is not None for r in rows):
        raise InputError(f"column '{index}' holds no numbers", "choose a numeric index column with --index")
    if pair_on is None:
        keys = default_pair_on(cols, by, index)
    else:
        if isinstance(pair_on, str):
            keys = tuple(k.strip() for k in pair_on.split(",") if k.strip())
        elif isinstance(pair_on, bytes) or not isinstance(pair_on, Sequence):
            raise InputError(f"--pair-on {pair_on!r:.40} is not a column name or a list of them",
                             "name the column(s) that identify an item, e.g. clean")
        else:
            keys = tuple(str(k) for k in pair_on)
        for k in keys:
            if k not in cols:
                raise InputError(f"column '{k}' (--pair-on) is not in the results", f"use one of: {', '.join(cols)}")
            if k in (by, index):
                raise InputError(f"--pair-on column '{k}' is the --by or --index column",
                                 "pair on the column(s) that identify an item, e.g. the clean file")
    if not keys:
        raise InputError("no column is left to identify items across conditions",
                         "name the item column with --pair-on")

    values: dict[str, dict[tuple, float]] = {}
    order: list[str] = []
    skipped = 0
    for r in rows:
        cond = str(r.get(by, "")).strip()
        if cond not in values:
            values[cond] = {}
            order.append(cond)
        v = cell_number(r.get(index))
        if str(r.get(ERROR_COLUMN, "") or "").strip() or v is None:
            skipped += 1
            continue
        key = tuple(str(r.get(k, "")) for k in keys)
        if key in values[cond]:
            raise InputError(
                f"condition '{cond}' has more than one row for the item "
                + ", ".join(f"{k}={val!r}" for k, val in zip(keys, key)),
                "name the column(s) that identify one item with --pair-on",
            )
        values[cond][key] = v
    return index, keys, values, order, skipped


def _paired(d: np.ndarray, boot: tuple[float, int, int, str]) -> dict:
    """The statistics of one set of paired differences ``d``: their mean and, from two
    items on, its bootstrap interval, the Wilcoxon p-value and d_z with its interval
    (``boot``: the checked options of :func:`_bootstrap_options`)."""
    confidence, n_resamples, seed, method = boot
    e: dict = dict(diff=float(np.mean(d)) if d.size else None, ci_low=None, ci_high=None, p_value=None)
    if d.size >= 2:
        e["ci_low"], e["ci_high"] = bootstrap_mean_ci(d, confidence=confidence, n_resamples=n_resamples,
                                                      seed=seed, method=method)
        e["p_value"] = wilcoxon_p(d)
        e["effect_size"], e["effect_ci_low"], e["effect_ci_high"] = effect_size_dz(d, confidence)
    return e


def _clear(e: Mapping[str, Any], p_holm: float | None) -> bool:
    """A clear difference: Holm-adjusted p below ALPHA and an interval that excludes zero."""
    return (p_holm is not None and p_holm < ALPHA and e["ci_low"] is not None
            and (e["ci_low"] > 0 or e["ci_high"] < 0))


def compare_conditions(
    rows: Sequence[Mapping[str, Any]],
    *,
    by: str,
    baseline: str,
    index: str | None = None,
    pair_on: str | Sequence[str] | None = None,
    columns: Sequence[str] | None = None,
    confidence: float = CONFIDENCE,
    n_resamples: int = BOOTSTRAP_RESAMPLES,
    seed: int = BOOTSTRAP_SEED,
    ci_method: str = "BCa",
) -> Comparison:
    """Compare every condition of column ``by`` with the ``baseline`` condition, paired by item.

    Parameters
    ----------
    rows : the results table, one mapping (column -> value or cell text) per row, e.g.
        from :func:`envpredict.tables.read_results`.
    by : the column naming the condition.
    baseline : the condition the others are compared with (a value of ``by``).
    index : the numeric column compared (default: ``sti`` or ``stoi``, whichever has
        values; both present -> it must be named).
    pair_on : column(s) identifying an item across conditions (see the module
        docstring for the default).
    columns : column order of the table (default: the keys of the first row).
    confidence, n_resamples, seed, ci_method : of the bootstrap interval
        (:func:`bootstrap_mean_ci`).

    Returns
    -------
    Comparison, the baseline first, then the other conditions in order of first
    appearance. A condition with fewer than 2 matched items gets no interval and no
    p-value (verdict "no clear difference").

    Examples
    --------
    Eight utterances scored noisy and after a (made-up) denoiser:

    >>> pairs = [(0.61, 0.66), (0.70, 0.72), (0.55, 0.61), (0.80, 0.83),
    ...          (0.66, 0.70), (0.59, 0.60), (0.73, 0.78), (0.64, 0.69)]
    >>> rows = [{"utterance": f"u{i}", "condition": c, "stoi": v}
    ...         for i, (a, b) in enumerate(pairs) for c, v in (("noisy", a), ("denoised", b))]
    >>> res = compare_conditions(rows, by="condition", baseline="noisy", pair_on="utterance")
    >>> c = res.conditions[1]
    >>> c.name, c.n, round(c.diff, 4), round(c.ci_low, 3), round(c.ci_high, 3), round(c.p_value, 4)
    ('denoised', 8, 0.0387, 0.026, 0.049, 0.0078)
    >>> c.verdict
    'higher'

    Raises
    ------
    InputError
        For a missing or unknown column, a baseline that is not a condition, index cells
        that are not numbers, or bootstrap options out of range.
    """
    boot = _bootstrap_options(confidence, n_resamples, seed, ci_method)
    confidence, n_resamples, seed, ci_method = boot
    index, keys, values, order, skipped = _table_values(rows, by=by, index=index, pair_on=pair_on, columns=columns)
    baseline = str(baseline).strip()
    if baseline not in values:
        raise InputError(f"baseline '{baseline}' is not a value of column '{by}'",
                         f"use one of: {', '.join(order)}")
    if not values[baseline]:
        raise InputError(f"the baseline '{baseline}' has no usable '{index}' values",
                         "check the error column of the results")

    base = values[baseline]
    notes: list[str] = []
    if skipped:
        notes.append(f"{skipped} row(s) without a usable {index} value (error or empty cell) were left out.")
    raw: list[dict] = []
    for cond in [baseline] + [c for c in order if c != baseline]:
        vals = values[cond]
        mean = float(np.mean(list(vals.values()))) if vals else float("nan")
        if cond == baseline:
            raw.append(dict(name=cond, n=len(vals), n_rows=len(vals), mean=mean, diff=0.0, ci_low=None,
                            ci_high=None, p_value=None))
            continue
        common = [k for k in vals if k in base]
        d = np.array([vals[k] - base[k] for k in common], dtype=float)
        entry = dict(name=cond, n=len(common), n_rows=len(vals), mean=mean, **_paired(d, boot))
        if d.size == 0:
            notes.append(f"No item of '{cond}' matches the baseline on ({', '.join(keys)}): give --pair-on "
                         "with the column(s) that identify an item.")
        elif d.size < 2:
            notes.append(f"'{cond}' has only {d.size} matched item: no interval or test.")
        elif d.size < FEW_ITEMS:
            notes.append(f"'{cond}' has only {d.size} matched items: the interval and p-value are rough.")
        if len(common) < len(vals) or len(common) < len(base):
            notes.append(f"'{cond}': {len(common)} item(s) matched; {len(vals) - len(common)} of its rows and "
                         f"{len(base) - len(common)} baseline rows have no partner.")
        raw.append(entry)
    adj = holm([e["p_value"] for e in raw])
    out = []
    for e, ph in zip(raw, adj):
        if e["name"] == baseline:
            verdict = "baseline"
        elif _clear(e, ph):
            verdict = "higher" if e["diff"] > 0 else "lower"
        else:
            verdict = "no clear difference"
        out.append(ConditionStats(p_holm=ph, verdict=verdict, **e))
    if len(out) > 2:
        notes.append("p (Holm) adjusts the p-values for comparing several conditions with one baseline (Holm 1979); "
                     "the verdict uses it.")
    notes.extend(_jnd_note(index, [(c.name, c.diff) for c in out if c.verdict != "baseline"]))
    return Comparison(index=index, by=by, baseline=baseline, pair_on=keys, conditions=tuple(out),
                      ci_method="BCa" if ci_method.lower() == "bca" else "percentile",
                      n_resamples=int(n_resamples), seed=int(seed), confidence=float(confidence),
                      skipped_rows=skipped, notes=tuple(notes), items=_item_values(values, order))


def _item_values(values: Mapping[str, Mapping[tuple, float]], order: Sequence[str]
                 ) -> tuple[tuple[str, dict[str, float]], ...]:
    """Each item's value per condition, items in order of first appearance; an item is
    labelled by its key cells joined with " / "."""
    seen: dict[tuple, dict[str, float]] = {}
    for cond in order:
        for key, v in values.get(cond, {}).items():
            seen.setdefault(key, {})[cond] = float(v)
    return tuple((" / ".join(str(k) for k in key), vals) for key, vals in seen.items())


@dataclass(frozen=True)
class PairDifference:
    """One pair of conditions: ``diff`` = mean over matched items of index(b) - index(a),
    with the statistics of :class:`ConditionStats` (``p_holm`` adjusted over all pairs)."""

    a: str
    b: str
    n: int
    diff: float | None
    ci_low: float | None
    ci_high: float | None
    p_value: float | None
    p_holm: float | None
    verdict: str
    effect_size: float | None = None
    effect_ci_low: float | None = None
    effect_ci_high: float | None = None

    def to_dict(self) -> dict:
        return jsonable({
            "a": self.a, "b": self.b, "n": self.n, "diff": self.diff, "ci_low": self.ci_low,
            "ci_high": self.ci_high, "p_value": self.p_value, "p_holm": self.p_holm, "verdict": self.verdict,
            "effect_size": self.effect_size, "effect_ci_low": self.effect_ci_low,
            "effect_ci_high": self.effect_ci_high,
        })


@dataclass(frozen=True)
class PairwiseComparison:
    """Result of :func:`compare_all_pairs`."""

    index: str
    by: str
    pair_on: tuple[str, ...]
    pairs: tuple[PairDifference, ...]
    ci_method: str = "BCa"
    n_resamples: int = BOOTSTRAP_RESAMPLES
    seed: int = BOOTSTRAP_SEED
    confidence: float = CONFIDENCE
    skipped_rows: int = 0
    notes: tuple[str, ...] = field(default=())

    def to_dict(self) -> dict:
        return jsonable({
            "index": self.index, "by": self.by, "pair_on": list(self.pair_on), "ci_method": self.ci_method,
            "n_resamples": self.n_resamples, "seed": self.seed, "confidence": self.confidence, "alpha": ALPHA,
            "skipped_rows": self.skipped_rows, "pairs": [p.to_dict() for p in self.pairs], "cautions": [],
            "notes": list(self.notes),
        })


def _jnd_note(index: str, diffs: list[tuple[str, float | None]]) -> list[str]:
    """For the STI family: the smallest meaningful difference and the differences below it."""
    from . import standards as std

    if index not in STI_FAMILY:
        return []
    small = [name for name, d in diffs if d is not None and abs(d) < std.STI_JND]
    s = (f"smallest meaningful difference of the STI: about {std.STI_JND:g} (the just-noticeable difference, "
         "Bradley 1986; from memory)")
    return [s + (f"; below it: {', '.join(small)}" if small else "")]


def compare_all_pairs(
    rows: Sequence[Mapping[str, Any]],
    *,
    by: str,
    index: str | None = None,
    pair_on: str | Sequence[str] | None = None,
    columns: Sequence[str] | None = None,
    confidence: float = CONFIDENCE,
    n_resamples: int = BOOTSTRAP_RESAMPLES,
    seed: int = BOOTSTRAP_SEED,
    ci_method: str = "BCa",
) -> PairwiseComparison:
    """Compare every pair of conditions of column ``by``, paired by item.

    For conditions in order of first appearance, each pair (a, b) with a before b gets
    the mean paired difference b - a over the items scored under both, its bootstrap
    interval, the Wilcoxon signed-rank p-value, the paired effect size d_z with its
    interval, and the p-value Holm-adjusted over *all* pairs (k conditions: k(k-1)/2
    tests). Parameters as for :func:`compare_conditions`.

    Raises
    ------
    InputError
        For a missing or unknown column, fewer than two conditions, index cells that are
        not numbers, or bootstrap options out of range.
    """
    boot = _bootstrap_options(confidence, n_resamples, seed, ci_method)
    confidence, n_resamples, seed, ci_method = boot
    index, keys, values, order, skipped = _table_values(rows, by=by, index=index, pair_on=pair_on, columns=columns)
    notes: list[str] = []
    if skipped:
        notes.append(f"{skipped} row(s) without a usable {index} value (error or empty cell) were left out.")
    if len(order) < 2:
        raise InputError(f"column '{by}' has only one condition", "compare at least two conditions")
    raw = []
    for i, a in enumerate(order):
        for b in order[i + 1:]:
            common = [k for k in values[b] if k in values[a]]
            d = np.array([values[b][k] - values[a][k] for k in common], dtype=float)
            e = dict(a=a, b=b, n=len(common), **_paired(d, boot))
            if d.size < 2:
                notes.append(f"'{a}' and '{b}' share {d.size} item(s): no interval or test.")
            raw.append(e)
    adj = holm([e["p_value"] for e in raw])
    pairs = []
    for e, ph in zip(raw, adj):
        if _clear(e, ph):
            verdict = "b higher" if e["diff"] > 0 else "b lower"
        else:
            verdict = "no clear difference"
        pairs.append(PairDifference(p_holm=ph, verdict=verdict, **e))
    notes.append(f"p (Holm) adjusts the p-values for all {len(raw)} pairs of conditions (Holm 1979); "
                 "the verdict uses it.")
    notes.extend(_jnd_note(index, [(f"{p.b} - {p.a}", p.diff) for p in pairs]))
    return PairwiseComparison(index=index, by=by, pair_on=keys, pairs=tuple(pairs),
                              ci_method="BCa" if ci_method.lower() == "bca" else "percentile",
                              n_resamples=int(n_resamples), seed=int(seed), confidence=float(confidence),
                              skipped_rows=skipped, notes=tuple(notes))


def compare_conditions_file(
    path: str | os.PathLike,
    *,
    by: str,
    baseline: str,
    index: str | None = None,
    pair_on: str | Sequence[str] | None = None,
    confidence: float = CONFIDENCE,
    n_resamples: int = BOOTSTRAP_RESAMPLES,
    seed: int = BOOTSTRAP_SEED,
    ci_method: str = "BCa",
) -> Comparison:
    """:func:`compare_conditions` of a results file written by ``envpredict batch``.

    Parameters
    ----------
    path : the results CSV (read by :func:`envpredict.tables.read_results`; a file still
        being written is read up to its last complete line).
    by, baseline, index, pair_on, confidence, n_resamples, seed, ci_method : as for
        :func:`compare_conditions`.

    Returns
    -------
    Comparison

    Raises
    ------
    InputError
        For a results file that cannot be read or is malformed, or options refused by
        :func:`compare_conditions`.
    """
    path = checks.path(path, "results file")
    from .tables import read_results

    columns, rows = read_results(path)
    return compare_conditions(rows, by=by, baseline=baseline, index=index, pair_on=pair_on, columns=columns,
                              confidence=confidence, n_resamples=n_resamples, seed=seed, ci_method=ci_method)


def compare_all_pairs_file(path: str | os.PathLike, **kwargs: Any) -> PairwiseComparison:
    """:func:`compare_all_pairs` of a results file written by ``envpredict batch``.

    Raises
    ------
    InputError
        For a file that is missing or not a results table, and as :func:`compare_all_pairs`.
    """
    from .tables import read_results

    columns, rows = read_results(checks.path(path, "results file"))
    return compare_all_pairs(rows, columns=columns, **kwargs)
