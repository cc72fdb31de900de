"""The statistical room model (envpredict.roommodel) against the published formulas.

Every expected value is computed here from the formula as published, with its own
constants written out (not the module's):

* reverberation only: m(F) = [1 + (2 pi F T / 13.8)^2]^(-1/2) (Houtgast, Steeneken &
  Plomp 1980, Acustica 46:60-72, eq. for an exponential decay);
* direct + diffuse: m(F) = |D + R / (1 + j 2 pi F T / 13.8)| / (D + R) with
  D / R = r_c^2 / r^2, r_c^2 = Q A / (16 pi), A = 0.161 V / T (Sabine);
* two equal arrivals tau apart: m(F) = |cos(pi F tau)|;
* Sabine and Eyring reverberation times: pyroomacoustics' ``rt60_theory``;
* the STI: IEC 60268-16:2011 A.2.4 - A.2.6 with the Table A.1 male weights.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy.integrate import quad

from envpredict.exceptions import InputError
from envpredict.roommodel import (
    MAX_GRID_POINTS, directivity_gain, modulation_transfer, parse_scene, read_scene, source_terms,
)

#: IEC 60268-16:2011 Table A.1, male: alpha (7), beta (6).
ALPHA = np.array([0.085, 0.127, 0.230, 0.233, 0.309, 0.224, 0.173])
BETA = np.array([0.085, 0.078, 0.065, 0.011, 0.047, 0.095])
#: IEC 60268-16:2011, the 14 modulation frequencies, Hz.
F = np.array([0.63, 0.8, 1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0, 10.0, 12.5])


def iec_sti(m: np.ndarray) -> float:
    """STI of a (7, 14) MTF without noise or auditory corrections (IEC 60268-16 A.2.4-A.2.6)."""
    m = np.clip(m, 1e-12, 1 - 1e-12)
    snr = np.clip(10 * np.log10(m / (1 - m)), -15, 15)
    mti = ((snr + 15) / 30).mean(axis=1)
    return float(ALPHA @ mti - BETA @ np.sqrt(mti[:-1] * mti[1:]))


def reverb_m(T: float) -> np.ndarray:
    return (1 + (2 * np.pi * F * T / 13.8) ** 2) ** -0.5


def one_source(volume, rt, pos, listener, q=1.0, **room):
    return {"room": {"volume_m3": volume, "rt_s": rt, **room},
            "sources": [{"name": "LS", "position_m": pos, "level_1m_db": 80, "q": q}],
            "listeners": [{"name": "P", "position_m": listener}]}


def model_mtf(d):
    sc = parse_scene(d)
    return modulation_transfer(sc.room, sc.sources, np.array([p for _, p in sc.listeners]))


# ---------------------------------------------------------------------------
# the published formulas
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("T, published", [(0.3, 0.827), (0.5, 0.736), (1.0, 0.588), (2.0, 0.437), (3.0, 0.357)])
def test_far_beyond_the_critical_distance_the_mtf_is_that_of_an_exponential_decay(T, published):
    # 2000 m3: r_c = sqrt(0.161 * 2000 / T / (16 pi)) is 1.3-4.1 m; 3 km is far beyond it
    mtf, _ = model_mtf(one_source(2000, T, [0, 0, 0], [3000, 0, 0]))
    assert np.allclose(mtf[0], reverb_m(T)[None, :], atol=1e-5)
    sti = iec_sti(np.tile(reverb_m(T), (7, 1)))
    assert sti == pytest.approx(published, abs=0.0005)      # the values the issue quotes
    assert iec_sti(mtf[0]) == pytest.approx(sti, abs=1e-4)


@pytest.mark.parametrize("r", [1.0, 2.0, 4.0, 8.0, 16.0, 32.0])
def test_direct_plus_diffuse_follows_the_formula_with_distance(r):
    V, T, Q = 2000.0, 1.5, 2.0
    A = 0.161 * V / T
    rc2 = Q * A / (16 * np.pi)
    d_over_r = rc2 / r ** 2
    expected = np.abs(d_over_r + 1 / (1 + 1j * 2 * np.pi * F * T / 13.8)) / (d_over_r + 1)
    mtf, _ = model_mtf(one_source(V, T, [0, 0, 0], [r, 0, 0], q=Q))
    assert np.allclose(mtf[0], expected[None, :], rtol=1e-9, atol=1e-12)
    # the issue's landmarks: about 0.88 at 1 m, about 0.50 beyond 16 m
    if r == 1.0:
        assert iec_sti(mtf[0]) == pytest.approx(0.88, abs=0.01)
    if r >= 16.0:
        assert iec_sti(mtf[0]) == pytest.approx(0.50, abs=0.02)


@pytest.mark.parametrize("tau_ms", [10.0, 40.0, 100.0])
def test_two_equal_arrivals_give_the_echo_formula(tau_ms):
    # a dead room (T = 10 ms in 10 000 m3: r_c = 56 m), both sources 1 m from the listener
    d = {"room": {"volume_m3": 10000, "rt_s": 0.01},
         "sources": [{"name": "A", "position_m": [-1, 0, 0], "level_1m_db": 80},
                     {"name": "B", "position_m": [1, 0, 0], "level_1m_db": 80, "delay_ms": tau_ms}],
         "listeners": [{"position_m": [0, 0, 0]}]}
    mtf, _ = model_mtf(d)
    echo = np.abs(np.cos(np.pi * F * tau_ms / 1000))
    assert np.allclose(mtf[0], echo[None, :], atol=2e-3)
    assert iec_sti(mtf[0]) == pytest.approx(iec_sti(np.tile(echo, (7, 1))), abs=0.005)


def test_off_axis_pattern_has_the_directivity_factor_q():
    """Q = 4 pi / integral of the intensity pattern over the sphere = 2 / int_{-1}^{1} g(u) du."""
    d = {"room": {"volume_m3": 500, "rt_s": 1.0},
         "sources": [{"position_m": [0, 0, 0], "aim_m": [1, 0, 0], "level_1m_db": 80,
                      "q": [1, 1.5, 2, 4, 8, 12, 30]}], "listeners": [{"position_m": [1, 0, 0]}]}
    src = parse_scene(d).sources[0]
    for k, q in enumerate(src.q):
        integral, _ = quad(lambda u: directivity_gain(src, np.array([u]))[0, k], -1, 1)
        assert 2 / integral == pytest.approx(q, rel=1e-6)


def test_off_axis_table_is_interpolated_in_angle():
    d = {"room": {"volume_m3": 500, "rt_s": 1.0},
         "sources": [{"position_m": [0, 0, 0], "aim_m": [1, 0, 0], "level_1m_db": 80, "q": 4,
                      "off_axis_db": {"angles_deg": [0, 90, 180], "attenuation_db": [0, 6, 20]}}],
         "listeners": [{"position_m": [1, 0, 0]}]}
    sc = parse_scene(d)
    pts = np.array([[1, 0, 0], [0, 2, 0], [np.cos(np.radians(45)), np.sin(np.radians(45)), 0]])
    D, _, _ = source_terms(sc.room, sc.sources[0], pts)
    lv = 10 * np.log10(D[:, 3])
    # distance law (-6.02 dB at 2 m) plus the table's 6 dB at 90 degrees, 3 dB at 45 degrees
    assert lv == pytest.approx([80, 80 - 20 * np.log10(2) - 6, 80 - 3], abs=1e-9)


def test_revised_theory_lowers_the_reverberant_level_with_distance():
    """Barron & Lee (1988): reflected energy times exp(-13.82 r / (c T))."""
    V, T, r, c = 2000.0, 1.5, 20.0, 343.0
    base = one_source(V, T, [0, 0, 0], [r, 0, 0])
    classic = parse_scene(base)
    base["room"]["field"] = "revised"
    revised = parse_scene(base)
    _, r0, _ = source_terms(classic.room, classic.sources[0], np.array([[r, 0, 0]]))
    _, r1, _ = source_terms(revised.room, revised.sources[0], np.array([[r, 0, 0]]))
    assert r1[0, 3] / r0[0, 3] == pytest.approx(np.exp(-13.82 * r / (c * T)), rel=1e-9)


def test_arrival_time_is_distance_over_c_plus_delay():
    d = one_source(500, 1.0, [0, 0, 0], [34.3, 0, 0])
    d["sources"][0]["delay_ms"] = 12.5
    sc = parse_scene(d)
    _, _, t = source_terms(sc.room, sc.sources[0], np.array([[34.3, 0, 0]]))
    assert t[0] == pytest.approx(34.3 / 343 + 0.0125, rel=1e-12)   # c = 343 m/s at 20 degC


@pytest.mark.parametrize("formula", ["sabine", "eyring"])
def test_reverberation_time_from_surfaces_matches_pyroomacoustics(formula):
    pra = pytest.importorskip("pyroomacoustics")
    dims = [12.0, 8.0, 4.0]
    alpha = 0.25
    room = pra.ShoeBox(dims, fs=16000, materials=pra.Material(alpha), max_order=1)
    expected = room.rt60_theory(formula=formula)
    area = 2 * (12 * 8 + 12 * 4 + 8 * 4)
    d = {"room": {"dimensions_m": dims, "surfaces": [{"area_m2": area, "absorption": alpha}],
                  "rt_formula": formula},
         "sources": [{"position_m": [2, 2, 2], "level_1m_db": 80}], "listeners": [{"position_m": [6, 4, 1.2]}]}
    rt = parse_scene(d).room.rt_s
    # pyroomacoustics uses 24 ln 10 / c (c = 343 m/s) = 0.16111 for the printed 0.161
    assert rt == pytest.approx(np.full(7, expected), rel=2e-3)


def test_level_in_dba_uses_the_talkers_spectrum():
    """level_1m_dba spreads the level by IEC 60268-16 Table A.2 (male: +2.9 dB at 125 Hz, -6.8 at 1 kHz)."""
    d = one_source(500, 1.0, [0, 0, 0], [1, 0, 0])
    del d["sources"][0]["level_1m_db"]
    d["sources"][0]["level_1m_dba"] = 70
    s = parse_scene(d).sources[0]
    assert s.level_1m_db[0] == pytest.approx(72.9) and s.level_1m_db[3] == pytest.approx(63.2)


def test_speech_level_is_the_sum_of_direct_and_reverberant_intensities():
    V, T, Q, r = 1000.0, 1.0, 1.0, 5.0
    A = 0.161 * V / T
    expected = 80 + 10 * np.log10(1 / r ** 2 + 16 * np.pi / (Q * A))
    _, total = model_mtf(one_source(V, T, [0, 0, 0], [r, 0, 0], q=Q))
    assert 10 * np.log10(total[0]) == pytest.approx(np.full(7, expected), abs=1e-9)


# ---------------------------------------------------------------------------
# the scene: bad input is refused in one line
# ---------------------------------------------------------------------------

def _ok():
    return {"room": {"volume_m3": 2000, "rt_s": [1.6, 1.5, 1.5, 1.4, 1.3, 1.1, 0.9]},
            "noise_db": [55, 52, 48, 45, 42, 38, 33],
            "sources": [{"name": "LS1", "position_m": [2, 5, 4], "aim_m": [10, 5, 1.2],
                         "level_1m_db": [84, 86, 88, 88, 86, 83, 78], "q": [1.5, 2, 3, 5, 8, 10, 12],
                         "delay_ms": 0}],
            "listeners": [{"name": "P1", "position_m": [12, 5, 1.2]}],
            "grid": {"x_m": [0, 40], "y_m": [0, 20], "z_m": 1.2, "step_m": 1.0}}


def test_the_issue_example_scene_is_accepted():
    sc = parse_scene(_ok())
    assert sc.grid.x_m.size == 41 and sc.grid.y_m.size == 21 and len(sc.listeners) == 1


def _set(path, value):
    d = _ok()
    cur = d
    keys = path.split(".")
    for k in keys[:-1]:
        cur = cur[int(k)] if isinstance(cur, list) else cur[k]
    last = keys[-1]
    if value is KeyError:
        del cur[last]
    elif isinstance(cur, list):
        cur[int(last)] = value
    else:
        cur[last] = value
    return d


@pytest.mark.parametrize("path, value, what", [
    ("room.rt", 1.0, "unknown key 'rt' in room"),
    ("sources.0.levl_1m_db", 80, "unknown key 'levl_1m_db' in sources[0]"),
    ("colour", "red", "unknown key 'colour'"),
    ("room.volume_m3", 0, "room.volume_m3 is 0"),
    ("room.volume_m3", -5, "room.volume_m3 is -5"),
    ("room.rt_s", [1.0, 1.0, 0.0, 1.0, 1.0, 1.0, 1.0], "room.rt_s[2] is 0"),
    ("room.rt_s", [1.0, 1.0, 1.0], "room.rt_s has 3 values; 7 are needed"),
    ("noise_db", [40, 40], "noise_db has 2 values"),
    ("sources.0.q", [1, 2, 3, 4, 5, 6], "sources[0].q has 6 values"),
    ("sources.0.q", 0.5, "sources[0].q is 0.5"),
    ("listeners.0.position_m", [2, 5, 4], "listener P1 is 0.00 m from source LS1"),
    ("listeners.0.position_m", [1, 2], "listeners[0].position_m must be 3 numbers"),
    ("grid.step_m", 0.01, "the grid has"),
    ("grid.step_m", 0, "grid.step_m is 0"),
    ("sources", [], "the scene has no sources"),
    ("room", KeyError, "the scene has no room"),
    ("sources.0.level_1m_dba", 80, "source LS1 has both level_1m_db and level_1m_dba"),
    ("sources.0.level_1m_db", KeyError, "source LS1 has no level"),
])
def test_bad_scenes_are_refused_with_what_and_fix(path, value, what):
    with pytest.raises(InputError) as e:
        parse_scene(_set(path, value))
    assert e.value.what.startswith(what), e.value.what
    assert e.value.fix
    assert "\n" not in e.value.one_line()


def test_an_unknown_key_names_the_known_ones():
    with pytest.raises(InputError) as e:
        parse_scene(_set("room.volume", 2000))
    for key in ("volume_m3", "dimensions_m", "rt_s", "surfaces", "rt_formula", "field"):
        assert key in e.value.fix


def test_no_listeners_and_no_grid_is_refused():
    d = _ok()
    del d["listeners"], d["grid"]
    with pytest.raises(InputError, match="neither listeners nor a grid"):
        parse_scene(d)


def test_rt_implying_more_absorption_than_surface_is_refused():
    # a 10 x 10 x 3 m room has 320 m2 of surface; T = 0.05 s implies 0.161 * 300 / 0.05 = 966 m2
    d = _ok()
    d["room"] = {"dimensions_m": [10, 10, 3], "rt_s": 0.05}
    d["sources"][0]["position_m"] = [2, 5, 2.5]
    d["sources"][0]["aim_m"] = [8, 5, 1.2]
    d["listeners"][0]["position_m"] = [8, 5, 1.2]
    d["grid"] = {"x_m": [0, 10], "y_m": [0, 10], "z_m": 1.2, "step_m": 1}
    with pytest.raises(InputError) as e:
        parse_scene(d)
    assert "implies an absorption area of 966 m2, more than the room's 320 m2" in e.value.what
    d["room"]["rt_s"] = 0.3
    parse_scene(d)


def test_points_outside_the_room_are_refused():
    d = _ok()
    d["room"] = {"dimensions_m": [40, 20, 6], "rt_s": 1.2}
    parse_scene(d)
    d["listeners"][0]["position_m"] = [41, 5, 1.2]
    with pytest.raises(InputError, match="listener P1 at .* is outside the room"):
        parse_scene(d)
    d = _ok()
    d["room"] = {"dimensions_m": [40, 20, 6], "rt_s": 1.2}
    d["grid"]["x_m"] = [0, 45]
    with pytest.raises(InputError, match="grid corner"):
        parse_scene(d)


def test_the_grid_limit_is_stated():
    d = _ok()
    side = int(np.sqrt(MAX_GRID_POINTS)) + 1
    d["grid"] = {"x_m": [0, side], "y_m": [0, side], "z_m": 1.2, "step_m": 1}
    with pytest.raises(InputError) as e:
        parse_scene(d)
    assert str(MAX_GRID_POINTS) in e.value.what


def test_both_rt_and_surfaces_is_refused():
    d = _ok()
    d["room"]["surfaces"] = [{"area_m2": 1000, "absorption": 0.2}]
    with pytest.raises(InputError, match="both rt_s and surfaces"):
        parse_scene(d)


def test_scene_files(tmp_path):
    p = tmp_path / "s.json"
    p.write_text(json.dumps(_ok()))
    assert read_scene(p).room.volume_m3 == 2000
    p.write_text('{"room": {"volume_m3": 2000,,}}')
    with pytest.raises(InputError, match="not valid JSON .line 1"):
        read_scene(p)
    with pytest.raises(InputError, match="does not exist"):
        read_scene(tmp_path / "missing.json")
    t = tmp_path / "s.toml"
    t.write_text('[room]\nvolume_m3 = 2000\nrt_s = 1.5\n[[sources]]\nposition_m = [0, 0, 3]\nlevel_1m_dba = 80\n'
                 '[[listeners]]\nposition_m = [5, 0, 1.2]\n')
    assert read_scene(t).room.rt_s[0] == 1.5


# ---------------------------------------------------------------------------
# invariants over random scenes (hypothesis)
# ---------------------------------------------------------------------------

coord = st.floats(-30, 30, allow_nan=False)
source_st = st.fixed_dictionaries({
    "position_m": st.tuples(coord, coord, st.floats(2, 8)).map(list),
    "level_1m_db": st.lists(st.floats(60, 100), min_size=7, max_size=7),
    "q": st.floats(1, 20), "delay_ms": st.floats(0, 200)})
scene_st = st.fixed_dictionaries({
    "room": st.fixed_dictionaries({"volume_m3": st.floats(100, 50000),
                                   "rt_s": st.lists(st.floats(0.2, 5), min_size=7, max_size=7)}),
    "sources": st.lists(source_st, min_size=1, max_size=4),
    "listeners": st.just([{"position_m": [0.5, 0.5, 1.2]}])})


@settings(max_examples=60, deadline=None)
@given(scene_st)
def test_mtf_lies_in_0_1_and_never_exceeds_the_reverberation_alone_of_one_source(d):
    mtf, total = model_mtf(d)
    assert np.all((mtf >= 0) & (mtf <= 1 + 1e-12)) and np.all(total > 0)
    if len(d["sources"]) == 1:     # one arrival: at least the diffuse part's own m (the direct part only helps)
        T = np.array(d["room"]["rt_s"])
        floor = (1 + (2 * np.pi * F[None, :] * T[:, None] / 13.8) ** 2) ** -0.5
        assert np.all(mtf[0] >= floor - 1e-12)


@settings(max_examples=40, deadline=None)
@given(scene_st, st.floats(-20, 20))
def test_without_noise_a_common_gain_leaves_the_mtf_unchanged(d, gain_db):
    mtf, total = model_mtf(d)
    for s in d["sources"]:
        s["level_1m_db"] = [v + gain_db for v in s["level_1m_db"]]
    mtf2, total2 = model_mtf(d)
    assert np.allclose(mtf2, mtf, atol=1e-12)
    assert np.allclose(10 * np.log10(total2 / total), gain_db, atol=1e-9)
