"""The check command: its JSON is :func:`envpredict.refcases.run_cases`' result plus the
filters given; a bad filter is refused by the API."""

import json

import pytest

from cli_for_tests import run_cli
from envpredict.exceptions import InputError
from envpredict.refcases import run_case, run_cases, select_cases, summary


def test_check_json_is_the_api_result_plus_inputs(capsys):
    code, out, _ = run_cli(["check", "--case", "decay_T0.3", "--json"], capsys)
    assert code == 0
    d = json.loads(out)
    assert d.pop("inputs") == {"case": "decay_T0.3", "method": None}
    run = run_cases(id_contains="decay_T0.3")
    assert d == json.loads(json.dumps(run.to_dict()))
    # the same as running the selected cases one by one
    outcomes = [run_case(c) for c in select_cases(id_contains="decay_T0.3")]
    assert d == json.loads(json.dumps({**summary(outcomes), "cases": [o.to_dict() for o in outcomes]}))
    assert d["passed"] == len(d["cases"]) >= 1 and d["failed"] == 0


def test_check_refuses_an_unknown_method(capsys):
    with pytest.raises(InputError, match="unknown method 'nope'"):
        run_cases(method="nope")
    code, _, err = run_cli(["check", "--method", "nope"], capsys)
    assert code == 2 and len(err.strip().splitlines()) == 1 and "unknown method 'nope'" in err
