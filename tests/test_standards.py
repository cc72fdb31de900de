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


def test_male_speech_spectrum_is_zero_dba():
    # IEC 60268-16:2011 Table A.2 gives band levels relative to the A-weighted level, so their
    # A-weighted sum (A-weighting from IEC 61672-1) must be 0 dB(A) within rounding.
    lv = np.array(std.SPEECH_SPECTRUM_MALE_DB) + np.array(std.A_WEIGHTING_OCTAVE_DB)
    assert 10 * np.log10(np.sum(10 ** (lv / 10))) == pytest.approx(0.0, abs=0.1)


def test_female_speech_spectrum_is_near_zero_dba():
    lv = np.array([v for v in std.SPEECH_SPECTRUM_FEMALE_DB if v is not None])
    aw = np.array(std.A_WEIGHTING_OCTAVE_DB[1:])
    assert 10 * np.log10(np.sum(10 ** ((lv + aw) / 10))) == pytest.approx(0.0, abs=0.2)


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
