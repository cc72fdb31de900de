"""Site surveys (envpredict.survey and the ``survey`` command): statistics per position
and zone against Python's ``statistics`` module, verdicts at the threshold, the demo
survey end to end, its report, and bad input."""

from __future__ import annotations

import json
import statistics

import numpy as np
import pytest
import soundfile as sf
from cli_for_tests import run_cli
from signals_for_tests import noise_decay

from envpredict.survey import parse_requirement, summarise_survey


@pytest.mark.parametrize("text, stat, op, value", [
    ("mean>=0.50", "mean", ">=", 0.5), (" min >= 0.45 ", "min", ">=", 0.45), ("mean-sd>=0.5", "mean-sd", ">=", 0.5),
    ("mean - sd > .6", "mean-sd", ">", 0.6), ("max>=0.7", "max", ">=", 0.7),
])
def test_requirements_parse(text, stat, op, value):
    r = parse_requirement(text)
    assert (r.statistic, r.op, r.value) == (stat, op, value)


@pytest.mark.parametrize("text", ["mean=>0.5", "median>=0.5", "mean>=1.5", "mean>=0", "mean<=0.5", "", "mean>=x"])
def test_bad_requirements_are_refused(text):
    from envpredict.exceptions import InputError

    with pytest.raises(InputError):
        parse_requirement(text)


def _rows(spec):
    """Survey rows from {(zone, position): [sti or None, ...]}."""
    rows, k = [], 0
    for (zone, pos), values in spec.items():
        for v in values:
            k += 1
            rows.append({"row": k, "zone": zone, "position": pos, "sti": "" if v is None else repr(v)})
    return rows


def test_statistics_per_position_and_zone_match_the_statistics_module():
    # reference: Python's statistics module (mean, sample stdev) on the position means;
    # each position counts once in its zone however often it was measured
    spec = {("hall", "a"): [0.61, 0.63, 0.62], ("hall", "b"): [0.48, 0.52], ("hall", "c"): [0.55],
            ("foyer", "x"): [0.70, 0.74]}
    positions, zones = summarise_survey(_rows(spec), ["mean>=0.50", "min>=0.52", "mean-sd>=0.50"])
    for p in positions:
        vals = spec[(p.zone, p.position)]
        assert p.mean == pytest.approx(statistics.mean(vals), abs=1e-12)
        assert p.sd == (pytest.approx(statistics.stdev(vals), abs=1e-12) if len(vals) > 1 else None)
        assert p.spread == pytest.approx(max(vals) - min(vals), abs=1e-12)
    hall = next(z for z in zones if z.zone == "hall")
    means = [statistics.mean(spec[("hall", k)]) for k in "abc"]
    assert hall.positions == 3
    assert hall.mean == pytest.approx(statistics.mean(means), abs=1e-12)
    assert hall.sd == pytest.approx(statistics.stdev(means), abs=1e-12)
    assert hall.min == pytest.approx(0.50) and hall.max == pytest.approx(0.62)
    # min 0.50 < 0.52 fails: the first failing rule decides
    assert hall.verdict == "fail" and hall.decided_by == "min >= 0.52"
    assert dict(hall.below)["min >= 0.52"] == ("b",)
    foyer = next(z for z in zones if z.zone == "foyer")
    # one position: mean-sd cannot be judged (no sample sd), so no verdict
    assert foyer.verdict == "no verdict" and "two positions" in foyer.decided_by


def test_an_unscored_position_withholds_a_pass_but_not_a_fail():
    ok = {("z", "a"): [0.7], ("z", "b"): [None, None]}
    _, (zone,) = summarise_survey(_rows(ok), ["mean>=0.5"])
    assert zone.verdict == "no verdict" and zone.unscored_positions == ("b",)
    bad = {("z", "a"): [0.4], ("z", "b"): [None]}
    _, (zone,) = summarise_survey(_rows(bad), ["mean>=0.5"])
    assert zone.verdict == "fail"


def test_the_verdict_is_taken_on_the_unrounded_value():
    # 0.4996 rounds to "0.50" but is below 0.50: the zone fails, and nothing printed says 0.50
    _, (zone,) = summarise_survey(_rows({("z", "a"): [0.4996], ("z", "b"): [0.4996]}), ["mean>=0.50"])
    assert zone.verdict == "fail"
    _, (zone,) = summarise_survey(_rows({("z", "a"): [0.5], ("z", "b"): [0.5]}), ["mean>=0.50"])
    assert zone.verdict == "pass"


# ---------------------------------------------------------------------------
# The demo survey through the command line
# ---------------------------------------------------------------------------

@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    from envpredict.demo import demo_survey_path

    d = tmp_path_factory.mktemp("survey_demo")
    (d / "record.txt").write_text("project: Pier 4 announcement system\noperator: K. Lind\nserial: 004211\n")
    args = ["survey", demo_survey_path(), "--out", d / "rows.csv", "--require", "mean>=0.50", "--require",
            "min>=0.45", "--positions-csv", d / "pos.csv", "--zones-csv", d / "zones.csv", "--report", d / "rep",
            "--record", d / "record.txt", "--json", "--workers", "1"]
    code, out, err = run_cli(args)
    return d, code, err


def test_demo_survey_scores_every_row_and_judges_each_zone(demo_run, capsys):
    d, code, err = demo_run
    assert code == 0, err
    res = json.loads((d / "rep" / "result.json").read_text())
    assert res["rows"] == 18 and res["failed_rows"] == 0
    verdicts = {z["zone"]: z["verdict"] for z in res["zones"]}
    assert verdicts == {"waiting hall": "fail", "boarding corridor": "pass", "ticket office": "pass"}
    hall = next(z for z in res["zones"] if z["zone"] == "waiting hall")
    assert hall["decided_by"] == "min >= 0.45" and hall["sti_min"] < 0.45
    # the per-row results are the batch's: the mean of a position's rows is its mean
    from envpredict.tables import read_results

    _, rows = read_results(d / "rows.csv")
    for p in res["positions"]:
        vals = [float(r["sti"]) for r in rows if r["zone"] == p["zone"] and r["position"] == p["position"]]
        assert p["sti_mean"] == pytest.approx(statistics.mean(vals), abs=1e-9)
    # the tables' columns are the JSON keys they flatten
    import csv

    with open(d / "zones.csv", newline="") as fh:
        zrows = list(csv.DictReader(fh))
    assert [r["verdict"] for r in zrows] == ["fail", "pass", "pass"]
    # people read these tables: 6 decimals of an STI, cut (so a value below a requirement stays
    # below it), not the 17 digits of a float's repr
    assert float(zrows[0]["sti_mean"]) == pytest.approx(hall["sti_mean"], abs=1e-6)
    assert float(zrows[0]["sti_mean"]) <= hall["sti_mean"]
    with open(d / "pos.csv", newline="") as fh:
        prows = list(csv.DictReader(fh))
    assert len(prows) == len(res["positions"])
    for r in zrows + prows:
        for c in ("sti_mean", "sti_sd", "sti_min", "sti_max", "sti_spread"):
            if r.get(c):
                assert len(r[c].split(".")[-1]) <= 6, (c, r[c])
        for part in r.get("checks", "").split(";"):
            if ":" in part:
                assert len(part.split(":")[1].split()[0].split(".")[-1]) <= 6, part


def test_survey_report_shows_names_not_folders_and_the_record(demo_run):
    d, code, _ = demo_run
    html = (d / "rep" / "report.html").read_text()
    as_json = (d / "rep" / "result.json").read_text()
    assert str(d) not in html and str(d) not in as_json  # no folder of the user's machine
    from envpredict._data import demo_dir

    assert str(demo_dir()) not in html and str(demo_dir()) not in as_json
    for shown in ("Measurement record", "Pier 4 announcement system", "K. Lind", "004211", "Review and sign-off",
                  "FAIL", "PASS", "@page{size:A4 portrait"):
        assert shown in html, shown
    assert (d / "rep" / "positions.png").stat().st_size > 10_000


def test_a_row_that_cannot_be_scored_is_reported_and_the_rest_summarised(tmp_path, capsys):
    sf.write(tmp_path / "a.wav", noise_decay(0.6, seed=2), 48000, subtype="FLOAT")
    (tmp_path / "s.csv").write_text("zone,position,ir\nhall,front,a.wav\nhall,back,missing.wav\n")
    code, out, err = run_cli(["survey", tmp_path / "s.csv", "--out", tmp_path / "rows.csv", "--require",
                              "mean>=0.3", "--json", "--workers", "1"], capsys)
    assert code == 1
    res = json.loads(out)
    assert res["failed_rows"] == 1 and "missing.wav" in res["failures"][0]["error"]
    (zone,) = res["zones"]
    assert zone["verdict"] == "no verdict" and zone["unscored_positions"] == ["back"]
    assert err.strip().splitlines()[-1].startswith("error: 1 of 2 measurements could not be scored")


@pytest.mark.parametrize("csv_text, extra, message", [
    ("position,ir\nfront,a.wav\n", [], "has no 'zone' column"),
    ("zone,position,clean,degraded\nh,p,a.wav,a.wav\n", [], "has clean/degraded columns"),
    ("zone,position,repeat,ir\nh,p,1,a.wav\nh,p,1,a.wav\n", [], "has repeat '1' twice"),
    ("zone,position,ir\nh,,a.wav\n", [], "the position is empty"),
    ("zone,position,ir\nh,p,a.wav\n", ["--require", "mean=>0.5"], "requirement 'mean=>0.5' does not parse"),
    ("zone,position,ir\nh,p,a.wav\n", ["--zones-csv", "{survey}"], "--zones-csv"),
    ("zone,position,ir\nh,p,a.wav\n", ["--zones-csv", "{rows}"], "--out and --zones-csv name the same file"),
    ("zone,position,ir\nh,p,a.wav\n", ["--record-field", "colour=red"], "unknown field 'colour'"),
])
def test_bad_surveys_are_refused_before_anything_is_written(tmp_path, capsys, csv_text, extra, message):
    sf.write(tmp_path / "a.wav", noise_decay(0.6, seed=2), 48000, subtype="FLOAT")
    survey = tmp_path / "s.csv"
    survey.write_text(csv_text)
    before = {p.name: p.stat().st_mtime_ns for p in tmp_path.iterdir()}
    args = [a.format(survey=survey, rows=tmp_path / "rows.csv") for a in extra]
    code, out, err = run_cli(["survey", survey, "--out", tmp_path / "rows.csv", "--workers", "1", *args], capsys)
    assert code == 2 and out == ""
    assert err.startswith("error: ") and message in err and err.count("\n") == 1, err
    assert {p.name: p.stat().st_mtime_ns for p in tmp_path.iterdir()} == before


def test_positions_chart_values_follow_the_result(tmp_path):
    # the report is rebuilt from its result.json alone: writing it again gives the same tables
    from envpredict.report import write_report

    res = {"index": "sti", "survey": "/somewhere/s.csv", "results": "rows.csv", "requirements": ["mean >= 0.5"],
           "rows": 2, "failed_rows": 0, "failures": [], "cautions": ["c"], "notes": [],
           "positions": [{"zone": "z", "position": "a", "rows": [1], "sti_values": [0.61], "failed_rows": [],
                          "repeats": 1, "sti_mean": 0.61, "sti_sd": None, "sti_spread": 0.0, "rating": "D"},
                         {"zone": "z", "position": "b", "rows": [2], "sti_values": [0.4996], "failed_rows": [],
                          "repeats": 1, "sti_mean": 0.4996, "sti_sd": None, "sti_spread": 0.0, "rating": "G"}],
           "zones": [{"zone": "z", "positions": 2, "unscored_positions": [], "sti_mean": 0.5548, "sti_sd": 0.078,
                      "sti_min": 0.4996, "sti_max": 0.61, "below": [{"rule": "mean >= 0.5", "positions": ["b"]}],
                      "checks": [{"rule": "mean >= 0.5", "value": 0.5548, "holds": True, "reason": ""}],
                      "verdict": "pass", "decided_by": "mean >= 0.5"}]}
    write_report("survey", res, tmp_path / "r1")
    again = json.loads((tmp_path / "r1" / "result.json").read_text())
    assert again["survey"] == "s.csv"  # the folder is cut from the path
    write_report("survey", again, tmp_path / "r2")
    t1 = (tmp_path / "r1" / "report.html").read_text().split("<h2>Numbers</h2>")[1].split("<h2>Inputs")[0]
    t2 = (tmp_path / "r2" / "report.html").read_text().split("<h2>Numbers</h2>")[1].split("<h2>Inputs")[0]
    assert t1 == t2
    assert "0.4996" in t1 and ">0.50<" not in t1  # shown with the decimals its verdict needs
    assert np.isclose(again["zones"][0]["sti_mean"], 0.5548)


def test_demo_sweep_recording_gives_the_halls_sti(tmp_path, capsys):
    # the demo's sweep recording at row F, deconvolved with the sweep the README's command
    # writes, rates as the hall's own impulse response does (the recording was made from it)
    import json as _json

    from envpredict._data import demo_dir

    sweep = tmp_path / "sweep.wav"
    code, _, err = run_cli(["testsignal", "sweep", sweep, "--repeats", "1", "--rate", "32000", "--f2", "14000"],
                           capsys)
    assert code == 0, err
    levels = ["--noise", "58,55,52,49,45,40,33", "--speech-level", "68", "--json"]
    code, out, err = run_cli(["ir", demo_dir() / "survey" / "row_F_sweep.flac", "--sweep", sweep, *levels], capsys)
    assert code == 0, err
    via_sweep = _json.loads(out)["sti"]
    code, out, _ = run_cli(["ir", demo_dir() / "waiting_hall_ir.wav", *levels], capsys)
    assert abs(via_sweep - _json.loads(out)["sti"]) < 0.01


def test_the_listener_of_a_survey_is_in_its_result_and_report(tmp_path):
    # issue 17: the report shows the audiogram. The survey's listener (here the ISO 7029
    # median of a 75-year-old man) is the one age_audiogram gives, and it lowers every
    # position's STI (a raised reception threshold takes audibility away, IEC 60268-16 A.2)
    from envpredict.demo import demo_survey_path
    from envpredict.hearing import age_audiogram
    from envpredict.report import write_report
    from envpredict.survey import run_survey

    normal = run_survey(demo_survey_path(), tmp_path / "a.csv", workers=1)
    old = run_survey(demo_survey_path(), tmp_path / "b.csv", workers=1, audiogram=age_audiogram(75, "m"))
    d = old.to_dict()
    assert "audiogram" not in normal.to_dict()
    listener = age_audiogram(75, "m").to_dict()
    assert {k: d["audiogram"][k] for k in listener} == listener  # plus the audibility caution, as every result
    assert set(d["audiogram"]) == set(listener) | {"cautions"} and "audibility" in d["audiogram"]["cautions"][0]
    assert all(o.mean < n.mean for o, n in zip(old.positions, normal.positions))
    html = write_report("survey", d, tmp_path / "rep").read_text()
    assert "hearing loss" in html and "ISO 7029:2017 median, age 75" in html
