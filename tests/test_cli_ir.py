"""The ir command: output contract and bad input (one line, non-zero exit, no output file)."""

import json

import numpy as np
import pytest

from cli_for_tests import run_cli
from signals_for_tests import noise_decay

FS = 48000


@pytest.fixture
def ir_file(write_wav):
    return write_wav("room.wav", noise_decay(0.9, seconds=2.0, seed=1, floor_db=-70), FS)


def test_json_output(ir_file, capsys, tmp_path):
    out = tmp_path / "r.json"
    code, stdout, _ = run_cli(["ir", ir_file, "--noise", "45,42,40,38,35,30,25", "--speech-level", "65",
                               "--talker", "female", "--json", "--out", out], capsys)
    assert code == 0
    d = json.loads(stdout)
    assert d == json.loads(out.read_text())
    assert d["talker"] == "female" and 0 <= d["sti"] <= 1
    assert len(d["mtf"]) == 7 and all(len(r) == 14 for r in d["mtf"])
    assert set(d["decay"]) >= {"edt", "t20", "t30", "c50", "c80", "d50"}
    assert d["cautions"]


def test_table_output(ir_file, capsys):
    code, stdout, _ = run_cli(["ir", ir_file], capsys)
    assert code == 0
    assert "STI =" in stdout and "qualification band" in stdout and "T30" in stdout
    assert "No background noise" in stdout


def test_textbook_switch(ir_file, capsys):
    run_cli(["ir", ir_file, "--json"], capsys)
    code, stdout, _ = run_cli(["ir", ir_file, "--json", "--no-auditory-corrections"], capsys)
    d = json.loads(stdout)
    assert code == 0 and d["auditory_corrections"] is False and d["threshold_db"] is None


def _assert_clean_failure(code, out, err, expect_code, pattern, out_file=None):
    assert code == expect_code
    lines = [ln for ln in err.strip().splitlines() if ln]
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    assert pattern in lines[0]
    assert "Traceback" not in err + out
    if out_file is not None:
        assert not out_file.exists()
        assert not list(out_file.parent.glob(".*.part"))


@pytest.mark.parametrize(
    "extra,pattern",
    [
        (["--noise", "1,2,3"], "noise level"),
        (["--noise", "a,b,c,d,e,f,g"], "not all numbers"),
        (["--speech-level", "500"], "implausible"),
        (["--talker", "robot"], "unknown talker"),
        (["--channel", "3"], "channel 3"),
        (["--bogus"], "No such option"),
    ],
)
def test_bad_options(ir_file, capsys, tmp_path, extra, pattern):
    out = tmp_path / "r.json"
    code, o, e = run_cli(["ir", ir_file, "--out", out] + extra, capsys)
    _assert_clean_failure(code, o, e, 2, pattern, out)


def test_bad_files(tmp_path, capsys, write_wav):
    out = tmp_path / "r.json"
    (tmp_path / "text.wav").write_text("hello")
    (tmp_path / "empty.wav").write_bytes(b"")
    cases = [
        (tmp_path / "missing.wav", "does not exist"),
        (tmp_path, "folder"),
        (tmp_path / "text.wav", "not a readable audio file"),
        (tmp_path / "empty.wav", "empty"),
        (write_wav("zeros.wav", np.zeros(FS), FS), "silent"),
        (write_wav("nan.wav", np.where(np.arange(FS) == 5, np.nan, noise_decay(0.5, seconds=1.0)), FS, "FLOAT"),
         "NaN"),
        (write_wav("short.wav", noise_decay(0.1, seconds=0.3), FS), "0.63 Hz"),
        (write_wav("clip.wav", np.clip(4 * noise_decay(1.0, seconds=1.5), -1, 1), FS), "clipped"),
        (write_wav("low.wav", noise_decay(0.5, fs=16000, seconds=1.5), 16000), "8 kHz octave band"),
    ]
    for path, pattern in cases:
        code, o, e = run_cli(["ir", path, "--out", out], capsys)
        _assert_clean_failure(code, o, e, 2, pattern, out)


def test_help_is_fast_and_lists_commands():
    import subprocess
    import sys

    r = subprocess.run([sys.executable, "-c", "from envpredict.cli import main; main(['--help'])"],
                       capture_output=True, text=True, timeout=60)
    assert r.returncode == 0 and "ir" in r.stdout and "demo" in r.stdout
    # heavy modules stay unloaded for --help
    r = subprocess.run([sys.executable, "-c",
                        "import sys\nfrom envpredict.cli import main\n"
                        "try:\n main(['--help'])\nexcept SystemExit: pass\n"
                        "print([m for m in ('scipy', 'matplotlib', 'soundfile', 'numpy') if m in sys.modules])"],
                       capture_output=True, text=True, timeout=60)
    assert r.stdout.strip().splitlines()[-1] == "[]"


def test_report_folder(ir_file, capsys, tmp_path):
    import html.parser

    rep = tmp_path / "report"
    code, out, _ = run_cli(["ir", ir_file, "--json", "--report", rep], capsys)
    assert code == 0
    d = json.loads(out)
    names = {p.name for p in rep.iterdir()}
    assert {"report.html", "mtf.png", "decay_curves.png", "transmission_index.png"} <= names
    for p in rep.glob("*.png"):
        assert p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    page = (rep / "report.html").read_text()

    class Embedded(html.parser.HTMLParser):
        parts: list = []
        inside = False

        def handle_starttag(self, tag, attrs):
            self.inside = tag == "script" and ("id", "result") in attrs

        def handle_endtag(self, tag):
            self.inside = False

        def handle_data(self, text):
            if self.inside:
                Embedded.parts.append(text)

    Embedded().feed(page)
    embedded = json.loads("".join(Embedded.parts))
    assert embedded["sti"] == d["sti"] and embedded["mtf"] == d["mtf"]


def test_report_refuses_a_busy_folder(ir_file, capsys, tmp_path):
    (tmp_path / "keep.txt").write_text("mine")
    code, _, err = run_cli(["ir", ir_file, "--report", tmp_path], capsys)
    assert code == 2 and err.startswith("error: ")
    assert (tmp_path / "keep.txt").read_text() == "mine"


def test_ir_gives_the_mid_frequency_decay_figures(capsys):
    # ISO 3382-1 Annex A: the single number is the mean of the 500 Hz and 1 kHz octave values
    import json

    from cli_for_tests import run_cli

    from envpredict._data import demo_dir

    code, out, _ = run_cli(["ir", demo_dir() / "waiting_hall_ir.wav", "--json"], capsys)
    dec = json.loads(out)["decay"]
    assert dec["t30_mid"] == pytest.approx((dec["t30"][2] + dec["t30"][3]) / 2, abs=1e-3)
    assert dec["edt_mid"] == pytest.approx((dec["edt"][2] + dec["edt"][3]) / 2, abs=1e-3)
    code, text, _ = run_cli(["ir", demo_dir() / "waiting_hall_ir.wav"], capsys)
    assert f"T30 {dec['t30_mid']:.2f} s, EDT {dec['edt_mid']:.2f} s" in text


def test_female_talkers_125_hz_band_is_shown_as_not_used(capsys, tmp_path):
    # IEC 60268-16 Table A.3: the female weights give the 125 Hz band no weight (no speech
    # there), so the band is "not used", not an MTI of 0.00 that reads as total loss
    import json

    from cli_for_tests import run_cli

    from envpredict._data import demo_dir

    ir = demo_dir() / "waiting_hall_ir.wav"
    code, out, _ = run_cli(["ir", ir, "--talker", "female", "--json", "--report", tmp_path / "rep"], capsys)
    d = json.loads(out)
    assert d["bands_used"] == [False] + [True] * 6
    code, text, _ = run_cli(["ir", ir, "--talker", "female"], capsys)
    assert any(line.split()[:3] == ["125", "not", "used"] for line in text.splitlines())
    assert "not used" in (tmp_path / "rep" / "report.html").read_text()
    code, out, _ = run_cli(["ir", ir, "--json"], capsys)
    assert json.loads(out)["bands_used"] == [True] * 7
