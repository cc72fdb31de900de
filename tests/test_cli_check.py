"""The check command's JSON: the reference-case summary, the cases and the filters given."""

import json

from conftest import run_cli


def test_check_json_has_inputs(capsys):
    from envpredict.refcases import run_case, select_cases, summary

    code, out, _ = run_cli(["check", "--case", "decay_T0.3", "--json"], capsys)
    assert code == 0
    d = json.loads(out)
    assert d.pop("inputs") == {"case": "decay_T0.3", "method": None}
    outcomes = [run_case(c) for c in select_cases(id_contains="decay_T0.3")]
    assert d == json.loads(json.dumps({**summary(outcomes), "cases": [o.to_dict() for o in outcomes]}))
