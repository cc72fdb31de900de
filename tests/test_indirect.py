"""STI from impulse responses: analytic decay + noise cases (IEC 60268-16 indirect method)."""

import numpy as np
import pytest

from envpredict import standards as std
from envpredict.exceptions import InputError
from envpredict.indirect import sti_from_ir

from signals_for_tests import noise_decay

F = np.array(std.MODULATION_FREQUENCIES_HZ)
ALPHA = np.array(std.ALPHA_MALE)
BETA = np.array(std.BETA_MALE)


def formula_sti(T, snr=None):
    """STI of an exponential decay with uniform band SNR, from the published formulas:
    m(F) = [1+(2 pi F T/13.8)^2]^-1/2 * 1/(1+10^(-SNR/10)) (Houtgast, Steeneken & Plomp 1980),
    SNR_eff = 10 log m/(1-m) limited to +-15 dB, TI = (SNR_eff+15)/30 (IEC 60268-16:2011 A.2)."""
    m = 1 / np.sqrt(1 + (2 * np.pi * F * T / 13.8) ** 2)
    if snr is not None:
        m = m / (1 + 10 ** (-snr / 10))
    snr_eff = np.clip(10 * np.log10(m / (1 - m)), -15, 15)
    mti = np.full(7, ((snr_eff + 15) / 30).mean())
    return float(ALPHA @ mti - BETA @ np.sqrt(mti[:-1] * mti[1:]))


@pytest.mark.parametrize("T", [0.3, 0.45, 0.7, 1.0, 1.5, 2.2, 3.0])
def test_sti_of_noise_decays_matches_formula(T):
    ir = noise_decay(T, seed=int(T * 100))
    r = sti_from_ir(ir, 48000, auditory=False)
    assert r.sti.sti == pytest.approx(formula_sti(T), abs=0.02)


@pytest.mark.parametrize("T,snr", [(0.5, 9.0), (1.0, 0.0), (1.0, -6.0), (2.0, 3.0)])
def test_sti_of_decay_with_noise_matches_formula(T, snr):
    speech = 60 + np.array(std.SPEECH_SPECTRUM_MALE_DB)
    r = sti_from_ir(noise_decay(T, seed=7), 48000, noise_db=speech - snr, speech_level_dba=60, auditory=False)
    assert r.sti.sti == pytest.approx(formula_sti(T, snr), abs=0.02)


def test_more_reverberation_lowers_sti():
    # same noise sequence, longer decay: the index must not rise (Houtgast & Steeneken: m falls with T)
    vals = [sti_from_ir(noise_decay(T, seconds=5.0, seed=3), 48000, auditory=False).sti.sti
            for T in (0.3, 0.6, 1.2, 2.4)]
    assert all(b <= a + 0.005 for a, b in zip(vals, vals[1:]))


def test_result_dict_keys():
    r = sti_from_ir(noise_decay(0.8, seed=1), 48000, noise_db=[40] * 7).to_dict()
    for key in ("sti", "rating", "talker", "bands_hz", "modulation_hz", "mtf", "mti", "decay", "cautions"):
        assert key in r
    assert len(r["bands_hz"]) == 7 and np.shape(r["modulation_hz"]) == np.shape(r["mtf"]) == (7, 14)
    assert np.array(r["mtf"]).shape == (7, 14) and len(r["mti"]) == 7
    for k in ("edt", "t20", "t30", "c50", "c80", "d50"):
        assert len(r["decay"][k]) == 7
    assert any("qualified person" in c for c in r["cautions"])


def test_too_short_ir_refused():
    with pytest.raises(InputError, match="0.63 Hz"):
        sti_from_ir(noise_decay(0.2, seconds=0.5), 48000)


def test_low_rate_refused():
    with pytest.raises(InputError, match="8 kHz octave band"):
        sti_from_ir(noise_decay(0.5, fs=16000, seed=1), 16000)


def test_truncated_ir_caution():
    # T = 2 s cut after 0.9 s: 27 dB of decay, still falling at the end
    r = sti_from_ir(noise_decay(2.0, seconds=0.9), 48000)
    assert any("cut off" in c for c in r.cautions)


def test_noise_is_not_an_impulse_response():
    x = 0.1 * np.random.default_rng(0).standard_normal(2 * 48000)
    with pytest.raises(InputError, match="does not look like an impulse response"):
        sti_from_ir(x, 48000)


def test_sti_from_ir_file_equals_the_array_function(tmp_path):
    import soundfile as sf

    from envpredict.indirect import sti_from_ir_file

    x = noise_decay(0.8, seed=11)
    path = tmp_path / "ir.wav"
    sf.write(path, x, 48000, subtype="FLOAT")  # float32 on disk: compare with what is read back
    y, fs = sf.read(path, dtype="float64")
    a = sti_from_ir(y, fs, noise_db=[50, 47, 44, 41, 38, 35, 32], speech_level_dba=65, talker="female")
    b = sti_from_ir_file(path, noise_db="50,47,44,41,38,35,32", speech_level_dba=65, talker="female")
    assert b.to_dict() == a.to_dict()


@pytest.mark.parametrize("kw,what", [
    ({"talker": "child"}, "talker"),
    ({"speech_level_dba": float("nan")}, "speech level"),
    ({"noise_db": "1,2,3"}, "noise"),
])
def test_sti_from_ir_file_checks_options_before_reading(tmp_path, kw, what):
    # the file does not exist: the option error must come first (no audio work for bad options)
    from envpredict.indirect import sti_from_ir_file

    with pytest.raises(InputError, match=what):
        sti_from_ir_file(tmp_path / "missing.wav", **kw)
    with pytest.raises(InputError, match="does not exist"):
        sti_from_ir_file(tmp_path / "missing.wav")
