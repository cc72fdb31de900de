"""Internal consistency of the standard tables (IEC 60268-16:2011, IEC 61672-1, ISO 3382-1)."""

import numpy as np
import pytest

from envpredict import standards as std


@pytest.mark.parametrize("talker", ["male", "female"])
def test_weights_sum_to_one(talker):
    # IEC 60268-16:2011 A.2.6: the weights are normalised so that sum(alpha) - sum(beta) = 1,
    # i.e. an MTI of 1 in every band gives STI = 1.
    alpha, beta = std.WEIGHTS[talker]
    assert len(alpha) == 7 and len(beta) == 6
    assert sum(alpha) - sum(beta) == pytest.approx(1.0, abs=1e-9)


OCTAVES_HZ = 1000.0 * 2.0 ** np.arange(-3, 4)  # 125 Hz ... 8 kHz (exact base-2 centres)


def a_weighting_db(f):
    """A-weighting from its analytic definition, IEC 61672-1:2013 eqs. (E.1)/(E.6):
    R_A(f) = f4**2 f**4 / ((f**2 + f1**2) sqrt((f**2 + f2**2)(f**2 + f3**2)) (f**2 + f4**2)),
    A(f) = 20 log10 R_A(f) - A1000, with f1 = 20.60, f2 = 107.7, f3 = 737.9, f4 = 12194 Hz and
    A1000 = -2.000 dB (the normalisation at 1 kHz)."""
    f1, f2, f3, f4 = 20.598997, 107.65265, 737.86223, 12194.217
    f = np.asarray(f, dtype=float)
    ra = f4 ** 2 * f ** 4 / ((f ** 2 + f1 ** 2) * np.sqrt((f ** 2 + f2 ** 2) * (f ** 2 + f3 ** 2)) * (f ** 2 + f4 ** 2))
    return 20 * np.log10(ra) + 2.0


def test_a_weighting_table_follows_the_formula():
    # IEC 61672-1:2013 Table 3 lists the weighting at the nominal centres rounded to 0.1 dB;
    # the analytic formula at the exact base-2 centres agrees with it within 0.1 dB
    np.testing.assert_allclose(std.A_WEIGHTING_OCTAVE_DB, a_weighting_db(OCTAVES_HZ), atol=0.1)


def test_male_speech_spectrum_is_zero_dba():
    # IEC 60268-16:2011 Table A.2 gives band levels relative to the A-weighted level, so their
    # A-weighted sum (A-weighting from the IEC 61672-1 formula above) is 0 dB(A) within rounding.
    lv = np.array(std.SPEECH_SPECTRUM_MALE_DB) + a_weighting_db(OCTAVES_HZ)
    assert 10 * np.log10(np.sum(10 ** (lv / 10))) == pytest.approx(0.0, abs=0.1)


def test_female_speech_spectrum_is_near_zero_dba():
    lv = np.array([v for v in std.SPEECH_SPECTRUM_FEMALE_DB if v is not None])
    aw = a_weighting_db(OCTAVES_HZ[1:])
    assert 10 * np.log10(np.sum(10 ** ((lv + aw) / 10))) == pytest.approx(0.0, abs=0.2)


@pytest.mark.parametrize("talker,alpha,beta", [
    # IEC 60268-16:2011 Table A.1 (written here from the table; female without the 125 Hz band)
    ("male", (0.085, 0.127, 0.230, 0.233, 0.309, 0.224, 0.173), (0.085, 0.078, 0.065, 0.011, 0.047, 0.095)),
    ("female", (0.0, 0.117, 0.223, 0.216, 0.328, 0.250, 0.194), (0.0, 0.099, 0.066, 0.062, 0.025, 0.076)),
])
def test_weights_are_table_a1(talker, alpha, beta):
    np.testing.assert_array_equal(std.WEIGHTS[talker][0], alpha)
    np.testing.assert_array_equal(std.WEIGHTS[talker][1], beta)


def test_speech_spectra_are_table_a2():
    # IEC 60268-16:2011 Table A.2, octave levels re the A-weighted level, dB (written from the table)
    assert tuple(std.SPEECH_SPECTRUM_MALE_DB) == (2.9, 2.9, -0.8, -6.8, -12.8, -18.8, -24.8)
    assert tuple(std.SPEECH_SPECTRUM_FEMALE_DB) == (None, 5.3, -1.9, -9.1, -15.8, -16.7, -18.0)


def test_subjective_scale_table():
    # the five-step scale: bad < 0.30 <= poor < 0.45 <= fair < 0.60 <= good < 0.75 <= excellent
    # (IEC 60268-16, 1998/2003 editions, and ISO 9921:2003; from memory), highest first
    assert tuple(std.SUBJECTIVE_SCALE) == (("excellent", 0.75), ("good", 0.60), ("fair", 0.45), ("poor", 0.30),
                                           ("bad", 0.0))


def test_masking_pieces_are_continuous():
    # IEC 60268-16:2011 Table A.3: amdB is continuous in the level of the masking band
    pieces = std.MASKING_PIECES
    for (b, s1, o1), (_, s2, o2) in zip(pieces[:-1], pieces[1:]):
        assert s1 * b + o1 == pytest.approx(s2 * b + o2, abs=0.25)


def test_modulation_frequencies_are_third_octaves():
    # IEC 60268-16:2011 Table 1: 0.63 ... 12.5 Hz in one-third-octave steps (nominal values)
    f = np.array(std.MODULATION_FREQUENCIES_HZ)
    assert f.size == 14
    exact = 0.63 * 2 ** (np.arange(14) / 3)
    assert np.all(np.abs(f / exact - 1) < 0.03)


def test_stipa_frequencies_are_a_subset_of_full_sti():
    # IEC 60268-16:2011 Annex B: each STIPA frequency is one of the 14 (6.25 is nominal 6.3)
    full = np.array(std.MODULATION_FREQUENCIES_HZ)
    used = sorted(f for pair in std.STIPA_MODULATION_HZ for f in pair)
    assert len(used) == 14 and len(set(used)) == 14
    assert all(np.min(np.abs(full - f)) < 0.06 for f in used)


def test_qualification_bands_are_004_wide():
    # IEC 60268-16:2011 Table F.1: bands J..A are 0.04 wide from 0.36 to 0.76
    edges = [lo for _, lo, _ in std.QUALIFICATION_BANDS]
    assert edges[0] == 0.76 and edges[-2] == 0.36 and edges[-1] == 0.0
    assert np.allclose(-np.diff(edges[:-1]), 0.04)
    for _, lo, nominal in std.QUALIFICATION_BANDS[1:-1]:
        assert nominal == pytest.approx(lo + 0.02)


def test_stoi_constants_are_the_published_ones():
    # Taal et al. 2011 (IEEE TASLP 19(7)) Sec. II and Jensen & Taal 2016 Sec. III, written here
    # from the papers: 10 kHz, 256-sample Hann frames with 50 % overlap, 512-point DFT, 15
    # one-third-octave bands from 150 Hz, 30-frame (384 ms) segments, beta = -15 dB, frames
    # more than 40 dB below the loudest clean frame removed
    assert (std.STOI_FS, std.STOI_FRAME_LEN, std.STOI_HOP, std.STOI_NFFT) == (10000, 256, 128, 512)
    assert (std.STOI_NUM_BANDS, std.STOI_MIN_FREQ_HZ, std.STOI_SEGMENT_FRAMES) == (15, 150.0, 30)
    assert (std.STOI_BETA_DB, std.STOI_DYNAMIC_RANGE_DB) == (-15.0, 40.0)
