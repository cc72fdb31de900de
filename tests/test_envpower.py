"""Tests of envpredict.envpower: the envelope-power index (sEPSM, Jørgensen & Dau 2011).

Checks against things outside the code: the envelope power of a sinusoidally modulated
tone (m^2/2 at the modulation frequency, by definition) weighted by the written-out
filter responses; the m-alternative ideal observer against a Monte Carlo simulation of
its definition (the largest of m - 1 noise draws against a signal draw); and the
published directions of Jørgensen & Dau 2011 (JASA 130(3):1475-1487): SNR_env rises with
the SNR in speech-shaped noise, falls with reverberation, and falls with the
over-subtraction factor of spectral subtraction while the normalised-covariance
speech-based STI does not fall with it.
"""

from __future__ import annotations

import numpy as np
import pytest

from envpredict.envpower import envelope_powers, ideal_observer, modulation_weights, sepsm
from envpredict.exceptions import InputError
from signals_for_tests import at_snr, reverberant, speech_like, speech_shaped_noise

FS = 16000


@pytest.fixture(scope="module")
def speech():
    return speech_like(6.0, FS, seed=1)


@pytest.fixture(scope="module")
def ssn(speech):
    return speech_shaped_noise(speech, 2)


def _noise_at(x: np.ndarray, noise: np.ndarray, snr_db: float) -> np.ndarray:
    """The noise scaled as :func:`at_snr` scales it (mean powers)."""
    return at_snr(x, noise, snr_db) - x


def test_envelope_power_of_a_modulated_tone_is_m_squared_over_two():
    # a 1 kHz tone with envelope 1 + m cos(2 pi 8 t): the envelope's AC power over its DC
    # power is m^2/2, all at 8 Hz; each modulation filter passes it with its written-out
    # power response (first order 150 Hz envelope low-pass included)
    m, fm = 0.5, 8.0
    t = np.arange(int(4.0 * FS)) / FS
    x = (1 + m * np.cos(2 * np.pi * fm * t)) * np.sin(2 * np.pi * 1000 * t)
    p, bands = envelope_powers(x, FS)
    k = bands.index(1000)
    mods = (1.0, 2.0, 4.0, 8.0, 16.0, 32.0, 64.0)
    lp = 1.0 / (1.0 + (fm / 150.0) ** 2)
    for j, fc in enumerate(mods):
        if j == 0:
            w = 1.0 / (1.0 + (fm / fc) ** 6)
        else:
            w = 1.0 / (1.0 + (fm / fc - fc / fm) ** 2)
        # abs: the onset transient of the gammatone filter adds a little broadband envelope power
        assert p[k, j] == pytest.approx(m ** 2 / 2 * w * lp, rel=0.05, abs=1e-3), fc
    assert modulation_weights(np.array([8.0]))[3, 0] == pytest.approx(1.0)


def test_ideal_observer_against_a_simulation_of_its_definition():
    # Green & Birdsall 1964: correct when the signal draw N(d', sigma_s) exceeds the largest
    # of m - 1 standard normal noise draws; the model replaces that maximum by a normal of
    # mean U + 0.577/U and sd 1.28255/U (an approximation: 4 points of tolerance)
    rng = np.random.default_rng(0)
    m, sigma_s, k, q = 500, 0.6, 1.2 ** 0.5, 0.5
    trials = 4000
    noise_max = rng.standard_normal((trials, m - 1)).max(axis=1)
    for snr_env in (4.0, 9.0, 16.0):
        d = k * snr_env ** q
        sim = 100 * np.mean(d + sigma_s * rng.standard_normal(trials) > noise_max)
        assert ideal_observer(snr_env, k=k, q=q, sigma_s=sigma_s, m=m) == pytest.approx(sim, abs=4.0)


def test_snr_env_rises_monotonically_with_the_snr_in_speech_shaped_noise(speech, ssn):
    values = [sepsm(speech + _noise_at(speech, ssn, snr), _noise_at(speech, ssn, snr), FS)
              for snr in (-9, -6, -3, 0, 3, 6)]
    db = [r.snr_env_db for r in values]
    assert np.all(np.diff(db) > 0.5), db
    pc = [r.percent_correct for r in values]
    assert np.all(np.diff(pc) >= 0) and pc[0] < 50 < pc[-1]


def test_snr_env_falls_with_reverberation(speech, ssn):
    nz = _noise_at(speech, ssn, 0.0)
    db = []
    for t30 in (0.4, 0.8, 1.5, 2.3):
        wet = reverberant(speech, FS, t30, seed=3)
        wet *= np.sqrt(np.mean(speech ** 2) / np.mean(wet ** 2))  # the same speech power
        db.append(sepsm(wet + nz, nz, FS).snr_env_db)
    assert np.all(np.diff(db) < 0), db


def _berouti(noisy: np.ndarray, noise: np.ndarray, alpha: float, beta: float = 0.0, nper: int = 512):
    """Power spectral subtraction with over-subtraction (Berouti, Schwartz & Makhoul 1979,
    ICASSP, "Enhancement of speech corrupted by acoustic noise"): |S|^2 = |Y|^2 - alpha |N|^2
    where that exceeds beta |N|^2, else beta |N|^2, with |N|^2 the noise's long-term power
    spectrum; the same gains are applied to the noise alone (its processed version)."""
    from scipy.signal import istft, stft

    _, _, y = stft(noisy, FS, nperseg=nper)
    _, _, n = stft(noise, FS, nperseg=nper)
    pn = np.mean(np.abs(n) ** 2, axis=1, keepdims=True)
    py = np.abs(y) ** 2
    ps = np.where(py - alpha * pn > beta * pn, py - alpha * pn, beta * pn)
    g = np.sqrt(ps / np.maximum(py, 1e-30))
    return istft(y * g, FS, nperseg=nper)[1][: noisy.size], istft(n * g, FS, nperseg=nper)[1][: noisy.size]


def test_spectral_subtraction_lowers_snr_env_where_the_ncm_sees_no_loss(speech, ssn):
    # Jørgensen & Dau 2011: with growing over-subtraction, listeners' SRTs get worse and the
    # sEPSM's SNR_env falls, while the speech-based STI (NCM) predicts a benefit. On this
    # invented signal at 0 dB SNR the tool's octave-band NCM rises from alpha = 1 to 2
    # (then falls too, where the subtraction removes speech): SNR_env falls over 1 -> 8 and
    # already from 1 to 2, where the NCM rises.
    from envpredict.pair import speech_sti

    nz = _noise_at(speech, ssn, 0.0)
    noisy = speech + nz
    snr_env, ncm = [], []
    for alpha in (1.0, 2.0, 4.0, 8.0):
        y, n = _berouti(noisy, nz, alpha)
        snr_env.append(sepsm(y, n, FS).snr_env_db)
        ncm.append(speech_sti(speech, y, FS))
    assert np.all(np.diff(snr_env) < 0), snr_env
    assert snr_env[0] - snr_env[-1] > 6.0
    assert ncm[1] > ncm[0] and snr_env[1] < snr_env[0] - 1.0, (ncm, snr_env)


def test_sepsm_result_vocabulary_and_bad_input(speech, ssn):
    nz = _noise_at(speech, ssn, 0.0)
    d = sepsm(speech + nz, nz, FS).to_dict()
    assert d["index"] == "sepsm" and "snr_env_db" in d and len(d["bands_hz"]) == 21  # 8 kHz > 0.4 fs
    assert np.asarray(d["snr_env_bands"]).shape == (21, 7) and d["modulation_hz"][0] == 1.0
    assert any("material" in n for n in d["notes"]) and any("8000 Hz left out" in n for n in d["notes"])
    with pytest.raises(InputError, match="differ in length"):
        sepsm(speech + nz, nz[:-10], FS)
    with pytest.raises(InputError, match="at least 1 s"):
        sepsm(speech[: FS // 2], nz[: FS // 2], FS)
    with pytest.raises(InputError, match="silent"):
        sepsm(speech + nz, np.zeros_like(nz), FS)
