"""The bundled reference-case library (the same files `envpredict check` runs)."""

import json

import numpy as np
import pytest

from envpredict.refcases import load_cases, run_case

from conftest import run_cli

CASES = load_cases()


def test_library_is_complete():
    ids = [c["id"] for c in CASES]
    assert len(ids) == len(set(ids)) >= 20
    for c in CASES:
        assert c["source"] and c["expected"] and c["title"]


@pytest.mark.parametrize("case", CASES, ids=[c["id"] for c in CASES])
def test_case(case):
    outcome = run_case(case)
    assert outcome.error is None, outcome.error
    bad = [(c.quantity, c.expected, c.got, c.tolerance) for c in outcome.checks if not c.passed]
    assert outcome.passed, bad


def test_expected_values_follow_the_formula():
    # guard against a mistyped file: recompute the decay cases' expected STI from the published
    # formula here (Houtgast, Steeneken & Plomp 1980; IEC 60268-16:2011 Annex A, male weights)
    F = np.array([0.63, 0.8, 1, 1.25, 1.6, 2, 2.5, 3.15, 4, 5, 6.3, 8, 10, 12.5])
    for c in CASES:
        if c["input"].get("synth") == "exponential_decay" and c["settings"]["noise_db"] is None \
                and "sti" in c["expected"]:
            T = c["input"]["t60_s"]
            m = 1 / np.sqrt(1 + (2 * np.pi * F * T / 13.8) ** 2)
            ti = (np.clip(10 * np.log10(m / (1 - m)), -15, 15) + 15) / 30
            assert c["expected"]["sti"]["value"] == pytest.approx(ti.mean(), abs=1e-3)


def test_check_command_json(capsys):
    code, out, _ = run_cli(["check", "--case", "impulse", "--json"], capsys)
    d = json.loads(out)
    assert code == 0 and d["failed"] == 0 and d["passed"] >= 7


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
