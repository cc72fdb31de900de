"""The listener's hearing: audiograms, age presets and the thresholds they give each band.

An audiogram gives hearing levels in dB HL at audiometric frequencies: the listener's
pure-tone threshold above the reference threshold of a young normal-hearing listener
(0 dB HL). This module turns it into what the indices need, per STI octave band
(125 Hz ... 8 kHz):

* the hearing loss of the band, ``band_hl_db`` (the audiogram at the band's centre
  frequency, filled as stated below where it was not measured);
* the listener's pure-tone threshold in dB SPL, free field:
  ``threshold_spl_db = RETSPL(f) + HL(f)`` with the reference threshold of ISO 389-7:2005
  (:data:`~envpredict.standards.REFERENCE_THRESHOLD_FREE_FIELD_DB`). It is reported, and
  it is what "a threshold in dB SPL" means to an audiologist;
* the STI's absolute reception threshold raised by the loss:
  ``reception_threshold_db = RT_k + HL_k`` with RT_k of IEC 60268-16:2011, Table A.4
  (:data:`~envpredict.standards.RECEPTION_THRESHOLD_DB`). The IEC method treats the
  reception threshold as a noise-like intensity I_rt,k added to the noise of band k; a
  hearing loss of HL_k dB raises the listener's threshold by HL_k dB at every level
  convention, so the same shift applies to RT_k (the equivalent octave-band speech
  level at threshold). 0 dB HL leaves RT_k, and so every STI, exactly unchanged;
* for the pair indices, which know no absolute threshold, a threshold-simulating noise:
  a noise whose octave-band intensity is the *excess* of the listener's reception
  threshold over the normal one, ``10**((RT_k + HL_k)/10) - 10**(RT_k/10)``
  (:func:`threshold_noise_band_db`, :func:`threshold_noise`). 0 dB HL (or better) adds
  no noise, so the indices stay exactly unchanged.

These model **audibility only**: the suprathreshold deficits of sensorineural loss
(broadened auditory filters, loss of temporal fine structure, recruitment) are not
modelled, and the prediction for a listener with such a loss is an upper bound.

Filling bands that were not measured
------------------------------------
The STI needs all seven octave bands, 125 Hz to 8 kHz.

* A band between two measured frequencies at most two octaves apart is interpolated
  linearly in dB over log2(frequency) (e.g. 1 kHz from 500 Hz and 2 kHz).
* A band outside the measured range takes the value of the nearest measured frequency
  if that is at most one octave away (e.g. 125 Hz from 250 Hz, the usual audiogram's
  lowest frequency; 8 kHz from 4 kHz). This holds the edge value; it is an
  extrapolation and the result says so.
* Anything else is refused, naming the bands that are missing.

Every filled band is listed in ``filled_bands_hz`` and explained in ``notes``.

Age presets
-----------
:func:`age_audiogram` gives the median hearing levels of otologically normal people of
an age and sex by ISO 7029:2017 (dH = a (Y - 18)^b, 4.2 and Table 1;
:data:`~envpredict.standards.ISO7029_MEDIAN`). 18 years gives 0 dB HL everywhere.

References
----------
IEC 60268-16:2011, Annex A (reception threshold). ISO 389-7:2005, Table 1.
ISO 7029:2017, 4.2 and Table 1.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, replace
from typing import Sequence

import numpy as np

from . import checks
from . import standards as std
from .exceptions import InputError
from .results import jsonable

#: Largest gap, octaves, between two measured frequencies a band may be interpolated across.
MAX_INTERPOLATION_OCTAVES: float = 2.0
#: Largest distance, octaves, from the nearest measured frequency for an edge band to
#: take its value (holding the edge value is an extrapolation; stated in the result).
MAX_EXTRAPOLATION_OCTAVES: float = 1.0
#: Sexes of the ISO 7029 preset ("m" male, "f" female).
SEXES: tuple[str, ...] = ("f", "m")
#: Seed of the threshold-simulating noise when none is given.
DEFAULT_NOISE_SEED: int = 17
#: Longest threshold-simulating noise made in one piece, samples (about 23 minutes at
#: 48 kHz; the noise is shaped in one FFT, so memory grows with the length).
MAX_NOISE_SAMPLES: int = 2**26

CAUTION_AUDIBILITY = ("The listener's hearing loss is modelled as a raised threshold (audibility) only; the "
                      "suprathreshold deficits of sensorineural loss are not modelled, so the prediction for such a "
                      "listener is an upper bound")

_EXAMPLE = "250:20,500:25,1000:30,2000:45,4000:60,8000:70"
_FIX = f"give frequency:dB HL pairs, e.g. \"{_EXAMPLE}\", or a CSV file with columns frequency_hz,hearing_level_db"


@dataclass(frozen=True)
class Audiogram:
    """A listener's hearing levels and their values in the seven STI octave bands.

    Attributes
    ----------
    measured_hz : audiometric frequencies given, Hz, ascending.
    measured_hl_db : hearing levels given there, dB HL.
    band_hl_db : hearing level of each STI octave band (125 Hz ... 8 kHz), dB HL.
    filled_bands_hz : octave bands not measured, filled by interpolation or by holding
        the nearest value (see the module's rules).
    notes : how each filled band was filled.
    source : where the audiogram came from ("audiogram", a file name, or the ISO 7029
        preset with age and sex).
    bands_hz : the octave bands of ``band_hl_db``.
    """

    measured_hz: tuple[float, ...]
    measured_hl_db: tuple[float, ...]
    band_hl_db: tuple[float, ...]
    filled_bands_hz: tuple[float, ...] = ()
    notes: tuple[str, ...] = ()
    source: str = "audiogram"
    bands_hz: tuple[float, ...] = std.OCTAVE_BANDS_HZ

    @property
    def reception_threshold_db(self) -> np.ndarray:
        """The STI's reception threshold raised by the loss, RT_k + HL_k, dB (7 bands)."""
        return reception_threshold_db(self)

    @property
    def threshold_spl_db(self) -> np.ndarray:
        """The listener's free-field pure-tone threshold at the band centres, dB SPL."""
        return band_threshold_spl_db(self)

    def to_dict(self) -> dict:
        return jsonable({
            "source": self.source,
            "measured_hz": self.measured_hz,
            "measured_hl_db": np.round(np.asarray(self.measured_hl_db), 2),
            "bands_hz": self.bands_hz,
            "band_hl_db": np.round(np.asarray(self.band_hl_db), 1),
            "threshold_spl_db": np.round(band_threshold_spl_db(self), 1),
            "reception_threshold_db": np.round(reception_threshold_db(self), 1),
            "filled_bands_hz": self.filled_bands_hz,
            "notes": list(self.notes),
        })


def _check_points(freqs: Sequence[float], levels: Sequence[float]) -> tuple[np.ndarray, np.ndarray]:
    known = np.asarray(std.AUDIOMETRIC_FREQUENCIES_HZ)
    f = np.asarray(freqs, dtype=float)
    hl = np.asarray(levels, dtype=float)
    if f.size == 0:
        raise InputError("the audiogram is empty", _FIX)
    for v in f:
        if not np.isfinite(v) or not np.any(np.isclose(known, v)):
            raise InputError(f"audiogram frequency {v:g} Hz is not an audiometric frequency",
                             "use " + ", ".join(f"{k:g}" for k in known) + " Hz")
    if len(set(np.round(f, 6))) != f.size:
        raise InputError("the audiogram names a frequency twice", "give each frequency once")
    lo, hi = std.HEARING_LEVEL_RANGE_DB
    for fv, v in zip(f, hl):
        if not np.isfinite(v) or not lo <= v <= hi:
            raise InputError(f"hearing level {v:g} dB HL at {fv:g} Hz is outside {lo:g}..{hi:g} dB HL",
                             f"give hearing levels from {lo:g} to {hi:g} dB HL")
    order = np.argsort(f)
    return known[np.argmin(np.abs(known[None, :] - f[order, None]), axis=1)], hl[order]


def _fill_bands(f: np.ndarray, hl: np.ndarray) -> tuple[np.ndarray, list[float], list[str]]:
    """The seven octave-band hearing levels by the module's filling rules."""
    bands = np.asarray(std.OCTAVE_BANDS_HZ)
    out = np.empty(bands.size)
    filled: list[float] = []
    notes: list[str] = []
    missing: list[str] = []
    lf = np.log2(f)
    for i, fc in enumerate(bands):
        hit = np.isclose(f, fc)
        if np.any(hit):
            out[i] = hl[hit][0]
            continue
        lb = math.log2(fc)
        below, above = f[f < fc], f[f > fc]
        if below.size and above.size:
            f0, f1 = below[-1], above[0]
            gap = math.log2(f1 / f0)
            if gap <= MAX_INTERPOLATION_OCTAVES + 1e-9:
                h0, h1 = hl[f == f0][0], hl[f == f1][0]
                out[i] = h0 + (h1 - h0) * (lb - math.log2(f0)) / gap
                filled.append(float(fc))
                notes.append(f"{fc:g} Hz not measured: {out[i]:.1f} dB HL interpolated on a log-frequency axis "
                             f"between {f0:g} and {f1:g} Hz")
                continue
            missing.append(f"{fc:g} Hz (nearest measured {f0:g} and {f1:g} Hz are more than "
                           f"{MAX_INTERPOLATION_OCTAVES:g} octaves apart)")
            continue
        j = int(np.argmin(np.abs(lf - lb)))
        dist = abs(lf[j] - lb)
        if dist <= MAX_EXTRAPOLATION_OCTAVES + 1e-9:
            out[i] = hl[j]
            filled.append(float(fc))
            notes.append(f"{fc:g} Hz not measured: the {f[j]:g} Hz value ({hl[j]:g} dB HL) is held "
                         f"(extrapolated {dist:g} octave beyond the audiogram)")
            continue
        missing.append(f"{fc:g} Hz (nearest measured {f[j]:g} Hz is {dist:g} octaves away)")
    if missing:
        raise InputError("the audiogram does not cover the STI octave bands: missing " + "; ".join(missing),
                         f"measure at or within one octave of 125 Hz and 8 kHz and at most "
                         f"{MAX_INTERPOLATION_OCTAVES:g} octaves apart, e.g. \"{_EXAMPLE}\"")
    return out, filled, notes


def audiogram_from_points(frequencies_hz: Sequence[float], hearing_level_db: Sequence[float], *,
                          source: str = "audiogram") -> Audiogram:
    """An :class:`Audiogram` from hearing levels (dB HL) at audiometric frequencies (Hz).

    Frequencies must be among :data:`~envpredict.standards.AUDIOMETRIC_FREQUENCIES_HZ`,
    levels within :data:`~envpredict.standards.HEARING_LEVEL_RANGE_DB`; the seven octave
    bands are filled by the rules of this module (interpolation on log frequency across
    at most two octaves, the edge value held for at most one octave).

    >>> a = audiogram_from_points([250, 500, 1000, 2000, 4000, 8000], [20, 25, 30, 45, 60, 70])
    >>> a.band_hl_db, a.filled_bands_hz
    ((20.0, 20.0, 25.0, 30.0, 45.0, 60.0, 70.0), (125.0,))

    Raises
    ------
    InputError
        Frequencies and levels of different counts, a frequency that is not audiometric or
        given twice, a level outside -10..120 dB HL, or bands that cannot be filled (named).
    """
    source = checks.text(source, "audiogram source")
    try:
        freqs = [float(v) for v in frequencies_hz]
        levels = [float(v) for v in hearing_level_db]
    except (TypeError, ValueError, OverflowError):
        raise InputError("the audiogram holds entries that are not numbers", _FIX) from None
    if len(freqs) != len(levels):
        raise InputError(f"{len(freqs)} audiogram frequencies but {len(levels)} hearing levels",
                         "give one hearing level per frequency")
    f, hl = _check_points(freqs, levels)
    band, filled, notes = _fill_bands(f, hl)
    return Audiogram(measured_hz=tuple(float(v) for v in f), measured_hl_db=tuple(float(v) for v in hl),
                     band_hl_db=tuple(float(v) for v in band), filled_bands_hz=tuple(filled), notes=tuple(notes),
                     source=source)


def parse_audiogram(text: str, *, source: str = "audiogram") -> Audiogram:
    """An :class:`Audiogram` from text ``"250:20,500:25,1000:30,2000:45,4000:60,8000:70"``
    (frequency in Hz : hearing level in dB HL, separated by commas or semicolons).

    >>> parse_audiogram("125:0,250:0,500:0,1000:0,2000:0,4000:0,8000:0").band_hl_db
    (0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0)

    Raises
    ------
    InputError
        Text that is not frequency:level pairs, and as :func:`audiogram_from_points`.
    """
    text = checks.text(text, "audiogram", _FIX)
    parts = [p.strip() for p in re.split(r"[,;\n]", text) if p.strip()]
    if not parts:
        raise InputError("the audiogram is empty", _FIX)
    freqs, levels = [], []
    for p in parts:
        pair = [s.strip() for s in p.split(":")]
        try:
            if len(pair) != 2:
                raise ValueError
            f, v = float(pair[0].lower().removesuffix("hz")), float(pair[1].lower().removesuffix("db"))
        except ValueError:
            raise InputError(f"audiogram entry '{p[:40]}' is not frequency:level", _FIX) from None
        freqs.append(f)
        levels.append(v)
    return audiogram_from_points(freqs, levels, source=source)


def audiogram_from_rows(rows: Sequence[Sequence[str]], *, source: str = "audiogram file") -> Audiogram:
    """An :class:`Audiogram` from table rows of two cells, frequency (Hz) and hearing level
    (dB HL), e.g. the rows of a CSV file with the header ``frequency_hz,hearing_level_db``
    (read by :func:`envpredict.tables.read_audiogram`).

    Raises
    ------
    InputError
        Rows that are not two numbers, and as :func:`audiogram_from_points`.
    """
    freqs, levels = [], []
    for i, row in enumerate(rows, start=1):
        cells = [str(c).strip() for c in row]
        if len(cells) < 2:
            raise InputError(f"{source}: row {i} has {len(cells)} cell(s)",
                             "give two columns, frequency_hz and hearing_level_db")
        try:
            freqs.append(float(cells[0]))
            levels.append(float(cells[1]))
        except ValueError:
            raise InputError(f"{source}: row {i} ({','.join(cells)[:40]}) is not two numbers",
                             "give frequency_hz,hearing_level_db per row") from None
    return audiogram_from_points(freqs, levels, source=source)


def check_sex(sex: str) -> str:
    """``sex`` as "f" or "m" ("female"/"male" and case accepted).

    Raises
    ------
    InputError
        Any other value.
    """
    s = str(sex).strip().lower()
    s = {"female": "f", "male": "m", "w": "f"}.get(s, s)
    if s not in SEXES:
        raise InputError(f"sex '{str(sex)[:20]}' is not f or m", "give --sex f or --sex m")
    return s


def iso7029_median_db(age: float, sex: str = "m",
                      frequencies_hz: Sequence[float] = std.AUDIOMETRIC_FREQUENCIES_HZ) -> np.ndarray:
    """Median hearing threshold deviation from that at 18 years, dB, by ISO 7029:2017:
    dH_md = a (Y - 18)^b (4.2, Table 1; coefficients
    :data:`~envpredict.standards.ISO7029_MEDIAN`).

    >>> round(float(iso7029_median_db(60, "m", [4000])[0]), 1)
    20.2

    Raises
    ------
    InputError
        An age outside 18..80 years, an unknown sex, or a frequency that is not audiometric.

    References
    ----------
    ISO 7029:2017, Acoustics -- Statistical distribution of hearing thresholds related to
    age and gender.
    """
    lo, hi = std.ISO7029_AGE_RANGE_YEARS
    age = checks.number(age, "age", lo=lo, hi=hi, fix=f"give an age from {lo:g} to {hi:g} years (ISO 7029:2017)")
    coef = np.asarray(std.ISO7029_MEDIAN[check_sex(sex)])
    known = np.asarray(std.AUDIOMETRIC_FREQUENCIES_HZ)
    idx = []
    for fv in frequencies_hz:
        hit = np.flatnonzero(np.isclose(known, float(fv)))
        if hit.size == 0:
            raise InputError(f"{fv} Hz is not an audiometric frequency of ISO 7029",
                             "use " + ", ".join(f"{k:g}" for k in known) + " Hz")
        idx.append(int(hit[0]))
    a, b = coef[idx, 0], coef[idx, 1]
    return a * (age - lo) ** b


def age_audiogram(age: float, sex: str = "m") -> Audiogram:
    """The median audiogram of otologically normal people of ``age`` years and ``sex`` by
    ISO 7029:2017 (:func:`iso7029_median_db` at all eleven audiometric frequencies; the
    deviation from 18 years is read as the hearing level, dB HL).

    >>> age_audiogram(18).band_hl_db
    (0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0)

    Raises
    ------
    InputError
        As :func:`iso7029_median_db`.
    """
    s = check_sex(sex)
    hl = iso7029_median_db(age, s)
    a = audiogram_from_points(std.AUDIOMETRIC_FREQUENCIES_HZ, hl,
                              source=f"ISO 7029:2017 median, age {float(age):g}, {'female' if s == 'f' else 'male'}")
    notes = list(a.notes)
    if float(age) > std.ISO7029_INFORMATIVE_ABOVE_YEARS:
        notes.append(f"ISO 7029:2017 gives the values from {std.ISO7029_INFORMATIVE_FROM_HZ:g} Hz up above "
                     f"{std.ISO7029_INFORMATIVE_ABOVE_YEARS:g} years for information only")
    return replace(a, notes=tuple(notes))


def listener_audiogram(audiogram: "Audiogram | str | None" = None, age: float | None = None,
                       sex: str | None = None) -> Audiogram | None:
    """The listener of a run: an audiogram (an :class:`Audiogram` or its text form), an
    ISO 7029 age preset (``age``, with ``sex``, default "m"), or ``None`` (normal hearing).

    Raises
    ------
    InputError
        Both an audiogram and an age, a sex without an age, and as :func:`parse_audiogram`
        and :func:`age_audiogram`.
    """
    if audiogram is not None and age is not None:
        raise InputError("both an audiogram and an age were given", "give --audiogram or --age, not both")
    if sex is not None and age is None:
        raise InputError("a sex was given without an age", "give --age YEARS with --sex")
    if age is not None:
        return age_audiogram(age, "m" if sex is None else sex)
    if audiogram is None or isinstance(audiogram, Audiogram):
        return audiogram
    return parse_audiogram(audiogram)


def check_auditory(audiogram: Audiogram | None, auditory: bool) -> Audiogram | None:
    """``audiogram`` once it is known the auditory effects are on: the hearing loss raises
    the reception threshold, one of those effects, so an audiogram without them is refused.

    Raises
    ------
    InputError
        An audiogram with ``auditory`` False, an ``auditory`` that is not a flag, or an
        ``audiogram`` that is not an :class:`Audiogram` or ``None``.
    """
    auditory = checks.flag(auditory, "auditory")
    if audiogram is None:
        return None
    if not auditory:
        raise InputError("an audiogram (or age) was given with the auditory corrections off",
                         "leave out --no-auditory: the hearing loss raises the reception threshold")
    return _audiogram(audiogram)


def _audiogram(a: Audiogram) -> Audiogram:
    if not isinstance(a, Audiogram):
        raise InputError(f"audiogram is a {type(a).__name__}", "give an Audiogram (see parse_audiogram)")
    return a


def reception_threshold_db(audiogram: Audiogram | None) -> np.ndarray:
    """The STI's absolute reception threshold of each octave band raised by the hearing
    loss: RT_k + HL_k, dB (IEC 60268-16:2011 Table A.4 for RT_k); RT_k for ``None``.

    >>> reception_threshold_db(parse_audiogram("125:0,250:0,500:0,1000:0,2000:0,4000:0,8000:0"))
    array([46. , 27. , 12. ,  6.5,  7.5,  8. , 12. ])

    Raises
    ------
    InputError
        An ``audiogram`` that is not an :class:`Audiogram` or ``None``.
    """
    rt = np.asarray(std.RECEPTION_THRESHOLD_DB, dtype=float)
    if audiogram is None:
        return rt
    return rt + np.asarray(_audiogram(audiogram).band_hl_db, dtype=float)


def band_threshold_spl_db(audiogram: Audiogram) -> np.ndarray:
    """The listener's free-field pure-tone threshold at each octave band's centre, dB SPL:
    the reference threshold of ISO 389-7:2005 (Table 1, free field) plus the hearing level.

    Raises
    ------
    InputError
        An ``audiogram`` that is not an :class:`Audiogram`.
    """
    a = _audiogram(audiogram)
    known = np.asarray(std.AUDIOMETRIC_FREQUENCIES_HZ)
    ref = np.asarray(std.REFERENCE_THRESHOLD_FREE_FIELD_DB)
    idx = [int(np.flatnonzero(np.isclose(known, fc))[0]) for fc in a.bands_hz]
    return ref[idx] + np.asarray(a.band_hl_db, dtype=float)


def threshold_noise_band_db(audiogram: Audiogram) -> np.ndarray:
    """Octave-band levels, dB SPL, of the noise that simulates the listener's raised
    threshold in the pair indices: the intensity by which the listener's reception
    threshold exceeds the normal one, 10 log10(10^((RT_k + HL_k)/10) - 10^(RT_k/10));
    ``-inf`` where HL_k <= 0 (no noise: a noise cannot lower a threshold).

    Raises
    ------
    InputError
        An ``audiogram`` that is not an :class:`Audiogram`.
    """
    a = _audiogram(audiogram)
    rt = np.asarray(std.RECEPTION_THRESHOLD_DB, dtype=float)
    hl = np.asarray(a.band_hl_db, dtype=float)
    excess = np.where(hl > 0, 10.0 ** (rt / 10.0) * (10.0 ** (hl / 10.0) - 1.0), 0.0)
    with np.errstate(divide="ignore"):
        return 10.0 * np.log10(excess)


def threshold_noise(audiogram: Audiogram, n: int, fs: int, calibration_db: float, *,
                    seed: int = DEFAULT_NOISE_SEED) -> np.ndarray | None:
    """A noise of ``n`` samples at ``fs`` whose octave-band levels are
    :func:`threshold_noise_band_db` in dB SPL when full-scale RMS (RMS 1) is
    ``calibration_db`` dB SPL; flat spectrum within each octave band (edges fc/sqrt 2 ..
    fc sqrt 2, cut at Nyquist), nothing outside; deterministic for a ``seed``.
    ``None`` when the audiogram asks for no noise (no band above 0 dB HL).

    Raises
    ------
    InputError
        A length, rate or calibration that is not a usable number, or a seed that is not a
        whole number.
    """
    a = _audiogram(audiogram)
    n = checks.number(n, "noise length", lo=1, hi=MAX_NOISE_SAMPLES, integer=True,
                      fix=f"give 1 to {MAX_NOISE_SAMPLES} samples (use a shorter excerpt)")
    fs = checks.sample_rate(fs, "threshold noise")
    calibration_db = checks.number(calibration_db, "calibration", lo=0.0, hi=200.0)
    seed = checks.number(seed, "noise seed", lo=0, integer=True)
    levels = threshold_noise_band_db(a)
    if not np.any(np.isfinite(levels)):
        return None
    rng = np.random.default_rng(seed)
    spec = np.fft.rfft(rng.standard_normal(n))
    f = np.fft.rfftfreq(n, 1.0 / fs)
    gain = np.zeros(f.size)
    for fc, lev in zip(a.bands_hz, levels):
        sel = (f >= fc / std.OCTAVE_EDGE_FACTOR) & (f < fc * std.OCTAVE_EDGE_FACTOR) & (f > 0)
        if not np.isfinite(lev) or not np.any(sel):
            continue
        power = np.sum(np.abs(spec[sel]) ** 2)  # band power of the white noise (Parseval, up to a constant)
        target = 10.0 ** ((lev - calibration_db) / 10.0)  # mean square re full-scale RMS
        gain[sel] = np.sqrt(target * n * n / 2.0 / power) if power > 0 else 0.0
    return np.fft.irfft(spec * gain, n)


def inaudible_bands_hz(speech_db: Sequence[float] | np.ndarray, audiogram: Audiogram | None) -> tuple[float, ...]:
    """The octave bands the hearing loss made inaudible: speech level at or above the
    normal reception threshold RT_k but below the listener's RT_k + HL_k.

    Raises
    ------
    InputError
        Speech levels that are not seven values, or an ``audiogram`` that is not an
        :class:`Audiogram` or ``None``.
    """
    s = checks.array(speech_db, "band speech levels", finite=False)
    if s.size != len(std.OCTAVE_BANDS_HZ):
        raise InputError(f"{s.size} band speech levels", "give seven, 125 Hz to 8 kHz")
    if audiogram is None:
        return ()
    rt = reception_threshold_db(None)
    lt = reception_threshold_db(audiogram)
    hit = np.isfinite(s) & (s >= rt) & (s < lt)
    return tuple(float(fc) for fc, h in zip(std.OCTAVE_BANDS_HZ, hit) if h)


def audiogram_summary(audiogram: Audiogram | None, speech_db: Sequence[float] | np.ndarray | None = None
                      ) -> dict | None:
    """The JSON a result carries for its listener: the audiogram (:meth:`Audiogram.to_dict`),
    ``inaudible_bands_hz`` (with band speech levels) and the audibility caution.

    Raises
    ------
    InputError
        As :func:`inaudible_bands_hz`.
    """
    if audiogram is None:
        return None
    d = _audiogram(audiogram).to_dict()
    if speech_db is not None:
        d["inaudible_bands_hz"] = list(inaudible_bands_hz(speech_db, audiogram))
    d["cautions"] = [CAUTION_AUDIBILITY]
    return d

