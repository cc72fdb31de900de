"""Stimuli of a listening test (envpredict.stimuli) and ``sweep --write-stimuli``.

The mixtures are rebuilt here from their definition -- speech + g * noise segment with
10 log10(speech power / (g^2 noise power)) = SNR, scaled so that the speech's long-term
level is the presentation level in dB re full scale -- and compared with the files read
back by soundfile (24-bit PCM: within half a step, 2**-24, plus rounding). The active
reference is checked by the manifest's levels against the P.56 measurement of the
written speech level (itself checked against the method's definition in
tests/test_speechlevel.py).
"""

from __future__ import annotations

import csv
import hashlib
import json

import numpy as np
import pytest
import soundfile as sf
from scipy.signal import resample_poly

from envpredict.exceptions import InputError
from envpredict.stimuli import MANIFEST_NAME, stimulus_snrs, write_stimuli
from envpredict.sweep import snr_sweep

from cli_for_tests import run_cli
from signals_for_tests import speech_like

FS = 16000
#: One step of 24-bit PCM (full scale 1): the written files are within this of the floats.
PCM24_STEP = 2.0 ** -23


@pytest.fixture(scope="module")
def signals():
    clean = speech_like(3.0, FS, seed=4)
    noise = np.random.default_rng(5).standard_normal(8 * FS) * 0.05
    return clean, noise


def _manifest(folder):
    with open(folder / MANIFEST_NAME, newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


def _digest(folder):
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir())}


def test_mixtures_are_the_speech_plus_the_noise_at_the_snr(tmp_path, signals):
    clean, noise = signals
    res = write_stimuli(tmp_path / "st", clean, noise, FS, [-6, 0, 4.96], snr_reference="long-term",
                        presentation_level_db=-30.0, seed=3)
    rows = _manifest(tmp_path / "st")
    assert [float(r["snr_db"]) for r in rows] == [-6.0, 0.0, 5.0]  # rounded to 0.1 dB
    assert [r["file"] for r in rows] == [s.file for s in res.stimuli]
    for r in rows:
        y, fs = sf.read(tmp_path / "st" / r["file"])
        assert fs == FS and y.size == clean.size
        o = int(r["noise_offset_samples"])
        assert o / FS == pytest.approx(float(r["noise_offset_s"]), abs=1e-3)
        seg = noise[o:o + clean.size]
        snr = float(r["snr_db"])
        g = np.sqrt(np.mean(clean ** 2) / (np.mean(seg ** 2) * 10 ** (snr / 10)))
        k = np.sqrt(10 ** (-30 / 10) / np.mean(clean ** 2))  # speech at -30 dB re full scale
        np.testing.assert_allclose(y, k * (clean + g * seg), atol=PCM24_STEP)
        assert float(r["speech_long_term_level_db"]) == pytest.approx(-30.0, abs=1e-3)
        assert float(r["speech_long_term_level_db"]) - float(r["noise_level_db"]) == pytest.approx(snr, abs=2e-3)
        assert float(r["mixture_level_db"]) == pytest.approx(10 * np.log10(np.mean(y ** 2)), abs=1e-3)


def test_the_active_reference_sets_the_active_level(tmp_path, signals):
    from envpredict.speechlevel import active_speech_level

    clean, noise = signals
    write_stimuli(tmp_path / "st", clean, noise, FS, [-3, 3], presentation_level_db=-26.0)
    lev = active_speech_level(clean, FS)
    for r in _manifest(tmp_path / "st"):
        assert r["snr_reference"] == "active"
        assert float(r["speech_active_level_db"]) == pytest.approx(-26.0, abs=1e-3)
        assert float(r["speech_active_level_db"]) - float(r["noise_level_db"]) == pytest.approx(
            float(r["snr_db"]), abs=2e-3)
        # active minus long-term is 10 log10(1 / activity factor)
        assert float(r["speech_active_level_db"]) - float(r["speech_long_term_level_db"]) == pytest.approx(
            -10 * np.log10(lev.activity_factor), abs=2e-3)


def test_files_are_bit_exact_from_the_seed(tmp_path, signals):
    clean, noise = signals
    for name, seed in (("a", 7), ("b", 7), ("c", 8)):
        write_stimuli(tmp_path / name, clean, noise, FS, [-6, 0], seed=seed)
    assert _digest(tmp_path / "a") == _digest(tmp_path / "b")
    assert _digest(tmp_path / "a") != _digest(tmp_path / "c")


def test_clipping_is_refused_or_every_file_scaled_by_one_factor(tmp_path, signals):
    clean, noise = signals
    with pytest.raises(InputError, match="would clip"):
        write_stimuli(tmp_path / "x", clean, noise, FS, [-12, 0], presentation_level_db=-3.0)
    assert not (tmp_path / "x").exists()  # nothing written
    write_stimuli(tmp_path / "ref", clean, noise, FS, [-12, 0], presentation_level_db=-30.0)
    res = write_stimuli(tmp_path / "fit", clean, noise, FS, [-12, 0], presentation_level_db=-3.0, scale_to_fit=True)
    assert res.common_gain_db < 0 and res.cautions and "one common factor" in res.cautions[0]
    peaks, ratios = [], []
    for s in res.stimuli:
        y, _ = sf.read(tmp_path / "fit" / s.file)
        r, _ = sf.read(tmp_path / "ref" / s.file)
        peaks.append(np.max(np.abs(resample_poly(y, 4, 1))))  # true peak: 4x oversampled (BS.1770-4 Annex 2)
        ratios.append(np.sum(y * r) / np.sum(r * r))
        assert s.true_peak_dbtp == pytest.approx(20 * np.log10(peaks[-1]), abs=2e-3)
        assert s.peak_db == pytest.approx(20 * np.log10(np.max(np.abs(y))), abs=2e-3)
    assert 20 * np.log10(max(peaks)) == pytest.approx(-1.0, abs=2e-3)  # the loudest true peak at -1 dB TP
    assert ratios[0] == pytest.approx(ratios[1], rel=1e-5)  # one factor for every file
    assert 20 * np.log10(ratios[0]) == pytest.approx(27.0 + res.common_gain_db, abs=1e-3)


def test_a_folder_that_is_not_new_or_empty_is_refused(tmp_path, signals):
    clean, noise = signals
    (tmp_path / "full").mkdir()
    (tmp_path / "full" / "keep.txt").write_text("mine")
    with pytest.raises(InputError, match="not empty"):
        write_stimuli(tmp_path / "full", clean, noise, FS, [0])
    assert [p.name for p in (tmp_path / "full").iterdir()] == ["keep.txt"]
    (tmp_path / "empty").mkdir()
    write_stimuli(tmp_path / "empty", clean, noise, FS, [0])
    assert (tmp_path / "empty" / MANIFEST_NAME).exists()


def test_the_snrs_written(signals):
    from envpredict.mapping import ScoreMapping

    clean, noise = signals
    m = ScoreMapping(index="probe", shape="logistic", a=-4.0, b=8.0)
    f = {"probe": lambda c, d, fs: float(1 / (1 + np.exp(-10 * np.log10(np.sum(c ** 2) / np.sum((d - c) ** 2)) / 8)))}
    res = snr_sweep(clean, noise, FS, snr_db=[-6, 0, 6], index="probe", mapping=m, n_segments=1, index_functions=f)
    assert stimulus_snrs(res) == [res.targets[0].snr_db]
    assert stimulus_snrs(res, [-3.0]) == [-3.0]
    plain = snr_sweep(clean, noise, FS, snr_db=[-6, 0, 6], index="probe", n_segments=1, index_functions=f)
    assert stimulus_snrs(plain) == [-6.0, 0.0, 6.0]


def test_cli_sweep_writes_the_stimuli(tmp_path, capsys, signals):
    clean, noise = signals
    cw, nw = tmp_path / "clean.wav", tmp_path / "noise.wav"
    sf.write(cw, clean, FS, subtype="FLOAT")
    sf.write(nw, noise, FS, subtype="FLOAT")
    args = ["sweep", str(cw), str(nw), "--snr=-6:6:6", "--segments", "1", "--index", "estoi"]
    code, out, err = run_cli(args + ["--write-stimuli", str(tmp_path / "st"), "--stimuli-snr=-2",
                                     "--stimuli-snr", "2", "--json"], capsys)
    assert code == 0, err
    d = json.loads(out)
    assert [s["snr_db"] for s in d["stimuli"]["stimuli"]] == [-2.0, 2.0]
    assert sorted(p.name for p in (tmp_path / "st").iterdir()) == sorted(
        [MANIFEST_NAME] + [s["file"] for s in d["stimuli"]["stimuli"]])
    # an existing folder with files is refused before the sweep runs
    code, out, err = run_cli(args + ["--write-stimuli", str(tmp_path / "st")], capsys)
    assert code == 2 and "not empty" in err and out == ""
    code, out, err = run_cli(args + ["--write-stimuli", str(tmp_path / "loud"), "--presentation-level=-1"], capsys)
    assert code == 2 and "would clip" in err and not (tmp_path / "loud").exists()


def test_several_sentences_each_at_the_presentation_level(tmp_path, signals):
    from envpredict.stimuli import write_stimuli_files

    _clean, noise = signals
    folder = tmp_path / "sentences"
    folder.mkdir()
    sents = [speech_like(2.0 + 0.4 * i, FS, seed=30 + i) * (0.3 + 0.3 * i) for i in range(3)]
    for i, x in enumerate(sents):
        sf.write(folder / f"list1_{i}.wav", x, FS, subtype="DOUBLE")
    nw = tmp_path / "noise.wav"
    sf.write(nw, noise, FS, subtype="DOUBLE")
    res = write_stimuli_files(tmp_path / "st", folder, nw, [-3, 3], snr_reference="long-term",
                              presentation_level_db=-30.0, seed=2)
    rows = _manifest(tmp_path / "st")
    assert len(rows) == 6 and len(res.stimuli) == 6
    assert {r["sentence"] for r in rows} == {"list1_0", "list1_1", "list1_2"}
    for r in rows:
        x = sents[int(r["sentence"][-1])]
        y, _ = sf.read(tmp_path / "st" / r["file"])
        o = int(r["noise_offset_samples"])
        seg = noise[o:o + x.size]
        g = np.sqrt(np.mean(x ** 2) / (np.mean(seg ** 2) * 10 ** (float(r["snr_db"]) / 10)))
        k = np.sqrt(10 ** (-30 / 10) / np.mean(x ** 2))  # each sentence at -30 dB re full scale
        np.testing.assert_allclose(y, k * (x + g * seg), atol=PCM24_STEP)
    # bit-exact again from the same seed
    write_stimuli_files(tmp_path / "again", folder, nw, [-3, 3], snr_reference="long-term",
                        presentation_level_db=-30.0, seed=2)
    assert _digest(tmp_path / "st") == _digest(tmp_path / "again")


def _soft_clip(m, fs):
    """A level-dependent (nonlinear) chain: the gain it is given matters."""
    return np.tanh(4.0 * m) / 4.0


@pytest.mark.parametrize("level", ["speech", "mixture"])
def test_processed_mixtures_are_the_chain_of_the_swept_mixture(tmp_path, signals, level):
    """Each processed file is the chain's output for the mixture the sweep gives the chain
    (speech at its own level; for 'mixture', rescaled to the speech's long-term level),
    times the gain that brought that mixture to the presentation level; flagged in the
    manifest; bit-exact again from the seed."""
    clean, noise = signals
    kw = dict(snr_reference="long-term", level=level, presentation_level_db=-30.0, seed=5, process=_soft_clip)
    res = write_stimuli(tmp_path / "st", clean, noise, FS, [-3, 3], **kw)
    rows = _manifest(tmp_path / "st")
    assert [r["processed"] for r in rows] == ["False", "True", "False", "True"]
    assert [r["file"] for r in rows][:2] == ["stimulus_snr-3.0dB.wav", "stimulus_snr-3.0dB_processed.wav"]
    assert res.process and res.to_dict()["process"] == res.process
    p_speech = np.mean(clean ** 2)
    for r in rows:
        y, _ = sf.read(tmp_path / "st" / r["file"])
        o = int(r["noise_offset_samples"])
        seg = noise[o:o + clean.size]
        g = np.sqrt(p_speech / (np.mean(seg ** 2) * 10 ** (float(r["snr_db"]) / 10)))
        mix = clean + g * seg
        p_mix = np.mean(mix ** 2)
        if level == "speech":
            fed, gain = mix, np.sqrt(10 ** (-3.0) / p_speech)
        else:
            fed, gain = mix * np.sqrt(p_speech / p_mix), np.sqrt(10 ** (-3.0) / p_speech)
        want = gain * np.tanh(4.0 * fed) / 4.0 if r["processed"] == "True" else np.sqrt(
            10 ** (-3.0) / (p_speech if level == "speech" else p_mix)) * mix
        np.testing.assert_allclose(y, want, atol=PCM24_STEP)
        assert float(r["true_peak_dbtp"]) >= float(r["peak_db"]) - 1e-9
    write_stimuli(tmp_path / "again", clean, noise, FS, [-3, 3], **kw)
    assert _digest(tmp_path / "st") == _digest(tmp_path / "again")


def test_an_inter_sample_peak_above_full_scale_is_refused(tmp_path, signals):
    """A sine at fs/4, phase pi/4, of amplitude 1.2: its samples peak at 1.2 / sqrt 2
    (-1.4 dB re full scale, which the sample peak passes) but the waveform reaches 1.2
    (+1.6 dB TP): refused, or scaled to -1 dB TP with --scale-to-fit."""
    _clean, noise = signals
    n = np.arange(2 * FS)
    fade = np.minimum(1.0, np.minimum(n, n[::-1]) / 800.0)
    tone = np.sin(np.pi / 2 * n + np.pi / 4) * fade
    level = 20 * np.log10(1.2) - 10 * np.log10(2)  # long-term level of a sine of amplitude 1.2
    kw = dict(snr_reference="long-term", presentation_level_db=level + 10 * np.log10(np.mean(fade ** 2)))
    with pytest.raises(InputError, match=r"would clip \(true peak \+1\.[5-7] dB TP"):
        write_stimuli(tmp_path / "x", tone, noise, FS, [80], **kw)
    assert not (tmp_path / "x").exists()
    res = write_stimuli(tmp_path / "fit", tone, noise, FS, [80], scale_to_fit=True, **kw)
    s = res.stimuli[0]
    assert s.peak_db == pytest.approx(-1.0 - 3.01, abs=0.05) and s.true_peak_dbtp == pytest.approx(-1.0, abs=1e-3)


def test_cli_sweep_writes_the_processed_stimuli(tmp_path, capsys, signals):
    clean, noise = signals
    cw, nw = tmp_path / "clean.wav", tmp_path / "noise.wav"
    sf.write(cw, clean, FS, subtype="FLOAT")
    sf.write(nw, noise, FS, subtype="FLOAT")
    (tmp_path / "chain.py").write_text("import numpy as np\n\ndef soft(m, fs):\n    return np.tanh(4 * m) / 4\n")
    spec = f"{tmp_path / 'chain.py'}:soft"
    args = ["sweep", str(cw), str(nw), "--snr=-6:6:6", "--segments", "1", "--index", "estoi", "--process", spec,
            "--stimuli-snr=-2", "--presentation-level=-30"]
    code, out, err = run_cli(args + ["--write-stimuli", str(tmp_path / "st")], capsys)
    assert code == 0, err
    assert "stimulus_snr-2.0dB_processed.wav" in out and "true peak, dBTP" in out
    rows = _manifest(tmp_path / "st")
    assert [(r["file"], r["processed"]) for r in rows] == [("stimulus_snr-2.0dB.wav", "False"),
                                                           ("stimulus_snr-2.0dB_processed.wav", "True")]
    code, out, err = run_cli(args + ["--write-stimuli", str(tmp_path / "st2")], capsys)
    assert code == 0 and _digest(tmp_path / "st") == _digest(tmp_path / "st2")
