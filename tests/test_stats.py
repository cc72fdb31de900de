"""Tests of envpredict.stats (paired comparison of conditions) and the ``compare`` command.

References outside the project: scipy.stats.bootstrap (BCa and percentile intervals),
scipy.stats.wilcoxon, the exact signed-rank distribution by enumeration (Wilcoxon
1945), statsmodels' Holm adjustment.
"""

from __future__ import annotations

import csv
import itertools
import json

import numpy as np
import pytest
from scipy import stats as sps

from envpredict.exceptions import InputError
from envpredict.stats import BOOTSTRAP_RESAMPLES, bootstrap_mean_ci, compare_conditions, holm, wilcoxon_p

from cli_for_tests import cli_exit_code, run_cli


def _scipy_ci(d, method, n_resamples, seed):
    r = sps.bootstrap((np.asarray(d),), np.mean, n_resamples=n_resamples, method=method,
                      confidence_level=0.95, rng=np.random.default_rng(seed))
    return float(r.confidence_interval.low), float(r.confidence_interval.high)


# ---------------------------------------------------------------------------
# Bootstrap interval against scipy.stats.bootstrap
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("method", ["BCa", "percentile"])
@pytest.mark.parametrize("n", [12, 40, 300])
def test_bootstrap_ci_agrees_with_scipy_within_monte_carlo_error(method, n):
    rng = np.random.default_rng(n)
    d = rng.exponential(0.05, n) - 0.03  # skewed, like differences of bounded indices
    ours = bootstrap_mean_ci(d, method=method, n_resamples=20000, seed=1)
    width = ours[1] - ours[0]
    # scipy with independent streams: the ends agree to a few % of the width (Monte-Carlo
    # error of 20000 resamples), averaged over 4 scipy runs
    refs = np.array([_scipy_ci(d, method, 20000, s) for s in (11, 12, 13, 14)])
    assert abs(ours[0] - refs[:, 0].mean()) < 0.03 * width
    assert abs(ours[1] - refs[:, 1].mean()) < 0.03 * width


def test_bootstrap_ci_equals_scipy_with_the_same_resamples():
    # scipy.stats.bootstrap draws rng.integers(0, n, (B, n)) like we do; with the same
    # generator seed both see the same resamples, so the intervals must agree exactly
    # (this checks the BCa bias and acceleration formulas without Monte-Carlo noise)
    rng = np.random.default_rng(5)
    d = rng.gamma(2.0, 0.02, 35) - 0.02
    ours_p = bootstrap_mean_ci(d, method="percentile", n_resamples=5000, seed=9)
    ref_p = _scipy_ci(d, "percentile", 5000, 9)
    if not np.allclose(ours_p, ref_p, rtol=0, atol=1e-12):
        pytest.skip("this scipy draws its resamples differently; the Monte-Carlo test above still applies")
    ours = bootstrap_mean_ci(d, method="BCa", n_resamples=5000, seed=9)
    assert ours == pytest.approx(_scipy_ci(d, "BCa", 5000, 9), abs=1e-12)


def test_bootstrap_ci_is_repeatable_and_covers_the_mean():
    d = np.random.default_rng(2).normal(0.02, 0.05, 50)
    a = bootstrap_mean_ci(d)
    assert a == bootstrap_mean_ci(d)  # fixed seed
    assert a[0] < d.mean() < a[1]
    # for a normal sample the percentile interval is close to the t interval (large n)
    t_lo, t_hi = sps.t.interval(0.95, d.size - 1, loc=d.mean(), scale=sps.sem(d))
    p = bootstrap_mean_ci(d, method="percentile")
    assert p[0] == pytest.approx(t_lo, abs=0.15 * (t_hi - t_lo))
    assert p[1] == pytest.approx(t_hi, abs=0.15 * (t_hi - t_lo))


def test_bootstrap_ci_degenerate_and_bad_input():
    assert bootstrap_mean_ci([0.1, 0.1, 0.1]) == (pytest.approx(0.1), pytest.approx(0.1))
    with pytest.raises(InputError, match="at least 2"):
        bootstrap_mean_ci([0.1])
    with pytest.raises(InputError, match="at least 2"):
        bootstrap_mean_ci([0.1, np.nan])
    with pytest.raises(InputError, match="unknown bootstrap method"):
        bootstrap_mean_ci([0.1, 0.2], method="studentized")
    with pytest.raises(InputError, match="too few"):
        bootstrap_mean_ci([0.1, 0.2], n_resamples=10)


# ---------------------------------------------------------------------------
# Wilcoxon and Holm
# ---------------------------------------------------------------------------


def test_wilcoxon_p_equals_the_exact_signed_rank_distribution():
    # Wilcoxon (1945): under H0 every sign pattern of the ranks is equally likely;
    # two-sided p = P(|W - E W| >= |w - E W|) over all 2^n patterns (no ties, no zeros)
    d = np.array([0.031, -0.012, 0.044, 0.007, 0.025, -0.003, 0.052, 0.018, -0.021, 0.039])
    ranks = sps.rankdata(np.abs(d))
    w = ranks[d > 0].sum()
    mean = ranks.sum() / 2
    all_w = np.array([np.dot(s, ranks) for s in itertools.product((0, 1), repeat=d.size)])
    exact = np.mean(np.abs(all_w - mean) >= abs(w - mean) - 1e-12)
    assert wilcoxon_p(d) == pytest.approx(exact, rel=1e-9)


def test_wilcoxon_p_undefined_without_differences():
    assert wilcoxon_p([0.0, 0.0, 0.0]) is None


def test_holm_matches_statsmodels():
    from statsmodels.stats.multitest import multipletests

    p = [0.01, 0.04, 0.03, 0.20, 0.005]
    want = multipletests(p, method="holm")[1]
    assert holm(p) == pytest.approx(list(want), abs=1e-12)
    assert holm([0.02, None, 0.01]) == [pytest.approx(0.02), None, pytest.approx(0.02)]


# ---------------------------------------------------------------------------
# compare_conditions
# ---------------------------------------------------------------------------


def _table(seed: int = 0, n_items: int = 24, shift: dict | None = None, shuffle: bool = True) -> list[dict]:
    """A results table of 3 conditions x n_items utterances (2 talkers), rows shuffled."""
    rng = np.random.default_rng(seed)
    shift = shift or {"unprocessed": 0.0, "denoiser-a": 0.04, "denoiser-b": 0.0}
    base = rng.uniform(0.5, 0.8, n_items)
    rows = []
    for cond, s in shift.items():
        for i in range(n_items):
            v = base[i] + s + rng.normal(0, 0.02)
            rows.append({"row": "", "clean": f"clean/u{i:02d}.wav", "degraded": f"{cond}/u{i:02d}.wav",
                         "condition": cond, "talker": f"T{i % 2}", "stoi": repr(float(v)), "estoi": "",
                         "ssti": "", "delay_ms": "0.0", "notes": "", "error": ""})
    order = rng.permutation(len(rows)) if shuffle else np.arange(len(rows))
    out = [rows[i] for i in order]
    for k, r in enumerate(out, start=1):
        r["row"] = str(k)
    return out


def _paired(rows, cond, base="unprocessed", col="stoi"):
    a = {r["clean"]: float(r[col]) for r in rows if r["condition"] == cond and r[col] and not r["error"]}
    b = {r["clean"]: float(r[col]) for r in rows if r["condition"] == base and r[col] and not r["error"]}
    keys = sorted(set(a) & set(b))
    return np.array([a[k] for k in keys]), np.array([b[k] for k in keys])


def test_compare_matches_scipy_on_the_matched_pairs():
    rows = _table()
    res = compare_conditions(rows, by="condition", baseline="unprocessed")
    assert res.index == "stoi"
    assert res.pair_on == ("clean", "talker")  # default: not row/degraded/results/by
    names = [c.name for c in res.conditions]
    assert names[0] == "unprocessed" and set(names) == {"unprocessed", "denoiser-a", "denoiser-b"}
    ps = []
    for c in res.conditions[1:]:
        x, y = _paired(rows, c.name)
        assert c.n == 24 and c.n_rows == 24
        assert c.mean == pytest.approx(np.mean(x), abs=1e-12)
        assert c.diff == pytest.approx(np.mean(x - y), abs=1e-12)
        assert c.p_value == pytest.approx(sps.wilcoxon(x, y).pvalue, rel=1e-9)  # scipy.stats.wilcoxon
        lo, hi = _scipy_ci(x - y, "BCa", BOOTSTRAP_RESAMPLES, 3)  # scipy.stats.bootstrap, other stream
        w = hi - lo
        assert abs(c.ci_low - lo) < 0.05 * w and abs(c.ci_high - hi) < 0.05 * w
        ps.append(c.p_value)
    assert [c.p_holm for c in res.conditions[1:]] == pytest.approx(holm(ps))
    verdict = {c.name: c.verdict for c in res.conditions}
    assert verdict == {"unprocessed": "baseline", "denoiser-a": "higher", "denoiser-b": "no clear difference"}


def test_compare_does_not_depend_on_row_order():
    a = compare_conditions(_table(shuffle=False), by="condition", baseline="unprocessed").to_dict()
    b = compare_conditions(_table(shuffle=True), by="condition", baseline="unprocessed").to_dict()
    for ca in a["conditions"]:
        cb = next(c for c in b["conditions"] if c["name"] == ca["name"])
        for k in ("n", "mean", "diff", "p_value"):
            assert ca[k] == pytest.approx(cb[k], abs=1e-12)


def test_compare_leaves_out_failed_and_unmatched_rows():
    rows = _table(n_items=20)
    drop = [r for r in rows if r["condition"] == "denoiser-a" and r["clean"] in ("clean/u03.wav", "clean/u07.wav")]
    drop[0]["error"] = "degraded 'x.wav' does not exist — check the path"
    drop[0]["stoi"] = ""
    rows.remove(drop[1])
    res = compare_conditions(rows, by="condition", baseline="unprocessed", pair_on="clean")
    c = next(c for c in res.conditions if c.name == "denoiser-a")
    x, y = _paired(rows, "denoiser-a")
    assert c.n == 18 == x.size and c.n_rows == 18
    assert c.diff == pytest.approx(np.mean(x - y), abs=1e-12)
    assert c.p_value == pytest.approx(sps.wilcoxon(x, y).pvalue, rel=1e-9)
    assert res.skipped_rows == 1
    assert any("18 item(s) matched" in n for n in res.notes)


def test_compare_refuses_ambiguous_items_and_bad_names():
    rows = _table(n_items=6)
    with pytest.raises(InputError, match="more than one row for the item"):
        compare_conditions(rows, by="condition", baseline="unprocessed", pair_on="talker")
    with pytest.raises(InputError, match="baseline 'clean' is not a value of column 'condition'"):
        compare_conditions(rows, by="condition", baseline="clean")
    with pytest.raises(InputError, match="'snr' \\(--by\\) is not in the results"):
        compare_conditions(rows, by="snr", baseline="0")
    with pytest.raises(InputError, match="'pesq' \\(--index\\) is not in the results"):
        compare_conditions(rows, by="condition", baseline="unprocessed", index="pesq")
    with pytest.raises(InputError, match="--pair-on"):
        compare_conditions(rows, by="condition", baseline="unprocessed", pair_on="nope")
    with pytest.raises(InputError, match="'talker' holds no numbers"):
        compare_conditions(rows, by="condition", baseline="unprocessed", index="talker")
    with pytest.raises(InputError, match="no rows"):
        compare_conditions([], by="condition", baseline="unprocessed")
    for r in rows:
        r["sti"] = "0.5"
    with pytest.raises(InputError, match="both sti and stoi"):
        compare_conditions(rows, by="condition", baseline="unprocessed")


def test_compare_with_no_matching_items_says_so():
    rows = _table(n_items=5)
    for r in rows:
        if r["condition"] == "denoiser-b":
            r["clean"] = r["clean"].replace("clean/", "other/")
    res = compare_conditions(rows, by="condition", baseline="unprocessed")
    c = next(c for c in res.conditions if c.name == "denoiser-b")
    assert c.n == 0 and c.diff is None and c.ci_low is None and c.p_value is None
    assert c.verdict == "no clear difference"
    assert any("No item of 'denoiser-b' matches" in n for n in res.notes)


# ---------------------------------------------------------------------------
# The compare command
# ---------------------------------------------------------------------------


def _write(rows, path):
    with open(path, "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    return path


def test_cli_compare_json(tmp_path, capsys):
    rows = _table()
    p = _write(rows, tmp_path / "results.csv")
    out = tmp_path / "cmp.json"
    assert cli_exit_code(["compare", str(p), "--by", "condition", "--baseline", "unprocessed", "--json",
                 "--out", str(out)]) == 0
    d = json.loads(capsys.readouterr().out)
    assert d == json.loads(out.read_text())
    assert d["index"] == "stoi" and d["baseline"] == "unprocessed"
    for c in d["conditions"]:
        for key in ("name", "n", "mean", "diff", "ci_low", "ci_high", "p_value"):
            assert key in c
    a = next(c for c in d["conditions"] if c["name"] == "denoiser-a")
    x, y = _paired(rows, "denoiser-a")
    assert a["diff"] == pytest.approx(np.mean(x - y), abs=1e-12)
    assert a["p_value"] == pytest.approx(sps.wilcoxon(x, y).pvalue, rel=1e-9)


def test_cli_compare_table_and_errors(tmp_path, capsys):
    p = _write(_table(), tmp_path / "results.csv")
    assert cli_exit_code(["compare", str(p), "--by", "condition", "--baseline", "unprocessed",
                          "--pair-on", "clean"]) == 0
    text = capsys.readouterr().out
    assert "denoiser-a" in text and "CI (95 %)" in text and "higher" in text
    assert cli_exit_code(["compare", str(p), "--by", "condition", "--baseline", "nope"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: baseline 'nope'") and "Traceback" not in err
    assert cli_exit_code(["compare", str(tmp_path / "missing.csv"), "--by", "c", "--baseline", "a"]) == 2


def test_docstring_examples():
    import doctest

    import envpredict.stats

    failed, attempted = doctest.testmod(envpredict.stats, optionflags=doctest.ELLIPSIS)
    assert attempted >= 5 and failed == 0


# ---------------------------------------------------------------------------
# Effect size, all pairs, several indices
# ---------------------------------------------------------------------------


def test_effect_size_dz_interval_covers_the_true_effect_at_its_level():
    # the interval's definition, checked by simulation: normal differences with a known
    # d_z = 0.5, n = 12; a 95 % interval should cover 0.5 in about 95 % of samples
    from envpredict.stats import effect_size_dz

    rng = np.random.default_rng(3)
    hits, runs = 0, 600
    for _ in range(runs):
        d = rng.normal(0.5, 1.0, 12)
        dz, lo, hi = effect_size_dz(d)
        assert dz == pytest.approx(np.mean(d) / np.std(d, ddof=1))
        hits += lo <= 0.5 <= hi
    assert 0.925 <= hits / runs <= 0.975  # binomial sd 0.009 at 600 runs
    assert effect_size_dz([0.1]) == (None, None, None) and effect_size_dz([0.2, 0.2]) == (None, None, None)


def test_compare_all_pairs_matches_scipy_and_statsmodels():
    from scipy import stats
    from statsmodels.stats.multitest import multipletests

    from envpredict.stats import compare_all_pairs

    rows = _table()
    res = compare_all_pairs(rows, by="condition")
    conds = ["unprocessed", "denoiser-a", "denoiser-b"]
    order = [r["condition"] for r in rows]
    conds.sort(key=order.index)
    want_p = []
    for p, (a, b) in zip(res.pairs, [(a, b) for i, a in enumerate(conds) for b in conds[i + 1:]]):
        assert (p.a, p.b) == (a, b)
        xb, xa = _paired(rows, b, base=a)
        assert p.diff == pytest.approx(np.mean(xb - xa), abs=1e-12)
        assert p.p_value == pytest.approx(stats.wilcoxon(xb - xa).pvalue, rel=1e-9)
        want_p.append(p.p_value)
    assert [p.p_holm for p in res.pairs] == pytest.approx(list(multipletests(want_p, method="holm")[1]))
    d = res.to_dict()
    assert d["index"] == "stoi" and len(d["pairs"]) == 3 and "effect_ci_low" in d["pairs"][0]


def test_cli_compare_several_indices_and_all_pairs(tmp_path, capsys):
    rows = _table()
    for r in rows:
        r["estoi"] = repr(float(r["stoi"]) - 0.2)
    path = tmp_path / "r.csv"
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    code, out, _ = run_cli(["compare", path, "--by", "condition", "--baseline", "unprocessed", "--pair-on", "clean",
                            "--index", "stoi,estoi", "--all-pairs", "--json"], capsys)
    assert code == 0
    d = json.loads(out)
    assert d["index"] == ["stoi", "estoi"] and len(d["comparisons"]) == 2 and len(d["pairwise"]) == 2
    # estoi = stoi - 0.2 on every row: the same paired differences
    a, b = d["comparisons"]
    assert [c["diff"] for c in a["conditions"]] == pytest.approx([c["diff"] for c in b["conditions"]])
    code, _, err = run_cli(["compare", path, "--by", "condition", "--baseline", "unprocessed", "--index",
                            "stoi,estoi", "--report", tmp_path / "rep"], capsys)
    assert code == 2 and "one index" in err
