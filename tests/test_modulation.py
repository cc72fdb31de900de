"""MTF from impulse responses against the analytic exponential-decay formula."""

import numpy as np
import pytest

from envpredict import standards as std
from envpredict.bands import octave_bands
from envpredict.modulation import mtf_from_ir

from conftest import noise_decay

F = np.array(std.MODULATION_FREQUENCIES_HZ)


def analytic(T):
    # Houtgast, Steeneken & Plomp (1980); Schroeder (1981): m(F) = [1 + (2 pi F T / 13.8)^2]^-1/2
    return 1.0 / np.sqrt(1.0 + (2 * np.pi * F * T / 13.8) ** 2)


@pytest.mark.parametrize("T", [0.3, 1.0, 3.0])
def test_smooth_exponential_energy_decay_is_exact(T):
    # a deterministic energy decay exp(-13.8 t/T): Schroeder's formula gives the analytic MTF
    # up to the discretisation and the (negligible) truncation at 10 T
    fs = 8000
    t = np.arange(int(10 * T * fs)) / fs
    h = np.exp(-6.9 * t / T)
    assert np.allclose(mtf_from_ir(h[None, :], fs)[0], analytic(T), atol=2e-3)


@pytest.mark.parametrize("T", [0.5, 1.0, 2.0])
def test_noise_decay_band_mtf_near_analytic(T):
    # ensemble mean over seeds of the 1 kHz band MTF of noise decays (a single realisation
    # scatters; the mean of 8 is within 0.04 of the formula)
    fs = 48000
    ms = [mtf_from_ir(octave_bands(noise_decay(T, fs, seed=s), fs)[3:4], fs)[0] for s in range(8)]
    assert np.max(np.abs(np.mean(ms, axis=0) - analytic(T))) < 0.04


def test_mtf_bounds_and_dc():
    rng = np.random.default_rng(0)
    h = rng.standard_normal((3, 5000))
    m = mtf_from_ir(h, 1000.0, (0.0, 1.0, 5.0))
    assert np.allclose(m[:, 0], 1.0)  # F = 0: normalised to 1 by definition
    assert np.all((m >= 0) & (m <= 1))


def test_lengths_truncate():
    fs = 1000
    h = np.ones((1, 4000))
    full = mtf_from_ir(h, fs, (1.0,))
    # a boxcar of 1 s has |sinc| = 0 at 1 Hz; of 4 s also 0; truncating to 0.5 s gives 2/pi
    part = mtf_from_ir(h, fs, (1.0,), lengths=np.array([500]))
    assert full[0, 0] == pytest.approx(0.0, abs=1e-3)
    assert part[0, 0] == pytest.approx(2 / np.pi, abs=5e-3)
