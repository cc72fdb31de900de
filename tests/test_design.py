"""The design job (envpredict.design) and its command (envpredict design).

External references: the STI of the indirect method (``envpredict.sti_from_ir``) on an
impulse response synthesised from the same model (direct impulses plus exponentially
decaying noise; the indirect path knows nothing of the model), the noise-only formula
STI = (SNR + 15) / 30 (IEC 60268-16:2011 A.2.4-A.2.6, weights summing to 1), and the
quantile of the grid checked by counting.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

import envpredict
from cli_for_tests import run_cli
from envpredict.design import predict_design, predict_design_file
from envpredict.roommodel import parse_scene, source_terms

FS = 48000


def scene(**extra):
    d = {"room": {"volume_m3": 2000, "rt_s": [1.6, 1.5, 1.5, 1.4, 1.3, 1.1, 0.9]},
         "noise_db": [55, 52, 48, 45, 42, 38, 33],
         "sources": [{"name": "LS1", "position_m": [2, 5, 4], "aim_m": [10, 5, 1.2],
                      "level_1m_db": [84, 86, 88, 88, 86, 83, 78], "q": [1.5, 2, 3, 5, 8, 10, 12]},
                     {"name": "LS2", "position_m": [38, 15, 4], "aim_m": [30, 15, 1.2],
                      "level_1m_db": [84, 86, 88, 88, 86, 83, 78], "q": [1.5, 2, 3, 5, 8, 10, 12]}],
         "listeners": [{"name": "P1", "position_m": [12, 5, 1.2]}, {"name": "P2", "position_m": [37, 15, 1.2]}],
         "grid": {"x_m": [0, 40], "y_m": [0, 20], "z_m": 1.2, "step_m": 1.0}}
    d.update(extra)
    return d


# ---------------------------------------------------------------------------
# against the indirect method on a synthesised impulse response
# ---------------------------------------------------------------------------

def synthesised_ir(d: dict, seed: int, seconds: float = 4.0) -> np.ndarray:
    """Impulse response of the model at the first listener: per loudspeaker a direct impulse of
    energy D at its arrival time and, from then on, Gaussian noise decaying by 60 dB in T with
    energy R (variance 13.8 R / (T fs): the sum of sigma^2 exp(-13.8 n / (T fs)) is R).
    The scenes used have the same T, D and R in every band, so one broadband response serves."""
    sc = parse_scene(d)
    pos = sc.listeners[0][1]
    T = float(sc.room.rt_s[3])
    n = int(seconds * FS)
    t = np.arange(n) / FS
    ir = np.zeros(n)
    rng = np.random.default_rng(seed)
    for s in sc.sources:
        D, R, ta = source_terms(sc.room, s, pos[None, :])
        i0 = int(round(ta[0] * FS))
        ir[i0] += np.sqrt(D[0, 3])
        ir[i0:] += rng.standard_normal(n - i0) * np.sqrt(13.8 * R[0, 3] / (T * FS)) * np.exp(-6.9 * t[: n - i0] / T)
    return 0.5 * ir / np.max(np.abs(ir))


FLAT = {"level_1m_db": 80, "q": 2}


@pytest.mark.parametrize("case", [
    {"T": 1.0, "listener": [6, 0, 3], "sources": [{"position_m": [0, 0, 3], **FLAT}]},
    {"T": 1.5, "listener": [3, 0, 3], "sources": [{"position_m": [0, 0, 3], **FLAT}]},
    {"T": 0.6, "listener": [10, 0, 3], "sources": [{"position_m": [0, 0, 3], **FLAT}]},
    {"T": 1.0, "listener": [4, 0, 3], "sources": [{"name": "A", "position_m": [0, 0, 3], **FLAT},
                                                  {"name": "B", "position_m": [0, 8, 3], "delay_ms": 60, **FLAT}]},
])
@pytest.mark.parametrize("seed", [0, 1])
def test_design_agrees_with_the_indirect_method_on_a_synthesised_response(case, seed):
    d = {"room": {"volume_m3": 2000, "rt_s": case["T"]}, "sources": case["sources"],
         "listeners": [{"position_m": case["listener"]}]}
    designed = predict_design(d, auditory=False).listeners[0].sti.sti
    measured = envpredict.sti_from_ir(synthesised_ir(d, seed), FS, auditory=False).sti.sti
    assert measured == pytest.approx(designed, abs=0.02)


def test_with_noise_and_auditory_corrections_the_two_paths_agree():
    """Noise, masking and threshold are the same code: with the model's band speech levels given
    to the indirect method, the two agree as closely as without noise."""
    d = {"room": {"volume_m3": 2000, "rt_s": 1.0}, "noise_db": [70, 68, 66, 64, 62, 60, 58],
         "sources": [{"position_m": [0, 0, 3], **FLAT}], "listeners": [{"position_m": [6, 0, 3]}]}
    li = predict_design(d).listeners[0]
    ir = envpredict.sti_from_ir(synthesised_ir(d, 0), FS, noise_db=d["noise_db"], speech_db=li.sti.speech_db)
    assert ir.sti.sti == pytest.approx(li.sti.sti, abs=0.02)
    assert li.sti.sti < predict_design(dict(d, noise_db=None)).listeners[0].sti.sti - 0.05


@pytest.mark.parametrize("snr", [-9.0, 0.0, 6.0, 12.0])
def test_noise_only_gives_snr_plus_15_over_30(snr):
    # a dead room (T = 10 ms in 10 000 m3), the listener 1 m from the loudspeaker: m = 1 but for noise
    speech = 80 + 10 * np.log10(1 + 16 * np.pi / (0.161 * 10000 / 0.01))   # direct + (tiny) diffuse, Sabine
    d = {"room": {"volume_m3": 10000, "rt_s": 0.01}, "noise_db": [speech - snr] * 7,
         "sources": [{"position_m": [0, 0, 0], "level_1m_db": 80}], "listeners": [{"position_m": [1, 0, 0]}]}
    r = predict_design(d, auditory=False).listeners[0].sti
    assert r.sti == pytest.approx((snr + 15) / 30, abs=0.002)


def test_grid_values_equal_the_listener_computation_at_the_same_points():
    d = scene()
    d["listeners"] = [{"name": f"g{x}_{y}", "position_m": [x, y, 1.2]} for x, y in ((0, 0), (12, 5), (40, 20), (25, 7))]
    r = predict_design(d)
    for li in r.listeners:
        x, y = li.position_m[:2]
        assert r.grid.sti[int(y), int(x)] == pytest.approx(li.sti.sti, abs=1e-12)


def test_grid_share_minimum_and_orientation():
    r = predict_design(scene(), requirement=0.48)
    g = r.grid
    assert g.sti.shape == (21, 41)                       # rows = y, columns = x
    assert g.share_meeting == pytest.approx(np.count_nonzero(g.sti >= 0.48) / g.sti.size)
    d = r.to_dict()["grid"]
    assert np.shape(d["sti"]) == (len(d["y_m"]), len(d["x_m"]))
    iy, ix = np.unravel_index(np.argmin(g.sti), g.sti.shape)
    assert d["min_at_m"][:2] == [g.x_m[ix], g.y_m[iy]]
    assert d["requirement"] == 0.48 and r.requirement_given


def test_listener_outputs_dominant_source_and_echo():
    r = predict_design(scene())
    p1, p2 = r.listeners
    assert p1.dominant_source == "LS1" and p2.dominant_source == "LS2"
    # LS2 is 27.6 m farther from P1 than LS1: 80 ms later (c = 343 m/s)
    late = p1.late_arrival
    assert late[0] == "LS2"
    r1 = np.linalg.norm(np.subtract([12, 5, 1.2], [2, 5, 4]))
    r2 = np.linalg.norm(np.subtract([12, 5, 1.2], [38, 15, 4]))
    assert late[1] == pytest.approx(1000 * (r2 - r1) / 343, abs=1e-6)
    assert p1.echo == (late[1] > 50 and late[2] >= -10)
    d = r.to_dict()
    assert d["listeners"][0]["late_arrival"]["echo"] == p1.echo
    assert "Haas" in d["echo_criterion"]


def test_delaying_the_near_loudspeaker_removes_the_echo():
    d = scene()
    d["listeners"] = [{"name": "P1", "position_m": [12, 5, 1.2]}]
    base = predict_design(d).listeners[0]
    assert base.echo
    d["sources"][0]["delay_ms"] = 70.0
    delayed = predict_design(d).listeners[0]
    assert not delayed.echo


def test_result_dictionary_has_the_agreed_keys():
    d = predict_design(scene()).to_dict()
    json.dumps(d, allow_nan=False)
    for li in d["listeners"]:
        for key in ("name", "position_m", "sti", "mtf", "rating", "speech_db", "dominant_source", "late_arrival"):
            assert key in li
        assert np.shape(li["mtf"]) == (7, 14)
    for key in ("x_m", "y_m", "sti", "share_meeting_requirement", "min_sti", "min_at_m"):
        assert key in d["grid"]
    assert d["cautions"] and d["notes"]
    assert any("Galbrun" in c for c in d["cautions"])
    assert any("No requirement was given" in c for c in d["cautions"])


def test_female_talker_from_dba_levels():
    d = scene()
    for s in d["sources"]:
        del s["level_1m_db"]
        s["level_1m_dba"] = 85
    r = predict_design(d, talker="female")
    assert r.talker == "female" and 0 < r.listeners[0].sti.sti < 1
    assert r.to_dict()["listeners"][0]["speech_db"][0] is None     # no speech in the 125 Hz band


# ---------------------------------------------------------------------------
# the command
# ---------------------------------------------------------------------------

@pytest.fixture
def scene_file(tmp_path):
    p = tmp_path / "scene.json"
    p.write_text(json.dumps(scene()))
    return p


def test_cli_json_is_to_dict_plus_inputs(scene_file, capsys):
    code, out, err = run_cli(["design", scene_file, "--json", "--require", "0.45"], capsys)
    assert code == 0, err
    d = json.loads(out)
    assert d.pop("inputs") == {"scene": str(scene_file), "talker": "male", "auditory_corrections": True,
                               "require": 0.45, "engine": "statistical"}
    assert d == predict_design_file(scene_file, requirement=0.45).to_dict()


def test_cli_table(scene_file, capsys):
    code, out, err = run_cli(["design", scene_file], capsys)
    assert code == 0, err
    assert "P1" in out and "Grid: 41 x 21 points" in out and "Cautions:" in out


def test_cli_writes_out_and_report(scene_file, tmp_path, capsys):
    code, out, err = run_cli(["design", scene_file, "--out", tmp_path / "r.json", "--report", tmp_path / "rep",
                              "--no-auditory-corrections"], capsys)
    assert code == 0, err
    assert json.loads((tmp_path / "r.json").read_text())["auditory_corrections"] is False
    assert (tmp_path / "rep" / "report.html").is_file()


@pytest.mark.parametrize("change, what", [
    (lambda d: d["room"].update(volume_m3=-1), "room.volume_m3 is -1"),
    (lambda d: d["room"].update(rt=1.0), "unknown key 'rt' in room"),
    (lambda d: d["listeners"][0].update(position_m=[2, 5, 4]), "listener P1 is 0.00 m from source LS1"),
    (lambda d: d["grid"].update(step_m=0.02), "the grid has"),
    (lambda d: d["room"].update(rt_s=[1, 2]), "room.rt_s has 2 values"),
])
def test_cli_bad_scene_one_line_exit_2_nothing_written(tmp_path, capsys, change, what):
    d = scene()
    change(d)
    p = tmp_path / "bad.json"
    p.write_text(json.dumps(d))
    code, out, err = run_cli(["design", p, "--out", tmp_path / "o.json", "--report", tmp_path / "rep"], capsys)
    assert code == 2
    assert err.startswith(f"error: {what}") and err.count("\n") == 1 and " — " in err
    assert out == "" and not (tmp_path / "o.json").exists() and not (tmp_path / "rep").exists()


@pytest.mark.parametrize("args", [["--talker", "child"], ["--require", "1.5"], ["--engine", "rays"]])
def test_cli_bad_options(scene_file, capsys, args):
    code, out, err = run_cli(["design", scene_file, *args], capsys)
    assert code == 2 and err.startswith("error: ") and out == ""


def test_report_is_rebuilt_from_result_json_and_shows_the_json_numbers(scene_file, tmp_path, capsys):
    import re

    from envpredict.report import write_report

    code, _, err = run_cli(["design", scene_file, "--report", tmp_path / "rep", "--json"], capsys)
    assert code == 0, err
    d = json.loads((tmp_path / "rep" / "result.json").read_text())
    page = (tmp_path / "rep" / "report.html").read_text()
    assert 'id="fig-map"' in page
    shown = dict(re.findall(r'data-key="([^"]+)">([^<]+)<', page))
    for i, li in enumerate(d["listeners"]):
        assert float(shown[f"listeners.{i}.sti"]) == pytest.approx(li["sti"], abs=0.005)
    assert float(shown["grid.share_meeting_requirement"].rstrip(" %")) == pytest.approx(
        100 * d["grid"]["share_meeting_requirement"], abs=0.05)
    again = write_report("design", d, tmp_path / "rep2")
    assert 'id="fig-map"' in again.read_text()


def test_the_installed_demo_hall_scene(capsys):
    from envpredict._data import demo_dir

    path = demo_dir() / "design_hall.json"
    r = predict_design_file(path)
    assert [li.name for li in r.listeners] == ["row B", "row F", "row K", "kiosk"]
    assert r.grid.sti.shape == (37, 73)
    # the hall of the demo site: its reverberation times and noise
    assert list(r.scene.room.rt_s) == [1.9, 1.8, 1.6, 1.45, 1.3, 1.1, 0.85]
    assert list(r.scene.noise_db) == [58, 55, 52, 49, 45, 40, 33]
    code, out, err = run_cli(["design", path], capsys)
    assert code == 0 and "row F" in out


# ---------------------------------------------------------------------------
# the image engine (pyroomacoustics) against the statistical model
# ---------------------------------------------------------------------------

#: How far the two engines may differ in a diffuse-ish shoebox with uniform absorption (stated in
#: the README): the image sources' specular decay is not diffuse (its late part lasts longer than
#: Eyring's T), so a few hundredths either way are expected.
ENGINE_TOLERANCE = 0.05


@pytest.mark.parametrize("T, listener", [(0.45, [7, 5, 1.2]), (1.0, [15, 9, 1.2]), (1.0, [5, 4, 1.2])])
def test_image_engine_agrees_with_the_statistical_model_in_a_shoebox(T, listener):
    pytest.importorskip("pyroomacoustics")
    dims = [10, 7, 3.5] if T < 0.5 else [20, 12, 6]
    d = {"room": {"dimensions_m": dims, "rt_s": T}, "noise_db": [45] * 7,
         "sources": [{"position_m": [2, 2, 2] if T < 0.5 else [3, 3, 3], "level_1m_db": 80}],
         "listeners": [{"name": "P", "position_m": listener}]}
    r = predict_design(d, engine="image")
    li = r.listeners[0]
    assert r.engine == "image" and li.statistical_sti == pytest.approx(predict_design(d).listeners[0].sti.sti)
    assert li.sti.sti == pytest.approx(li.statistical_sti, abs=ENGINE_TOLERANCE)
    # the image response carries the same speech level (direct + reverberant energy) within 2 dB
    assert li.sti.speech_db == pytest.approx(predict_design(d).listeners[0].sti.speech_db, abs=2.0)
    assert any(c.startswith("Image engine:") for c in r.cautions)


def test_image_engine_needs_the_rooms_dimensions():
    pytest.importorskip("pyroomacoustics")
    d = {"room": {"volume_m3": 500, "rt_s": 1.0}, "sources": [{"position_m": [0, 0, 3], "level_1m_db": 80}],
         "listeners": [{"position_m": [4, 0, 1.2]}]}
    with pytest.raises(envpredict.InputError, match="needs the room's dimensions"):
        predict_design(d, engine="image")
