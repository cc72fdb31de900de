"""Tests of envpredict.mapping and envpredict.sweep: mappings, binomial fit, SNR sweep, predicted-score column.

External references: scipy.stats (binomial simulation, chi-square, Student t,
binomial log-pmf), statsmodels (binomial GLM with logit and probit links; Logit and
Probit models on the ungrouped trials, whose standard errors come from the observed
information), and the package's own STOI only as the index inside the sweep.
"""

from __future__ import annotations

import csv
import json
import math

import numpy as np
import pytest
import soundfile as sf
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import stats
from scipy.special import expit, logit, ndtr

from envpredict.exceptions import ComputationError, InputError
from envpredict.mapping import (
    ScoreMapping,
    add_predictions,
    fit_mapping,
    mapping_from_dict,
    predict_scores,
    scores_from_rows,
)
from envpredict.sweep import parse_snr_range, snr_sweep

from conftest import run_cli

sm = pytest.importorskip("statsmodels.api")

FS = 16000


# ---------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------

def simulate(a, b, x, n, seed, shape="logistic", guess=0.0, lapse=0.0):
    """Binomial counts simulated with scipy.stats at p = guess + (1-guess-lapse) F(a + b x)."""
    F = expit if shape == "logistic" else ndtr
    p = guess + (1 - guess - lapse) * F(a + b * np.asarray(x))
    return stats.binom.rvs(np.asarray(n), p, random_state=np.random.default_rng(seed))


def speech_like(seconds=3.0, seed=0):
    """An invented speech-like test signal: a gliding harmonic complex (f0 about 110 Hz)
    gated by a 4 Hz syllable envelope with random syllable levels."""
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * FS)) / FS
    phase = 2 * np.pi * np.cumsum(110 + 10 * np.sin(2 * np.pi * 0.5 * t)) / FS
    x = sum(np.sin(h * phase) / h for h in range(1, 35))
    amps = rng.uniform(0.2, 1.0, int(seconds * 4) + 1)
    env = np.repeat(amps, FS // 4)[: t.size] * np.maximum(0, np.sin(2 * np.pi * 2 * t)) ** 2
    return 0.1 * x * env / np.max(np.abs(x))


def rows_of(table):
    header = list(table[0].keys())
    return header, [(i + 2, r) for i, r in enumerate(table)]


def power_index(clean, degraded, fs):
    """A simple deterministic index for the sweep machinery: SNR of (degraded - clean)
    mapped to 0..1, rising with the SNR (not a published index; test scaffolding)."""
    e = degraded - clean
    snr = 10 * np.log10(np.mean(clean ** 2) / np.mean(e ** 2))
    return float(expit(snr / 8.0))


# ---------------------------------------------------------------------------
# fitting
# ---------------------------------------------------------------------------

X8 = np.linspace(0.35, 0.95, 8)


def test_fit_matches_statsmodels_glm_logit():
    # statsmodels GLM, Binomial family, logit link (canonical: observed = expected info)
    n = np.full(X8.size, 30)
    k = simulate(-10.0, 16.0, X8, n, seed=3)
    m = fit_mapping(X8, k, n, index="stoi")
    glm = sm.GLM(np.c_[k, n - k], sm.add_constant(X8), family=sm.families.Binomial()).fit()
    assert m.a == pytest.approx(glm.params[0], rel=1e-7, abs=1e-7)
    assert m.b == pytest.approx(glm.params[1], rel=1e-7)
    se = m.param_se()
    assert se["a"] == pytest.approx(glm.bse[0], rel=1e-5)
    assert se["b"] == pytest.approx(glm.bse[1], rel=1e-5)
    assert np.asarray(m.cov) == pytest.approx(np.asarray(glm.cov_params()), rel=1e-5)
    assert m.gof.deviance == pytest.approx(glm.deviance, rel=1e-6)
    assert m.gof.pearson_chi2 == pytest.approx(glm.pearson_chi2, rel=1e-6)
    assert m.gof.log_likelihood == pytest.approx(glm.llf, rel=1e-8)
    assert m.gof.df == int(glm.df_resid)
    # p-values: scipy.stats chi-square upper tail
    assert m.gof.deviance_p == pytest.approx(stats.chi2.sf(glm.deviance, glm.df_resid), rel=1e-6)
    # Wald intervals as statsmodels computes them
    ci = np.asarray(glm.conf_int(alpha=0.05))
    assert m.ci()["a"] == pytest.approx(tuple(ci[0]), rel=1e-5)
    assert m.ci()["b"] == pytest.approx(tuple(ci[1]), rel=1e-5)


def test_fit_matches_statsmodels_probit():
    # Cumulative-normal shape = binomial GLM with probit link (same ML estimate);
    # standard errors from the observed information = statsmodels' Probit model on the
    # ungrouped 0/1 trials (its covariance is the inverse negative Hessian).
    n = np.full(X8.size, 25)
    k = simulate(-6.0, 9.5, X8, n, seed=5, shape="normal")
    m = fit_mapping(X8, k, n, index="estoi", shape="normal")
    glm = sm.GLM(np.c_[k, n - k], sm.add_constant(X8),
                 family=sm.families.Binomial(link=sm.families.links.Probit())).fit()
    assert (m.a, m.b) == pytest.approx(tuple(glm.params), rel=1e-6)
    xs = np.repeat(X8, n)
    ys = np.concatenate([np.r_[np.ones(ki), np.zeros(ni - ki)] for ki, ni in zip(k, n)])
    pro = sm.Probit(ys, sm.add_constant(xs)).fit(disp=0)
    assert (m.a, m.b) == pytest.approx(tuple(pro.params), rel=1e-5)
    assert np.asarray(m.cov) == pytest.approx(np.asarray(pro.cov_params()), rel=1e-4)
    assert m.gof.deviance == pytest.approx(glm.deviance, rel=1e-6)


def test_profile_likelihood_interval_of_x50_matches_statsmodels_profile():
    # independent profile: for fixed x50 the model logit p = b (x - x50) is a GLM without
    # intercept; its maximised log-likelihood (statsmodels) gives the likelihood-ratio
    # statistic, and the interval ends are where it equals chi2(1).ppf(0.95) (scipy)
    from scipy.optimize import brentq

    x = np.linspace(0.45, 0.8, 5)
    n = np.full(x.size, 20)
    k = simulate(-10.0, 15.0, x, n, seed=21)
    m = fit_mapping(x, k, n)
    full = sm.GLM(np.c_[k, n - k], sm.add_constant(x), family=sm.families.Binomial()).fit()

    def lr(x50):
        prof = sm.GLM(np.c_[k, n - k], (x - x50)[:, None], family=sm.families.Binomial()).fit()
        return 2 * (full.llf - prof.llf) - stats.chi2.ppf(0.95, 1)

    x50 = -full.params[0] / full.params[1]
    lo = brentq(lr, x50 - 0.3, x50)
    hi = brentq(lr, x50, x50 + 0.3)
    assert m.profile_ci_x50 == pytest.approx((lo, hi), abs=1e-6)
    # the profile interval is not the symmetric Wald interval
    assert m.to_dict()["ci_profile"]["x50"] == pytest.approx([lo, hi], abs=1e-6)


def test_fit_recovers_known_parameters_and_intervals_cover():
    # 300 data sets simulated with scipy.stats.binom at known (a, b): estimates are
    # nearly unbiased and the 95 % intervals cover the truth about 95 % of the time
    a0, b0 = -8.0, 12.0
    x = np.linspace(0.3, 1.0, 6)
    n = np.full(x.size, 40)
    est, cover_b, cover_x50 = [], 0, 0
    reps = 300
    for seed in range(reps):
        k = simulate(a0, b0, x, n, seed=100 + seed)
        try:
            m = fit_mapping(x, k, n)
        except ComputationError:  # pragma: no cover - essentially never at these settings
            continue
        est.append((m.a, m.b, m.x50))
        lo, hi = m.ci()["b"]
        cover_b += lo <= b0 <= hi
        lo, hi = m.ci()["x50"]
        cover_x50 += lo <= -a0 / b0 <= hi
    est = np.array(est)
    assert len(est) >= reps - 3
    assert np.median(est[:, 0]) == pytest.approx(a0, rel=0.05)
    assert np.median(est[:, 1]) == pytest.approx(b0, rel=0.05)
    assert np.median(est[:, 2]) == pytest.approx(-a0 / b0, abs=0.01)
    # binomial sampling of the coverage itself: 300 trials at 0.95 -> sd 1.3 %
    assert 0.90 <= cover_b / len(est) <= 0.99
    assert 0.90 <= cover_x50 / len(est) <= 0.99


def test_fit_with_guess_and_lapse_is_the_likelihood_maximum():
    # 4-alternative closed-set test (guess 0.25), lapse 0.02: the estimate maximises the
    # binomial log-likelihood computed with scipy.stats.binom.logpmf (independent
    # derivative-free optimiser), and lies near the simulation truth
    from scipy.optimize import minimize

    a0, b0, g, lam = -9.0, 14.0, 0.25, 0.02
    x = np.linspace(0.3, 1.0, 8)
    n = np.full(x.size, 200)
    k = simulate(a0, b0, x, n, seed=11, guess=g, lapse=lam)
    m = fit_mapping(x, k, n, guess=g, lapse=lam)

    def nll(t):
        p = g + (1 - g - lam) * expit(t[0] + t[1] * x)
        return -np.sum(stats.binom.logpmf(k, n, p))

    ref = minimize(nll, [a0 * 0.8, b0 * 0.8], method="Nelder-Mead",
                   options={"xatol": 1e-9, "fatol": 1e-12, "maxiter": 20000})
    assert (m.a, m.b) == pytest.approx(tuple(ref.x), rel=1e-4)
    assert m.gof.log_likelihood == pytest.approx(-ref.fun, abs=1e-6)
    lo, hi = m.ci()["x50"]
    assert lo <= -a0 / b0 <= hi
    # the curve runs from the guess rate to 1 - lapse
    assert float(m.proportion(-10.0)) == pytest.approx(g, abs=1e-6)
    assert float(m.proportion(10.0)) == pytest.approx(1 - lam, abs=1e-6)


def test_goodness_of_fit_flags_overdispersion():
    # counts far more scattered than binomial (alternating high/low) -> small p and a note
    x = np.linspace(0.3, 0.9, 8)
    n = np.full(8, 100)
    k = np.array([5, 40, 10, 70, 30, 95, 60, 99])
    m = fit_mapping(x, k, n)
    assert m.gof.pearson_p < 0.01
    assert any("scatter" in s for s in m.notes)


@pytest.mark.parametrize(
    "x, k, n, words",
    [
        ([0.5, 0.6, 0.7, 0.8], [20, 20, 20, 20], [20, 20, 20, 20], "ceiling"),
        ([0.5, 0.6, 0.7, 0.8], [0, 0, 0, 0], [20, 20, 20, 20], "floor"),
        ([0.5, 0.6, 0.6, 0.5], [3, 12, 13, 4], [20, 20, 20, 20], "distinct"),
        ([0.4, 0.5, 0.6, 0.7], [0, 0, 20, 20], [20, 20, 20, 20], "between"),
        ([0.4, 0.5, 0.6, 0.7], [18, 14, 8, 3], [20, 20, 20, 20], "falls"),
        ([0.4, 0.5, 0.6, 0.7], [10, 9, 11, 10], [20, 20, 20, 20], "zero"),
        ([0.4, 0.5, 0.6, 0.7], [0, 1, 19, 20], [20, 20, 20, 20], None),
    ],
)
def test_fit_refuses_undetermined_curves(x, k, n, words):
    if words is None:  # a steep but determined curve is accepted
        m = fit_mapping(x, k, n)
        assert m.b > 0
        return
    with pytest.raises(ComputationError, match=words):
        fit_mapping(x, k, n)


@pytest.mark.parametrize(
    "k, n, words",
    [
        ([3, 25, 10], [20, 20, 20], "more correct"),
        ([3, 5.5, 10], [20, 20, 20], "whole number"),
        ([3, 5, 10], [20, 0, 20], "0 trials"),
        ([3, -1, 10], [20, 20, 20], "whole number"),
        ([3, 5], [20, 20, 20], "correct counts"),
    ],
)
def test_fit_refuses_malformed_counts(k, n, words):
    with pytest.raises(InputError, match=words):
        fit_mapping([0.4, 0.6, 0.8], k, n)


def test_fit_refuses_bad_shape_and_rates():
    with pytest.raises(InputError, match="shape"):
        fit_mapping([0.4, 0.6, 0.8], [2, 10, 18], [20, 20, 20], shape="weibull")
    with pytest.raises(InputError, match="guess"):
        fit_mapping([0.4, 0.6, 0.8], [2, 10, 18], [20, 20, 20], guess=1.2)
    with pytest.raises(InputError, match="no room"):
        fit_mapping([0.4, 0.6, 0.8], [2, 10, 18], [20, 20, 20], guess=0.5, lapse=0.45)


# ---------------------------------------------------------------------------
# the mapping object
# ---------------------------------------------------------------------------

def test_mapping_formula_inverse_and_derivative():
    m = ScoreMapping(index="stoi", shape="logistic", a=-9.0, b=15.0)
    x = np.array([0.3, 0.6, 0.9])
    # analytic logistic
    assert predict_scores(x, m) == pytest.approx(100 / (1 + np.exp(-(-9.0 + 15.0 * x))))
    assert m.x50 == pytest.approx(0.6)
    assert m.slope_at_x50 == pytest.approx(15.0 / 4)
    for pct in (10, 20, 50, 80, 95):
        assert m.index_at(pct) == pytest.approx((logit(pct / 100) + 9.0) / 15.0)
        assert float(m.percent(m.index_at(pct))) == pytest.approx(pct)
    # derivative against a central difference
    h = 1e-6
    assert float(m.derivative(0.55)) == pytest.approx(float(m.proportion(0.55 + h) - m.proportion(0.55 - h)) / (2 * h),
                                                      rel=1e-6)
    mn = ScoreMapping(index="stoi", shape="normal", a=-3.0, b=5.0, guess=0.5)
    assert float(mn.proportion(0.6)) == pytest.approx(0.5 + 0.5 * stats.norm.cdf(0.0))
    assert mn.slope_at_x50 == pytest.approx(0.5 * stats.norm.pdf(0) * 5.0)
    with pytest.raises(InputError, match="outside the range"):
        mn.index_at(40)  # below the guess rate of a 2-alternative test
    assert np.isnan(predict_scores([np.nan], m)[0])


def test_mapping_json_round_trip_and_refusals():
    n = np.full(X8.size, 30)
    m = fit_mapping(X8, simulate(-10.0, 16.0, X8, n, seed=1), n, index="STOI", source="pilot")
    d = json.loads(json.dumps(m.to_dict()))
    for key in ("index", "shape", "params", "ci", "n_points", "source", "fit", "notes", "cov_ab"):
        assert key in d
    assert d["index"] == "stoi" and d["n_points"] == X8.size and d["n_trials"] == int(n.sum())
    m2 = mapping_from_dict(d, "map.json")
    assert (m2.a, m2.b, m2.index, m2.shape) == (m.a, m.b, m.index, m.shape)
    assert m2.ci()["x50"] == pytest.approx(m.ci()["x50"])
    bad = dict(d, params={"a": 1.0, "b": -2.0})
    with pytest.raises(InputError, match="slope"):
        mapping_from_dict(bad, "map.json")
    with pytest.raises(InputError, match="map.json"):
        mapping_from_dict(dict(d, params={"a": "x", "b": 1.0}), "map.json")
    with pytest.raises(InputError, match="format"):
        mapping_from_dict(dict(d, format="something-else"), "map.json")
    with pytest.raises(InputError, match="shape"):
        mapping_from_dict(dict(d, shape="cubic"), "map.json")


# ---------------------------------------------------------------------------
# table rows
# ---------------------------------------------------------------------------

def test_scores_from_rows_names_row_and_column():
    header, rows = rows_of([{"stoi": "0.5", "correct": "3", "trials": "20"},
                            {"stoi": "0.6", "correct": "12%", "trials": "20"}])
    with pytest.raises(InputError, match=r"pilot\.csv, row 3, column 'correct'"):
        scores_from_rows(rows, header, index="stoi", source="pilot.csv")
    with pytest.raises(InputError, match="no column 'estoi'"):
        scores_from_rows(rows, header, index="estoi", source="pilot.csv")
    header, rows = rows_of([{"stoi": "0.5", "correct": "", "trials": "20"}])
    with pytest.raises(InputError, match="row 2, column 'correct': empty"):
        scores_from_rows(rows, header, index="stoi", source="pilot.csv")


def test_add_predictions_column():
    m = ScoreMapping(index="stoi", shape="logistic", a=-9.0, b=15.0, index_range=(0.4, 0.9))
    header, rows = rows_of([
        {"row": "1", "stoi": "0.6", "error": ""},
        {"row": "2", "stoi": "", "error": "clean file missing"},
        {"row": "3", "stoi": "0.95", "error": ""},
    ])
    tab = add_predictions(rows, header, m)
    assert tab.header == ["row", "stoi", "error", "predicted_percent", "predicted_percent_note"]
    assert float(tab.rows[0]["predicted_percent"]) == pytest.approx(50.0)
    assert tab.rows[1]["predicted_percent"] == "" and tab.n_blank == 1
    assert float(tab.rows[2]["predicted_percent"]) == pytest.approx(100 * expit(-9 + 15 * 0.95), abs=0.01)
    assert tab.rows[2]["predicted_percent_note"] == "extrapolated" and tab.n_extrapolated == 1
    header, rows = rows_of([{"STOI": "0.6"}])  # column names match regardless of case
    assert float(add_predictions(rows, header, m).rows[0]["predicted_percent"]) == pytest.approx(50.0)
    header, rows = rows_of([{"stoi": "high"}])
    with pytest.raises(InputError, match="row 2, column 'stoi'"):
        add_predictions(rows, header, m, source="r.csv")
    header, rows = rows_of([{"stoi": "0.5", "predicted_percent": "1"}])
    with pytest.raises(InputError, match="already has"):
        add_predictions(rows, header, m)


# ---------------------------------------------------------------------------
# SNR sweep
# ---------------------------------------------------------------------------

@pytest.fixture(scope="module")
def signals():
    clean = speech_like(3.0, seed=0)
    noise = np.random.default_rng(7).standard_normal(int(10 * FS)) * 0.05
    return clean, noise


def test_parse_snr_range():
    assert parse_snr_range("-15:15:5").tolist() == [-15, -10, -5, 0, 5, 10, 15]
    assert parse_snr_range("0:1:0.25").tolist() == [0, 0.25, 0.5, 0.75, 1.0]
    for bad in ("1:2", "5:0:1", "0:10:0", "a:b:c", "0:1:2"):
        with pytest.raises(InputError):
            parse_snr_range(bad)


def test_sweep_mixes_at_the_stated_snr(signals):
    # speech-level convention: 10 log10(sum clean^2 / sum noise part^2) equals the SNR
    # asked for, and the noise part is a contiguous piece of the noise recording
    clean, noise = signals
    seen = []

    def probe(c, d, fs):
        seen.append(d - c)
        return power_index(c, d, fs)

    res = snr_sweep(clean, noise, FS, snr_db=[-6, 0, 6], index="probe", n_segments=3,
                    index_functions={"probe": probe})
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
              index_functions={"probe": lambda c, d, fs: seen.append(d) or 0.5})
    for d in seen:
        assert np.mean(d ** 2) == pytest.approx(np.mean(clean ** 2), rel=1e-12)


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
    from pystoi import stoi as reference_stoi

    clean, noise = signals
    res = snr_sweep(clean, noise, FS, snr_db=[-10, 0], index="stoi", n_segments=2)
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
    res = snr_sweep(clean, noise, FS, snr_db=[-5, 5], index="ssti", n_segments=1)
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
# CLI
# ---------------------------------------------------------------------------



def write_pilot(path, x, k, n, index="stoi"):
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["condition", index, "correct", "trials"])
        for i, (xi, ki, ni) in enumerate(zip(x, k, n)):
            w.writerow([f"c{i}", f"{xi:.4f}", int(ki), int(ni)])


def test_cli_fitmap_sweep_predict(tmp_path, capsys, signals):
    x = np.linspace(0.4, 0.95, 6)
    n = np.full(x.size, 40)
    k = simulate(-11.0, 17.0, x, n, seed=9)
    pilot = tmp_path / "pilot.csv"
    write_pilot(pilot, x, k, n)
    mp = tmp_path / "map.json"
    code, out, err = run_cli(["fitmap", str(pilot), "--index", "stoi", "--out", str(mp), "--json"], capsys)
    assert code == 0, err
    d = json.loads(out)
    assert json.loads(mp.read_text()) == d
    m = fit_mapping(x.round(4), k, n)
    assert d["params"]["a"] == pytest.approx(m.a, rel=1e-9)
    code, out, err = run_cli(["fitmap", str(pilot), "--index", "stoi"], capsys)
    assert code == 0 and "x50" in out and "Goodness of fit" in out

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
    code, out, err = run_cli(["sweep", str(cw), str(nw), "--snr", "-6:6:6", "--segments", "2"], capsys)
    assert code == 0, err
    assert "no mapping" in out

    results = tmp_path / "results.csv"
    results.write_text("row,stoi,error\n1,0.7,\n2,,bad file\n")
    outcsv = tmp_path / "pred.csv"
    code, out, err = run_cli(["predict", str(results), "--map", str(mp), "--out", str(outcsv)], capsys)
    assert code == 0, err
    got = list(csv.DictReader(outcsv.open()))
    assert float(got[0]["predicted_percent"]) == pytest.approx(float(m.percent(0.7)), abs=0.01)
    assert got[1]["predicted_percent"] == ""
    code, out, err = run_cli(["predict", str(results), "--map", str(mp), "--json"], capsys)
    assert code == 0
    j = json.loads(out)
    assert j["n_predicted"] == 1 and len(j["rows"]) == 2


@pytest.mark.parametrize(
    "text, words",
    [
        ("stoi,correct,trials\n0.5,3,20\n0.6,x,20\n0.7,15,20\n", "row 3, column 'correct'"),
        ("stoi,correct,trials\n0.5,3,20\n0.6,8\n0.7,15,20\n", "row 3: 2 cell"),
        ("stoi,correct,correct\n0.5,3,20\n", "more than once"),
        ("stoi;correct;trials\n0.5;3;20\n", "';'"),
        ("", "empty"),
        ("stoi,right,trials\n0.5,3,20\n", "no column 'correct'"),
    ],
)
def test_cli_fitmap_refuses_malformed_csv(tmp_path, capsys, text, words):
    p = tmp_path / "pilot.csv"
    p.write_text(text)
    mp = tmp_path / "map.json"
    code, _out, err = run_cli(["fitmap", str(p), "--index", "stoi", "--out", str(mp)], capsys)
    assert code == 2
    assert words in err and "pilot.csv" in err
    assert err.count("\n") == 1 and "Traceback" not in err
    assert not mp.exists()


def test_cli_fitmap_undetermined_exits_1(tmp_path, capsys):
    p = tmp_path / "pilot.csv"
    write_pilot(p, [0.5, 0.6, 0.7], [20, 20, 20], [20, 20, 20])
    code, _out, err = run_cli(["fitmap", str(p), "--index", "stoi", "--out", str(tmp_path / "m.json")], capsys)
    assert code == 1 and "ceiling" in err
    assert not (tmp_path / "m.json").exists()


def test_cli_sweep_and_predict_refusals(tmp_path, capsys):
    bad = tmp_path / "map.json"
    bad.write_text("{not json")
    code, _out, err = run_cli(["predict", str(tmp_path / "r.csv"), "--map", str(bad)], capsys)
    assert code == 2 and "not valid JSON" in err
    code, _out, err = run_cli(["sweep", "a.wav", "b.wav", "--snr", "5:0:1"], capsys)
    assert code == 2 and "FROM < TO" in err
    code, _out, err = run_cli(["sweep", "a.wav", "b.wav", "--target", "50"], capsys)
    assert code == 2 and "needs a mapping" in err


# ---------------------------------------------------------------------------
# File-level functions (mapping.fit_mapping_file / predict_file / read_mapping,
# sweep.snr_sweep_files) and the old module name
# ---------------------------------------------------------------------------

def test_file_functions_equal_the_array_functions(tmp_path):
    from envpredict.mapping import fit_mapping_file, predict_file, read_mapping

    x = np.linspace(0.4, 0.95, 6)
    n = np.full(x.size, 40)
    k = simulate(-11.0, 17.0, x, n, seed=9)
    pilot = tmp_path / "pilot.csv"
    write_pilot(pilot, x, k, n)
    m, data = fit_mapping_file(pilot, index="stoi")
    ref = fit_mapping(x.round(4), k, n, index="stoi")
    assert (m.a, m.b) == (ref.a, ref.b)
    assert np.array_equal(data.correct, k) and np.array_equal(data.observed_percent, 100 * k / n)
    mp = tmp_path / "map.json"
    mp.write_text(json.dumps(m.to_dict()))
    back = read_mapping(mp)
    assert (back.a, back.b, back.index) == (m.a, m.b, "stoi")
    results = tmp_path / "results.csv"
    results.write_text("row,stoi,error\n1,0.7,\n2,,bad file\n")
    tab = predict_file(results, mp, out=tmp_path / "out.csv")
    assert tab.rows[0]["predicted_percent"] == f"{float(m.percent(0.7)):.2f}"
    assert list(csv.DictReader((tmp_path / "out.csv").open())) == tab.rows
    assert tab.csv_text() == (tmp_path / "out.csv").read_text()


def test_fit_mapping_file_checks_options_before_reading(tmp_path):
    from envpredict.mapping import fit_mapping_file

    with pytest.raises(InputError, match="unknown mapping shape"):
        fit_mapping_file(tmp_path / "missing.csv", index="stoi", shape="weibull")
    with pytest.raises(InputError, match="does not exist"):
        fit_mapping_file(tmp_path / "missing.csv", index="stoi")


@pytest.mark.parametrize("kw,what", [
    ({"snr_db": "0:10"}, "FROM:TO:STEP"),
    ({"targets": [50.0]}, "--target needs a mapping"),
    ({"index": "pesq"}, "unknown index"),
    ({"level": "loud"}, "level convention"),
    ({"n_segments": 0}, "--segments"),
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


def test_old_module_name_still_works():
    import envpredict
    import envpredict.mapping
    import envpredict.predict
    import envpredict.sweep

    assert envpredict.predict.fit_mapping is envpredict.mapping.fit_mapping
    assert envpredict.predict.snr_sweep is envpredict.sweep.snr_sweep
    assert envpredict.fit_mapping is envpredict.mapping.fit_mapping
    assert envpredict.snr_sweep_files is envpredict.sweep.snr_sweep_files
