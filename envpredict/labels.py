"""How quantities are shown to a person: band labels, names, units and explanations.

The JSON keys are the machine names (the result vocabulary of :mod:`envpredict.results`);
this module holds what a person reads in the terminal, the reports and the figures, so
that the three say the same thing the same way.

Band labels are the nominal frequencies of the bands (ISO 266:1997 preferred
frequencies, the R10 series for one-third octaves and every third one of it for
octaves; IEC 61260-1:2014 Annex E names bands by them): the band centred on 238.1 Hz
is "250 Hz", on 1511.9 Hz "1.6 kHz", whatever exact centre the method computes with.
"""

from __future__ import annotations

import math

from . import checks
from .exceptions import InputError

#: ISO 266 preferred (nominal) one-third-octave mid-band frequencies, Hz, 10 Hz to 20 kHz.
NOMINAL_THIRD_OCTAVE_HZ: tuple[float, ...] = (
    10, 12.5, 16, 20, 25, 31.5, 40, 50, 63, 80, 100, 125, 160, 200, 250, 315, 400, 500, 630, 800,
    1000, 1250, 1600, 2000, 2500, 3150, 4000, 5000, 6300, 8000, 10000, 12500, 16000, 20000,
)


def nominal_frequency(fc: float) -> float:
    """The nominal (ISO 266) frequency nearest to ``fc`` on a logarithmic scale.

    Raises
    ------
    InputError
        ``fc`` is not a positive, finite frequency.

    Examples
    --------
    >>> nominal_frequency(238.1), nominal_frequency(1511.9), nominal_frequency(150.0)
    (250, 1600, 160)
    """
    f = checks.number(fc, "band centre", lo=0.0, lo_open=True, fix="give a positive frequency in Hz")
    return min(NOMINAL_THIRD_OCTAVE_HZ, key=lambda n: abs(math.log(f / n)))


def band_label(fc: float, *, unit: bool = True) -> str:
    """The label of the band centred on ``fc``: its nominal frequency, in Hz below 1 kHz
    and in kHz from there ("125 Hz", "1.6 kHz", "3.15 kHz"; without the unit: "125",
    "1.6k").

    Raises
    ------
    InputError
        ``fc`` is not a positive, finite frequency.

    Examples
    --------
    >>> band_label(238.1), band_label(3809.8), band_label(8000), band_label(150, unit=False)
    ('250 Hz', '4 kHz', '8 kHz', '160')
    """
    n = nominal_frequency(fc)
    if n >= 1000:
        k = f"{n / 1000:g}"
        return f"{k} kHz" if unit else f"{k}k"
    return f"{n:g} Hz" if unit else f"{n:g}"


#: What a person reads for each quantity: (label, unit, explanation). The label and unit
#: are used in table headers and axis labels; the explanation in report glossaries and
#: column notes.
QUANTITIES: dict[str, tuple[str, str, str]] = {
    "sti": ("STI", "", "Speech Transmission Index, 0 (nothing understood) to 1 (perfect transmission), "
                       "IEC 60268-16"),
    "rating": ("qualification band", "", "IEC 60268-16 Annex F band of the STI, A+ (best) to U"),
    "subjective": ("subjective rating", "", "five-step scale of the STI, bad to excellent"),
    "mti": ("MTI", "", "modulation transmission index of an octave band: the mean transmission index over "
                       "the modulation frequencies, 0 to 1"),
    "mtf": ("MTF", "", "modulation transfer: the fraction of the speech envelope's modulation depth that "
                       "reaches the listener, per band and modulation frequency"),
    "decay_range_db": ("decay range", "dB", "how far the band's decay falls before its noise floor; T30 needs "
                                            "45 dB, T20 35 dB, EDT 20 dB"),
    "envelope_noise_depth": ("envelope noise depth", "", "the modulation depth the recording's own noise "
                                                         "shows at frequencies the test signal does not use"),
    "band_levels_db": ("band level (signal + noise)", "dB", "octave-band level of the whole recording: the test "
                                                           "signal plus the noise at the position"),
    "uncertainty": ("standard uncertainty", "", "one standard uncertainty of the STI (about 68 % coverage)"),
    "stoi": ("STOI", "", "short-time objective intelligibility, Taal et al. 2011"),
    "estoi": ("ESTOI", "", "extended STOI, Jensen & Taal 2016"),
    "t30_mid": ("T30 (mid-frequency)", "s", "reverberation time from the 25 dB decay below -5 dB, mean of "
                                            "500 Hz and 1 kHz (ISO 3382-1)"),
    "edt_mid": ("EDT (mid-frequency)", "s", "early decay time, mean of 500 Hz and 1 kHz (ISO 3382-1)"),
}


def header(key: str) -> str:
    """A table header for a quantity: its label with the unit ("decay range, dB").

    Raises
    ------
    InputError
        ``key`` is not one of :data:`QUANTITIES`.
    """
    if not isinstance(key, str) or key not in QUANTITIES:
        shown = repr(key[:40]) if isinstance(key, str) else f"of type {type(key).__name__}"
        raise InputError(f"no label for the quantity {shown}", f"give one of {', '.join(QUANTITIES)}")
    label, unit, _ = QUANTITIES[key]
    return f"{label}, {unit}" if unit else label
