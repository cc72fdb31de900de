"""The demo command runs from any folder on the installed demo material; it prints the
result of :func:`envpredict.demo.rate_demo_site`."""

import json
import os

import pytest

from cli_for_tests import run_cli


@pytest.fixture(scope="module")
def demo_result():
    from envpredict.demo import rate_demo_site

    return rate_demo_site()


def test_demo_runs_anywhere(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    code, out, _ = run_cli(["demo"], capsys)
    assert code == 0
    assert "STI =" in out and "qualified person" in out
    code, out, _ = run_cli(["demo", "--json"], capsys)
    d = json.loads(out)
    assert code == 0 and 0 < d["ir"]["sti"] < 1
    assert os.listdir(tmp_path) == []  # the demo writes nothing


def test_demo_json_is_the_api_result(demo_result, capsys):
    code, out, _ = run_cli(["demo", "--json"], capsys)
    assert code == 0
    d = json.loads(out)
    assert d.pop("inputs") == {}
    assert d == json.loads(json.dumps(demo_result.to_dict()))
    assert d["cautions"] == d["ir"]["cautions"] and d["notes"] == []
    with open(os.path.join(d["folder"], "scenario.json"), encoding="utf-8") as fh:
        assert d["scenario"] == json.load(fh)


def test_demo_mid_frequency_figures(demo_result, capsys):
    # ISO 3382-1: the single-number T30 and EDT are the means of the 500 Hz and 1 kHz octaves
    dec = demo_result.ir.decay
    k500, k1k = list(dec.bands_hz).index(500), list(dec.bands_hz).index(1000)
    assert demo_result.t30_mid_s == pytest.approx((dec.t30[k500] + dec.t30[k1k]) / 2, rel=1e-12)
    assert demo_result.edt_mid_s == pytest.approx((dec.edt[k500] + dec.edt[k1k]) / 2, rel=1e-12)
    code, out, _ = run_cli(["demo"], capsys)
    assert code == 0
    assert (f"T30 = {demo_result.t30_mid_s:.2f} s, EDT = {demo_result.edt_mid_s:.2f} s") in out


def test_copy_to_gives_a_folder_of_sentences_and_a_noise(tmp_path, capsys):
    """The researcher's starting point: the demo corpus's clean sentences alone in
    ``sentences/`` (the same bytes as ``corpus/sNN_clean.wav``) beside the hall noise."""
    from envpredict._data import demo_dir

    code, out, err = run_cli(["demo", "--copy-to", tmp_path / "site", "--json"], capsys)
    assert code == 0, err
    files = json.loads(out)["files"]
    site = tmp_path / "site"
    names = sorted(p.name for p in (site / "sentences").iterdir())
    assert names == [f"s{i:02d}.wav" for i in range(1, 9)] and f"sentences{os.sep}s01.wav" in files
    for n in names:
        assert (site / "sentences" / n).read_bytes() == (demo_dir() / "corpus" / n.replace(".wav", "_clean.wav")
                                                         ).read_bytes()
    assert (site / "hall_noise.wav").is_file()
    code, out, err = run_cli(["demo", "--copy-to", tmp_path / "site"], capsys)
    assert code == 2 and "not empty" in err
