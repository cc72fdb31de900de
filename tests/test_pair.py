"""Tests of envpredict.pair: alignment, resampling, trimming, the three pair indices,
chunked processing, the speech-based STI (NCM) and the ``pair`` command.

References: pystoi for STOI/ESTOI (called, never read); the normalised-covariance
formulas of Goldsworthy & Greenberg (2004) computed here independently with numpy and
scipy. Signals are invented (see tests/test_correlation.py).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import soundfile as sf
from scipy.signal import butter, resample_poly, sosfilt
from cli_for_tests import run_cli
from signals_for_tests import PYSTOI_TOL_RESAMPLED as TOL, at_snr, fluctuating_noise, pystoi_value as ref, speech_like, speech_shaped_noise  # noqa: E501

from envpredict.exceptions import ComputationError, InputError
from envpredict.pair import (
    MIN_MATCH_CORRELATION,
    SSTI_ENVELOPE_LOWPASS_HZ,
    SSTI_ENVELOPE_ORDER,
    SSTI_ENVELOPE_RATE_HZ,
    pair_from_files,
    pair_indices,
    speech_sti,
)

pytest.importorskip("pystoi")


def delayed(y: np.ndarray, lag: int) -> np.ndarray:
    """``y`` late by ``lag`` samples (lead-in of zeros), or early (start cut off)."""
    return np.concatenate([np.zeros(lag), y]) if lag >= 0 else y[-lag:]


@pytest.mark.parametrize("delay_s", [0.35, -0.2, 0.95])
def test_delayed_copy_after_alignment_against_pystoi(delay_s):
    # reference: pystoi on the pair aligned and trimmed by hand; delay within one sample
    fs = 16000
    x = speech_like(4.0, fs, 31)
    y = at_snr(x, speech_shaped_noise(x, 32), 0)
    lag = round(delay_s * fs)
    r = pair_indices(x, delayed(y, lag), fs)
    assert r.delay_samples == lag
    assert r.delay_ms == pytest.approx(delay_s * 1000, abs=1000 / fs)
    xs, ys = (x, y) if lag >= 0 else (x[-lag:], y[-lag:])
    assert abs(r.stoi - ref(xs, ys, fs)) < TOL
    assert abs(r.estoi - ref(xs, ys, fs, extended=True)) < TOL


def test_other_sample_rate_is_resampled():
    # reference: pystoi on the same-rate pair; the degraded file comes at 48 kHz
    fs = 16000
    x = speech_like(4.0, fs, 33)
    y = at_snr(x, fluctuating_noise(x, fs, 34), 3)
    r = pair_indices(x, resample_poly(y, 3, 1), fs, fs_degraded=48000)
    assert r.fs == fs and r.fs_degraded == 48000 and r.delay_samples == 0
    assert abs(r.stoi - ref(x, y, fs)) < TOL
    assert abs(r.estoi - ref(x, y, fs, extended=True)) < TOL
    assert any("resampled" in n for n in r.notes)


def test_chunked_equals_unchunked():
    # issue 3 item 6: chunks must not change any number (small chunks on a short pair,
    # with a delay and a rate change so every streamed stage is exercised)
    fs = 24000
    x = speech_like(7.0, fs, 35)
    y = delayed(resample_poly(at_snr(x, fluctuating_noise(x, fs, 36), 0), 2, 3), 1234)
    whole = pair_indices(x, y, fs, fs_degraded=16000, chunk_s=600)
    part = pair_indices(x, y, fs, fs_degraded=16000, chunk_s=1.0)
    assert part.chunks > 5 and whole.chunks == 1
    assert part.delay_samples == whole.delay_samples
    for key in ("stoi", "estoi", "ssti"):
        assert getattr(part, key) == pytest.approx(getattr(whole, key), abs=1e-9)
    np.testing.assert_allclose(part.ssti_bands.correlation, whole.ssti_bands.correlation, atol=1e-9)
    np.testing.assert_allclose(part.correlation.stoi_band, whole.correlation.stoi_band, atol=1e-9)


def test_unrelated_pair_is_refused():
    fs = 16000
    x = speech_like(3.0, fs, 37)
    y = np.random.default_rng(3).standard_normal(x.size) * 0.1
    with pytest.raises(InputError, match="do not match"):
        pair_indices(x, y, fs)
    r = pair_indices(x, y, fs, align=False)  # the user switched the check off
    assert abs(r.match_correlation) < MIN_MATCH_CORRELATION and r.delay_ms == 0.0


def test_alignment_off_keeps_lag_zero():
    fs = 16000
    x = speech_like(3.0, fs, 38)
    r = pair_indices(x, delayed(x, 160), fs, align=False)
    assert r.delay_samples == 0 and not r.aligned
    assert r.stoi < pair_indices(x, delayed(x, 160), fs).stoi


def test_lengths_beyond_alignment_are_refused():
    fs = 16000
    x = speech_like(6.0, fs, 39)
    with pytest.raises(InputError, match="differ in length"):
        pair_indices(x, x[: fs * 3], fs)
    # a short tail difference is trimmed and said
    r = pair_indices(x, x[: x.size - fs // 4], fs)
    assert r.stoi > 0.99 and any("trimmed" in n for n in r.notes)


def test_bad_arrays():
    fs = 16000
    x = speech_like(2.0, fs, 40)
    nan = x.copy()
    nan[5] = np.nan
    with pytest.raises(InputError, match="NaN"):
        pair_indices(x, nan, fs)
    with pytest.raises(InputError, match="silent"):
        pair_indices(np.zeros_like(x), x, fs)
    with pytest.raises(InputError, match="one channel"):
        pair_indices(x, np.stack([x, x], axis=1), fs)
    with pytest.raises(InputError, match="8000 Hz"):
        pair_indices(x[::2], x[::2], 8000)
    with pytest.raises(InputError, match="analysis segment"):
        pair_indices(x[:4000], x[:4000], fs)
    with pytest.raises(InputError, match="maximum delay"):
        pair_indices(x, x, fs, max_delay_s=-1)


# --- speech-based STI (normalised-covariance method) ---------------------------


def _octave_filters(fs: int) -> list:
    """Octave band-passes designed here: IEC 61260-1 base-2 edges fc/sqrt(2), fc*sqrt(2),
    3rd-order Butterworth prototypes; a band reaching 98 % of Nyquist as a high-pass at
    its lower edge (the tool's documented treatment of the top band)."""
    out = []
    for fc in (125, 250, 500, 1000, 2000, 4000, 8000):
        lo, hi = fc / 2 ** 0.5, fc * 2 ** 0.5
        if hi >= 0.98 * fs / 2:
            out.append(butter(3, lo, "highpass", fs=fs, output="sos"))
        else:
            out.append(butter(3, [lo, hi], "bandpass", fs=fs, output="sos"))
    return out


def _envelopes(sig: np.ndarray, fs: int) -> np.ndarray:
    """Intensity envelopes computed here, whole-signal, for the independent check."""
    sos_bands = _octave_filters(fs)
    lp = butter(SSTI_ENVELOPE_ORDER, SSTI_ENVELOPE_LOWPASS_HZ, "lowpass", fs=fs, output="sos")
    q = int(fs // SSTI_ENVELOPE_RATE_HZ)
    return np.array([sosfilt(lp, sosfilt(s, sig) ** 2)[::q] for s in sos_bands])


def test_ssti_identity_is_one():
    fs = 24000
    x = speech_like(4.0, fs, 41)
    r = pair_indices(x, x, fs)
    assert r.ssti == pytest.approx(1.0, abs=1e-9)
    np.testing.assert_allclose(r.ssti_bands.ti, 1.0)


def test_ncm_formula_independent_check():
    # Goldsworthy & Greenberg 2004: r = normalised covariance of the envelopes,
    # SNR = 10 log10(r^2 / (1 - r^2)) limited to +-15 dB, TI = (SNR + 15)/30; combined
    # with IEC 60268-16 Table A.1 male weights alpha/beta (written out here)
    fs = 24000
    x = speech_like(5.0, fs, 42)
    y = at_snr(x, speech_shaped_noise(x, 43), -12)
    r = pair_indices(x, y, fs, align=False)
    ex, ey = _envelopes(x, fs), _envelopes(y, fs)
    rho = np.array([np.corrcoef(a, b)[0, 1] for a, b in zip(ex, ey)])
    np.testing.assert_allclose(r.ssti_bands.correlation, rho, atol=1e-9)
    snr = np.clip(10 * np.log10(rho ** 2 / (1 - rho ** 2)), -15, 15)
    np.testing.assert_allclose(r.ssti_bands.apparent_snr_db, snr, atol=1e-6)
    ti = (snr + 15) / 30
    alpha = np.array([0.085, 0.127, 0.230, 0.233, 0.309, 0.224, 0.173])
    beta = np.array([0.085, 0.078, 0.065, 0.011, 0.047, 0.095])
    expect = float(alpha @ ti - beta @ np.sqrt(ti[:-1] * ti[1:]))
    assert r.ssti == pytest.approx(expect, abs=1e-6)
    assert speech_sti(x, y, fs) == pytest.approx(expect, abs=1e-6)


def test_ssti_stationary_noise_relation():
    # For stationary noise independent of the speech, the degraded intensity envelope is
    # I_y = I_x + D with D = (noise envelope + speech x noise cross term) uncorrelated
    # with I_x, so the NCM gives r^2/(1 - r^2) = var(I_x)/var(D): the apparent SNR is
    # the ratio of envelope-FLUCTUATION powers, not the band SNR of the classical MTF
    # relation 10 log10(S/N). Since var(noise envelope) grows as N^2 and the cross term
    # as S N, the apparent SNR rises with the band SNR at 1 to 2 dB per dB.
    # Tolerance: the sampling error of r. With N independent envelope values the
    # standard error of r is about (1 - r^2)/sqrt(N) (Fisher), and d(SNR)/dr =
    # 8.69/(r (1 - r^2)) dB, so SE(SNR) = 8.69/(r sqrt(N)) dB. The speech envelope
    # changes at the 4 Hz syllable rate (of these signals and of speech), N = 2 x 4 Hz x T
    # = 160 for T = 20 s; we allow 3 SE per band (1.9 dB at r = 0.9, 5.5 dB at r = 0.3).
    fs = 24000
    x = speech_like(20.0, fs, 44)
    n = speech_shaped_noise(x, 45)
    ex = _envelopes(x, fs)
    prev = None
    for snr in (-15, -10, -5):
        y = at_snr(x, n, snr)
        r = pair_indices(x, y, fs, align=False)
        app = 10 * np.log10(r.ssti_bands.mtf / (1 - r.ssti_bands.mtf))
        d = _envelopes(y, fs) - ex
        theory = 10 * np.log10(ex.var(axis=1) / d.var(axis=1))
        use = np.abs(theory) < 12  # away from the +-15 dB limits
        assert use.sum() >= 3
        rho = r.ssti_bands.correlation
        se_db = 8.69 / (rho * np.sqrt(2 * 4.0 * 20.0))
        assert np.all(np.abs(app - theory)[use] < 3 * se_db[use])
        if prev is not None:
            slope = (app - prev) / 5.0
            ok = np.isfinite(slope) & (np.abs(prev) < 14) & (np.abs(app) < 14)
            assert np.all((slope[ok] > 0.8) & (slope[ok] < 2.2))
        prev = app


def test_ssti_monotone_in_snr():
    # more noise never raises the index (HOUSE.md property)
    fs = 24000
    x = speech_like(6.0, fs, 46)
    n = speech_shaped_noise(x, 47)
    values = [pair_indices(x, at_snr(x, n, s), fs, align=False).ssti for s in (-20, -15, -10, -5, 0)]
    assert all(a <= b + 1e-9 for a, b in zip(values, values[1:]))
    assert values[0] < values[-1]


def test_ssti_low_rates():
    x16 = speech_like(4.0, 16000, 48)
    r = pair_indices(x16, x16, 16000)
    assert r.ssti is not None and r.ssti_bands.partial[-1]
    assert any("partly" in n for n in r.notes)
    x10 = speech_like(4.0, 10000, 48)
    r = pair_indices(x10, x10, 10000)
    assert r.ssti is None and any("8000 Hz lie above" in n for n in r.notes)
    with pytest.raises(ComputationError):
        speech_sti(x10, x10, 10000)


def test_result_dict_keys():
    fs = 16000
    x = speech_like(4.0, fs, 49)
    d = pair_indices(x, at_snr(x, speech_shaped_noise(x, 50), 0), fs).to_dict()
    for key in ("stoi", "estoi", "ssti", "delay_ms", "fs", "bands"):
        assert key in d
    assert len(d["bands"]["third_octave"]["stoi"]) == 15
    assert len(d["bands"]["octave"]["ti"]) == 7
    assert d["worst_moments"] and d["timeline"]["step_s"] == 1.0
    json.dumps(d, allow_nan=False)


# --- files and the command --------------------------------------------------------


@pytest.fixture()
def wav_pair(tmp_path):
    fs = 16000
    x = speech_like(4.0, fs, 51)
    y = delayed(at_snr(x, speech_shaped_noise(x, 52), 5), 480)
    c, d = tmp_path / "clean.wav", tmp_path / "degraded.wav"
    sf.write(c, x, fs, subtype="FLOAT")
    sf.write(d, y, fs, subtype="FLOAT")
    return c, d, x, y


def test_files_equal_arrays(wav_pair):
    c, d, x, y = wav_pair
    a = pair_from_files(c, d)
    b = pair_indices(x, y, 16000)
    assert a.stoi == pytest.approx(b.stoi, abs=1e-7) and a.delay_ms == pytest.approx(30.0)


def test_cli_json_and_out(wav_pair, tmp_path, capsys):
    c, d, *_ = wav_pair
    out = tmp_path / "r.json"
    code, stdout, _ = run_cli(["pair", str(c), str(d), "--json", "--out", str(out)], capsys)
    assert code == 0
    res = json.loads(stdout)
    assert res == json.loads(out.read_text())
    assert res["delay_ms"] == pytest.approx(30.0)
    code, stdout, _ = run_cli(["pair", str(c), str(d)], capsys)
    assert code == 0 and "STOI" in stdout and "ESTOI" in stdout


def test_cli_bad_inputs(wav_pair, tmp_path, capsys):
    c, d, x, _ = wav_pair
    stereo = tmp_path / "stereo.wav"
    sf.write(stereo, np.stack([x, x], axis=1), 16000)
    low = tmp_path / "low.wav"
    sf.write(low, x[::2], 8000)
    silent = tmp_path / "silent.wav"
    sf.write(silent, np.zeros(x.size), 16000)
    nan = tmp_path / "nan.wav"
    bad = x.copy()
    bad[10] = np.nan
    sf.write(nan, bad, 16000, subtype="FLOAT")
    short = tmp_path / "short.wav"
    sf.write(short, x[3200:9200], 16000)
    out = tmp_path / "never.json"
    cases = [
        ([str(c), str(stereo)], "--channel"),
        ([str(low), str(low)], "8000 Hz"),
        ([str(silent), str(d)], "silent"),
        ([str(c), str(nan)], "NaN"),
        ([str(short), str(short)], "analysis segment"),
        ([str(c), str(c)[:-4] + "_missing.wav"], "does not exist"),
        ([str(c), str(d), "--max-delay", "-3"], "maximum delay"),
    ]
    for args, text in cases:
        code, _, err = run_cli(["pair", *args, "--out", str(out)], capsys)
        assert code == 2, (args, err)
        assert err.count("\n") == 1 and err.startswith("error: ") and text in err
        assert "Traceback" not in err
        assert not out.exists()
    code, stdout, _ = run_cli(["pair", str(c), str(stereo), "--channel", "1", "--json"], capsys)
    assert code == 0 and json.loads(stdout)["stoi"] > 0.5


def test_delay_found_after_a_quiet_start(monkeypatch):
    # long inputs are aligned on an excerpt; it is taken at the loudest stretch, so a
    # quiet lead-in longer than the excerpt does not defeat the alignment
    import envpredict.audio as audio_mod
    import envpredict.pair as pair_mod

    fs = 16000
    monkeypatch.setattr(audio_mod, "ALIGN_EXCERPT_S", 2.0)
    monkeypatch.setattr(pair_mod, "SCAN_BLOCK", fs)
    rng = np.random.default_rng(53)
    x = np.concatenate([1e-5 * rng.standard_normal(3 * fs), speech_like(4.0, fs, 54)])
    y = delayed(at_snr(x, speech_shaped_noise(x, 55), 5), 400)
    r = pair_indices(x, y, fs)
    assert r.delay_samples == 400


def test_ssti_regression_follows_the_stationary_noise_relation():
    # Envelope regression (Ludvigsen et al. 1990): for noise independent of the speech the
    # regression slope is 1 and the mean ratio S/(S+N), so m = 1/(1+N/S) and the apparent SNR
    # equals the band SNR (Houtgast & Steeneken's stationary-noise relation, IEC 60268-16 A.2).
    # Tolerance: the slope's sampling error with about 2 x 4 Hz x 20 s = 160 independent envelope
    # samples is below 0.5 dB of apparent SNR where |SNR| <= 10 dB; we allow 1.5 dB (3 SE).
    from envpredict.bands import octave_bands

    fs = 24000
    x = speech_like(20.0, fs, 44)
    n = speech_shaped_noise(x, 45)
    xb = octave_bands(x, fs)
    for snr in (-10, -5, 0, 5, 10):
        y = at_snr(x, n, snr)
        band_snr = 10 * np.log10(np.mean(xb ** 2, axis=1) / np.mean((octave_bands(y, fs) - xb) ** 2, axis=1))
        r = pair_indices(x, y, fs, align=False)
        assert np.all(np.abs(r.ssti_bands.regression_snr_db - band_snr) < 1.5), (snr, r.ssti_bands.regression_snr_db)
        # the index itself then equals the classical STI of that band SNR: TI = (SNR + 15)/30
        assert r.ssti_regression == pytest.approx((snr + 15) / 30, abs=0.05)


def test_ssti_regression_falls_with_reverberation():
    from scipy.signal import fftconvolve

    fs = 24000
    x = speech_like(10.0, fs, 46)
    rng = np.random.default_rng(0)
    vals = []
    for T in (0.3, 0.8, 2.0):
        t = np.arange(int(2.5 * T * fs)) / fs
        y = fftconvolve(x, rng.standard_normal(t.size) * np.exp(-6.9 * t / T))[: x.size]
        vals.append(pair_indices(x, y, fs, align=False).ssti_regression)
    assert vals[0] > vals[1] > vals[2]


def test_speech_sti_computes_only_the_speech_based_sti(monkeypatch):
    # speech_sti shares the pair job's checks and envelopes but runs no STOI/ESTOI pass;
    # the value is the pair job's ssti, bit for bit
    import envpredict.pair as pair

    fs = 16000
    x = speech_like(4.0, fs, 51)
    y = at_snr(x, speech_shaped_noise(x, 52), 0)
    want = pair_indices(x, y, fs, align=False).ssti

    def no_stoi(*args, **kwargs):
        raise AssertionError("speech_sti ran the STOI/ESTOI pass")

    monkeypatch.setattr(pair, "stoi_estoi_stream", no_stoi)
    assert speech_sti(x, y, fs) == want


def test_clean_and_degraded_as_two_channels_of_one_file(tmp_path, capsys):
    # the same signals as two mono files and as the two channels of one file give the
    # same result; --channel alone would take one channel for both
    import json

    import soundfile as sf
    from cli_for_tests import run_cli
    from signals_for_tests import at_snr, speech_like, speech_shaped_noise

    fs = 16000
    x = speech_like(6.0, fs, seed=4)
    y = at_snr(x, speech_shaped_noise(x, seed=5), 3.0)
    sf.write(tmp_path / "c.wav", x, fs, subtype="FLOAT")
    sf.write(tmp_path / "d.wav", y, fs, subtype="FLOAT")
    sf.write(tmp_path / "both.wav", np.stack([x, y], axis=1), fs, subtype="FLOAT")
    code, out, err = run_cli(["pair", tmp_path / "c.wav", tmp_path / "d.wav", "--json"], capsys)
    assert code == 0, err
    mono = json.loads(out)
    both = tmp_path / "both.wav"
    code, out, err = run_cli(["pair", both, both, "--clean-channel", "0", "--degraded-channel", "1", "--json"], capsys)
    assert code == 0, err
    two = json.loads(out)
    for k in ("stoi", "estoi", "ssti", "delay_ms"):
        assert two[k] == mono[k], k
    code, out, _ = run_cli(["pair", both, both, "--channel", "0", "--json"], capsys)
    assert json.loads(out)["stoi"] > 0.99 > mono["stoi"]  # one channel against itself


# ---------------------------------------------------------------------------
# The envelope-power index in the pair job (--noise)
# ---------------------------------------------------------------------------


def test_pair_noise_adds_the_envelope_power_index(tmp_path, capsys):
    import envpredict

    fs = 16000
    x = speech_like(4.0, fs, seed=4)
    noise = at_snr(x, speech_shaped_noise(x, 5), 0.0) - x
    deg = np.concatenate([np.zeros(48), (x + noise)[:-48]])  # 3 ms late
    nz = np.concatenate([np.zeros(48), noise[:-48]])
    for name, sig in (("c.wav", x), ("d.wav", deg), ("n.wav", nz), ("short.wav", nz[:-100])):
        sf.write(tmp_path / name, sig, fs, subtype="FLOAT")
    code, out, _ = run_cli(["pair", str(tmp_path / "c.wav"), str(tmp_path / "d.wav"), "--noise",
                            str(tmp_path / "n.wav"), "--json"], capsys)
    assert code == 0
    d = json.loads(out)
    direct = envpredict.sepsm(deg, nz, fs)  # the API on the same signals
    assert d["sepsm"]["snr_env_db"] == pytest.approx(round(direct.snr_env_db, 3), abs=1e-9)
    assert d["inputs"]["noise"].endswith("n.wav") and d["alignment"]["delay_ms"] == pytest.approx(3.0)
    r = pair_indices(x, deg, fs, noise=nz)
    assert r.sepsm is not None and r.sepsm.snr_env_db == pytest.approx(direct.snr_env_db)
    code, _, err = run_cli(["pair", str(tmp_path / "c.wav"), str(tmp_path / "d.wav"), "--noise",
                            str(tmp_path / "short.wav")], capsys)
    assert code == 2 and "does not match the degraded file" in err and "Traceback" not in err


# ---------------------------------------------------------------------------
# Phase inversion (Hagerman & Olofsson 2004): --inverted
# ---------------------------------------------------------------------------


def test_pair_inverted_separates_processed_speech_and_noise(tmp_path, capsys):
    # a linear chain (a low-pass and a 2 ms delay) processes speech + noise and speech - noise;
    # half their sum is the processed speech and half their difference the processed noise,
    # exactly (linearity), so the output SNR is that of the chain's outputs for each alone
    import envpredict
    from envpredict.pair import phase_inversion_split

    fs = 16000
    x = speech_like(4.0, fs, seed=8)
    n = at_snr(x, speech_shaped_noise(x, 9), 3.0) - x
    sos = butter(4, 3000, fs=fs, output="sos")

    def chain(v):
        return np.concatenate([np.zeros(32), sosfilt(sos, v)[:-32]])

    a, b = chain(x + n), chain(x - n)
    s_, n_ = phase_inversion_split(a, b)
    assert np.max(np.abs(s_ - chain(x))) < 1e-12 and np.max(np.abs(n_ - chain(n))) < 1e-12
    for name, sig in (("c.wav", x), ("a.wav", a), ("b.wav", b), ("half.wav", 0.5 * a)):
        sf.write(tmp_path / name, sig, fs, subtype="DOUBLE")
    code, out, _ = run_cli(["pair", str(tmp_path / "c.wav"), str(tmp_path / "a.wav"), "--inverted",
                            str(tmp_path / "b.wav"), "--json"], capsys)
    assert code == 0
    d = json.loads(out)
    sep = d["separation"]
    direct = 10 * np.log10(np.mean(chain(x) ** 2) / np.mean(chain(n) ** 2))
    assert sep["broadband_snr_db"] == pytest.approx(direct, abs=0.01)
    assert sep["noise_correlation"] < 0.1 < sep["speech_correlation"]
    assert d["sepsm"]["snr_env_db"] == pytest.approx(envpredict.sepsm(a, chain(n), fs).snr_env_db, abs=1e-3)
    assert len(sep["output_snr_db"]) == 7 and sep["bands_hz"][0] == 125
    # not the counterpart: half the mixture leaves speech in the difference; the same file none
    for other, msg in (("half.wav", "not the phase-inverted counterpart"), ("a.wav", "derived noise is silent")):
        code, _, err = run_cli(["pair", str(tmp_path / "c.wav"), str(tmp_path / "a.wav"), "--inverted",
                                str(tmp_path / other)], capsys)
        assert code == 2 and msg in err and "Traceback" not in err
    with pytest.raises(InputError, match="give one of them"):
        pair_from_files(tmp_path / "c.wav", tmp_path / "a.wav", noise_path=tmp_path / "b.wav",
                        inverted_path=tmp_path / "b.wav")


def test_noise_and_inverted_files_of_another_rate_or_length_are_refused(tmp_path, capsys):
    # issue 15, bad input: a noise or inverted file that does not match the degraded
    # file's rate or length gets one line and exit 2 (no traceback, no partial output),
    # with a remedy that names what the file must be
    fs = 16000
    x = speech_like(2.0, fs, seed=3)
    n = 0.5 * speech_shaped_noise(x, 4)
    for name, sig, rate in (("c.wav", x, fs), ("d.wav", x + n, fs), ("n8k.wav", n[::2], 8000),
                            ("i8k.wav", (x - n)[::2], 8000), ("ishort.wav", (x - n)[:-100], fs)):
        sf.write(tmp_path / name, sig, rate, subtype="FLOAT")
    for option, other, fix in (("--noise", "n8k.wav", "noise alone"), ("--inverted", "i8k.wav", "polarity inverted"),
                               ("--inverted", "ishort.wav", "polarity inverted")):
        code, out, err = run_cli(["pair", tmp_path / "c.wav", tmp_path / "d.wav", option, tmp_path / other,
                                  "--json"], capsys)
        lines = err.strip().splitlines()
        assert code == 2 and out == "" and len(lines) == 1, (other, err)
        assert lines[0].startswith("error: ") and "does not match the degraded file" in lines[0] and fix in lines[0]
