"""Two ears (issue 17, item 4): each ear by the one-channel job, the better ear per octave
band (van Wijngaarden & Drullman 2008, JASA 123(6):4514-4523; the rule cited from memory).

Checks and their outside reasons:

* the rule is max(MTI_left, MTI_right) per band, combined by the IEC 60268-16:2011 A.2.6
  formula (weights of the standard's Table A.1, written out here), computed in the test;
* two identical ears give the one-ear result (max(a, a) = a, analytic), to 1e-12;
* swapping the ears changes nothing in the better-ear result (max is symmetric);
* an ear of pure noise leaves the other ear's result: a noise channel carries no
  modulation of the speech (m = 0, so SNR_eff is limited to -15 dB and TI = 0, IEC A.2.4-5),
  and max(MTI, 0) = MTI;
* each ear's STOI agrees with the reference library pystoi on that channel;
* channels of different lengths, and a file without two channels, are refused.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

import envpredict
from cli_for_tests import run_cli
from envpredict.binaural import (
    better_ear_bands,
    better_ear_sti,
    ir_ears,
    ir_ears_file,
    pair_ears,
    pair_ears_file,
    stipa_ears,
)
from envpredict.exceptions import InputError
from envpredict.indirect import sti_from_ir, sti_from_ir_file
from envpredict.sti import sti_from_mtf
from signals_for_tests import harmonic_syllables, noise_decay, pystoi_tolerance, pystoi_value

FS = 48000

#: IEC 60268-16:2011 Table A.1, male weights alpha_k and redundancy factors beta_k
#: (125 Hz ... 8 kHz), written out here so the rule is checked against the standard's
#: numbers, not the package's copy.
ALPHA_MALE = (0.085, 0.127, 0.230, 0.233, 0.309, 0.224, 0.173)
BETA_MALE = (0.085, 0.078, 0.065, 0.011, 0.047, 0.095)


def _iec_sti(mti):
    mti = np.clip(np.asarray(mti, dtype=float), 0, 1)
    return float(np.clip(np.dot(ALPHA_MALE, mti) - np.dot(BETA_MALE, np.sqrt(mti[:-1] * mti[1:])), 0, 1))


@pytest.fixture(scope="module")
def irs():
    return (noise_decay(0.5, fs=FS, seconds=1.5, seed=1), noise_decay(1.4, fs=FS, seconds=1.5, seed=2))


@pytest.fixture(scope="module")
def speech():
    fs = 16000
    clean = harmonic_syllables(4.0, fs, 1)
    rng = np.random.default_rng(5)
    near = clean + 0.02 * rng.standard_normal(clean.size)
    far = clean + 0.08 * rng.standard_normal(clean.size)
    return clean, near, far, fs


# ---------------------------------------------------------------------------
# the rule
# ---------------------------------------------------------------------------

def test_the_better_ear_is_the_larger_index_of_each_band_tie_to_the_left():
    v, ear = better_ear_bands([0.2, 0.9, 0.5, np.nan], [0.3, 0.1, 0.5, 0.4])
    assert v.tolist() == [0.3, 0.9, 0.5, 0.4] and ear.tolist() == [1, 0, 0, 1]
    with pytest.raises(InputError):
        better_ear_bands([0.1, 0.2], [0.1])


def test_better_ear_sti_is_the_iec_formula_of_the_per_band_maxima():
    # two MTFs of constant m per band: MTI_k follows from m by IEC A.2.4-5, computed here
    ml = np.array([0.9, 0.8, 0.3, 0.2, 0.7, 0.4, 0.5])
    mr = np.array([0.2, 0.5, 0.6, 0.9, 0.3, 0.8, 0.1])
    left = sti_from_mtf(np.repeat(ml[:, None], 14, axis=1), auditory=False)
    right = sti_from_mtf(np.repeat(mr[:, None], 14, axis=1), auditory=False)

    def mti(m):
        return (np.clip(10 * np.log10(m / (1 - m)), -15, 15) + 15) / 30

    expected = _iec_sti(np.maximum(mti(ml), mti(mr)))
    both = better_ear_sti(left, right)
    assert both.sti == pytest.approx(expected, abs=1e-12)
    assert both.sti > max(left.sti, right.sti)  # here each ear is better in some bands
    # the MTF rows used are those of the better ear
    assert np.allclose(both.mtf[:, 0], np.where(mti(mr) > mti(ml), mr, ml))


def test_an_ear_without_modulation_leaves_the_other_ear():
    # pure noise at one ear: m = 0 in every band, TI = 0 (IEC A.2.4-5), max(MTI, 0) = MTI
    left = sti_from_mtf(np.full((7, 14), 0.6))
    noise = sti_from_mtf(np.zeros((7, 14)))
    assert np.all(noise.mti == 0)
    both = better_ear_sti(left, noise)
    assert both.sti == left.sti and np.array_equal(both.mti, left.mti)
    assert better_ear_sti(noise, left).sti == left.sti


def test_ears_of_another_talker_are_refused():
    with pytest.raises(InputError):
        better_ear_sti(sti_from_mtf(np.full((7, 14), 0.6)), sti_from_mtf(np.full((7, 14), 0.6), talker="female"))


# ---------------------------------------------------------------------------
# impulse responses
# ---------------------------------------------------------------------------

def test_two_identical_ears_give_the_one_ear_result(irs):
    a, _ = irs
    one = sti_from_ir(a, FS, noise_db=[45, 42, 40, 38, 35, 30, 28])
    two = ir_ears(a, a.copy(), FS, noise_db=[45, 42, 40, 38, 35, 30, 28])
    assert abs(two.better.sti - one.sti.sti) <= 1e-12
    assert np.allclose(two.better.mti, one.sti.mti, rtol=0, atol=1e-12)
    assert np.allclose(two.better.mtf, one.sti.mtf, rtol=0, atol=1e-12)
    d = two.to_dict()
    assert d["binaural"]["mti_difference"] == [0.0] * 7


def test_swapping_the_ears_changes_nothing_but_their_names(irs):
    a, b = irs
    lr, rl = ir_ears(a, b, FS), ir_ears(b, a, FS)
    assert lr.better.sti == rl.better.sti
    assert np.array_equal(lr.better.mti, rl.better.mti)
    assert np.allclose(lr.mti_left - lr.mti_right, rl.mti_right - rl.mti_left)
    differ = lr.mti_left != lr.mti_right
    swapped = [{"left": "right", "right": "left"}[e] for e in lr.better_ear]
    assert [e for e, k in zip(swapped, differ) if k] == [e for e, k in zip(rl.better_ear, differ) if k]


def test_a_noise_channel_leaves_the_other_ears_result(irs):
    a, _ = irs
    noise = 0.05 * np.random.default_rng(9).standard_normal(a.size)
    one = sti_from_ir(a, FS)
    two = ir_ears(a, noise, FS)
    assert two.better.sti == one.sti.sti
    d = two.to_dict()
    assert d["ears"]["right"] is None and d["binaural"]["errors"]["right"]
    assert any("right ear gave no result" in c for c in d["cautions"])


def test_both_ears_refused_is_refused(irs):
    noise = 0.05 * np.random.default_rng(9).standard_normal(FS)
    with pytest.raises(InputError):
        ir_ears(noise, noise, FS)


def test_channels_of_different_lengths_are_refused(irs):
    a, b = irs
    with pytest.raises(InputError) as e:
        ir_ears(a, b[:-10], FS)
    assert "differ in length" in e.value.what and e.value.fix and "\n" not in e.value.one_line()
    with pytest.raises(InputError):
        pair_ears(np.zeros(100), np.zeros(100), np.zeros(90), 16000)


def test_a_file_ear_is_the_one_channel_analysis_of_its_channel(irs, write_wav):
    a, b = irs
    p = write_wav("lr.wav", np.stack([a, b], axis=1), FS, "FLOAT")
    two = ir_ears_file(p, noise_db=[40] * 7)
    for ch, ear in enumerate(("left", "right")):
        assert two.ears[ear].sti.sti == sti_from_ir_file(p, channel=ch, noise_db=[40] * 7).sti.sti
    assert two.better.sti == pytest.approx(_iec_sti(np.maximum(two.mti_left, two.mti_right)), abs=1e-12)
    with pytest.raises(InputError):
        ir_ears_file(p, channel=0)
    with pytest.raises(InputError):
        ir_ears_file(write_wav("mono.wav", a, FS, "FLOAT"))


# ---------------------------------------------------------------------------
# STIPA and pairs
# ---------------------------------------------------------------------------

def test_stipa_two_identical_ears_give_the_one_ear_result():
    x = envpredict.stipa_signal(15.0, 24000, seed=3)
    x = 0.3 * x / np.max(np.abs(x))
    one = envpredict.stipa_from_recording(x, 24000)
    two = stipa_ears(x, x.copy(), 24000)
    assert abs(two.better.sti - one.sti.sti) <= 1e-12
    assert np.allclose(two.better.mti, one.sti.mti, rtol=0, atol=1e-12)


def test_pair_two_identical_ears_give_the_one_ear_result(speech):
    clean, near, _, fs = speech
    one = envpredict.pair_indices(clean, near, fs)
    two = pair_ears(clean, near, near.copy(), fs)
    assert abs(two.stoi - one.stoi) <= 1e-12 and abs(two.estoi - one.estoi) <= 1e-12
    assert abs(two.ssti - one.ssti) <= 1e-12


def test_pair_ears_follow_pystoi_and_swap(speech):
    clean, near, far, fs = speech
    lr = pair_ears(clean, near, far, fs, align=False)
    rl = pair_ears(clean, far, near, fs, align=False)
    tol = pystoi_tolerance(fs)
    # each ear's STOI from the reference library; the better ear's STOI is the larger
    ref = [pystoi_value(clean, y, fs) for y in (near, far)]
    assert lr.left.stoi == pytest.approx(ref[0], abs=tol) and lr.right.stoi == pytest.approx(ref[1], abs=tol)
    assert lr.stoi == max(lr.left.stoi, lr.right.stoi)
    for k in ("stoi", "estoi", "ssti", "ssti_regression"):
        assert getattr(lr, k) == getattr(rl, k), k


def test_pair_noise_ear_leaves_the_other_ear(speech):
    clean, near, _, fs = speech
    noise = 0.05 * np.random.default_rng(11).standard_normal(near.size)
    one = envpredict.pair_indices(clean, near, fs)
    two = pair_ears(clean, near, noise, fs)
    assert (two.stoi, two.estoi) == (one.stoi, one.estoi)
    assert two.ssti == pytest.approx(one.ssti, abs=1e-12)


# ---------------------------------------------------------------------------
# the commands
# ---------------------------------------------------------------------------

def _json(args, capsys):
    code, out, err = run_cli(list(args) + ["--json"], capsys)
    assert code == 0, err
    return json.loads(out)


def test_ir_ears_cli(irs, write_wav, capsys, tmp_path):
    a, b = irs
    p = write_wav("lr.wav", np.stack([a, b], axis=1), FS, "FLOAT")
    d = _json(["ir", p, "--ears", "--report", tmp_path / "rep"], capsys)
    left = sti_from_ir_file(p, channel=0).sti
    right = sti_from_ir_file(p, channel=1).sti
    assert d["binaural"]["mti_difference"] == pytest.approx(np.round(left.mti - right.mti, 4), abs=1.1e-4)
    assert d["sti"] == pytest.approx(_iec_sti(np.maximum(left.mti, right.mti)), abs=1e-4)
    assert d["ears"]["left"]["sti"] == left.to_dict()["sti"] and d["inputs"]["ears"] is True
    assert (tmp_path / "rep" / "interaural_difference.png").is_file()
    # the report is rebuilt from result.json alone
    from envpredict.report import write_report

    write_report("ir", json.loads((tmp_path / "rep" / "result.json").read_text()), tmp_path / "again")
    # text output names both ears and the difference
    code, out, _ = run_cli(["ir", p, "--ears"], capsys)
    assert code == 0 and "better ear" in out and "left minus right" in out
    # without --ears a two-channel file is what it was: refused without --channel, channel 0 with it
    assert run_cli(["ir", p], capsys)[0] == 2
    assert _json(["ir", p, "--channel", "0"], capsys)["sti"] == d["ears"]["left"]["sti"]


@pytest.mark.parametrize("command", ["ir", "stipa"])
def test_ears_refuse_a_mono_file_and_a_channel(command, irs, write_wav, capsys):
    a, b = irs
    mono = write_wav("mono.wav", a, FS, "FLOAT")
    code, out, err = run_cli([command, mono, "--ears"], capsys)
    assert code == 2 and out == "" and err.startswith("error: ") and " — " in err and "two-channel" in err
    stereo = write_wav("lr.wav", np.stack([a, b], axis=1), FS, "FLOAT")
    code, _, err = run_cli([command, stereo, "--ears", "--channel", "1"], capsys)
    assert code == 2 and "--channel" in err and len(err.strip().splitlines()) == 1


def test_stipa_ears_cli(write_wav, capsys):
    x = envpredict.stipa_signal(15.0, 24000, seed=2)
    x = (0.3 * x / np.max(np.abs(x))).astype(np.float32)
    noisy = (x + 0.1 * np.random.default_rng(1).standard_normal(x.size)).astype(np.float32)
    p = write_wav("st.wav", np.stack([noisy, x], axis=1), 24000, "FLOAT")
    d = _json(["stipa", p, "--ears"], capsys)
    # each ear is the one-channel analysis of its samples
    assert d["ears"]["right"]["sti"] == envpredict.stipa_from_recording(x, 24000).to_dict()["sti"]
    assert d["ears"]["left"]["sti"] == envpredict.stipa_from_recording(noisy, 24000).to_dict()["sti"]
    b = d["binaural"]
    assert d["sti"] == pytest.approx(_iec_sti(np.maximum(b["mti_left"], b["mti_right"])), abs=1e-3)
    assert b["better_ear"].count("right") >= 5  # the clean ear wins most bands


def test_pair_ears_cli(speech, write_wav, capsys, tmp_path):
    clean, near, far, fs = speech
    pc = write_wav("c.wav", clean, fs, "FLOAT")
    pd = write_wav("d.wav", np.stack([far, near], axis=1), fs, "FLOAT")
    d = _json(["pair", pc, pd, "--ears", "--report", tmp_path / "rep"], capsys)
    ref = [pystoi_value(clean, y, fs) for y in (far, near)]
    tol = pystoi_tolerance(fs)
    assert d["binaural"]["stoi_left"] == pytest.approx(ref[0], abs=tol)
    assert d["stoi"] == pytest.approx(max(ref), abs=tol)
    assert (tmp_path / "rep" / "interaural_difference.png").is_file()
    code, _, err = run_cli(["pair", pc, pc, "--ears"], capsys)
    assert code == 2 and "two-channel" in err
    code, _, err = run_cli(["pair", pc, pd, "--ears", "--degraded-channel", "0"], capsys)
    assert code == 2 and "--degraded-channel" in err


def test_batch_ears(irs, speech, write_wav, tmp_path, capsys):
    import csv

    a, b = irs
    clean, near, far, fs = speech
    write_wav("lr.wav", np.stack([a, b], axis=1), FS, "FLOAT")
    write_wav("mono.wav", a, FS, "FLOAT")
    write_wav("c.wav", clean, fs, "FLOAT")
    write_wav("d.wav", np.stack([near, far], axis=1), fs, "FLOAT")
    (tmp_path / "m.csv").write_text("ir\nlr.wav\nmono.wav\n")
    code, _, _ = run_cli(["batch", tmp_path / "m.csv", "--out", tmp_path / "o.csv", "--ears", "--workers", "1"],
                         capsys)
    rows = list(csv.DictReader((tmp_path / "o.csv").open()))
    assert code == 1 and "t30_mid" not in rows[0]
    e = ir_ears_file(tmp_path / "lr.wav")
    # the results CSV keeps 6 decimals of an index, cut (issue 18): within 1e-6 of the API's value
    assert float(rows[0]["sti"]) == pytest.approx(e.better.sti, abs=1e-6)
    assert float(rows[0]["sti_right"]) == pytest.approx(e.right.sti.sti, abs=1e-6)
    assert "two-channel" in rows[1]["error"]
    (tmp_path / "p.csv").write_text("clean,degraded\nc.wav,d.wav\n")
    code, _, _ = run_cli(["batch", tmp_path / "p.csv", "--out", tmp_path / "po.csv", "--ears", "--workers", "1",
                          "--delay-per-row"], capsys)
    row = next(csv.DictReader((tmp_path / "po.csv").open()))
    pe = pair_ears_file(tmp_path / "c.wav", tmp_path / "d.wav")
    assert code == 0 and float(row["stoi"]) == pytest.approx(pe.stoi, abs=1e-6)
    assert float(row["stoi_right"]) == pytest.approx(pe.right.stoi, abs=1e-6)
    assert len(row["stoi_right"].split(".")[1]) <= 6
    assert float(row["stoi"]) == max(float(row["stoi_left"]), float(row["stoi_right"]))
    # a channel column contradicts --ears
    (tmp_path / "c.csv").write_text("ir,channel\nlr.wav,0\n")
    code, _, err = run_cli(["batch", tmp_path / "c.csv", "--out", tmp_path / "co.csv", "--ears"], capsys)
    assert code == 2 and "channel" in err


def test_a_mono_calibrator_calibrates_both_ears(write_wav):
    from envpredict.binaural import stipa_ears_file

    x = envpredict.stipa_signal(15.0, 24000, seed=4)
    x = (0.3 * x / np.max(np.abs(x))).astype(np.float32)
    p = write_wav("st.wav", np.stack([x, 0.5 * x], axis=1), 24000, "FLOAT")
    cal = write_wav("cal.wav", 0.5 * np.sin(2 * np.pi * 1000 * np.arange(96000) / 48000), 48000)
    e = stipa_ears_file(p, calibrator=cal, calibrator_level=94.0)
    assert e.errors == ("", "") and e.left.calibrated and e.right.calibrated
    # the same calibration for both: the right ear's levels are 20 log10(0.5) = -6.02 dB lower
    assert np.allclose(e.left.band_levels_db - e.right.band_levels_db, 20 * np.log10(2), atol=0.01)


def test_one_listener_for_both_ears(irs, write_wav, capsys):
    # a 0 dB HL audiogram leaves the two-ear result unchanged (issue 17: to 1e-9); a loss
    # reaches each ear as it reaches the one-ear analysis of that channel
    a, b = irs
    p = write_wav("lr.wav", np.stack([a, b], axis=1), FS, "FLOAT")
    flat0 = envpredict.parse_audiogram("250:0,500:0,1000:0,2000:0,4000:0,8000:0")
    loss = envpredict.parse_audiogram("250:20,500:25,1000:30,2000:45,4000:60,8000:70")
    assert abs(ir_ears_file(p, audiogram=flat0).better.sti - ir_ears_file(p).better.sti) <= 1e-9
    e = ir_ears_file(p, audiogram=loss)
    for ch, ear in enumerate(("left", "right")):
        assert e.ears[ear].sti.sti == sti_from_ir_file(p, channel=ch, audiogram=loss).sti.sti
    assert e.better.sti < ir_ears_file(p).better.sti
    code, out, _ = run_cli(["ir", p, "--ears", "--audiogram", "250:20,500:25,1000:30,2000:45,4000:60,8000:70"],
                           capsys)
    assert code == 0 and "Listener:" in out
