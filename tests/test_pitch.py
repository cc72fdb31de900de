"""Tests of envpredict.pitch (YIN, de Cheveigne & Kawahara 2002) not covered by the
F0 accuracy tests in test_timescales.py: the search-range refusals and the module split."""

from __future__ import annotations

import numpy as np
import pytest

from envpredict.exceptions import InputError
from envpredict.pitch import check_f0_range, yin_f0


@pytest.mark.parametrize("lo,hi,what", [
    (300.0, 200.0, "empty or negative"),
    (0.0, 200.0, "empty or negative"),
    (10.0, 500.0, "outside 20-2000 Hz"),
    (50.0, 4000.0, "outside 20-2000 Hz"),
])
def test_f0_range_refusals(lo, hi, what):
    with pytest.raises(InputError, match=what):
        check_f0_range(lo, hi)
    with pytest.raises(InputError, match=what):
        yin_f0(np.ones(16000), 16000, f0_min_hz=lo, f0_max_hz=hi)


def test_f0_of_a_pure_tone():
    # a sinusoid of 200 Hz has period 5 ms (analytic); YIN's parabolic interpolation
    # resolves it to well below 1 % at 16 kHz
    fs = 16000
    t = np.arange(fs) / fs
    tr = yin_f0(0.5 * np.sin(2 * np.pi * 200.0 * t), fs)
    assert np.nanmedian(tr.f0_hz) == pytest.approx(200.0, rel=0.005)
    assert tr.voiced.mean() > 0.9


def test_timescales_uses_the_one_yin():
    import envpredict.pitch
    import envpredict.timescales

    assert envpredict.timescales.yin_f0 is envpredict.pitch.yin_f0
    assert envpredict.timescales._yin_frames is envpredict.pitch._yin_frames
