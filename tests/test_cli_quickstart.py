"""The researcher's quick start as a new user runs it (README "Quick start: researcher"),
on small inputs: a folder of short sentences and a noise -> the pilot's stimuli and STOI
(``sweep --write-stimuli``) -> a per-listener pilot fit written to MAP.json
(``fitmap --listener --out``) -> the predicted psychometric curve with its intervals and
the stimuli for the main test (``sweep --map --target --write-stimuli``), the mapping
read back by ``--map`` for the group and for one listener (``MAP.json#NAME``).

External references: the logistic p = 1 / (1 + exp(-(a + b x))) (scipy.special.expit)
with the a, b the fit printed; the crossing of the index curve by linear interpolation
(numpy.interp); the written files read back with soundfile.
"""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
import soundfile as sf
from scipy.special import expit

from cli_for_tests import run_cli
from signals_for_tests import speech_like

FS = 10000  # the lowest rate STOI analyses (Taal 2011)


@pytest.fixture(scope="module")
def material(tmp_path_factory):
    root = tmp_path_factory.mktemp("quickstart")
    folder = root / "sentences"
    folder.mkdir()
    for i in range(3):
        sf.write(folder / f"s{i + 1}.wav", speech_like(1.6 + 0.2 * i, FS, seed=60 + i), FS, subtype="PCM_16")
    # one sentence at another rate: resampled to the first one's, and the output says so
    sf.write(folder / "s4.wav", speech_like(1.7, 16000, seed=64), 16000, subtype="PCM_16")
    sf.write(root / "noise.wav", 0.05 * np.random.default_rng(9).standard_normal(8 * FS), FS, subtype="PCM_16")
    return root


def _manifest(folder):
    with open(folder / "manifest.csv", newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


def test_from_sentences_and_noise_to_the_main_test_stimuli(material, tmp_path, capsys):
    sentences, noise = material / "sentences", material / "noise.wav"
    # 1. the pilot: its stimuli and the STOI of each condition
    code, out, err = run_cli(["sweep", sentences, noise, "--snr=-9:3:3", "--segments", "2",
                              "--write-stimuli", tmp_path / "pilot", "--presentation-level=-30", "--json"], capsys)
    assert code == 0, err
    pilot = json.loads(out)
    assert pilot["n_sentences"] == 4 and any("s4.wav" in n and "resampled" in n for n in pilot["notes"])
    snrs, stoi = np.array(pilot["snr_db"]), np.array(pilot["stoi"])
    assert np.all(np.diff(stoi) > 0)
    rows = _manifest(tmp_path / "pilot")
    assert len(rows) == 4 * snrs.size and {float(r["snr_db"]) for r in rows} == set(snrs)
    for r in rows:
        y, fs = sf.read(tmp_path / "pilot" / r["file"])
        assert fs == FS and float(r["true_peak_dbtp"]) < 0 and np.max(np.abs(y)) < 1

    # 2. the pilot's scores (two listeners, from known logistics of the STOI) and the fit
    x50_true = {"L1": float(np.interp(-3.5, snrs, stoi)), "L2": float(np.interp(-2.5, snrs, stoi))}
    lines = ["listener,snr_db,stoi,correct,trials"]
    for name, x50 in x50_true.items():
        k = np.round(40 * expit(40.0 * (stoi - x50))).astype(int)
        lines += [f"{name},{s:g},{v:.4f},{c},40" for s, v, c in zip(snrs, stoi, k)]
    (tmp_path / "pilot.csv").write_text("\n".join(lines) + "\n")
    mp = tmp_path / "MAP.json"
    code, out, err = run_cli(["fitmap", tmp_path / "pilot.csv", "--index", "stoi", "--listener", "listener",
                              "--out", mp, "--json"], capsys)
    assert code == 0, err
    fit = json.loads(out)
    assert [f["listener"] for f in fit["listeners"]] == ["L1", "L2"] and fit["listener_spread"]["n_fitted"] == 2
    a, b = fit["params"]["a"], fit["params"]["b"]

    # 3. the predicted psychometric curve, the target SNRs with their intervals, the main test's stimuli
    code, out, err = run_cli(["sweep", sentences, noise, "--map", mp, "--snr=-9:3:3", "--segments", "2",
                              "--target", "50", "--write-stimuli", tmp_path / "main", "--presentation-level=-30",
                              "--report", tmp_path / "curve", "--json"], capsys)
    assert code == 0, err
    main = json.loads(out)
    # the report's curve draws the interval to plan with, and its caption says which it is
    from envpredict.report import build_page

    page = build_page("sweep", json.loads((tmp_path / "curve" / "result.json").read_text()))
    assert "total interval (sentences, noise segments and mapping" in page.figures[0].caption
    np.testing.assert_allclose(main["stoi"], stoi, atol=1e-12)  # the same mixtures as the pilot's sweep
    # the JSON holds the index to 5 decimals and the percent to 3: within those roundings
    np.testing.assert_allclose(main["predicted_percent"], 100 * expit(a + b * stoi), atol=0.01)
    t = main["targets"][0]
    assert t["snr_db"] == pytest.approx(np.interp(-a / b, stoi, snrs), abs=1e-3)  # 50 % at x50 = -a / b
    for key in ("ci", "map_ci", "sentence_ci", "combined_ci", "total_ci"):
        assert t[f"{key}_low"] < t["snr_db"] < t[f"{key}_high"], key
    # adding the mapping's variance to the combined one can only widen the interval
    assert t["total_ci_high"] - t["total_ci_low"] >= t["combined_ci_high"] - t["combined_ci_low"]
    rows = _manifest(tmp_path / "main")
    assert len(rows) == 4 and {float(r["snr_db"]) for r in rows} == {round(t["snr_db"], 1)}
    assert {r["sentence"] for r in rows} == {"s1", "s2", "s3", "s4"}
    assert all(r["processed"] == "False" for r in rows)
    code, out, err = run_cli(["sweep", sentences, noise, "--map", mp, "--snr=-9:3:3", "--segments", "2",
                              "--target", "50", "--write-stimuli", tmp_path / "again", "--presentation-level=-30",
                              "--json"], capsys)
    assert code == 0, err
    for r in rows:  # bit-exact from the seed
        assert (tmp_path / "main" / r["file"]).read_bytes() == (tmp_path / "again" / r["file"]).read_bytes()

    # one listener's own curve, read from the same file
    f1 = fit["listeners"][0]
    code, out, err = run_cli(["sweep", sentences, noise, "--map", f"{mp}#L1", "--snr=-9:3:3", "--segments", "2",
                              "--json"], capsys)
    assert code == 0, err
    np.testing.assert_allclose(json.loads(out)["predicted_percent"], 100 * expit(f1["a"] + f1["b"] * stoi),
                               atol=0.01)


@pytest.mark.parametrize("args,what", [
    (["--map", "sti-sentences"], "no STI-to-score mapping is built in"),
    (["--map", "MAPFILE#nobody"], "no listener 'nobody'"),
    (["--process", "no_such_chain_module:f"], "cannot be imported"),
    (["--write-stimuli", "FULL"], "exists and is not empty"),
])
def test_the_quick_start_refuses_in_one_line(material, tmp_path, capsys, args, what):
    (tmp_path / "full").mkdir()
    (tmp_path / "full" / "mine.txt").write_text("keep")
    mp = tmp_path / "MAP.json"
    mp.write_text(json.dumps({"index": "stoi", "shape": "logistic", "params": {"a": -10.0, "b": 15.0},
                              "listeners": [{"listener": "L1", "n_points": 3, "n_trials": 60, "a": -9.0, "b": 14.0}]}))
    args = [str(a).replace("MAPFILE", str(mp)).replace("FULL", str(tmp_path / "full")) for a in args]
    code, out, err = run_cli(["sweep", material / "sentences", material / "noise.wav", "--snr=-9:3:3",
                              "--segments", "2"] + args, capsys)
    assert code == 2 and out == "" and what in err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err
    assert [p.name for p in (tmp_path / "full").iterdir()] == ["mine.txt"]
