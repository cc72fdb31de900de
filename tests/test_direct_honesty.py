"""Honesty of the direct method (envpredict.direct): short recordings, stated uncertainty,
clock-rate mismatch, and the envelope-noise-floor correction.

External references:
* The analytic MTF of a channel (Houtgast & Steeneken; IEC 60268-16:2011, Annex A / 6.2):
  exponential decay with reverberation time T, m(F) = [1 + (2 pi F T / 13.8)^2]^(-1/2),
  times 1 / (1 + 10^(-SNR/10)) for stationary noise at band SNR. The received test signal
  is synthesised here with exactly that MTF (plain numpy, not the tool's generator): each
  band's noise carrier (half an octave wide) carries the intensity
  1 + 0.55 (m(f1) sin(2 pi f1 t - p1) - m(f2) sin(2 pi f2 t - p2)) (IEC 60268-16:2011,
  Annex B, Table B.1 frequencies), plus independent noise of the same band at the SNR.
* The STI of an MTF written out from IEC 60268-16:2011, Annex A (male weights, Table A.1).
* The minimum STIPA measurement time of IEC 60268-16 (15 s; 15-25 s recommended).
* scipy.stats.binom for the coverage allowance of a finite number of recordings.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.signal import resample_poly
from scipy.stats import binom

from envpredict import direct
from envpredict.direct import stipa_from_recording
from envpredict.signals import stipa_signal

FS = 24000
# IEC 60268-16:2011, Annex B, Table B.1
STIPA_F = np.array([[1.6, 8.0], [1.0, 5.0], [0.63, 3.15], [2.0, 10.0], [1.25, 6.25], [0.8, 4.0], [2.5, 12.5]])
BANDS_HZ = np.array([125, 250, 500, 1000, 2000, 4000, 8000], dtype=float)
# male speech spectrum of the STIPA signal, dB re the A-weighted level (IEC 60268-16:2011, Table A.2)
LEVELS_DB = np.array([2.9, 2.9, -0.8, -6.8, -12.8, -18.8, -24.8])
# IEC 60268-16:2011, Table A.1: male weights and redundancy factors
ALPHA = np.array([0.085, 0.127, 0.230, 0.233, 0.309, 0.224, 0.173])
BETA = np.array([0.085, 0.078, 0.065, 0.011, 0.047, 0.095])


def analytic_mtf(T: float | None, snr_db: float | None) -> np.ndarray:
    m = np.ones_like(STIPA_F) if not T else (1.0 + (2 * np.pi * STIPA_F * T / 13.8) ** 2) ** -0.5
    return m if snr_db is None else m / (1.0 + 10 ** (-snr_db / 10))


def iec_sti(mtf: np.ndarray) -> float:
    """STI of a (7, F) MTF without auditory corrections, IEC 60268-16:2011 Annex A (written out)."""
    m = np.clip(mtf, 1e-12, 1 - 1e-12)
    ti = (np.clip(10 * np.log10(m / (1 - m)), -15, 15) + 15) / 30
    mti = ti.mean(axis=1)
    return float(ALPHA @ mti - BETA @ np.sqrt(mti[:-1] * mti[1:]))


def band_noise(rng: np.random.Generator, n: int) -> np.ndarray:
    """(7, n) Gaussian noises, each flat over half an octave around its band centre, unit mean square."""
    from scipy.fft import irfft, next_fast_len

    nf = next_fast_len(n, real=True)
    f = np.fft.rfftfreq(nf, 1 / FS)
    out = np.zeros((7, n))
    for k, fc in enumerate(BANDS_HZ):
        sel = (f >= fc * 2 ** -0.25) & (f <= fc * 2 ** 0.25)
        z = np.zeros(f.size, dtype=complex)
        z[sel] = rng.standard_normal(sel.sum()) + 1j * rng.standard_normal(sel.sum())
        x = irfft(z, nf)[:n]
        out[k] = x / np.sqrt(np.mean(x * x))
    return out


def received(seconds: float, T: float | None, snr_db: float | None, seed: int) -> np.ndarray:
    """A recording of STIPA through a channel of exactly the analytic MTF (see the module docstring),
    starting at a random point of the modulation cycle."""
    rng = np.random.default_rng(seed)
    n = int(round(seconds * FS))
    t = np.arange(n) / FS
    m = analytic_mtf(T, None)
    carriers = band_noise(rng, n)
    noise = band_noise(rng, n) if snr_db is not None else None
    phase = rng.uniform(0, 2 * np.pi, STIPA_F.shape)
    y = np.zeros(n)
    for k in range(7):
        (f1, f2), (p1, p2) = STIPA_F[k], phase[k]
        i = 1 + 0.55 * (m[k, 0] * np.sin(2 * np.pi * f1 * t - p1) - m[k, 1] * np.sin(2 * np.pi * f2 * t - p2))
        band = carriers[k] * np.sqrt(np.clip(i, 0, None))
        if noise is not None:
            band = band + noise[k] * 10 ** (-snr_db / 20)
        y += 10 ** (LEVELS_DB[k] / 20) * band
    return 0.5 * y / np.abs(y).max()


def received_per_band_snr(seconds: float, snr_db: np.ndarray, seed: int) -> np.ndarray:
    """STIPA through a channel that adds noise at a different SNR in each band (no reverberation)."""
    rng = np.random.default_rng(seed)
    n = int(round(seconds * FS))
    t = np.arange(n) / FS
    carriers, noise = band_noise(rng, n), band_noise(rng, n)
    phase = rng.uniform(0, 2 * np.pi, STIPA_F.shape)
    y = np.zeros(n)
    for k in range(7):
        (f1, f2), (p1, p2) = STIPA_F[k], phase[k]
        i = 1 + 0.55 * (np.sin(2 * np.pi * f1 * t - p1) - np.sin(2 * np.pi * f2 * t - p2))
        band = carriers[k] * np.sqrt(np.clip(i, 0, None)) + noise[k] * 10 ** (-snr_db[k] / 20)
        y += 10 ** (LEVELS_DB[k] / 20) * band
    return 0.5 * y / np.abs(y).max()


# --- short recordings: the standard's minimum and the bias below it --------------------


def test_short_recordings_read_low_by_the_stated_bias():
    # IEC 60268-16 asks for at least 15 s of STIPA (15-25 s recommended). Shorter recordings
    # of an undistorted channel (exact MTF 1, STI 1) read low: the envelope noise of the
    # carrier scatters every depth, and an MTF can only lose by it (above 0.97 the TI is
    # already 1). Measured here (6 start points and carriers per length): the mean offset at
    # 10, 12 and 14 s is the figure SHORT_RECORDING_BIAS quotes in the caution (within 0.01),
    # each recording carries the caution, and a 16 s recording does not.
    offsets = []
    for L in (10.0, 12.0, 14.0):
        for s in range(6):
            r = stipa_from_recording(received(L, None, None, 7000 + 10 * int(L) + s), FS)
            offsets.append(r.sti.sti - 1.0)
            assert any("reads low" in c and "15 s" in c for c in r.cautions), r.cautions
    assert abs(np.mean(offsets) + direct.SHORT_RECORDING_BIAS) <= 0.01, np.mean(offsets)
    r = stipa_from_recording(received(16.0, None, None, 7999), FS)
    assert not any("reads low" in c for c in r.cautions)


# --- honest uncertainty -----------------------------------------------------------------


COVERAGE_CHANNELS = [(None, None), (0.5, None), (1.0, 6.0), (None, 0.0), (0.3, None), (2.0, 3.0)]


def test_stated_uncertainty_covers_the_error_of_short_recordings():
    # 30 recordings of 10-30 s (random lengths and start points, independent carriers) through
    # six channels of exactly known MTF (ideal, decays T = 0.3-2 s, noise at 0-6 dB). The error
    # is the STI minus the analytic STI (IEC formulas written out above). Intended coverage:
    # about 95 % within 2 stated standard uncertainties. Allowance for 30 recordings: at most
    # 5 outside (scipy.stats.binom: P(more than 5 of 30 | 5 %) < 1 %). The uncertainty must not
    # be inflated either: at least a fifth outside 1 u (a normal error: 32 %) and the RMS of
    # error / u between 0.6 and 1.5. This set: 3 outside 2 u, 57 % within 1 u, RMS 1.16 (72 other
    # recordings: 3 outside 2 u). With the window spread alone, as stated before: 13 of these 30
    # outside 2 u, RMS 2.6 (the issue: 12 s read 0.981 +- 0.0005).
    rng = np.random.default_rng(12)
    z = []
    for i in range(30):
        T, snr = COVERAGE_CHANNELS[i % len(COVERAGE_CHANNELS)]
        L = float(rng.uniform(10.0, 30.0))
        r = stipa_from_recording(received(L, T, snr, 3000 + i), FS)
        z.append((r.sti.sti - iec_sti(analytic_mtf(T, snr))) / r.uncertainty)
    z = np.abs(np.array(z))
    assert binom.sf(5, 30, 0.05) < 0.01
    assert np.sum(z > 2) <= 5, np.round(z, 2)
    assert np.mean(z > 1) >= 0.2, np.round(z, 2)
    assert 0.6 <= np.sqrt(np.mean(z ** 2)) <= 1.5, np.round(z, 2)


# --- clock-rate mismatch ------------------------------------------------------------------


@pytest.fixture(scope="module")
def stipa25():
    x = stipa_signal(30, FS, seed=21)[: 25 * FS]
    return x, stipa_from_recording(x, FS)


@pytest.mark.parametrize("up, down", [(500, 501), (501, 500), (2000, 2001)])
def test_clock_mismatch_is_estimated_and_corrected(stipa25, up, down):
    # The player's clock 2000 or 500 ppm off the recorder's: resampling by down/up puts every
    # modulation frequency at F * down / up (the true mismatch). Before the estimate the
    # 2000 ppm case read 0.848 against 0.977 and said nothing. Now: the estimate is within
    # 100 ppm (about 2 x its stated standard uncertainty of 55 ppm at 25 s; the actual errors
    # were 0.2-5 ppm) of the truth, the
    # corrected STI within 0.01 of the same signal without the mismatch, and a mismatch
    # above CLOCK_CAUTION_PPM carries the caution.
    x, ref = stipa25
    true_ppm = (down / up - 1) * 1e6
    r = stipa_from_recording(resample_poly(x, up, down), FS)
    d = r.to_dict()
    assert abs(r.sti.sti - ref.sti.sti) <= 0.01, (r.sti.sti, ref.sti.sti)
    assert abs(d["clock_offset_ppm"] - true_ppm) <= 100, (d["clock_offset_ppm"], true_ppm)
    assert d["recordings"][0]["clock_corrected"] is True
    clock_caution = any("clocks differ" in c for c in r.cautions)
    assert clock_caution == (abs(true_ppm) > direct.CLOCK_CAUTION_PPM)


def test_no_clock_mismatch_changes_nothing(stipa25):
    # the same clock: the estimate is near 0 and no correction is applied (the numbers are
    # those of the nominal frequencies)
    _, ref = stipa25
    d = ref.to_dict()
    assert abs(d["clock_offset_ppm"]) <= 100
    assert d["recordings"][0]["clock_corrected"] is False
    assert not any("clock" in c for c in ref.cautions)


def test_clock_offset_of_a_noisy_envelope():
    # modulation.clock_offset on synthetic envelopes: cosines at F (1 + eps) in noise, eps
    # from -5000 to +5000 ppm: the estimate is within 4 stated standard uncertainties and the
    # stated uncertainty is not below a tenth of the actual error's scale (not overconfident)
    from envpredict.modulation import clock_offset

    rng = np.random.default_rng(4)
    fs_env, n = 200.0, 200 * 20
    t = np.arange(n) / fs_env
    freqs = STIPA_F
    errs = []
    for ppm in (-5000, -800, 0, 300, 2000, 5000):
        e = np.array([1 + 0.4 * np.cos(2 * np.pi * f1 * (1 + ppm * 1e-6) * t)
                      + 0.4 * np.cos(2 * np.pi * f2 * (1 + ppm * 1e-6) * t + 1.0) for f1, f2 in freqs])
        e = e + 0.3 * rng.standard_normal(e.shape)
        c = clock_offset(e, fs_env, freqs)
        assert abs(c.ppm - ppm) <= 4 * c.sigma_ppm, (ppm, c)
        errs.append(c.ppm - ppm)
    assert np.sqrt(np.mean(np.square(errs))) <= 50


# --- the envelope-noise-floor correction is pinned ----------------------------------------


def test_noise_floor_correction_keeps_low_band_depths_unbiased():
    # Noise at -10 dB in the three lowest bands (exact MTF 1 / (1 + 10) = 0.0909 there), 0 dB
    # above, 10 s recordings. The carrier's envelope noise adds a random phasor of power f^2
    # to each measured depth (f: the band's RMS noise depth, 0.12-0.21 in MTF units here, more
    # than the true MTF), so without the correction MTF^2 - m^2 averages about f^2 (z = 1 in
    # units of f^2) and the STI reads high. With it the mean z over the 3 bands x 2 frequencies
    # x 12 recordings is 0.60 (not 0: depths below the floor are set to 0, not negative) and
    # the STI's mean error -0.006. Measured by deleting the correction (noise_corrected_depth
    # returning the raw depth): z 1.38, STI error +0.0095; the limits sit between.
    snr = np.array([-10.0, -10.0, -10.0, 0.0, 0.0, 0.0, 0.0])
    m = np.ones((7, 2)) / (1 + 10 ** (-snr[:, None] / 10))
    want = iec_sti(m)
    z, err = [], []
    for s in range(12):
        r = stipa_from_recording(received_per_band_snr(10.0, snr, 500 + s), FS)
        f = np.asarray(r.noise_floor) / 0.55  # 0.55: the STIPA depth, IEC 60268-16 Annex B
        z.append(((r.sti.mtf_measured ** 2 - m ** 2) / f[:, None] ** 2)[:3])
        err.append(r.sti.sti - want)
    assert np.mean(z) < 1.0, np.mean(z)
    assert np.mean(err) <= 0.003, np.mean(err)


# --- the offset of reverberant channels -----------------------------------------------------


def test_short_decay_reads_the_analytic_sti_up_to_the_expected_offset():
    # A channel of exactly the analytic MTF of an exponential decay, T = 0.3 s (Houtgast &
    # Steeneken; the case where the direct method read 0.015-0.021 below the Schroeder STI of
    # the same noise impulse response), 30 s recordings, 8 carriers and start points. Against
    # the analytic STI the mean error is -0.0052 (10 carriers: standard error 0.0025) and the
    # expected offset the result states (envelope noise through the TI's nonlinearity) -0.0051: what is left
    # after it must be within 0.008 (3 standard errors). The rest of the gap to the Schroeder
    # STI is not an error of the direct method: see the report of issue 12 (crosstalk of the
    # 4 kHz carrier into the 8 kHz band, about -0.004; Schroeder's MTF of one noise decay
    # reading +0.003 above the formula; the scatter of single recordings, 0.007).
    T = 0.3
    want = iec_sti(analytic_mtf(T, None))
    err, offset = [], []
    for s in range(8):
        r = stipa_from_recording(received(30.0, T, None, 4000 + s), FS)
        err.append(r.sti.sti - want)
        offset.append(r.noise_bias)
    assert -0.01 < np.mean(offset) < 0
    assert abs(np.mean(err) - np.mean(offset)) <= 0.008, (np.mean(err), np.mean(offset))


def test_full_sti_set_with_a_clock_mismatch():
    # the 14 full-STI recordings made with a player 2000 ppm fast: one mismatch pooled from the
    # set is found within 100 ppm, corrected in every recording whose depth it would cost, and
    # the full STI reads within 0.01 of the same set without the mismatch (before: no estimate)
    from envpredict.direct import full_sti_from_recordings
    from envpredict.signals import full_sti_signals

    recs = [(x, FS, spec.filename) for spec, x in full_sti_signals(FS, seed=5)]
    ref = full_sti_from_recordings(recs)
    r = full_sti_from_recordings([(resample_poly(x, 500, 501), fs, name) for x, fs, name in recs])
    d = r.to_dict()
    assert abs(r.sti.sti - ref.sti.sti) <= 0.01, (r.sti.sti, ref.sti.sti)
    assert abs(d["clock_offset_ppm"] - (501 / 500 - 1) * 1e6) <= 100, d["clock_offset_ppm"]
    assert sum(x["clock_corrected"] for x in d["recordings"]) >= 7
    assert any("clocks differ" in c for c in r.cautions)
    assert abs(ref.to_dict()["clock_offset_ppm"]) <= 100
    assert not any(x["clock_corrected"] for x in ref.to_dict()["recordings"])
