"""The demo command runs from any folder on the installed demo material."""

import json
import os

from conftest import run_cli


def test_demo_runs_anywhere(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    code, out, _ = run_cli(["demo"], capsys)
    assert code == 0
    assert "STI =" in out and "qualified person" in out
    code, out, _ = run_cli(["demo", "--json"], capsys)
    d = json.loads(out)
    assert code == 0 and 0 < d["ir"]["sti"] < 1
    assert os.listdir(tmp_path) == []  # the demo writes nothing
