"""Listeners with hearing loss (issue 17, items 1-3): audiograms, ISO 7029 age presets, the
reception threshold they raise in the STI and the threshold-simulating noise of the pair indices.

Outside sources of the checks (each named beside its test):

* IEC 60268-16:2011, Annex A: the STI formula, the male band weights alpha_k and redundancy
  factors beta_k (Table A.1), the absolute reception threshold per octave band (Table A.4),
  the effective-SNR limit of +-15 dB (A.2.4). The numbers are written here, not read from
  envpredict.standards.
* ISO 7029:2017, 4.2 and Table 1: the median threshold of a 60-year-old man at 4 kHz,
  20.2 dB above that at 18 years (the value a published open-source acoustics library
  reproduces from the standard: 20.2085 dB), and 0 dB at 18 years by construction.
* ISO 389-7:2005, Table 1: the free-field reference threshold at the octave frequencies.
* scipy.signal.welch: the octave-band levels of the threshold noise.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import envpredict
from cli_for_tests import run_cli
from envpredict import hearing
from envpredict.exceptions import InputError
from signals_for_tests import at_snr, harmonic_syllables, noise_decay, speech_shaped_noise

# IEC 60268-16:2011, Table A.1 (male): weights alpha_k and redundancy factors beta_k
IEC_ALPHA_MALE = (0.085, 0.127, 0.230, 0.233, 0.309, 0.224, 0.173)
IEC_BETA_MALE = (0.085, 0.078, 0.065, 0.011, 0.047, 0.095)
# IEC 60268-16:2011, Table A.4: absolute speech reception threshold, dB, 125 Hz ... 8 kHz
IEC_RECEPTION_THRESHOLD = (46.0, 27.0, 12.0, 6.5, 7.5, 8.0, 12.0)
# IEC 60268-16:2011, Table A.2 (male): speech spectrum relative to the A-weighted level, dB
IEC_MALE_SPECTRUM = (2.9, 2.9, -0.8, -6.8, -12.8, -18.8, -24.8)
# ISO 389-7:2005, Table 1 (free field): reference threshold at 125, 250, ..., 8000 Hz, dB SPL
ISO389_7_OCTAVES = (22.1, 11.4, 4.4, 2.4, -1.3, -5.4, 12.6)
OCTAVES = (125, 250, 500, 1000, 2000, 4000, 8000)


def flat(hl: float) -> str:
    return ",".join(f"{f}:{hl:g}" for f in OCTAVES)


def iec_sti(mti) -> float:
    """IEC 60268-16:2011, A.2.6: STI = sum alpha_k MTI_k - sum beta_k sqrt(MTI_k MTI_k+1)."""
    m = np.clip(np.asarray(mti, dtype=float), 0, 1)
    return float(np.dot(IEC_ALPHA_MALE, m) - np.dot(IEC_BETA_MALE, np.sqrt(m[:-1] * m[1:])))


# ---------------------------------------------------------------------------
# audiograms: parsing and filling
# ---------------------------------------------------------------------------

def test_the_issue_example_parses_and_states_the_filled_band():
    a = hearing.parse_audiogram("250:20,500:25,1000:30,2000:45,4000:60,8000:70")
    assert a.band_hl_db == (20.0, 20.0, 25.0, 30.0, 45.0, 60.0, 70.0)
    assert a.filled_bands_hz == (125.0,)
    assert "125 Hz" in a.notes[0] and "250 Hz" in a.notes[0] and "extrapolated" in a.notes[0]


def test_a_missing_octave_is_interpolated_on_a_log_frequency_axis():
    # 1 kHz is half way between 500 Hz and 2 kHz on log2(f): the mean of the two levels
    a = hearing.parse_audiogram("125:10,250:10,500:20,2000:40,4000:50,8000:60")
    assert a.band_hl_db[3] == pytest.approx(30.0)
    # 3 kHz and 6 kHz given around 4 kHz: log2(4000/3000) = 0.415 of the 1-octave gap
    b = hearing.parse_audiogram("125:0,250:0,500:0,1000:0,2000:0,3000:30,6000:60,8000:60")
    assert b.band_hl_db[5] == pytest.approx(30 + 30 * math.log2(4000 / 3000))
    assert 4000.0 in b.filled_bands_hz


def test_the_csv_form_gives_the_text_form(tmp_path):
    p = tmp_path / "a.csv"
    p.write_text("frequency_hz,hearing_level_db\n250,20\n500,25\n1000,30\n2000,45\n4000,60\n8000,70\n")
    assert envpredict.read_audiogram(p).band_hl_db == hearing.parse_audiogram(
        "250:20,500:25,1000:30,2000:45,4000:60,8000:70").band_hl_db


@pytest.mark.parametrize("text, words", [
    ("250:130,500:20,1000:20,2000:20,4000:20,8000:20", "outside -10..120"),
    ("250:-11,500:20,1000:20,2000:20,4000:20,8000:20", "outside -10..120"),
    ("250:20,500:20,1100:20,2000:20,4000:20,8000:20", "1100 Hz is not an audiometric frequency"),
    ("1000:30", "missing 125 Hz"),
    ("250:20,4000:60", "missing 500 Hz"),
    ("250:20,500:20,1000:20,2000:20", "missing 8000 Hz"),
    ("250:x", "not frequency:level"),
])
def test_bad_audiograms_are_refused_naming_the_problem(text, words):
    with pytest.raises(InputError) as e:
        hearing.parse_audiogram(text)
    assert words in e.value.one_line() and "\n" not in e.value.one_line()


# ---------------------------------------------------------------------------
# ISO 7029 and ISO 389-7
# ---------------------------------------------------------------------------

def test_iso7029_median_at_a_named_value():
    # ISO 7029:2017, Table 1: man of 60, 4 kHz: 20.2 dB (20.2085 dB in a published reproduction)
    assert hearing.iso7029_median_db(60, "m", [4000])[0] == pytest.approx(20.2085, abs=0.01)


def test_iso7029_at_18_years_is_zero_and_women_lose_less_at_high_frequencies():
    assert np.all(hearing.iso7029_median_db(18, "f") == 0.0) and np.all(hearing.iso7029_median_db(18, "m") == 0.0)
    assert hearing.age_audiogram(18).band_hl_db == (0.0,) * 7
    # ISO 7029: at 4 kHz and above, the median man of 60 hears worse than the median woman
    assert np.all(hearing.iso7029_median_db(60, "m", [4000, 6000, 8000])
                  > hearing.iso7029_median_db(60, "f", [4000, 6000, 8000]))


@given(st.floats(18.0, 79.0), st.floats(0.1, 20.0), st.sampled_from(["f", "m"]))
@settings(max_examples=40, deadline=None)
def test_the_age_preset_is_monotone_in_age(age, more, sex):
    older = min(80.0, age + more)
    assert np.all(hearing.iso7029_median_db(older, sex) >= hearing.iso7029_median_db(age, sex))
    assert np.all(np.diff([hearing.age_audiogram(a, sex).band_hl_db for a in (age, older)], axis=0) >= 0)


def test_band_thresholds_in_db_spl_follow_iso389_7_at_0_db_hl():
    a = hearing.parse_audiogram(flat(0))
    np.testing.assert_allclose(hearing.band_threshold_spl_db(a), ISO389_7_OCTAVES)
    np.testing.assert_allclose(hearing.band_threshold_spl_db(hearing.parse_audiogram(flat(30))),
                               np.add(ISO389_7_OCTAVES, 30))


# ---------------------------------------------------------------------------
# the STI path
# ---------------------------------------------------------------------------

def test_0_db_hl_leaves_every_sti_unchanged():
    zero = hearing.parse_audiogram(flat(0))
    mtf = np.random.default_rng(1).uniform(0.2, 0.95, (7, 14))
    for kw in ({}, {"noise_db": [50, 45, 40, 35, 30, 25, 20]}, {"speech_level_dba": 40.0}):
        assert envpredict.sti_from_mtf(mtf, audiogram=zero, **kw).sti == pytest.approx(
            envpredict.sti_from_mtf(mtf, **kw).sti, abs=1e-9)
    ir = noise_decay(0.8, seed=3)
    assert envpredict.sti_from_ir(ir, 48000, audiogram=zero).sti.sti == pytest.approx(
        envpredict.sti_from_ir(ir, 48000).sti.sti, abs=1e-9)
    scene = {"room": {"volume_m3": 800, "rt_s": 1.2}, "noise_db": [45] * 7,
             "sources": [{"name": "LS1", "position_m": [1, 1, 3], "level_1m_dba": 80, "q": 2}],
             "listeners": [{"name": "P1", "position_m": [6, 4, 1.2]}],
             "grid": {"x_m": [0, 4], "y_m": [0, 3], "z_m": 1.2, "step_m": 1}}
    d0, d1 = envpredict.predict_design(scene), envpredict.predict_design(scene, audiogram=zero)
    np.testing.assert_allclose(d1.grid.sti, d0.grid.sti, atol=1e-9)
    assert d1.listeners[0].sti.sti == pytest.approx(d0.listeners[0].sti.sti, abs=1e-9)


@pytest.mark.parametrize("k", range(7))
def test_a_band_below_threshold_loses_its_weight_as_the_iec_formula_gives(k):
    # a 120 dB HL loss in band k only: its speech (60 dB(A) male spectrum, 35-63 dB SPL) is
    # far below RT_k + 120 dB, so m_k * I_s/(I_s + I_rt) < 10^-1.5/(1 + 10^-1.5): TI_k = 0
    # (IEC 60268-16 A.2.4, SNR limited to -15 dB); the other bands keep their MTI exactly
    hl = [0.0] * 7
    hl[k] = 120.0
    loss = hearing.audiogram_from_points(OCTAVES, hl)
    mtf = np.random.default_rng(k).uniform(0.3, 0.95, (7, 14))
    normal = envpredict.sti_from_mtf(mtf)
    impaired = envpredict.sti_from_mtf(mtf, audiogram=loss)
    assert np.all(impaired.ti[k] == 0.0) and impaired.mti[k] == 0.0
    keep = np.arange(7) != k
    np.testing.assert_allclose(impaired.mti[keep], normal.mti[keep], atol=1e-12)
    mti = normal.mti.copy()
    # the drop by the band's weight and its two redundancy terms (IEC 60268-16:2011, A.2.6)
    drop = IEC_ALPHA_MALE[k] * mti[k]
    if k > 0:
        drop -= IEC_BETA_MALE[k - 1] * math.sqrt(mti[k - 1] * mti[k])
    if k < 6:
        drop -= IEC_BETA_MALE[k] * math.sqrt(mti[k] * mti[k + 1])
    assert normal.sti - impaired.sti == pytest.approx(drop, abs=1e-9)
    mti[k] = 0.0
    assert impaired.sti == pytest.approx(iec_sti(mti), abs=1e-9)
    assert impaired.to_dict()["audiogram"]["inaudible_bands_hz"] == [float(OCTAVES[k])]


def test_a_flat_loss_silences_the_bands_whose_speech_falls_15_db_below_threshold():
    # male speech at 60 dB(A) (IEC Table A.2) against RT_k + 40 dB (IEC Table A.4): the bands
    # with speech 15 dB or more below the raised threshold transmit nothing, TI = 0
    mtf = np.full((7, 14), 0.9)
    r = envpredict.sti_from_mtf(mtf, audiogram=hearing.parse_audiogram(flat(40)))
    speech = 60.0 + np.array(IEC_MALE_SPECTRUM)
    below = speech - (np.array(IEC_RECEPTION_THRESHOLD) + 40.0)
    # (with I_s/I_rt = 10^(below/10): m = 0.9 I_s/(I_s + I_rt) <= 1/(1 + 10^1.5) when below <= -15.4 dB)
    gone = below < -15.4
    assert gone.sum() >= 2  # 125 Hz and 8 kHz
    assert np.all(r.mti[gone] == 0.0) and np.all(r.mti[~gone] > 0.0)
    assert r.sti == pytest.approx(iec_sti(r.mti), abs=1e-9)


def iec_increasing_from(mti, k) -> float:
    """The MTI of band k above which the IEC formula rises with it (the others fixed):
    dSTI/dMTI_k = alpha_k - (beta_k-1 sqrt(MTI_k-1) + beta_k sqrt(MTI_k+1)) / (2 sqrt(MTI_k)) >= 0."""
    pull = (IEC_BETA_MALE[k - 1] * math.sqrt(mti[k - 1]) if k > 0 else 0.0) + (
        IEC_BETA_MALE[k] * math.sqrt(mti[k + 1]) if k < 6 else 0.0)
    return (pull / (2 * IEC_ALPHA_MALE[k])) ** 2


@given(st.lists(st.floats(-10.0, 120.0), min_size=7, max_size=7), st.integers(0, 6), st.floats(0.5, 60.0),
       st.floats(30.0, 90.0), st.integers(0, 5))
@settings(max_examples=150, deadline=None)
def test_the_sti_never_rises_as_a_hearing_level_rises(hl, k, more, level, seed):
    """A higher hearing level never raises any band's MTI, and the STI follows the IEC
    formula from them. The IEC combination (A.2.6) itself is not monotone in one band's MTI:
    its redundancy term beta sqrt(MTI_k MTI_k+1) falls faster than alpha MTI_k when MTI_k is
    far below a neighbour's (below iec_increasing_from), so there -- and only there -- the
    STI of the published formula may rise a little (at most beta^2/(4 alpha), about 0.02)."""
    rng = np.random.default_rng(seed)
    mtf = rng.uniform(0.05, 1.0, (7, 14))
    noise = rng.uniform(0.0, 60.0, 7) if seed % 2 else None
    worse = list(hl)
    worse[k] = min(120.0, worse[k] + more)
    kw = {"speech_level_dba": level, "noise_db": noise}
    a = envpredict.sti_from_mtf(mtf, audiogram=hearing.audiogram_from_points(OCTAVES, hl), **kw)
    b = envpredict.sti_from_mtf(mtf, audiogram=hearing.audiogram_from_points(OCTAVES, worse), **kw)
    assert np.all(b.mti <= a.mti + 1e-12)
    assert np.array_equal(np.delete(b.mti, k), np.delete(a.mti, k))  # only the band whose loss rose
    assert b.sti == pytest.approx(iec_sti(b.mti), abs=1e-9)
    if b.mti[k] >= iec_increasing_from(b.mti, k):  # where the IEC formula rises with the band's MTI
        assert b.sti <= a.sti + 1e-12
    else:
        assert b.sti - a.sti <= IEC_BETA_MALE[max(k - 1, 0)] ** 2 / (4 * IEC_ALPHA_MALE[k]) + 0.02


def test_the_sti_falls_with_a_flat_loss_at_everyday_levels():
    # flat losses of 0..60 dB HL on a typical room MTF at 60 dB(A): every band's MTI and the STI fall
    mtf = envpredict.sti_from_ir(noise_decay(0.8, seed=3), 48000).sti.mtf_measured
    sti = [envpredict.sti_from_mtf(mtf, audiogram=hearing.parse_audiogram(flat(h))).sti for h in range(0, 61, 5)]
    assert np.all(np.diff(sti) < 0)


def test_an_audiogram_needs_the_auditory_corrections():
    with pytest.raises(InputError, match="auditory"):
        envpredict.sti_from_ir(noise_decay(0.8, seed=3), 48000, audiogram=flat(20), auditory=False)


# ---------------------------------------------------------------------------
# the threshold noise and the pair indices
# ---------------------------------------------------------------------------

def test_the_threshold_noise_has_the_stated_octave_band_levels():
    from scipy.signal import welch

    a = hearing.parse_audiogram("125:30,250:30,500:35,1000:40,2000:50,4000:60,8000:60")
    fs, cal = 32000, 100.0
    x = hearing.threshold_noise(a, 4 * fs, fs, cal, seed=3)
    f, p = welch(x, fs, nperseg=fs)  # scipy's estimate of the power spectral density
    for fc, want in zip(a.bands_hz, hearing.threshold_noise_band_db(a)):
        lo, hi = fc / 2 ** 0.5, min(fc * 2 ** 0.5, fs / 2)
        # flat within the octave: the mean density away from the edges (window leakage) times the width
        sel = (f >= lo * 1.05) & (f < hi / 1.05)
        got = 10 * np.log10(np.mean(p[sel]) * (hi - lo)) + cal
        assert got == pytest.approx(want, abs=0.5), fc
    assert np.array_equal(x, hearing.threshold_noise(a, 4 * fs, fs, cal, seed=3))  # deterministic


@pytest.fixture(scope="module")
def speech_pair():
    fs = 16000
    clean = 0.3 * harmonic_syllables(4.0, fs, 1)
    noise = speech_shaped_noise(clean, 2)
    degraded = at_snr(clean, noise, 5.0)
    return clean, degraded, degraded - clean, fs


def test_0_db_hl_leaves_the_pair_indices_unchanged(speech_pair):
    clean, degraded, noise, fs = speech_pair
    r0 = envpredict.pair_indices(clean, degraded, fs, noise=noise)
    r1 = envpredict.pair_indices(clean, degraded, fs, noise=noise, audiogram=flat(0), calibration_db=95.0)
    for key in ("stoi", "estoi", "ssti", "ssti_regression"):
        assert getattr(r1, key) == pytest.approx(getattr(r0, key), abs=1e-9)
    assert r1.sepsm.snr_env_db == pytest.approx(r0.sepsm.snr_env_db, abs=1e-9)


def test_a_loss_lowers_the_pair_indices_and_says_audibility_only(speech_pair):
    clean, degraded, noise, fs = speech_pair
    r0 = envpredict.pair_indices(clean, degraded, fs, noise=noise)
    r = envpredict.pair_indices(clean, degraded, fs, noise=noise, audiogram=flat(50), calibration_db=95.0)
    assert r.stoi < r0.stoi and r.estoi < r0.estoi and r.ssti < r0.ssti
    assert r.sepsm.snr_env_db < r0.sepsm.snr_env_db
    d = r.to_dict()
    assert d["audiogram"]["band_hl_db"] == [50.0] * 7 and d["calibration_db"] == 95.0
    assert any("audibility" in c and "suprathreshold" in c for c in d["cautions"])


def test_a_pair_audiogram_without_calibration_is_refused(speech_pair):
    clean, degraded, _, fs = speech_pair
    with pytest.raises(InputError, match="calibration"):
        envpredict.pair_indices(clean, degraded, fs, audiogram=flat(20))


# ---------------------------------------------------------------------------
# the command line: results, reports and one-line refusals
# ---------------------------------------------------------------------------

@pytest.fixture(scope="module")
def ir_file(tmp_path_factory):
    import soundfile as sf

    p = tmp_path_factory.mktemp("hearing") / "ir.wav"
    sf.write(p, noise_decay(0.8, seed=3), 48000, subtype="FLOAT")
    return p


def test_ir_json_carries_the_audiogram_and_the_bands_it_made_inaudible(ir_file, capsys, tmp_path):
    code, out, err = run_cli(["ir", ir_file, "--audiogram", "250:20,500:25,1000:30,2000:45,4000:60,8000:70",
                              "--json", "--report", tmp_path / "rep"], capsys)
    assert code == 0, err
    d = json.loads(out)
    assert d["audiogram"]["band_hl_db"] == [20, 20, 25, 30, 45, 60, 70]
    assert d["audiogram"]["inaudible_bands_hz"] == [125.0, 2000.0, 4000.0, 8000.0]
    assert d["inputs"]["audiogram"].startswith("250:20")
    html = (tmp_path / "rep" / "report.html").read_text()
    assert "Listener: hearing loss per octave band" in html and "inaudible" in html
    code, out, _ = run_cli(["ir", ir_file, "--age", "70", "--sex", "f", "--json"], capsys)
    assert code == 0 and json.loads(out)["audiogram"]["source"] == "ISO 7029:2017 median, age 70, female"


@pytest.mark.parametrize("args, words", [
    (["--audiogram", "250:130,500:20,1000:20,2000:20,4000:20,8000:20"], "outside -10..120"),
    (["--audiogram", "250:20,500:20,1100:20,2000:20,4000:20,8000:20"], "not an audiometric frequency"),
    (["--audiogram", "250:20,500:20,1000:20,2000:20"], "missing 8000 Hz"),
    (["--age", "12"], "age is 12"),
    (["--age", "60", "--sex", "x"], "sex"),
    (["--age", "60", "--audiogram", flat(10)], "both an audiogram and an age"),
    (["--audiogram", "  "], "--audiogram is empty"),
])
def test_bad_listener_options_exit_2_with_one_line(ir_file, capsys, args, words):
    code, out, err = run_cli(["ir", ir_file, *args], capsys)
    assert code == 2 and out == ""
    assert err.startswith("error: ") and words in err and err.count("\n") == 1


def test_pair_audiogram_without_calibration_exits_2(tmp_path, capsys, speech_pair):
    import soundfile as sf

    clean, degraded, _, fs = speech_pair
    sf.write(tmp_path / "c.wav", clean, fs, subtype="FLOAT")
    sf.write(tmp_path / "d.wav", degraded, fs, subtype="FLOAT")
    code, out, err = run_cli(["pair", tmp_path / "c.wav", tmp_path / "d.wav", "--audiogram", flat(30)], capsys)
    assert code == 2 and out == "" and "calibration" in err and err.count("\n") == 1
    code, out, err = run_cli(["pair", tmp_path / "c.wav", tmp_path / "d.wav", "--audiogram", flat(30),
                              "--calibration-db", "95", "--json"], capsys)
    assert code == 0, err
    assert json.loads(out)["audiogram"]["band_hl_db"] == [30.0] * 7


def test_batch_rows_take_an_audiogram_column(tmp_path, ir_file):
    import shutil

    shutil.copy(ir_file, tmp_path / "a.wav")
    (tmp_path / "m.csv").write_text('ir,audiogram\na.wav,\na.wav,"' + flat(0) + '"\na.wav,' + flat(40).replace(",", ";")
                                    + "\n")
    envpredict.run_batch(tmp_path / "m.csv", tmp_path / "o.csv", workers=1)
    _, rows = envpredict.read_results(tmp_path / "o.csv")
    sti = [float(r["sti"]) for r in rows]
    assert sti[1] == pytest.approx(sti[0], abs=1e-9) and sti[2] < sti[0]
