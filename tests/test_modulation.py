"""Modulation transfer: the projection kernel, the MTF from impulse responses (against the
analytic exponential-decay formula and Schroeder's formula computed here) and the depths of
test-signal envelopes with the envelope-noise-floor correction (against analytic noise)."""

import numpy as np
import pytest
from scipy.signal import butter, sosfiltfilt

from envpredict.modulation import (
    envelope_noise_floor,
    modulation_depths,
    mtf_from_ir,
    mtf_from_test_signal,
    noise_corrected_depth,
    project,
)

from signals_for_tests import noise_decay

# IEC 60268-16:2011, 5.1: the 14 modulation frequencies, one-third-octave steps 0.63-12.5 Hz
F = np.array([0.63, 0.8, 1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0, 10.0, 12.5])


def octave_band_1k(x, fs):
    """1 kHz octave band designed here: IEC 61260-1 base-2 edges, 3rd-order Butterworth, zero phase."""
    return sosfiltfilt(butter(3, [1000 / 2 ** 0.5, 1000 * 2 ** 0.5], "bandpass", fs=fs, output="sos"), x,
                       padtype=None)


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
    ms = [mtf_from_ir(octave_band_1k(noise_decay(T, fs, seed=s), fs)[None, :], fs)[0] for s in range(8)]
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


def schroeder(h, fs, freqs):
    """Schroeder's formula computed here sample by sample (no blocks):
    m(F) = |sum h^2 exp(-j 2 pi F t)| / sum h^2 (Acustica 49, 1981)."""
    e = h ** 2
    t = np.arange(h.size) / fs
    return np.abs(np.exp(-2j * np.pi * np.outer(freqs, t)) @ e) / e.sum()


def test_mtf_from_ir_equals_schroeder_per_sample():
    # the tool sums the energy in 0.5 ms blocks before the Fourier sum; against the
    # per-sample formula the difference is a phase error of at most pi F dt = 0.02 rad
    # (12.5 Hz) on the energy off the block centre: measured 2.4e-4 for this noise decay
    fs = 48000
    h = octave_band_1k(noise_decay(1.2, fs, seed=3), fs)
    assert np.max(np.abs(mtf_from_ir(h[None, :], fs)[0] - schroeder(h, fs, F))) < 5e-4


def test_project_is_the_dft_at_bin_frequencies():
    # at the DFT bin frequencies k fs/n the projection is the DFT (numpy.fft.rfft)
    rng = np.random.default_rng(3)
    x = rng.standard_normal((3, 1000))
    fs = 200.0
    k = np.array([0, 1, 7, 50, 123])
    z = project(x, k * fs / x.shape[1], fs, chunk=64)  # in pieces of 64 samples
    assert np.allclose(z, np.fft.rfft(x, axis=1)[:, k], rtol=0, atol=1e-9)
    # per-band frequencies, and samples at t = (i * stride + offset) / fs
    fk = np.array([[1.0, 3.0], [2.0, 5.0], [0.5, 4.0]])
    z = project(x, fk, fs, stride=4, offset=1.5)
    t = (np.arange(1000) * 4 + 1.5) / fs
    want = np.array([[np.sum(x[b] * np.exp(-2j * np.pi * f * t)) for f in fk[b]] for b in range(3)])
    assert np.allclose(z, want, rtol=0, atol=1e-9)


def test_depth_of_a_noise_free_envelope():
    # Houtgast & Steeneken's modulation index: I(t) = 1 + m cos(2 pi F t) has depth m at F
    fs_env = 200.0
    t = np.arange(int(20 * fs_env)) / fs_env
    freqs = np.array([[1.0, 5.0], [0.63, 3.15]])
    env = np.stack([1 + 0.4 * np.cos(2 * np.pi * 1.0 * t) + 0.2 * np.cos(2 * np.pi * 5.0 * t),
                    1 + 0.3 * np.cos(2 * np.pi * 0.63 * t) + 0.1 * np.sin(2 * np.pi * 3.15 * t)])
    d = modulation_depths(env, fs_env, freqs, [1.0, 5.0, 0.63, 3.15])
    assert np.allclose(d.raw, [[0.4, 0.2], [0.3, 0.1]], atol=2e-3)
    assert np.all(d.floor < 1e-3)  # nothing else in the envelope (leakage of 0.63 Hz: 1e-5)
    assert np.allclose(mtf_from_test_signal(env, fs_env, freqs, 0.5), np.array([[0.8, 0.4], [0.6, 0.2]]), atol=4e-3)


def test_envelope_noise_floor_of_white_envelope_noise():
    # envelope e = 1 + sigma w(t), w white Gaussian: 2 X(f)/X(0) at a bin has mean power
    # 4 sigma^2 / n (Parseval), so the RMS noise depth is 2 sigma / sqrt(n). The median of
    # the exponentially distributed |d|^2 over ~1000 bins estimates it within a few per cent.
    rng = np.random.default_rng(5)
    fs_env, n, sigma = 200.0, 60000, 0.3
    floor, local = envelope_noise_floor(1 + sigma * rng.standard_normal(n), fs_env, [2.0, 8.0], [2.0, 8.0])
    want = 2 * sigma / np.sqrt(n)
    assert floor == pytest.approx(want, rel=0.08)
    assert np.allclose(local, want, rtol=0.6)  # 12 bins only: chi-square scatter


def test_noise_floor_correction_removes_the_bias():
    # |m + z|^2 with z complex Gaussian of mean power f^2 has mean m^2 + f^2; the corrected
    # depth sqrt(|d|^2 - f^2) is unbiased in the square. Envelopes 1 + m cos(2 pi F t) +
    # sigma w(t) with f = 2 sigma/sqrt(n) as large as m: the uncorrected mean square reads
    # about 2 m^2, the corrected one m^2 (within the scatter of 200 realisations)
    rng = np.random.default_rng(9)
    fs_env, n, m, F0 = 100.0, 2000, 0.05, 2.0
    sigma = m * np.sqrt(n) / 2
    t = np.arange(n) / fs_env
    env = 1 + m * np.cos(2 * np.pi * F0 * t) + sigma * rng.standard_normal((200, n))
    d = modulation_depths(env, fs_env, np.full((200, 1), F0), [F0])
    assert np.mean(d.raw ** 2) == pytest.approx(2 * m ** 2, rel=0.25)
    assert np.mean(d.depth ** 2) == pytest.approx(m ** 2, rel=0.3)
    assert np.mean(d.depth ** 2) < 0.7 * np.mean(d.raw ** 2)


def test_noise_corrected_depth_formula():
    raw = np.array([[0.5, 0.1], [0.3, 0.0]])
    out = noise_corrected_depth(raw, np.array([0.3, np.nan]))
    assert np.allclose(out, [[0.4, 0.0], [0.3, 0.0]])  # sqrt(0.25 - 0.09); a NaN floor corrects nothing
