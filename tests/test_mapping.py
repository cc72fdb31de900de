"""Tests of envpredict.mapping: the psychometric mapping, its binomial fit, intervals,
goodness of fit, mapping files and the predicted-score column (predict_scores /
add_predictions, ``fitmap`` and ``predict`` commands).

External references: scipy.stats (binomial simulation, chi-square, Student t,
binomial log-pmf), statsmodels (binomial GLM with logit and probit links; Logit and
Probit models on the ungrouped trials, whose standard errors come from the observed
information).
"""

from __future__ import annotations

import csv
import io
import json

import numpy as np
import pytest
from scipy import stats
from scipy.special import expit, logit

from envpredict.exceptions import ComputationError, InputError
from envpredict.mapping import (
    ScoreMapping,
    add_predictions,
    fit_mapping,
    mapping_from_dict,
    predict_scores,
    scores_from_rows,
)

from cli_for_tests import run_cli
from signals_for_tests import simulated_counts as simulate

sm = pytest.importorskip("statsmodels.api")


# ---------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------

def rows_of(table):
    header = list(table[0].keys())
    return header, [(i + 2, r) for i, r in enumerate(table)]


def write_pilot(path, x, k, n, index="stoi"):
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["condition", index, "correct", "trials"])
        for i, (xi, ki, ni) in enumerate(zip(x, k, n)):
            w.writerow([f"c{i}", f"{xi:.4f}", int(ki), int(ni)])


def write_simulated_pilot(path):
    """A pilot table of six conditions, 40 trials each, simulated at a = -11, b = 17;
    returns (x, k, n)."""
    x = np.linspace(0.4, 0.95, 6)
    n = np.full(x.size, 40)
    k = simulate(-11.0, 17.0, x, n, seed=9)
    write_pilot(path, x, k, n)
    return x, k, n


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
# CLI: fitmap and predict
# ---------------------------------------------------------------------------

def test_cli_fitmap_and_predict(tmp_path, capsys):
    pilot = tmp_path / "pilot.csv"
    x, k, n = write_simulated_pilot(pilot)
    mp = tmp_path / "map.json"
    code, out, err = run_cli(["fitmap", str(pilot), "--index", "stoi", "--out", str(mp), "--json"], capsys)
    assert code == 0, err
    d = json.loads(out)
    assert json.loads(mp.read_text()) == d
    m = fit_mapping(x.round(4), k, n)
    assert d["params"]["a"] == pytest.approx(m.a, rel=1e-9)
    code, out, err = run_cli(["fitmap", str(pilot), "--index", "stoi"], capsys)
    assert code == 0 and "x50" in out and "Goodness of fit" in out

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


def test_cli_predict_refusals(tmp_path, capsys):
    bad = tmp_path / "map.json"
    bad.write_text("{not json")
    code, _out, err = run_cli(["predict", str(tmp_path / "r.csv"), "--map", str(bad)], capsys)
    assert code == 2 and "not valid JSON" in err

# ---------------------------------------------------------------------------
# File-level functions (mapping.fit_mapping_file / predict_file / read_mapping)
# ---------------------------------------------------------------------------

def test_file_functions_equal_the_array_functions(tmp_path):
    from envpredict.mapping import fit_mapping_file, predict_file, read_mapping

    pilot = tmp_path / "pilot.csv"
    x, k, n = write_simulated_pilot(pilot)
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


# ---------------------------------------------------------------------------
# Built-in published mappings
# ---------------------------------------------------------------------------

# Taal et al. 2011 (IEEE Trans. ASLP 19(7)), the fitted logistic f(d) = 100 / (1 + exp(a d + b)),
# written here from the transcription: IEEE sentences a = -17.4906, b = 9.6921;
# Dantale II a = -14.5435, b = 7.0792.
TAAL = {"taal2011-ieee": (-17.4906, 9.6921), "taal2011-dantale": (-14.5435, 7.0792)}


@pytest.mark.parametrize("name", sorted(TAAL))
def test_published_mapping_is_the_paper_logistic(name):
    from envpredict.mapping import published_mapping, read_mapping

    a, b = TAAL[name]
    d = np.linspace(0.3, 1.0, 15)
    expected = 100.0 / (1.0 + np.exp(a * d + b))
    for m in (published_mapping(name), read_mapping(name), read_mapping(name.upper())):
        assert m.index == "stoi"
        np.testing.assert_allclose(m.percent(d), expected, rtol=1e-12)
        assert "Taal" in m.source and "secondary transcription" in m.source
        assert any("secondary transcription" in n for n in m.notes)
    # 50 % at d = -b / a
    assert published_mapping(name).index_at(50.0) == pytest.approx(-b / a, rel=1e-12)


def test_an_unknown_mapping_name_lists_the_known_ones(tmp_path):
    from envpredict.mapping import published_mapping, read_mapping

    for bad in (lambda: published_mapping("taal2012"), lambda: read_mapping("taal2012")):
        with pytest.raises(InputError) as e:
            bad()
        assert "taal2011-ieee" in str(e.value) and "taal2011-dantale" in str(e.value)
    with pytest.raises(InputError, match="does not exist.*taal2011-ieee"):
        read_mapping(tmp_path / "missing.json")


def test_cli_takes_a_built_in_mapping_wherever_map_is(tmp_path, capsys):
    from cli_for_tests import run_cli

    res = tmp_path / "results.csv"
    res.write_text("item,stoi\na,0.5\nb,0.7\n")
    code, out, err = run_cli(["predict", str(res), "--map", "taal2011-ieee", "--json"], capsys)
    assert code == 0, err
    import json

    rows = json.loads(out)
    assert "inputs" in rows
    code, _out, err = run_cli(["predict", str(res), "--map", "taal-ieee"], capsys)
    assert code == 2 and "taal2011-ieee" in err and "taal2011-dantale" in err
    code, _out, err = run_cli(["sweep", "a.wav", "b.wav", "--map", "nope"], capsys)
    assert code == 2 and "taal2011-ieee" in err
    # asking for an STI mapping: refused in one line that says none is built in, and why
    res.write_text("item,sti\na,0.5\nb,0.7\n")
    code, out, err = run_cli(["predict", str(res), "--map", "sti-words"], capsys)
    assert code == 2 and out == "" and len(err.strip().splitlines()) == 1
    assert "no STI-to-score mapping is built in" in err and "fitmap --index sti" in err


# ---------------------------------------------------------------------------
# Overdispersion: quasi-binomial intervals
# ---------------------------------------------------------------------------

def _betabinomial_counts(p, n, rho, rng):
    """Beta-binomial counts (scipy.stats.betabinom) with mean n p and intra-class correlation
    rho: variance n p (1 - p) (1 + (n - 1) rho), i.e. dispersion 1 + (n - 1) rho."""
    return stats.betabinom.rvs(n, p * (1 - rho) / rho, (1 - p) * (1 - rho) / rho, random_state=rng)


def test_quasi_binomial_intervals_cover_x50_on_overdispersed_data():
    # Pilots simulated from a beta-binomial (scipy.stats): 6 conditions x 50 keywords, rho = 0.1
    # (dispersion 1 + 49 * 0.1 = 5.9). The nominal 95 % interval of x50 must cover the true x50 in
    # about 95 % of pilots with the quasi-binomial intervals; the binomial ones cover far less.
    # Over 1000 pilots (reported with the change): quasi 0.924, binomial 0.571; at rho = 0.03
    # quasi 0.948, binomial 0.791; on binomial data (rho = 0) quasi 0.959, binomial 0.934.
    a, b, n, rho, sims = -12.0, 18.0, 50, 0.1, 120
    x = np.linspace(0.5, 0.85, 6)
    p = expit(a + b * x)
    rng = np.random.default_rng(11)
    hits = {"quasi": 0, "binomial": 0}
    used = 0
    for _ in range(sims):
        k = _betabinomial_counts(p, n, rho, rng)
        try:
            fits = {d: fit_mapping(x, k, [n] * x.size, dispersion=d) for d in hits}
        except ComputationError:
            continue
        used += 1
        for d, m in fits.items():
            lo, hi = m.ci()["x50"]
            hits[d] += lo <= -a / b <= hi
    assert used >= 0.9 * sims
    cover = {d: h / used for d, h in hits.items()}
    # the standard error of a coverage near 0.92 over ~120 pilots is 0.025: three of them below
    assert cover["quasi"] >= 0.85, cover
    assert cover["binomial"] <= 0.75, cover
    assert cover["quasi"] - cover["binomial"] >= 0.2, cover


def test_the_quasi_binomial_fit_says_what_it_used():
    # strongly overdispersed rows: the dispersion is the Pearson chi-square / df (computed here
    # from the fitted curve), the covariance is the binomial one times it, the quantile is Student t
    x = np.array([0.45, 0.55, 0.65, 0.75, 0.85])
    k, n = np.array([2, 40, 30, 95, 88]), np.full(5, 100)
    mb = fit_mapping(x, k, n, dispersion="binomial")
    mq = fit_mapping(x, k, n)  # quasi is the default
    p = expit(mb.a + mb.b * x)
    phi = float(np.sum((k - n * p) ** 2 / (n * p * (1 - p)))) / (x.size - 2)
    assert phi > 1
    assert mq.interval_method == "quasi-binomial" and mb.interval_method == "binomial"
    assert mq.dispersion == pytest.approx(phi, rel=1e-6) and mq.ci_df == 3
    np.testing.assert_allclose(mq.cov, phi * mb.cov, rtol=1e-9)
    assert (mq.a, mq.b) == (mb.a, mb.b)
    half_q = np.diff(mq.ci()["x50"])[0] / 2
    half_b = np.diff(mb.ci()["x50"])[0] / 2
    assert half_q / half_b == pytest.approx(np.sqrt(phi) * stats.t.ppf(0.975, 3) / stats.norm.ppf(0.975), rel=1e-9)
    d = mq.to_dict()
    assert d["interval_method"] == "quasi-binomial" and d["ci_df"] == 3
    assert any("quasi-binomial" in note for note in d["notes"])
    assert any("too narrow" in note for note in mb.notes)
    # the MAP.json round trip keeps the method, and the profile interval widens too
    back = mapping_from_dict(json.loads(json.dumps(d)))
    assert back.interval_method == "quasi-binomial" and back.ci()["x50"] == pytest.approx(mq.ci()["x50"])
    assert mq.profile_ci_x50[0] < mb.profile_ci_x50[0] and mq.profile_ci_x50[1] > mb.profile_ci_x50[1]


def test_binomial_looking_data_keep_the_binomial_intervals():
    # Pearson chi-square / df <= 1: nothing is applied (intervals never narrower than binomial)
    x = np.array([0.45, 0.55, 0.65, 0.75, 0.85])
    k, n = np.array([8, 22, 48, 74, 90]), np.full(5, 100)
    mq, mb = fit_mapping(x, k, n), fit_mapping(x, k, n, dispersion="binomial")
    assert mq.dispersion_estimate <= 1 and mq.interval_method == "binomial"
    assert mq.ci() == mb.ci()
    with pytest.raises(InputError, match="dispersion"):
        fit_mapping(x, k, n, dispersion="beta")


# ---------------------------------------------------------------------------
# Per-listener data
# ---------------------------------------------------------------------------

def test_fitmap_per_listener_and_group(tmp_path, capsys):
    sm = pytest.importorskip("statsmodels.api")
    rng = np.random.default_rng(41)
    x = np.linspace(0.45, 0.85, 6)
    rows, truth = [], {"L1": 0.58, "L2": 0.63, "L3": 0.68, "L4": 0.72}
    for name, x50 in truth.items():
        k = rng.binomial(60, expit(20.0 * (x - x50)))
        rows += [(name, xi, ki) for xi, ki in zip(x, k)]
    rows += [("L5", 0.8, 60), ("L5", 0.85, 60), ("L5", 0.9, 60)]  # at the ceiling: no curve of its own
    p = tmp_path / "pilot.csv"
    p.write_text("listener,stoi,correct,trials\n" + "".join(f"{a},{b:.4f},{c},60\n" for a, b, c in rows))
    code, out, err = run_cli(["fitmap", str(p), "--index", "stoi", "--listener", "listener", "--json"], capsys)
    assert code == 0, err
    d = json.loads(out)
    fits = {f["listener"]: f for f in d["listeners"]}
    assert fits["L5"]["x50"] is None and "ceiling" in fits["L5"]["error"]
    x50s = []
    for name in truth:
        sel = [(b, c) for a, b, c in rows if a == name]
        xs, ks = np.array([round(b, 4) for b, _ in sel]), np.array([c for _, c in sel])
        glm = sm.GLM(np.column_stack([ks, 60 - ks]), sm.add_constant(xs), family=sm.families.Binomial()).fit()
        x50s.append(-glm.params[0] / glm.params[1])
        assert fits[name]["x50"] == pytest.approx(x50s[-1], abs=1e-5)
    sp = d["listener_spread"]
    assert sp["n_listeners"] == 5 and sp["n_fitted"] == 4
    assert sp["x50_mean"] == pytest.approx(np.mean(x50s), abs=1e-5)
    assert sp["x50_sd"] == pytest.approx(np.std(x50s, ddof=1), abs=1e-5)
    # the listeners differ: the group's intervals carry the scatter (quasi-binomial)
    assert d["interval_method"] == "quasi-binomial"
    assert any("listener L5" in n for n in d["notes"])
    code, out, err = run_cli(["fitmap", str(p), "--index", "stoi", "--listener", "listener"], capsys)
    assert code == 0 and "Per listener (4 of 5 fitted" in out
    code, out, err = run_cli(["fitmap", str(p), "--index", "stoi", "--listener", "who"], capsys)
    assert code == 2 and "who" in err


def test_listener_fits_survive_the_map_json_round_trip(tmp_path, capsys):
    """fitmap --listener --out MAP.json, read back: the group (default) and each
    listener (MAP.json#NAME) predict the same scores to 1e-12, with the same intervals;
    each listener's curve and interval are statsmodels' binomial GLM of its own rows."""
    sm = pytest.importorskip("statsmodels.api")
    from envpredict.mapping import read_mapping

    rng = np.random.default_rng(7)
    x = np.linspace(0.45, 0.85, 6)
    rows = []
    for name, x50 in {"L1": 0.58, "L2": 0.66, "L3": 0.71}.items():
        rows += [(name, xi, ki) for xi, ki in zip(x, rng.binomial(40, expit(18.0 * (x - x50))))]
    p = tmp_path / "pilot.csv"
    p.write_text("listener,stoi,correct,trials\n" + "".join(f"{a},{b:.4f},{c},40\n" for a, b, c in rows))
    mp = tmp_path / "MAP.json"
    code, out, err = run_cli(["fitmap", str(p), "--index", "stoi", "--listener", "listener", "--json",
                              "--out", str(mp)], capsys)
    assert code == 0, err
    fitted = json.loads(out)
    group = read_mapping(mp)
    grid = np.linspace(0.3, 1.0, 29)
    eta = fitted["params"]["a"] + fitted["params"]["b"] * grid
    np.testing.assert_allclose(group.percent(grid), 100 * expit(eta), rtol=0, atol=1e-12)
    back = group.to_dict()
    for key in ("params", "ci", "ci_profile", "cov_ab", "interval_method", "dispersion", "ci_df", "fit",
                "listeners", "listener_spread", "index_range"):
        assert back[key] == fitted[key], key
    for name in ("L1", "L2", "L3"):
        one = read_mapping(f"{mp}#{name}")
        xs = np.array([round(b, 4) for a, b, _ in rows if a == name])
        ks = np.array([c for a, _, c in rows if a == name])
        glm = sm.GLM(np.column_stack([ks, 40 - ks]), sm.add_constant(xs), family=sm.families.Binomial()).fit()
        np.testing.assert_allclose(one.percent(grid), 100 * expit(glm.params[0] + glm.params[1] * grid),
                                   rtol=0, atol=1e-5)
        f = next(f for f in fitted["listeners"] if f["listener"] == name)
        np.testing.assert_allclose(one.percent(grid), 100 * expit(f["a"] + f["b"] * grid), rtol=0, atol=1e-12)
        np.testing.assert_allclose(one.cov, glm.cov_params(), rtol=2e-3)
        assert one.ci()["a"] == pytest.approx(tuple(glm.conf_int()[0]), rel=2e-3)
    # the same selection in the CLI: the group by default, a listener by #NAME, an unknown one refused
    res = tmp_path / "res.csv"
    res.write_text("item,stoi\na,0.6\nb,0.7\n")
    code, out, err = run_cli(["predict", str(res), "--map", f"{mp}#L2"], capsys)
    assert code == 0, err
    l2 = read_mapping(mp, listener="L2")
    assert [float(r["predicted_percent"]) for r in csv.DictReader(io.StringIO(out))] == pytest.approx(
        list(np.round(l2.percent([0.6, 0.7]), 2)), abs=1e-9)
    code, out, err = run_cli(["predict", str(res), "--map", f"{mp}#L9"], capsys)
    assert code == 2 and "no listener 'L9'" in err and "L1, L2, L3" in err and len(err.strip().splitlines()) == 1


def test_fit_report_data_against_its_definitions():
    from envpredict.mapping import ScoreData, fit_report_data

    x = np.array([0.45, 0.55, 0.65, 0.75, 0.85])
    k, n = np.array([2, 40, 30, 95, 88]), np.full(5, 100)
    m = fit_mapping(x, k, n, index="stoi")
    f = fit_report_data(m, ScoreData(index_values=x, correct=k, trials=n))
    # Clopper-Pearson from the beta quantiles (scipy.stats.beta), 95 %
    lo = np.where(k > 0, stats.beta.ppf(0.025, k, n - k + 1), 0.0)
    hi = np.where(k < n, stats.beta.ppf(0.975, k + 1, n - k), 1.0)
    np.testing.assert_allclose(f["observed_low"], 100 * lo, atol=1e-4)
    np.testing.assert_allclose(f["observed_high"], 100 * hi, atol=1e-4)
    p = expit(m.a + m.b * x)
    np.testing.assert_allclose(f["pearson_residual"], (k - n * p) / np.sqrt(n * p * (1 - p)), atol=1e-4)
    # the band: logistic of eta -+ t_3 * se(eta), se from the (quasi-binomial) covariance
    g = np.array(f["curve_index"])
    se = np.sqrt(m.cov[0, 0] + 2 * g * m.cov[0, 1] + g * g * m.cov[1, 1])
    q = stats.t.ppf(0.975, 3)
    np.testing.assert_allclose(f["band_low"], 100 * expit(m.a + m.b * g - q * se), atol=1e-4)
    np.testing.assert_allclose(f["band_high"], 100 * expit(m.a + m.b * g + q * se), atol=1e-4)


def test_cli_fitmap_report(tmp_path, capsys):
    p = tmp_path / "pilot.csv"
    p.write_text("stoi,correct,trials\n0.45,2,100\n0.55,40,100\n0.65,30,100\n0.75,95,100\n0.85,88,100\n")
    code, out, err = run_cli(["fitmap", str(p), "--index", "stoi", "--report", str(tmp_path / "rep")], capsys)
    assert code == 0, err
    assert (tmp_path / "rep" / "report.html").is_file() and (tmp_path / "rep" / "mapping_fit.png").is_file()
    d = json.loads((tmp_path / "rep" / "result.json").read_text())
    assert d["interval_method"] == "quasi-binomial" and len(d["fit_data"]["pearson_residual"]) == 5
