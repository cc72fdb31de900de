"""Measured site levels in the IR job: seven octave-band speech levels (``--speech-levels``)
and a calibrated noise recording (``--noise-recording``), checked against the direct
method on the same simulated channel and against the band power of white noise."""

from __future__ import annotations

import json

import numpy as np
import pytest
import soundfile as sf
from cli_for_tests import run_cli
from signals_for_tests import noise_decay

CAL_DB = 100.0  # dB SPL of a full-scale RMS signal, used for every recording here
FS = 48000


def test_white_noise_band_levels_match_its_power_in_each_nominal_octave():
    # analytic: white noise of variance s2 sampled at fs has power s2 * B / (fs / 2) in a
    # band of width B; the octave's nominal width is fc (2**0.5 - 2**-0.5) (IEC 61260-1
    # base-2 edges). A class 1 band meter reads within a few tenths of a dB of it.
    from envpredict.audio import octave_band_levels

    sigma = 0.01
    x = np.random.default_rng(5).standard_normal(20 * FS) * sigma
    fc = np.array([125, 250, 500, 1000, 2000, 4000, 8000.0])
    want = 10 * np.log10(sigma**2 * fc * (2**0.5 - 2**-0.5) / (FS / 2)) + CAL_DB
    got = octave_band_levels(x, FS, calibration_db=CAL_DB)
    np.testing.assert_allclose(got, want, atol=0.3)


@pytest.fixture(scope="module")
def site(tmp_path_factory):
    """A hall (exponential decay, T = 0.5 s), the STIPA signal played through it at a
    calibrated level, and steady speech-shaped site noise at about 6 dB SNR."""
    from scipy.signal import fftconvolve, lfilter

    from envpredict.audio import octave_band_levels
    from envpredict.signals import stipa_signal

    d = tmp_path_factory.mktemp("site")
    ir = np.concatenate([np.zeros(FS // 100), noise_decay(0.5, FS, seconds=1.2, seed=4)])
    sf.write(d / "ir.wav", ir, FS, subtype="FLOAT")
    seconds = 25.0
    test = stipa_signal(seconds, FS, seed=1)
    at_listener = fftconvolve(test, ir)[: test.size]
    at_listener *= 10 ** (-20 / 20) / np.sqrt(np.mean(at_listener**2))  # -20 dBFS: 80 dB SPL
    rng = np.random.default_rng(9)

    def site_noise(n):  # pink-ish steady noise (one-pole low-pass of white noise), -26 dBFS
        v = lfilter([1.0], [1.0, -0.95], rng.standard_normal(n))
        return v * 10 ** (-26 / 20) / np.sqrt(np.mean(v**2))

    sf.write(d / "recording.wav", at_listener + site_noise(at_listener.size), FS, subtype="FLOAT")
    sf.write(d / "noise.wav", site_noise(20 * FS), FS, subtype="FLOAT")
    # what a band level meter reads with the test signal playing and the site quiet
    speech = octave_band_levels(at_listener, FS, calibration_db=CAL_DB)
    return d, ",".join(f"{v:.1f}" for v in speech)


def test_direct_and_indirect_agree_once_the_same_levels_are_used(site, capsys):
    # IEC 60268-16: the direct method (STIPA recording) and the indirect method (impulse
    # response plus the site's speech and noise levels) measure the same channel; with
    # the measured levels on both sides they agree within 0.02 (the criterion)
    d, speech = site
    code, out, err = run_cli(["stipa", d / "recording.wav", "--calibration-db", CAL_DB, "--json"], capsys)
    assert code == 0, err
    direct = json.loads(out)["sti"]
    code, out, err = run_cli(["ir", d / "ir.wav", "--speech-levels", speech, "--noise-recording", d / "noise.wav",
                              "--calibration-db", CAL_DB, "--json"], capsys)
    assert code == 0, err
    res = json.loads(out)
    assert abs(res["sti"] - direct) <= 0.02, (res["sti"], direct)
    # the levels used are reported, with where they came from
    np.testing.assert_allclose(res["speech_db"], [float(v) for v in speech.split(",")], atol=0.05)
    assert any("noise.wav" in n for n in res["notes"])
    assert res["inputs"]["noise_recording"].endswith("noise.wav")
    # and without them (the standard spectrum at the default level, no noise) the two differ
    code, out, _ = run_cli(["ir", d / "ir.wav", "--json"], capsys)
    assert abs(json.loads(out)["sti"] - direct) > 0.05


@pytest.mark.parametrize(
    "extra, message",
    [
        (["--noise-recording", "{noise}"], "the noise recording has no calibration"),
        (["--speech-level", "60", "--speech-levels", "60,60,60,60,60,60,60"],
         "both a speech level in dB(A) and octave-band speech levels"),
        (["--calibration-db", "100"], "without a noise recording"),
        (["--noise", "40,40,40,40,40,40,40", "--noise-recording", "{noise}", "--calibration-db", "100"],
         "both noise levels and a noise recording"),
        (["--speech-levels", "60,60,60"], "3 speech level(s) given; 7 are needed"),
        (["--speech-levels", "60,60,60,60,60,60,1e9"], "a speech level is outside the plausible range"),
        (["--noise-recording", "{ir}", "--calibration-db", "100"], "its band levels need at least 5 s"),
    ],
)
def test_bad_level_options_are_refused_in_one_line(site, capsys, extra, message):
    d, _ = site
    before = {p.name: p.stat().st_mtime_ns for p in d.iterdir()}
    args = [a.format(noise=d / "noise.wav", ir=d / "ir.wav") for a in extra]
    code, out, err = run_cli(["ir", d / "ir.wav", *args], capsys)
    assert code == 2 and out == ""
    assert err.startswith("error: ") and message in err and err.count("\n") == 1, err
    assert {p.name: p.stat().st_mtime_ns for p in d.iterdir()} == before


def test_batch_rows_with_site_levels_and_stipa_recordings_equal_the_single_commands(site, capsys, tmp_path):
    # the same files through a manifest (IR row with measured levels and a noise recording,
    # STIPA row with its calibration, and a row whose noise recording lacks a calibration)
    # give the numbers of the single-file commands; the bad row is a row error, the rest go on
    d, speech = site
    manifest = tmp_path / "site.csv"
    manifest.write_text(
        "zone,ir,stipa,speech_levels,noise_recording,calibration_db\n"
        f'hall,{d / "ir.wav"},,"{speech}",{d / "noise.wav"},{CAL_DB}\n'
        f"hall,,{d / 'recording.wav'},,,{CAL_DB}\n"
        f'hall,{d / "ir.wav"},,"{speech}",{d / "noise.wav"},\n',
        encoding="utf-8",
    )
    out = tmp_path / "rows.csv"
    code, _, err = run_cli(["batch", manifest, "--out", out, "--workers", "1"], capsys)
    assert code == 1, err  # one row failed
    from envpredict.tables import read_results

    _, rows = read_results(out)
    code, o1, _ = run_cli(["ir", d / "ir.wav", "--speech-levels", speech, "--noise-recording", d / "noise.wav",
                           "--calibration-db", CAL_DB, "--json"], capsys)
    code, o2, _ = run_cli(["stipa", d / "recording.wav", "--calibration-db", CAL_DB, "--json"], capsys)
    assert float(rows[0]["sti"]) == pytest.approx(json.loads(o1)["sti"], abs=5e-5)
    assert float(rows[1]["sti"]) == pytest.approx(json.loads(o2)["sti"], abs=5e-5)
    assert rows[1]["t30_mid"] == ""  # a STIPA row has no decay figures
    assert "no calibration" in rows[2]["error"] and rows[2]["sti"] == ""
