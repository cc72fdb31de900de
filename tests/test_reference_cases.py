"""The bundled reference-case library (the same files `envpredict check` runs)."""

import json
from pathlib import Path

import numpy as np
import pytest

from envpredict.reference_cases import recipes
from envpredict.refcases import METHODS, load_cases, run_case

from cli_for_tests import run_cli

CASES = load_cases()

# IEC 60268-16:2011 values typed again here (independent of envpredict.standards)
F14 = np.array([0.63, 0.8, 1, 1.25, 1.6, 2, 2.5, 3.15, 4, 5, 6.3, 8, 10, 12.5])  # Table 1 / 5.1
STIPA_PAIRS = [[1.6, 8.0], [1.0, 5.0], [0.63, 3.15], [2.0, 10.0], [1.25, 6.25], [0.8, 4.0], [2.5, 12.5]]  # Table B.1
ALPHA = np.array([0.085, 0.127, 0.230, 0.233, 0.309, 0.224, 0.173])  # Table A.1, male
BETA = np.array([0.085, 0.078, 0.065, 0.011, 0.047, 0.095])
MALE_SPECTRUM = [2.9, 2.9, -0.8, -6.8, -12.8, -18.8, -24.8]  # Table A.2


def _ti(m):
    m = np.clip(np.asarray(m, dtype=float), 1e-12, 1 - 1e-12)
    return (np.clip(10 * np.log10(m / (1 - m)), -15, 15) + 15) / 30


def _sti(mti):
    mti = np.asarray(mti)
    return float(np.clip(ALPHA @ mti - BETA @ np.sqrt(mti[:-1] * mti[1:]), 0, 1))


def _m_channel(f, channel):
    # Houtgast, Steeneken & Plomp (1980); Schroeder (1981): m(F) = [1 + (2 pi F T/13.8)^2]^-1/2;
    # Houtgast & Steeneken (1973): stationary noise multiplies m by 1/(1 + 10^(-SNR/10))
    f = np.asarray(f, dtype=float)
    T, snr = channel.get("t60_s"), channel.get("snr_db")
    m = 1 / np.sqrt(1 + (2 * np.pi * f * T / 13.8) ** 2) if T else np.ones(f.shape)
    return m / (1 + 10 ** (-snr / 10)) if snr is not None else m


def test_library_is_complete():
    ids = [c["id"] for c in CASES]
    assert len(ids) == len(set(ids)) >= 40
    for c in CASES:
        assert c["source"] and c["expected"] and c["title"]
        assert c["method"] in METHODS
    # every method has cases (issue 11: `check` covers every method)
    assert {c["method"] for c in CASES} == set(METHODS)


@pytest.mark.parametrize("case", CASES, ids=[c["id"] for c in CASES])
def test_case(case):
    outcome = run_case(case)
    assert outcome.error is None, outcome.error
    bad = [(c.quantity, c.expected, c.got, c.tolerance) for c in outcome.checks if not c.passed]
    assert outcome.passed, bad


def test_expected_values_follow_the_formula():
    # guard against a mistyped file: recompute the decay cases' expected STI from the published
    # formula here (Houtgast, Steeneken & Plomp 1980; IEC 60268-16:2011 Annex A, male weights)
    for c in CASES:
        if c["input"].get("synth") == "exponential_decay" and c["settings"]["noise_db"] is None \
                and "sti" in c["expected"]:
            T = c["input"]["t60_s"]
            m = 1 / np.sqrt(1 + (2 * np.pi * F14 * T / 13.8) ** 2)
            assert c["expected"]["sti"]["value"] == pytest.approx(_ti(m).mean(), abs=1e-3)


def test_direct_method_expectations_follow_the_formula():
    # STIPA: MTI_k = mean TI at the two frequencies of band k (IEC 60268-16:2011 Annex B);
    # full STI: all 14 frequencies in every band. Recipes per the standard's signal definition.
    n = 0
    for c in CASES:
        if c["method"] not in ("stipa", "fullsti"):
            continue
        spec, ch = c["input"], c["input"]["channel"]
        assert spec["bands_hz"] == [125, 250, 500, 1000, 2000, 4000, 8000]
        assert spec["band_levels_db"] == MALE_SPECTRUM and spec["carrier_octaves"] == 0.5
        if c["method"] == "stipa":
            assert spec["modulation_hz"] == STIPA_PAIRS and spec["depth"] == 0.55
            mti = [_ti(_m_channel(p, ch)).mean() for p in STIPA_PAIRS]
        else:
            assert spec["modulation_hz"] == F14.tolist() and spec["depth"] == 1.0
            mti = [_ti(_m_channel(F14, ch)).mean()] * 7
        assert c["expected"]["sti"]["value"] == pytest.approx(_sti(mti), abs=1e-4)
        n += 1
    assert n >= 8


def test_ssti_expectations_follow_the_relation():
    # steady noise at a uniform band SNR: m = 1/(1+10^(-SNR/10)), so STI = (SNR + 15)/30
    cases = [c for c in CASES if c["method"] == "ssti"]
    assert len(cases) >= 3
    for c in cases:
        assert c["input"]["noise"]["kind"] == "speech_shaped"
        snr = c["input"]["noise"]["snr_db"]
        assert c["expected"]["ssti_regression"]["value"] == pytest.approx((snr + 15) / 30, abs=1e-4)


def test_stoi_values_are_pystois():
    # the stored values are pystoi's on the recipe's signals, and the file names the version
    pystoi = pytest.importorskip("pystoi")
    cases = [c for c in CASES if c["method"] in ("stoi", "estoi")]
    assert {c["method"] for c in cases} == {"stoi", "estoi"}
    assert {c["input"]["fs"] for c in cases} == {10000, 16000}
    for c in cases:
        assert f"pystoi {pystoi.__version__}" in c["source"]
        clean, degraded, fs = recipes.speechlike(c["input"])
        ref = pystoi.stoi(clean, degraded, fs, extended=c["method"] == "estoi")
        assert c["expected"][c["method"]]["value"] == pytest.approx(ref, abs=1e-11)
        if fs == 10000:  # the requirement: no resampling, the same arithmetic
            assert c["expected"][c["method"]]["abs_tol"] <= 1e-9


def test_mapping_values_are_statsmodels():
    sm = pytest.importorskip("statsmodels.api")
    for c in (c for c in CASES if c["method"] == "mapping"):
        rows = c["input"]
        k, n = np.array(rows["correct"]), np.array(rows["trials"])
        link = sm.families.links.Logit() if rows["shape"] == "logistic" else sm.families.links.Probit()
        res = sm.GLM(np.column_stack([k, n - k]), sm.add_constant(np.array(rows["index"])),
                     family=sm.families.Binomial(link=link)).fit(method="newton", tol=1e-12, maxiter=100)
        se = res.bse
        if rows.get("dispersion") == "quasi":  # quasi-binomial: times sqrt(Pearson chi-square / df) when > 1
            se = se * np.sqrt(max(1.0, res.pearson_chi2 / res.df_resid))
        got = dict(zip(("a", "b", "se_a", "se_b"), [*res.params, *se]))
        for q, v in got.items():
            assert c["expected"][q]["value"] == pytest.approx(v, abs=1e-8)


def test_recipes_do_not_use_the_products_generator():
    # the signals come from the case library's own numpy/scipy code, and make_cases.py computes
    # the expected values without envpredict
    for name in ("recipes.py", "make_cases.py"):
        text = (Path(recipes.__file__).parent / name).read_text(encoding="utf-8")
        assert "import envpredict" not in text and "from envpredict" not in text


def _band(x, fs, lo, hi):
    spec = np.fft.rfft(x)
    f = np.fft.rfftfreq(x.size, 1 / fs)
    spec[(f < lo) | (f > hi)] = 0
    return np.fft.irfft(spec, x.size)


def test_stipa_recipe_makes_the_standard_signal():
    # the synthesiser itself, checked with plain numpy: band levels at the male spectrum and an
    # intensity envelope 1 + 0.55 (sin 2 pi f1 t - sin 2 pi f2 t) in every band (Annex B). The
    # squared envelope of Gaussian noise of bandwidth B fluctuates: over T seconds a sine
    # component's estimate scatters by about sqrt(2 / (B T)); allowed: 4 times that.
    spec = next(c for c in CASES if c["id"] == "stipa_ideal")["input"]
    x, fs = recipes.stipa(spec)
    t = np.arange(x.size) / fs
    levels = []
    for fc, (f1, f2) in zip(spec["bands_hz"], spec["modulation_hz"]):
        b = _band(x, fs, fc * 2 ** -0.25, fc * 2 ** 0.25)
        e = b * b
        levels.append(10 * np.log10(np.mean(e)))
        tol = 4 * np.sqrt(2 / (fc * (2 ** 0.25 - 2 ** -0.25) * spec["seconds"]))
        for f, sign in ((f1, 1), (f2, -1)):
            # depth and sign of the sine component: 2 <e sin> / <e>
            assert 2 * np.mean(e * np.sin(2 * np.pi * f * t)) / np.mean(e) == pytest.approx(0.55 * sign, abs=tol)
    # 0.15 dB: the modulation's mean over a part period and the sidebands cut at the band edges
    rel = np.array(levels) - levels[0]
    assert rel == pytest.approx(np.array(MALE_SPECTRUM) - MALE_SPECTRUM[0], abs=0.15)


def test_recipe_noise_is_at_the_stated_snr():
    # channel noise: in every carrier band, mean square of the noise = received band / SNR
    spec = next(c for c in CASES if c["id"] == "stipa_snr+0dB")["input"]
    spec = dict(spec, seconds=5.0, channel={"snr_db": -6.0})
    fs, n = spec["fs"], int(5.0 * spec["fs"])
    rng = np.random.default_rng(0)
    x = rng.standard_normal(n)
    noise = recipes.apply_channel(x, spec, None, noise_seed=1) - x
    for fc in spec["bands_hz"]:
        lo, hi = fc * 2 ** -0.25, fc * 2 ** 0.25
        ratio = np.mean(_band(x, fs, lo, hi) ** 2) / np.mean(_band(noise, fs, lo, hi) ** 2)
        assert 10 * np.log10(ratio) == pytest.approx(-6.0, abs=1e-6)
    # speech-like signal in speech-shaped noise: overall SNR as stated, and the noise has the
    # clean signal's magnitude spectrum, so the SNR is the same in every band
    c = next(c for c in CASES if c["method"] == "ssti")
    clean, degraded, _ = recipes.speechlike(c["input"])
    snr = c["input"]["noise"]["snr_db"]
    noise = degraded - clean
    assert 10 * np.log10(np.mean(clean ** 2) / np.mean(noise ** 2)) == pytest.approx(snr, abs=1e-9)
    a, b = np.abs(np.fft.rfft(noise)), np.abs(np.fft.rfft(clean)) * 10 ** (-snr / 20)
    assert np.max(np.abs(a - b)) <= 1e-9 * np.max(b)


def test_check_command_json(capsys):
    code, out, _ = run_cli(["check", "--case", "impulse", "--json"], capsys)
    d = json.loads(out)
    assert code == 0 and d["failed"] == 0 and d["passed"] >= 7
    assert all(c["method"] == "ir" for c in d["cases"]) and d["methods"] == {"ir": {"passed": 7, "failed": 0}}


def test_check_command_lists_the_method_of_each_case(capsys):
    code, out, _ = run_cli(["check", "--method", "mapping", "--json"], capsys)
    d = json.loads(out)
    assert code == 0 and d["passed"] >= 2 and {c["method"] for c in d["cases"]} == {"mapping"}
    code, out, _ = run_cli(["check", "--method", "stoi"], capsys)
    assert code == 0 and "[stoi]" in out and "stoi 2/2" in out


def test_check_command_refuses_an_unknown_method(capsys):
    code, _, err = run_cli(["check", "--method", "nonsense"], capsys)
    assert code == 2 and "unknown method" in err


def test_check_command_fails_on_a_wrong_case(tmp_path, monkeypatch, capsys):
    # a case whose expectation is wrong must make `check` exit non-zero
    case = dict(next(c for c in CASES if c["id"] == "impulse_snr+0dB"))
    case.pop("_path")
    case["expected"] = {"sti": {"value": 0.9, "abs_tol": 0.01}}
    (tmp_path / "wrong.json").write_text(json.dumps(case))
    import envpredict.refcases as rc

    monkeypatch.setattr(rc, "reference_dir", lambda: tmp_path)
    code, out, _ = run_cli(["check"], capsys)
    assert code == 1 and "FAIL" in out
