"""STI from an MTF: IEC 60268-16:2011 Annex A formulas."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from envpredict import standards as std
from envpredict.exceptions import InputError
from envpredict.sti import (combine_bands, masking_factor, qualification_band, sti_from_mtf,
                            subjective_rating, transmission_index)

# IEC 60268-16:2011 Table A.1, male speech (written here from the table, not taken from the
# package): octave-band weights alpha_k (125 Hz ... 8 kHz) and redundancy weights beta_k.
ALPHA_MALE_TABLE_A1 = (0.085, 0.127, 0.230, 0.233, 0.309, 0.224, 0.173)
BETA_MALE_TABLE_A1 = (0.085, 0.078, 0.065, 0.011, 0.047, 0.095)


@pytest.mark.parametrize("snr", [-20, -15, -9, -3, 0, 3, 9, 15, 25])
def test_ti_from_snr(snr):
    # IEC 60268-16:2011 A.2.4-A.2.5: m = 1/(1+10^(-SNR/10)) gives SNR_eff = SNR, TI = (SNR+15)/30,
    # limited to [0, 1]
    m = 1.0 / (1.0 + 10 ** (-snr / 10))
    _, ti = transmission_index(np.array([m]))
    assert ti[0] == pytest.approx(min(1, max(0, (snr + 15) / 30)), abs=1e-9)


def test_uniform_mti_gives_sti_equal_mti():
    # sum(alpha) - sum(beta) = 1 (Table A.1): equal MTI in all bands gives STI = MTI
    for talker in ("male", "female"):
        assert combine_bands(np.full(7, 0.37), talker) == pytest.approx(0.37, abs=1e-9)


def test_redundancy_correction_by_hand():
    # IEC 60268-16:2011 A.2.6, male weights; hand calculation
    mti = np.array([0.2, 0.4, 0.6, 0.8, 1.0, 0.5, 0.3])
    a, b = ALPHA_MALE_TABLE_A1, BETA_MALE_TABLE_A1
    hand = sum(ai * mi for ai, mi in zip(a, mti)) - sum(b[k] * (mti[k] * mti[k + 1]) ** 0.5 for k in range(6))
    assert combine_bands(mti, "male") == pytest.approx(hand, abs=1e-12)


@pytest.mark.parametrize(
    "sti,label",
    [(0.80, "A+"), (0.76, "A+"), (0.7599, "A"), (0.74, "A"), (0.70, "B"), (0.66, "C"), (0.62, "D"),
     (0.58, "E"), (0.54, "F"), (0.50, "G"), (0.48, "G"), (0.4799, "H"), (0.42, "I"), (0.38, "J"),
     (0.36, "J"), (0.3599, "U"), (0.0, "U")],
)
def test_qualification_band_edges(sti, label):
    # IEC 60268-16:2011 Table F.1
    assert qualification_band(sti) == label


# IEC 60268-16:2011 Annex F, Table F.1 (written here from the table): lower STI edge of each
# qualification band; a value at or above the edge and below the next one gets the label.
TABLE_F1_LOWER_EDGES = [("A+", 0.76), ("A", 0.72), ("B", 0.68), ("C", 0.64), ("D", 0.60), ("E", 0.56),
                        ("F", 0.52), ("G", 0.48), ("H", 0.44), ("I", 0.40), ("J", 0.36)]


def assert_edge_pinned(classify, edges, k, lowest):
    """Edge ``k`` of a table of (label, lower edge), highest first, pinned from both sides:
    the edge and 0.0009 above it give its label, 0.0009 below gives the next lower label
    (``lowest`` below the last edge). Moving an edge by 0.001 fails."""
    label, edge = edges[k]
    below = edges[k + 1][0] if k + 1 < len(edges) else lowest
    assert classify(edge) == label
    assert classify(edge + 0.0009) == label
    assert classify(edge - 0.0009) == below


@pytest.mark.parametrize("k", range(len(TABLE_F1_LOWER_EDGES)))
def test_every_qualification_edge(k):
    # each edge of Table F.1 pinned from both sides: moving any edge by 0.001 fails here
    assert_edge_pinned(qualification_band, TABLE_F1_LOWER_EDGES, k, "U")


# The five-step subjective scale for the STI: bad < 0.30 <= poor < 0.45 <= fair < 0.60 <= good
# < 0.75 <= excellent. Source: IEC 60268-16 (2nd/3rd editions, 1998/2003, the table relating
# STI to the subjective scale; the 2011 edition keeps it beside the qualification bands of
# Annex F) and ISO 9921:2003 (edition and clause from memory).
SUBJECTIVE_EDGES = [("excellent", 0.75), ("good", 0.60), ("fair", 0.45), ("poor", 0.30)]


@pytest.mark.parametrize("k", range(len(SUBJECTIVE_EDGES)))
def test_subjective_scale_edges(k):
    assert_edge_pinned(subjective_rating, SUBJECTIVE_EDGES, k, "bad")


@pytest.mark.parametrize("sti,label", [(0.0, "bad"), (0.15, "bad"), (0.375, "poor"), (0.525, "fair"),
                                       (0.675, "good"), (0.9, "excellent"), (1.0, "excellent")])
def test_subjective_scale_inside_the_steps(sti, label):
    # mid-points of the five steps (same source as above)
    assert subjective_rating(sti) == label


def test_masking_factor_values():
    # IEC 60268-16:2011 Table A.3 evaluated by hand: L=50 -> -40 dB; L=65 -> 1.8*65-146.9 = -29.9 dB;
    # L=80 -> -19.8 dB; L=110 -> -10 dB
    amf = masking_factor(np.array([50.0, 65.0, 80.0, 110.0]))
    assert 10 * np.log10(amf) == pytest.approx([-40.0, -29.9, -19.8, -10.0], abs=1e-9)


def test_noise_correction_textbook():
    # m' = m / (1 + I_n/I_s) (Houtgast & Steeneken 1973) with auditory effects off
    speech = 60 + np.array(std.SPEECH_SPECTRUM_MALE_DB)
    noise = speech - 6.0
    res = sti_from_mtf(np.ones((7, 14)), noise_db=noise, speech_level_dba=60, auditory=False)
    assert res.sti == pytest.approx((6 + 15) / 30, abs=1e-6)
    assert np.allclose(res.mtf, 1 / (1 + 10 ** (-0.6)))


def test_perfect_channel_normal_voice_is_one():
    # At 60 dB(A) the masking (Table A.3) and threshold (Table A.4) terms stay more than 15 dB
    # below the speech in every band, so an ideal channel gives STI = 1 (hand calculation).
    assert sti_from_mtf(np.ones((7, 14)), speech_level_dba=60).sti == pytest.approx(1.0, abs=1e-9)


def test_female_ignores_125_hz():
    # Table A.1: no 125 Hz band for female speech
    m = np.ones((7, 14))
    m[0] = 0.5  # TI = 0.5 in the 125 Hz band
    assert sti_from_mtf(m, talker="female", auditory=False).sti == pytest.approx(1.0, abs=1e-9)
    # male, by hand: 1 - 0.085*(1 - 0.5) - 0.085*(sqrt(0.5) - 1)
    male = 1 - 0.085 * 0.5 - 0.085 * (0.5 ** 0.5 - 1)
    assert sti_from_mtf(m, talker="male", auditory=False).sti == pytest.approx(male, abs=1e-9)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(0, 1), min_size=7, max_size=7), st.floats(0.0, 0.5))
def test_more_modulation_loss_never_raises_sti(row, loss):
    # monotonicity of Annex A: lowering any m cannot raise the index (property)
    m = np.tile(np.array(row)[:, None], (1, 14))
    a = sti_from_mtf(m, auditory=False).sti
    b = sti_from_mtf(m * (1 - loss), auditory=False).sti
    assert 0.0 <= b <= a + 1e-12 <= 1.0 + 1e-12


@pytest.mark.parametrize("bad", ["1,2,3", "a,b,c,d,e,f,g", "40,40,40,40,40,40,400", "", "nan,1,1,1,1,1,1"])
def test_bad_noise_levels(bad):
    with pytest.raises(InputError):
        sti_from_mtf(np.ones((7, 14)), noise_db=bad)


@pytest.mark.parametrize("level", [5, 150, float("nan")])
def test_bad_speech_level(level):
    with pytest.raises(InputError):
        sti_from_mtf(np.ones((7, 14)), speech_level_dba=level)


def test_bad_talker_and_shape():
    with pytest.raises(InputError):
        sti_from_mtf(np.ones((7, 14)), talker="child")
    with pytest.raises(InputError):
        sti_from_mtf(np.ones((6, 14)))


def test_measured_band_levels_equal_standard_spectrum():
    # giving the standard spectrum (Table A.2) as measured band levels changes nothing
    m = np.full((7, 14), 0.7)
    a = sti_from_mtf(m, speech_level_dba=75, noise_db=[50] * 7)
    b = sti_from_mtf(m, speech_db=75 + np.array(std.SPEECH_SPECTRUM_MALE_DB), noise_db=[50] * 7)
    assert a.sti == pytest.approx(b.sti, abs=1e-12)
    # louder measured bands are masked more strongly from below (Table A.3 rises with level)
    c = sti_from_mtf(np.ones((7, 14)), speech_db=[110.0] * 7)
    assert c.sti < 1.0


@pytest.mark.parametrize("value", [float("nan"), float("inf"), -0.01, 1.5, "abc", None])
def test_rating_an_impossible_sti_is_refused(value):
    # IEC 60268-16:2011 Table F.1 and the five-step scale rate values in 0..1 only: a NaN
    # (a failed computation) must not become band U, nor 1.5 band A+
    from envpredict.sti import qualification_band, subjective_rating

    with pytest.raises(InputError):
        qualification_band(value)
    with pytest.raises(InputError):
        subjective_rating(value)


@pytest.mark.parametrize("value, shown", [(0.498, "0.498"), (0.4996, "0.4996"), (0.4949, "0.49"),
                                          (0.5, "0.50"), (0.5004, "0.50"), (0.62, "0.62"), (0.49999999, "0.499999")])
def test_a_value_near_the_requirement_is_never_rounded_across_it(value, shown):
    # the verdict against 0.50 is taken from the unrounded value; the number shown beside it
    # must be on the same side (a shown "0.50" with "below 0.50" contradicts itself). The
    # last case would round up even at 6 decimals and is cut instead.
    from envpredict.sti import format_index

    assert format_index(value, 0.5) == shown
    assert (float(shown) >= 0.5) == (value >= 0.5)


def test_the_caution_and_the_result_agree_at_the_threshold():
    # IEC 60268-16 Annex A with an MTF chosen so the STI lands just below 0.50: the
    # caution names the value with the decimals that keep it below, and so does the JSON
    from envpredict.cautions import below_target

    lo, hi = 0.0, 1.0
    for _ in range(60):  # bisect a uniform MTF to an STI of 0.4996 (textbook form)
        mid = (lo + hi) / 2
        if sti_from_mtf(np.full((7, 14), mid), auditory=False).sti < 0.4996:
            lo = mid
        else:
            hi = mid
    r = sti_from_mtf(np.full((7, 14), lo), auditory=False)
    assert 0.4995 < r.sti < 0.5
    text = below_target(r.sti)
    assert text is not None and text.startswith("STI 0.4996 is below 0.50")
    assert r.to_dict()["sti"] < 0.5
