"""Verdicts at a threshold: the headline, the caution, the JSON and the report of one run
never contradict each other (the verdict is taken from the unrounded STI).

The case is the demo hall at 70.5 dB(A) speech level with the site noise of the README,
whose STI (IEC 60268-16 indirect method) lands at 0.498: shown as "0.50" beside "below
0.50" it would contradict itself."""

from __future__ import annotations

import json
import re

from cli_for_tests import run_cli

from envpredict._data import demo_dir

NOISE = "58,55,52,49,45,40,33"


def test_ir_headline_caution_json_and_report_agree_just_below_the_requirement(tmp_path, capsys):
    ir = demo_dir() / "waiting_hall_ir.wav"
    args = ["ir", ir, "--noise", NOISE, "--speech-level", "70.5"]
    code, text, _ = run_cli(args, capsys)
    assert code == 0
    code, out, _ = run_cli(args + ["--json", "--report", tmp_path / "rep"], capsys)
    d = json.loads(out)
    assert 0.495 < d["sti"] < 0.5, d["sti"]
    shown = re.search(r"^STI = (\S+)", text, re.M).group(1)
    assert float(shown) < 0.5 and shown == "0.498"
    assert any(c.startswith(f"STI {shown} is below 0.50") for c in d["cautions"])
    assert f"STI {shown} is below 0.50" in text
    page = (tmp_path / "rep" / "report.html").read_text()
    assert f'data-key="sti">{shown}<' in page
