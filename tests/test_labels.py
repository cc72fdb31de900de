"""Band labels a person reads (envpredict.labels) against ISO 266's preferred frequencies."""

from __future__ import annotations

import pytest

from envpredict.labels import band_label, nominal_frequency

#: ISO 266:1997 Table 1, the one-third-octave preferred frequencies 160 Hz ... 4 kHz (R10),
#: typed here from the standard's table, not taken from the module.
ISO_266 = [160, 200, 250, 315, 400, 500, 630, 800, 1000, 1250, 1600, 2000, 2500, 3150, 4000]


def test_stoi_band_centres_get_the_nominal_labels():
    # STOI's 15 bands are centred at 150 * 2**(k/3) Hz (Taal et al. 2011): each is named
    # by the nearest preferred frequency, one each, in order
    centres = [150 * 2 ** (k / 3) for k in range(15)]
    assert [nominal_frequency(c) for c in centres] == ISO_266


@pytest.mark.parametrize("fc, label", [(125, "125 Hz"), (238.1, "250 Hz"), (1511.9, "1.6 kHz"),
                                       (3024.0, "3.15 kHz"), (8000, "8 kHz"), (31.6, "31.5 Hz")])
def test_band_labels(fc, label):
    assert band_label(fc) == label


def test_pair_table_uses_the_nominal_labels(capsys):
    from cli_for_tests import run_cli

    from envpredict._data import demo_dir

    d = demo_dir()
    code, out, _ = run_cli(["pair", d / "announcement_clean.wav", d / "announcement_in_hall.wav"], capsys)
    firsts = [line.split()[0] for line in out.splitlines() if line.split()]
    assert all(str(f) in firsts for f in (160, 200, 250, 315, "1.6k", "3.15k", "4k"))
    assert "238.1" not in out and "1511.9" not in out
