"""Speech Transmission Index from a modulation transfer matrix (IEC 60268-16:2011, Annex A).

One code path for every STI in this tool: the indirect method (MTF from an impulse
response), the direct method (full STI and STIPA recordings) and the speech-based
STI all end in :func:`sti_from_mtf`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from . import checks
from . import standards as std
from .exceptions import InputError
from .hearing import Audiogram, audiogram_summary, reception_threshold_db
from .results import jsonable

TALKERS = tuple(std.WEIGHTS)


def table_array(values: tuple) -> np.ndarray:
    """A table of :mod:`envpredict.standards` as a float array, ``None`` entries as NaN.

    Raises
    ------
    InputError
        If ``values`` is not a sequence of numbers (and None).
    """
    if isinstance(values, (str, bytes)) or not isinstance(values, (tuple, list, np.ndarray)):
        raise InputError(f"table {values!r:.40} is not a sequence of numbers", "pass a tuple of numbers (or None)")
    try:
        return np.array([np.nan if v is None else v for v in values], dtype=float)
    except (TypeError, ValueError):
        raise InputError("table holds entries that are not numbers", "pass a tuple of numbers (or None)") from None


def check_talker(talker: str) -> str:
    """``talker`` as "male" or "female" (case and spaces ignored).

    Raises
    ------
    InputError
        For any other talker.
    """
    t = str(talker).strip().lower()
    if t not in std.WEIGHTS:
        raise InputError(f"unknown talker '{talker}'", f"use one of: {', '.join(TALKERS)}")
    return t


def check_speech_level(level_dba: float) -> float:
    """An A-weighted speech level at the listener, dB(A), within ``standards.SPEECH_LEVEL_RANGE_DBA``.

    Raises
    ------
    InputError
        For a level that is not a number in that range.
    """
    lo, hi = std.SPEECH_LEVEL_RANGE_DBA
    try:
        v = float(level_dba)
    except (TypeError, ValueError):
        raise InputError(f"speech level '{level_dba}' is not a number", "give it in dB(A), e.g. 60") from None
    if not np.isfinite(v) or not lo <= v <= hi:
        raise InputError(
            f"speech level {level_dba} dB(A) is implausible",
            f"give a level between {lo:.0f} and {hi:.0f} dB(A) (normal voice at 1 m: 60)",
        )
    return v


def _parse_band_levels(text: str | Sequence[float], what: str, example: str) -> np.ndarray:
    """Seven octave-band levels (dB SPL, 125 Hz ... 8 kHz) from a comma-separated string
    or a sequence, each within :data:`~envpredict.standards.NOISE_LEVEL_RANGE_DB`."""
    if isinstance(text, str):
        parts = [p.strip() for p in text.replace(";", ",").split(",") if p.strip()]
        try:
            vals = [float(p) for p in parts]
        except ValueError:
            raise InputError(
                f"{what} levels '{text}' are not all numbers",
                f"give seven comma-separated dB values, 125 Hz to 8 kHz, e.g. {example}",
            ) from None
    else:
        try:
            vals = [float(v) for v in text]
        except (TypeError, ValueError, OverflowError):
            raise InputError(f"{what} levels are not all numbers", "give seven dB values, 125 Hz to 8 kHz") from None
    n = len(std.OCTAVE_BANDS_HZ)
    if len(vals) != n:
        raise InputError(
            f"{len(vals)} {what} level(s) given; {n} are needed",
            "give one dB SPL value per octave band, 125 Hz to 8 kHz, comma-separated",
        )
    a = np.array(vals, dtype=float)
    lo, hi = std.NOISE_LEVEL_RANGE_DB
    if not np.all(np.isfinite(a)) or np.any(a < lo) or np.any(a > hi):
        raise InputError(
            f"a {what} level is outside the plausible range",
            f"give octave-band levels between {lo:.0f} and {hi:.0f} dB SPL",
        )
    return a


def parse_noise_levels(text: str | Sequence[float] | None) -> np.ndarray | None:
    """Parse seven octave-band noise levels (dB SPL, 125 Hz ... 8 kHz).

    Accepts a comma-separated string or a sequence; ``None`` means no noise.

    Raises
    ------
    InputError
        For text or values that are not seven levels in dB.
    """
    if text is None:
        return None
    return _parse_band_levels(text, "noise", "45,42,40,38,35,30,25")


def parse_speech_levels(text: str | Sequence[float] | None) -> np.ndarray | None:
    """Parse seven measured octave-band speech levels at the listener (dB SPL, 125 Hz ...
    8 kHz), e.g. of the test signal played at speech level; ``None``: not given.

    Accepts a comma-separated string or a sequence.

    Raises
    ------
    InputError
        Not seven numbers, or a level outside
        :data:`~envpredict.standards.NOISE_LEVEL_RANGE_DB`.
    """
    if text is None:
        return None
    return _parse_band_levels(text, "speech", "60,63,61,55,49,43,37")


def a_weighted_level(band_db: Sequence[float] | np.ndarray) -> float:
    """A-weighted sum, dB(A), of seven octave-band levels (125 Hz ... 8 kHz), with the
    octave-band A-weighting of :data:`~envpredict.standards.A_WEIGHTING_OCTAVE_DB`.

    Raises
    ------
    InputError
        ``band_db`` is not seven finite numbers.
    """
    lk = checks.array(band_db, "octave-band levels", fix="give seven levels in dB, 125 Hz to 8 kHz")
    if lk.size != len(std.A_WEIGHTING_OCTAVE_DB):
        raise InputError(f"{lk.size} octave-band level(s) given; {len(std.A_WEIGHTING_OCTAVE_DB)} are needed",
                         "give seven levels in dB, 125 Hz to 8 kHz")
    return float(10.0 * np.log10(np.sum(10.0 ** ((lk + np.asarray(std.A_WEIGHTING_OCTAVE_DB)) / 10.0))))


def check_requirement(value: float | None) -> float | None:
    """Refuse a required STI that is not a number in (0, 1]; ``None`` (no requirement) passes.

    Raises
    ------
    InputError
        A value that is not a number within (0, 1].
    """
    if value is None:
        return None
    try:
        v = float(value)
    except (TypeError, ValueError, OverflowError):
        raise InputError(f"required STI '{value}' is not a number", "give a value such as 0.50") from None
    if not (math.isfinite(v) and 0.0 < v <= 1.0):
        raise InputError(f"required STI {value} is outside 0..1", "give a value such as 0.50")
    return v


def speech_band_levels(level_dba: float, talker: str = "male") -> np.ndarray:
    """Octave-band speech levels for an A-weighted speech level (NaN: band unused).

    Source: IEC 60268-16:2011, Table A.2 (see :mod:`envpredict.standards`).

    Raises
    ------
    InputError
        For a level or talker refused by :func:`check_speech_level` and :func:`check_talker`.
    """
    return float(level_dba) + table_array(std.SPEECH_SPECTRA_DB[check_talker(talker)])


def masking_factor(level_db: np.ndarray) -> np.ndarray:
    """Level-dependent auditory masking factor amf of the next-higher band.

    Source: IEC 60268-16:2011, Table A.3 (piecewise linear amdB in the level of the
    masking band); amf = 10**(amdB/10).

    Raises
    ------
    InputError
        For levels that are not numbers.
    """
    level_db = checks.array(level_db, "band levels", ndim=(0, 1, 2, 3), min_size=0, finite=False)
    L = np.asarray(level_db, dtype=float)
    amdb = np.full(L.shape, np.nan)
    lower = -np.inf
    for upper, slope, offset in std.MASKING_PIECES:
        sel = (L >= lower) & (L < upper)
        amdb[sel] = slope * L[sel] + offset
        lower = upper
    amdb[~np.isfinite(L)] = -np.inf  # no level, no masking
    return 10.0 ** (amdb / 10.0)


def transmission_index(m: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Effective SNR and transmission index from modulation transfer values.

    SNR_eff = 10 log10(m / (1 - m)), limited to +-15 dB; TI = (SNR_eff + 15) / 30.
    Source: IEC 60268-16:2011, A.2.4 - A.2.5.

    Raises
    ------
    InputError
        For modulation transfer values that are not numbers.
    """
    m = checks.array(m, "modulation transfer values", ndim=(0, 1, 2, 3, 4), min_size=0, finite=False)
    m = np.clip(np.asarray(m, dtype=float), 0.0, std.MTF_MAX)
    with np.errstate(divide="ignore"):
        snr = 10.0 * np.log10(m) - 10.0 * np.log10(1.0 - m)
    snr = np.clip(snr, -std.SNR_LIMIT_DB, std.SNR_LIMIT_DB)
    return snr, (snr + std.SNR_LIMIT_DB) / (2 * std.SNR_LIMIT_DB)


def combine_bands(mti: np.ndarray, talker: str = "male") -> float:
    """STI from the seven modulation transmission indices with redundancy correction.

    STI = sum_k alpha_k MTI_k - sum_k beta_k sqrt(MTI_k MTI_{k+1}).
    Source: IEC 60268-16:2011, A.2.6, weights Table A.1.

    Raises
    ------
    InputError
        For indices that are not seven finite numbers, or an unknown talker.
    """
    mti = checks.array(mti, "modulation transmission indices")
    if mti.size != len(std.OCTAVE_BANDS_HZ):
        raise InputError(f"{mti.size} modulation transmission indices", "give one per octave band (7)")
    alpha, beta = (np.array(w) for w in std.WEIGHTS[check_talker(talker)])
    mti = np.clip(np.asarray(mti, dtype=float), 0.0, 1.0)
    sti = float(np.dot(alpha, mti) - np.dot(beta, np.sqrt(mti[:-1] * mti[1:])))
    return float(np.clip(sti, 0.0, 1.0))


def combine_bands_many(mti: np.ndarray, talker: str = "male") -> np.ndarray:
    """:func:`combine_bands` of many sets of seven MTIs at once: ``mti`` has shape
    (..., 7), the result the leading shape (the same formula, IEC 60268-16:2011, A.2.6).

    Raises
    ------
    InputError
        For indices that are not an array with seven values along its last axis, or an
        unknown talker.
    """
    mti = checks.array(mti, "modulation transmission indices", ndim=(1, 2, 3, 4), finite=False)
    if mti.shape[-1] != len(std.OCTAVE_BANDS_HZ):
        raise InputError(f"{mti.shape[-1]} modulation transmission indices per set", "give one per octave band (7)")
    alpha, beta = (np.array(w) for w in std.WEIGHTS[check_talker(talker)])
    mti = np.clip(np.asarray(mti, dtype=float), 0.0, 1.0)
    sti = mti @ alpha - np.sqrt(mti[..., :-1] * mti[..., 1:]) @ beta
    return np.clip(sti, 0.0, 1.0)


def band_factors(speech_db: np.ndarray, noise_db: np.ndarray | None, auditory: bool,
                 audiogram: Audiogram | None = None) -> tuple[np.ndarray, np.ndarray | None, np.ndarray | None]:
    """The factor I_k / (I_k + I_n,k + I_am,k + I_rt,k) that scales the MTF of each
    octave band for noise, auditory masking and the reception threshold
    (IEC 60268-16:2011, A.2.2 - A.2.3), with the masking and threshold levels, dB.

    ``speech_db`` has shape (..., 7) (NaN or -inf: no speech in that band); ``noise_db``
    seven levels or ``None``. Used by :func:`sti_from_mtf` for one MTF and by the room
    model for many listener positions at once. An ``audiogram`` (a listener with hearing
    loss, :mod:`envpredict.hearing`) raises the reception threshold of each band by its
    hearing loss, RT_k + HL_k (with ``auditory`` only: the threshold is an auditory effect).

    Raises
    ------
    InputError
        For speech levels that are not an array with seven values along its last axis,
        noise levels that are not seven numbers, an ``auditory`` that is not a flag, or an
        ``audiogram`` with ``auditory=False`` (or that is not an Audiogram).
    """
    nb = len(std.OCTAVE_BANDS_HZ)
    speech_db = checks.array(speech_db, "band speech levels", ndim=(1, 2, 3, 4), min_size=0, finite=False)
    if speech_db.shape[-1] != nb:
        raise InputError(f"band speech levels have {speech_db.shape[-1]} values per position",
                         f"give {nb}, one per octave band")
    if noise_db is not None:
        noise_db = checks.array(noise_db, "band noise levels", min_size=nb)
        if noise_db.size != nb:
            raise InputError(f"{noise_db.size} band noise levels", f"give {nb}, one per octave band")
    auditory = checks.flag(auditory, "auditory")
    if audiogram is not None and not auditory:
        raise InputError("an audiogram was given without the auditory effects",
                         "keep the auditory corrections on (the hearing loss raises their reception threshold)")
    threshold = reception_threshold_db(audiogram)
    i_s = np.where(np.isfinite(speech_db), 10.0 ** (speech_db / 10.0), 0.0)
    i_n = 10.0 ** (np.asarray(noise_db, dtype=float) / 10.0) if noise_db is not None else np.zeros(nb)
    masking_db = threshold_db = None
    i_am = np.zeros(i_s.shape)
    i_rt = np.zeros(nb)
    if auditory:
        i_total = i_s + i_n
        with np.errstate(divide="ignore"):
            level_total = 10.0 * np.log10(i_total)
        amf = masking_factor(level_total)
        i_am[..., 1:] = i_total[..., :-1] * amf[..., :-1]
        i_rt = 10.0 ** (threshold / 10.0)
        with np.errstate(divide="ignore"):
            masking_db = 10.0 * np.log10(i_am)
        threshold_db = threshold
    den = i_s + i_n + i_am + i_rt
    with np.errstate(invalid="ignore", divide="ignore"):
        factor = np.where(den > 0, i_s / den, 0.0)
    return factor, masking_db, threshold_db


def sti_many(mtf: np.ndarray, speech_db: np.ndarray, noise_db: np.ndarray | None = None, *,
             talker: str = "male", auditory: bool = True, audiogram: Audiogram | None = None) -> np.ndarray:
    """STI of many modulation transfer matrices at once, by the steps of
    :func:`sti_from_mtf` (same helpers): ``mtf`` (..., 7, F), ``speech_db`` (..., 7)
    octave-band speech levels at each position, ``noise_db`` seven levels or ``None``.
    Returns shape (...).

    Raises
    ------
    InputError
        As :func:`band_factors`, and for an ``mtf`` whose shape does not follow
        ``speech_db``'s with a last axis of modulation frequencies, or an unknown talker.
    """
    talker = check_talker(talker)
    factor, _, _ = band_factors(speech_db, noise_db, auditory, audiogram)
    mtf = checks.array(mtf, "modulation transfer", ndim=(2, 3, 4, 5), finite=False)
    if mtf.shape[:-1] != factor.shape:
        raise InputError(f"modulation transfer of shape {mtf.shape} does not follow band levels {factor.shape}",
                         "give one (7, F) matrix per position of the band levels")
    m_eff = np.clip(np.clip(np.asarray(mtf, dtype=float), 0.0, None) * factor[..., None], 0.0, std.MTF_MAX)
    _, ti = transmission_index(m_eff)
    return combine_bands_many(ti.mean(axis=-1), talker)


def _check_index_value(sti: float) -> float:
    """An STI to be rated: a number in 0..1 (a NaN or 1.5 has no band and no rating)."""
    try:
        v = float(sti)
    except (TypeError, ValueError):
        raise InputError(f"STI '{sti}' is not a number", "give a value from 0 to 1") from None
    if not math.isfinite(v) or not -RATING_ROUNDING <= v <= 1.0 + RATING_ROUNDING:
        raise InputError(f"STI {sti} is outside 0..1", "give a value from 0 to 1")
    return min(max(v, 0.0), 1.0)


#: Floating-point slack of a computed STI at the ends of 0..1 (sums of weighted square
#: roots can land a few ulp outside).
RATING_ROUNDING: float = 1e-9


#: Decimals of the STI in a result's dictionary (more near the requirement, see below).
JSON_DECIMALS: int = 4

#: Most decimals an index is shown with to keep it on its side of a requirement.
MAX_VERDICT_DECIMALS: int = 6


def verdict_decimals(value: float, requirement: float = std.VOICE_ALARM_TARGET_STI, minimum: int = 2) -> int:
    """Decimals to show ``value`` with so that the shown number and the verdict against
    ``requirement`` (met when ``value >= requirement``, judged on the unrounded value)
    never contradict each other: ``minimum`` unless rounding would cross or reach the
    requirement from below (0.498 shown as "0.50" beside "below 0.50"), then more.

    >>> verdict_decimals(0.498), verdict_decimals(0.4996), verdict_decimals(0.62)
    (3, 4, 2)

    Raises
    ------
    InputError
        For a value or requirement that is not a finite number, or ``minimum`` outside
        0..:data:`MAX_VERDICT_DECIMALS`.
    """
    value = checks.number(value, "index value")
    requirement = checks.number(requirement, "requirement")
    minimum = checks.number(minimum, "decimals", lo=0, hi=MAX_VERDICT_DECIMALS, integer=True)
    v, req = float(value), float(requirement)
    for d in range(int(minimum), MAX_VERDICT_DECIMALS + 1):
        if (round(v, d) >= req) == (v >= req):
            return d
    return MAX_VERDICT_DECIMALS


def format_index(value: float, requirement: float = std.VOICE_ALARM_TARGET_STI, minimum: int = 2) -> str:
    """``value`` as text with :func:`verdict_decimals` decimals ("0.48", "0.498"); a value
    within 1e-6 below the requirement is cut (not rounded) to stay below it ("0.499999").

    Raises
    ------
    InputError
        As :func:`verdict_decimals`.
    """
    value = checks.number(value, "index value")
    requirement = checks.number(requirement, "requirement")
    minimum = checks.number(minimum, "decimals", lo=0, hi=MAX_VERDICT_DECIMALS, integer=True)
    v = float(value)
    d = verdict_decimals(v, requirement, minimum)
    if (round(v, d) >= requirement) != (v >= requirement):
        return f"{math.floor(v * 10 ** d) / 10 ** d:.{d}f}"
    return f"{v:.{d}f}"


def qualification_band(sti: float) -> str:
    """Qualification band label (A+ ... U) of an STI in 0..1, from its unrounded value.

    Source: IEC 60268-16:2011, Table F.1. Raises :class:`InputError` for a value that is
    not a number in 0..1.
    """
    # round to 1e-9 so a value computed as 0.5199999999 is not pushed down a band
    v = round(_check_index_value(sti), 9)
    for label, lower, _nominal in std.QUALIFICATION_BANDS:
        if v >= lower:
            return label
    return std.QUALIFICATION_BANDS[-1][0]


def subjective_rating(sti: float) -> str:
    """Five-step subjective scale (bad ... excellent) of an STI in 0..1. Source: see
    standards.SUBJECTIVE_SCALE.

    Raises
    ------
    InputError
        For a value that is not a number in 0..1.
    """
    v = _check_index_value(sti)
    for label, lower in std.SUBJECTIVE_SCALE:
        if v >= lower:
            return label
    return std.SUBJECTIVE_SCALE[-1][0]


@dataclass(frozen=True)
class StiResult:
    """An STI with everything that explains it.

    Attributes
    ----------
    sti : the index, 0..1.
    rating : qualification band (A+ ... U).
    subjective : five-step subjective scale.
    talker : "male" or "female".
    modulation_hz : the modulation frequencies of the columns, per band (7 lists).
    mtf_measured : modulation transfer before the noise and auditory corrections.
    mtf : modulation transfer used for the index (after the corrections).
    snr_eff : effective SNR per band and modulation frequency, dB, limited to +-15.
    ti : transmission index per band and modulation frequency.
    mti : modulation transmission index per band (mean of ti over modulations).
    speech_db, noise_db, masking_db, threshold_db : octave-band levels used, dB.
    auditory : whether masking and reception threshold were applied.
    requirement : the STI the user requires (``--require``), or None; the verdict
        ``meets_requirement`` is taken on the unrounded ``sti``.
    audiogram : the listener's hearing loss (:class:`~envpredict.hearing.Audiogram`) that
        raised ``threshold_db``, or None (normal hearing). With one, the dictionary carries
        ``audiogram`` (with ``inaudible_bands_hz``, the bands it made inaudible).
    """

    sti: float
    rating: str
    subjective: str
    talker: str
    modulation_hz: tuple[tuple[float, ...], ...]
    mtf_measured: np.ndarray
    mtf: np.ndarray
    snr_eff: np.ndarray
    ti: np.ndarray
    mti: np.ndarray
    speech_db: np.ndarray
    noise_db: np.ndarray | None
    masking_db: np.ndarray | None
    threshold_db: np.ndarray | None
    auditory: bool
    bands_hz: tuple[float, ...] = field(default=std.OCTAVE_BANDS_HZ)
    requirement: float | None = None
    audiogram: Audiogram | None = None

    @property
    def bands_used(self) -> np.ndarray:
        """Bands that count in the index: with speech and with a weight for the talker."""
        alpha = np.asarray(std.WEIGHTS.get(self.talker, std.WEIGHTS["male"])[0], dtype=float)
        used = np.isfinite(self.speech_db)
        return used & (alpha[: used.size] > 0) if alpha.size >= used.size else used

    @property
    def meets_requirement(self) -> bool | None:
        """``sti >= requirement`` on the unrounded value (None without a requirement)."""
        return None if self.requirement is None else bool(self.sti >= self.requirement)

    def to_dict(self) -> dict:
        req = std.VOICE_ALARM_TARGET_STI if self.requirement is None else self.requirement
        listener = {} if self.audiogram is None else {"audiogram": audiogram_summary(self.audiogram, self.speech_db)}
        return jsonable(
            {
                "index": "sti",
                "sti": float(format_index(self.sti, req, minimum=JSON_DECIMALS)),
                "requirement": self.requirement,
                "meets_requirement": self.meets_requirement,
                "rating": self.rating,
                "subjective": self.subjective,
                "talker": self.talker,
                "bands_hz": self.bands_hz,
                "modulation_hz": self.modulation_hz,
                "mtf": np.round(self.mtf, 4),
                "mtf_measured": np.round(self.mtf_measured, 4),
                "snr_eff_db": np.round(self.snr_eff, 2),
                "ti": np.round(self.ti, 4),
                "mti": np.round(self.mti, 4),
                "speech_db": np.round(self.speech_db, 1),
                "noise_db": self.noise_db,
                "masking_db": None if self.masking_db is None else np.round(self.masking_db, 1),
                "threshold_db": self.threshold_db,
                "auditory_corrections": self.auditory,
                # a band without speech or without weight (the female talker's 125 Hz band, also
                # when the direct method measured a level there) carries no weight
                "bands_used": [bool(u) for u in self.bands_used],
                **listener,
            }
        )


def sti_from_mtf(
    mtf: np.ndarray,
    *,
    modulation_hz: Sequence[float] | Sequence[Sequence[float]] = std.MODULATION_FREQUENCIES_HZ,
    noise_db: Sequence[float] | np.ndarray | None = None,
    speech_level_dba: float = std.DEFAULT_SPEECH_LEVEL_DBA,
    talker: str = "male",
    auditory: bool = True,
    speech_db: Sequence[float] | np.ndarray | None = None,
    audiogram: Audiogram | None = None,
) -> StiResult:
    """STI from a modulation transfer matrix, IEC 60268-16:2011 Annex A.

    Steps: (1) the measured MTF m_{k,f} is multiplied by the noise reduction
    I_k / (I_k + I_n,k + I_am,k + I_rt,k), where I_k is the speech intensity of
    band k (standard spectrum at ``speech_level_dba``), I_n,k the background noise,
    I_am,k the level-dependent masking by band k-1 (speech + noise intensity of
    band k-1 times amf) and I_rt,k the absolute reception threshold; (2) the
    corrected m is limited to 1 and converted to an effective SNR limited to
    +-15 dB; (3) TI = (SNR + 15)/30; (4) MTI_k = mean over modulation frequencies;
    (5) STI = weighted sum with redundancy correction (male or female weights).

    With ``auditory=False`` only the noise correction m * I_k/(I_k + I_n,k) is
    applied (the textbook form, for comparison with published formulas).

    Parameters
    ----------
    mtf : array (7, F) of measured modulation transfer values (F = 14 for full STI,
        2 for STIPA).
    modulation_hz : the F modulation frequencies (one list for all bands, or one list
        per band as for STIPA); reported, not used in the arithmetic.
    noise_db : seven octave-band background-noise levels at the listener, dB SPL, or
        ``None`` for no background noise.
    speech_level_dba : A-weighted speech level at the listener, dB(A).
    talker : "male" or "female" (weights and speech spectrum).
    auditory : apply masking and reception threshold.
    speech_db : optional measured octave-band levels of the received signal, dB SPL
        (direct method with a calibrated recording); they replace the standard
        spectrum at ``speech_level_dba``.
    audiogram : the listener's hearing loss (:mod:`envpredict.hearing`), or ``None`` for
        normal hearing: the reception threshold I_rt,k of each band is raised by the
        band's hearing loss (RT_k + HL_k dB); needs ``auditory``.

    Valid range: speech levels 20-120 dB(A); noise levels -20-140 dB SPL.

    Raises
    ------
    InputError
        For an MTF that is not seven bands of modulation transfer values, or an option out of
        range (noise or speech levels, talker).
    """
    talker = check_talker(talker)
    speech_level_dba = check_speech_level(speech_level_dba)
    m = np.asarray(mtf, dtype=float)
    nb = len(std.OCTAVE_BANDS_HZ)
    if m.ndim != 2 or m.shape[0] != nb or m.shape[1] < 1:
        raise InputError(f"MTF has shape {m.shape}", f"give an array of shape ({nb}, F)")
    if not np.all(np.isfinite(m)):
        raise InputError("MTF contains NaN or infinite values", "check the measurement")
    m = np.clip(m, 0.0, None)
    noise = parse_noise_levels(noise_db) if noise_db is not None else None

    if speech_db is None:
        speech_db = speech_band_levels(speech_level_dba, talker)
    else:
        speech_db = np.asarray(speech_db, dtype=float)
        if speech_db.shape != (nb,) or np.any(np.isnan(speech_db)) or np.any(speech_db > 160):
            raise InputError("band speech levels must be seven numbers in dB SPL", "check the calibration")
    factor, masking_db, threshold_db = band_factors(speech_db, noise, auditory, audiogram)
    m_eff = np.clip(m * factor[:, None], 0.0, std.MTF_MAX)
    snr, ti = transmission_index(m_eff)
    mti = ti.mean(axis=1)
    sti = combine_bands(mti, talker)

    mod = np.asarray(modulation_hz, dtype=float)
    if mod.ndim == 1:
        mod_per_band = tuple(tuple(float(v) for v in mod) for _ in range(nb))
    else:
        mod_per_band = tuple(tuple(float(v) for v in row) for row in mod)

    return StiResult(
        sti=sti,
        rating=qualification_band(sti),
        subjective=subjective_rating(sti),
        talker=talker,
        modulation_hz=mod_per_band,
        mtf_measured=m,
        mtf=m_eff,
        snr_eff=snr,
        ti=ti,
        mti=mti,
        speech_db=speech_db,
        noise_db=noise,
        masking_db=masking_db,
        threshold_db=threshold_db,
        auditory=bool(auditory),
        audiogram=audiogram,
    )
