"""Two ears: the index of each ear and their better-ear combination per octave band.

A two-channel (left, right) impulse response, STIPA recording or degraded signal is
analysed ear by ear with the one-channel jobs (:mod:`envpredict.indirect`,
:mod:`envpredict.direct`, :mod:`envpredict.pair`, unchanged), and the two ears are
combined here, in one place, by the better-ear rule:

    MTI_k = max(MTI_k,left, MTI_k,right) for each octave band k, then
    STI = sum_k alpha_k MTI_k - sum_k beta_k sqrt(MTI_k MTI_k+1)

(IEC 60268-16:2011, A.2.6, with its weights and redundancy factors,
:func:`envpredict.sti.combine_bands`). The better-ear per band rule is the simplest
binaural STI of van Wijngaarden & Drullman (2008); their full model also takes MTFs from
the interaural cross-correlation (binaural unmasking), which is not implemented here, so
the result is a lower estimate of what two ears achieve where binaural unmasking helps
(low bands, a noise source off to one side).

For STOI and ESTOI the paper defines no per-band rule. ESTOI correlates spectro-temporal
segments across bands, so its bands cannot be taken one ear at a time; the better-ear
value of both is therefore the larger of the two ears' indices (the listener attends to
the ear that carries more), stated in the result.

This module orchestrates the one-channel jobs and holds the combination rule; it holds
no DSP of its own.

References
----------
van Wijngaarden, S. J. and Drullman, R. (2008). Binaural intelligibility prediction based
on the speech transmission index. J. Acoust. Soc. Am. 123(6), 4514-4523. (The rule is
cited from memory: the text of the paper could not be checked here.)
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field, replace
from typing import Any, Callable, Sequence

import numpy as np

from . import checks
from . import standards as std
from .exceptions import InputError
from .results import jsonable
from .sti import StiResult, combine_bands, qualification_band, subjective_rating

#: Names of the two ears, in channel order (channel 0 = left, channel 1 = right: the
#: convention of stereo WAV files and of head-and-torso simulators).
EARS: tuple[str, str] = ("left", "right")

#: The combination rule, as the results state it.
BETTER_EAR_RULE: str = ("better ear per octave band: in each band the larger MTI of the two ears, combined with "
                        "the IEC 60268-16:2011 weights and redundancy factors (A.2.6)")

#: Where the rule comes from (cited from memory: the paper's text could not be checked).
BETTER_EAR_SOURCE: str = ("van Wijngaarden & Drullman 2008, J. Acoust. Soc. Am. 123(6):4514-4523, simplest "
                          "binaural STI (better ear per octave band; from memory); binaural unmasking not modelled")

#: The better-ear rule of STOI and ESTOI (no per-band rule is published for them).
BETTER_EAR_PAIR_RULE: str = ("STOI and ESTOI: the larger of the two ears' indices (no per-band better-ear rule is "
                             "published for them; ESTOI's segments span all bands, so its bands cannot be taken "
                             "one ear at a time). Speech-based STI: better ear per octave band, as for the STI")

#: Kinds of two-ear result.
KINDS: tuple[str, ...] = ("ir", "stipa", "pair")


def better_ear_bands(left: Sequence[float] | np.ndarray, right: Sequence[float] | np.ndarray
                     ) -> tuple[np.ndarray, np.ndarray]:
    """The better ear of each band: the larger of two ears' band indices (MTI or TI).

    Parameters
    ----------
    left, right : the band indices of each ear, same length (NaN: not computed in that
        band; a band computed in one ear only takes that ear).

    Returns
    -------
    (values, ear): the better-ear value per band, and per band 0 (left) or 1 (right);
    a tie goes to the left ear.

    References
    ----------
    van Wijngaarden & Drullman (2008), JASA 123(6):4514-4523 (the better ear per octave
    band; from memory).

    Examples
    --------
    >>> v, ear = better_ear_bands([0.5, 0.7], [0.6, 0.7])
    >>> v.tolist(), ear.tolist()
    ([0.6, 0.7], [1, 0])

    Raises
    ------
    InputError
        For indices that are not 1-D arrays of numbers of the same length.
    """
    lv = checks.array(left, "left ear's band indices", finite=False)
    rv = checks.array(right, "right ear's band indices", finite=False)
    if lv.shape != rv.shape:
        raise InputError(f"the ears have {lv.size} and {rv.size} band indices", "give one per band for each ear")
    ear = ((rv > lv) | (np.isnan(lv) & ~np.isnan(rv))).astype(int)
    return np.where(ear == 1, rv, lv), ear


def better_ear_sti(left: StiResult, right: StiResult) -> StiResult:
    """The better-ear STI of two ears' STI results: each octave band from the ear with
    the larger MTI (its rows of the MTF, TI, levels), the bands combined with the IEC
    60268-16:2011 weights (A.2.6) of the ears' talker.

    Two identical ears give the one-ear result; swapping the ears changes nothing but the
    ear names; an ear that carries nothing (MTI 0 in every band) leaves the other ear's
    result.

    References
    ----------
    van Wijngaarden & Drullman (2008), JASA 123(6):4514-4523 (from memory).

    Raises
    ------
    InputError
        For results that are not STI results, or whose talker, bands or modulation
        frequencies differ between the ears.
    """
    for r, what in ((left, "left"), (right, "right")):
        if not isinstance(r, StiResult):
            raise InputError(f"the {what} ear's result is not an STI result", "pass two StiResult objects")
    if left.talker != right.talker or tuple(left.bands_hz) != tuple(right.bands_hz) or \
            np.shape(left.mtf) != np.shape(right.mtf) or left.modulation_hz != right.modulation_hz:
        raise InputError("the ears' results differ in talker, bands or modulation frequencies",
                         "analyse both ears with the same options")
    mti, ear = better_ear_bands(left.mti, right.mti)
    pick = ear.astype(bool)

    def rows(a, b):
        if a is None or b is None:
            return a if b is None else b
        a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
        if a.shape != b.shape:
            return a
        sel = pick.reshape((-1,) + (1,) * (a.ndim - 1))
        return np.where(sel, b, a)

    sti = combine_bands(mti, left.talker)
    return replace(
        left, sti=sti, rating=qualification_band(sti), subjective=subjective_rating(sti),
        mtf_measured=rows(left.mtf_measured, right.mtf_measured), mtf=rows(left.mtf, right.mtf),
        snr_eff=rows(left.snr_eff, right.snr_eff), ti=rows(left.ti, right.ti), mti=mti,
        speech_db=rows(left.speech_db, right.speech_db), noise_db=rows(left.noise_db, right.noise_db),
        masking_db=rows(left.masking_db, right.masking_db), threshold_db=rows(left.threshold_db, right.threshold_db),
    )


@dataclass(frozen=True)
class EarsResult:
    """An index of two ears: each ear's whole result and their better-ear combination.

    Attributes
    ----------
    kind : "ir", "stipa" or "pair".
    left, right : each ear's result (:class:`envpredict.indirect.IrResult`,
        :class:`envpredict.direct.DirectResult` or :class:`envpredict.pair.PairResult`),
        or ``None`` for an ear that gave no result (``errors`` says why).
    better : the better-ear STI (STI kinds; ``None`` for a pair).
    better_ear : per octave band, the ear the better-ear value comes from.
    mti_left, mti_right : each ear's octave-band MTI (pair: the speech-based STI's TI),
        NaN for an ear without a result.
    errors : per ear, why it gave no result ("" when it did).
    stoi, estoi : pair only: the better ear's STOI and ESTOI (the larger of the ears').
    ssti, ssti_regression : pair only: the better-ear speech-based STI (normalised
        covariance and envelope regression; ``None`` when not computed).
    """

    kind: str
    left: Any
    right: Any
    better: StiResult | None
    better_ear: tuple[str, ...]
    mti_left: np.ndarray
    mti_right: np.ndarray
    errors: tuple[str, str] = ("", "")
    stoi: float | None = None
    estoi: float | None = None
    ssti: float | None = None
    ssti_regression: float | None = None
    bands_hz: tuple[float, ...] = field(default=std.OCTAVE_BANDS_HZ)

    @property
    def ears(self) -> dict:
        """The ears' results by name."""
        return dict(zip(EARS, (self.left, self.right)))

    def _binaural(self) -> dict:
        with np.errstate(invalid="ignore"):
            diff = self.mti_left - self.mti_right
        out = {
            "rule": BETTER_EAR_PAIR_RULE if self.kind == "pair" else BETTER_EAR_RULE,
            "source": BETTER_EAR_SOURCE,
            "bands_hz": self.bands_hz,
            "better_ear": list(self.better_ear),
            "mti_left": np.round(self.mti_left, 4),
            "mti_right": np.round(self.mti_right, 4),
            "mti_difference": np.round(diff, 4),
            "errors": {e: msg for e, msg in zip(EARS, self.errors)},
        }
        out.update({k: None if v is None else round(v, 4) for k, v in self.ear_indices.items()})
        return out

    @property
    def ear_indices(self) -> dict[str, float | None]:
        """Each ear's index, unrounded: ``sti_left``, ``sti_right`` (STI kinds) or
        ``stoi_left`` ... ``ssti_right`` (pair); ``None`` where an ear has none."""
        index = ("stoi", "estoi", "ssti") if self.kind == "pair" else ("sti",)
        out: dict[str, float | None] = {}
        for ear, r in self.ears.items():
            for k in index:
                v = None if r is None else (r.sti.sti if k == "sti" else getattr(r, k))
                out[f"{k}_{ear}"] = None if v is None else float(v)
        return out

    def _cautions_notes(self, dicts: dict) -> tuple[list, list]:
        """Cautions of both ears (one held by a single ear names it; an ear's "below the
        requirement" gives way to the better ear's own), notes once, the rule first."""
        from . import cautions as cau

        own: dict[str, list[str]] = {}
        notes: list[str] = []
        for ear, d in dicts.items():
            if d is None:
                continue
            r = self.ears[ear]
            low = cau.below_target(r.sti.sti, r.sti.requirement) if self.better is not None else None
            own[ear] = [str(c) for c in d.get("cautions", []) if c != low]
            notes += [str(n) for n in d.get("notes", []) if str(n) not in notes]
        cautions: list[str] = []
        for ear, items in own.items():
            for c in items:
                shared = all(c in v for v in own.values())
                text = c if shared else f"{ear.capitalize()} ear: {c}"
                if text not in cautions:
                    cautions.append(text)
        if self.better is not None:
            low = cau.below_target(self.better.sti, self.better.requirement)
            if low:
                cautions.append(f"Better ear: {low}")
        for ear, msg in zip(EARS, self.errors):
            if msg:
                other = EARS[1 - EARS.index(ear)]
                cautions.append(f"The {ear} ear gave no result ({msg}); the better-ear values are the {other} "
                                "ear's alone.")
        notes.insert(0, f"Two ears: channel 0 = left, channel 1 = right. {self._binaural()['rule']}. "
                        f"Source: {BETTER_EAR_SOURCE}.")
        key = "speech-based STI" if self.kind == "pair" else "STI"
        combined = self.ssti if self.kind == "pair" else self.better.sti
        ears = {e: getattr(r, "ssti", None) if self.kind == "pair" else r.sti.sti
                for e, r in self.ears.items() if r is not None}
        lower = {e: v for e, v in ears.items() if v is not None and combined is not None and combined < v - 1e-12}
        if lower:
            e, v = max(lower.items(), key=lambda kv: kv[1])
            notes.insert(1, f"The better-ear {key} ({combined:.4f}) is below the {e} ear's own ({v:.4f}): the "
                            "redundancy term of IEC 60268-16:2011 (A.2.6, minus beta_k sqrt(MTI_k MTI_k+1)) "
                            "grows when a band beside a weak band rises, so raising a weak band a little can lower "
                            "the index. The rule is kept as published.")
        return cautions, notes

    def to_dict(self) -> dict:
        dicts = {ear: None if r is None else r.to_dict() for ear, r in self.ears.items()}
        cautions, notes = self._cautions_notes(dicts)
        if self.kind == "pair":
            d: dict = {
                "stoi": None if self.stoi is None else round(self.stoi, 4),
                "estoi": None if self.estoi is None else round(self.estoi, 4),
                "ssti": None if self.ssti is None else round(self.ssti, 4),
                "ssti_regression": None if self.ssti_regression is None else round(self.ssti_regression, 4),
            }
        else:
            d = self.better.to_dict()
            one = next(x for x in dicts.values() if x is not None)
            d["method"] = f"{one['method']}; two ears, better ear per octave band"
            if "calibrated" in one and not one["calibrated"]:
                d["speech_db"] = None  # an uncalibrated recording has no levels in dB SPL
        d.update({"ears": dicts, "binaural": self._binaural(), "cautions": cautions, "notes": notes})
        return jsonable(d)


# ---------------------------------------------------------------------------
# Orchestration: each ear by the one-channel job, then the rule above
# ---------------------------------------------------------------------------

def check_ears(left: np.ndarray, right: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Two ears' signals as arrays of the same length.

    Raises
    ------
    InputError
        For signals that are not 1-D arrays of numbers, or that differ in length.
    """
    lv = checks.array(left, "left ear's signal", finite=False)
    rv = checks.array(right, "right ear's signal", finite=False)
    if lv.size != rv.size:
        raise InputError(f"the left and right channels differ in length ({lv.size} and {rv.size} samples)",
                         "give both ears of one recording, cut to the same length")
    return lv, rv


def two_channels(path: str | os.PathLike, name: str = "recording") -> None:
    """Refuse a file that does not hold exactly two channels (left, right).

    Raises
    ------
    InputError
        For a missing or unreadable file, or one with another number of channels.
    """
    from .audio import audio_info

    _, _, ch = audio_info(path, name)
    if ch != 2:
        raise InputError(f"the two-ear analysis needs a two-channel {name} (left, right); "
                         f"'{os.path.basename(os.fsdecode(path))}' has {ch} channel{'s' if ch != 1 else ''}",
                         "give a two-channel file (channel 0 left, channel 1 right), or leave out --ears")


def _halves(progress: Callable[[int, int], None] | None, ear: int) -> Callable[[int, int], None] | None:
    """A progress callback for one ear: the left ear fills the first half, the right the second."""
    if progress is None:
        return None
    return lambda done, total: progress(done + ear * total, 2 * total)


def _each_ear(run: Callable[[int, Any], Any], options: dict) -> tuple[list, list[str]]:
    """``run(ear, progress)`` for ear 0 and 1, with the ``progress`` option of ``options``
    (taken out of them) split in halves; an ear refused with an InputError gives ``None``
    and its reason, unless both are refused (then the left ear's error is raised)."""
    progress = options.pop("progress", None)
    results: list = [None, None]
    errors = ["", ""]
    first: InputError | None = None
    for i in (0, 1):
        try:
            results[i] = run(i, _halves(progress, i))
        except InputError as e:
            first = first or e
            errors[i] = e.one_line()
    if first is not None and results[0] is None and results[1] is None:
        raise first
    return results, errors


def _sti_ears(kind: str, results: list, errors: list[str]) -> EarsResult:
    stis = [None if r is None else r.sti for r in results]
    if stis[0] is None or stis[1] is None:
        better = stis[0] or stis[1]
        ear = np.full(len(better.mti), 0 if stis[0] is not None else 1)
    else:
        better = better_ear_sti(stis[0], stis[1])
        ear = better_ear_bands(stis[0].mti, stis[1].mti)[1]
    nan = np.full(len(better.mti), np.nan)
    return EarsResult(kind=kind, left=results[0], right=results[1], better=better,
                      better_ear=tuple(EARS[i] for i in ear), errors=(errors[0], errors[1]),
                      mti_left=nan if stis[0] is None else np.asarray(stis[0].mti, dtype=float),
                      mti_right=nan if stis[1] is None else np.asarray(stis[1].mti, dtype=float),
                      bands_hz=tuple(better.bands_hz))


def ir_ears(left: np.ndarray, right: np.ndarray, fs: int, **options: Any) -> EarsResult:
    """STI (indirect method) of a two-ear impulse response: each ear by
    :func:`envpredict.indirect.sti_from_ir` with the same ``options``, then the better
    ear per octave band (:func:`better_ear_sti`).

    Raises
    ------
    InputError
        For ears of different lengths, or as :func:`envpredict.indirect.sti_from_ir`
        when both ears are refused (one refused ear leaves the other's result, with a
        caution).
    """
    from .indirect import sti_from_ir

    lv, rv = check_ears(left, right)
    results, errors = _each_ear(lambda i, step: sti_from_ir((lv, rv)[i], fs, progress=step, **options), options)
    return _sti_ears("ir", results, errors)


def ir_ears_file(path: str | os.PathLike, **options: Any) -> EarsResult:
    """STI (indirect method) of a two-channel impulse-response file (channel 0 left,
    channel 1 right): each ear by :func:`envpredict.indirect.sti_from_ir_file` with the
    same ``options`` (any but ``channel``), then the better ear per octave band.

    Raises
    ------
    InputError
        For a file without exactly two channels, a ``channel`` option, or as
        :func:`envpredict.indirect.sti_from_ir_file` when both ears are refused.
    """
    from .indirect import sti_from_ir_file

    _no_channel(options)
    two_channels(path, "impulse response")
    results, errors = _each_ear(lambda i, step: sti_from_ir_file(path, channel=i, progress=step, **options),
                                options)
    return _sti_ears("ir", results, errors)


def stipa_ears(left: np.ndarray, right: np.ndarray, fs: int, **options: Any) -> EarsResult:
    """STI (direct method, STIPA) of a two-ear recording: each ear by
    :func:`envpredict.direct.stipa_from_recording` with the same ``options``, then the
    better ear per octave band (:func:`better_ear_sti`).

    Raises
    ------
    InputError
        For ears of different lengths, or as :func:`envpredict.direct.stipa_from_recording`
        when both ears are refused.
    """
    from .direct import stipa_from_recording

    lv, rv = check_ears(left, right)
    results, errors = _each_ear(lambda i, step: stipa_from_recording((lv, rv)[i], fs, progress=step,
                                                                     name=f"{EARS[i]} ear", **options), options)
    return _sti_ears("stipa", results, errors)


def stipa_ears_file(path: str | os.PathLike, **options: Any) -> EarsResult:
    """STI (direct method, STIPA) of a two-channel recording file (channel 0 left,
    channel 1 right), each ear by :func:`envpredict.direct.stipa_from_file` (read in
    blocks), then the better ear per octave band. A two-channel calibrator recording,
    if given, calibrates each ear from its own channel (a mono one both ears) unless
    ``calibrator_channel`` is given.

    Raises
    ------
    InputError
        For a file without exactly two channels, a ``channel`` option, or as
        :func:`envpredict.direct.stipa_from_file` when both ears are refused.
    """
    from .direct import stipa_from_file

    from .audio import audio_info

    _no_channel(options)
    two_channels(path, "recording")
    if options.get("calibrator") is not None and options.get("calibrator_channel") is None:
        # a mono calibrator serves both ears; a two-channel one gives each ear its own
        if audio_info(options["calibrator"], "calibrator recording")[2] == 1:
            options["calibrator_channel"] = 0
    name = os.path.basename(os.fsdecode(path))
    results, errors = _each_ear(lambda i, step: stipa_from_file(path, i, progress=step,
                                                                name=f"{name} ({EARS[i]})", **options), options)
    return _sti_ears("stipa", results, errors)


def _no_channel(options: dict) -> None:
    for k in ("channel", "clean_channel", "degraded_channel"):
        if options.get(k) is not None:
            raise InputError(f"--{k.replace('_', '-')} was given with the two-ear analysis (--ears)",
                             "leave it out: the ears are channel 0 (left) and 1 (right)")
        options.pop(k, None)


def _pair_ears(results: list, errors: list[str]) -> EarsResult:
    nb = len(std.OCTAVE_BANDS_HZ)
    nan = np.full(nb, np.nan)

    def ti(r, regression: bool = False) -> np.ndarray:
        if r is None or r.ssti_bands is None:
            return nan
        return np.asarray(r.ssti_bands.regression_ti if regression else r.ssti_bands.ti, dtype=float)

    def larger(values):
        vals = [v for v in values if v is not None]
        return max(vals) if vals else None

    # the speech-based STI (one modulation column: TI = MTI) by the better ear per band,
    # with the male weights of the one-ear speech-based STI (IEC 60268-16:2011, A.2.6)
    mti, ear = better_ear_bands(ti(results[0]), ti(results[1]))
    m_reg, _ = better_ear_bands(ti(results[0], True), ti(results[1], True))
    have = [r is not None and r.ssti is not None for r in results]
    ssti = combine_bands(mti, "male") if any(have) and np.all(np.isfinite(mti)) else None
    reg = combine_bands(m_reg, "male") if any(have) and np.all(np.isfinite(m_reg)) else None
    return EarsResult(
        kind="pair", left=results[0], right=results[1], better=None, better_ear=tuple(EARS[i] for i in ear),
        mti_left=ti(results[0]), mti_right=ti(results[1]), errors=(errors[0], errors[1]),
        stoi=larger([None if r is None else r.stoi for r in results]),
        estoi=larger([None if r is None else r.estoi for r in results]),
        ssti=ssti, ssti_regression=reg,
    )


def pair_ears(clean: np.ndarray | tuple[np.ndarray, np.ndarray], left: np.ndarray, right: np.ndarray, fs: int,
              **options: Any) -> EarsResult:
    """STOI, ESTOI and speech-based STI of two ears: each ear's degraded signal against
    the clean reference (one for both ears, or a (left, right) tuple of references) by
    :func:`envpredict.pair.pair_indices` with the same ``options``; then STOI and ESTOI
    of the better ear (the larger of the ears'; see :data:`BETTER_EAR_PAIR_RULE`) and
    the speech-based STI of the better ear per octave band.

    Raises
    ------
    InputError
        For degraded ears of different lengths, or as :func:`envpredict.pair.pair_indices`
        when both ears are refused.
    """
    from .pair import pair_indices

    lv, rv = check_ears(left, right)
    refs = clean if isinstance(clean, tuple) else (clean, clean)
    if len(refs) != 2:
        raise InputError("the clean reference is a tuple of more than two signals", "give one, or (left, right)")
    results, errors = _each_ear(lambda i, step: pair_indices(refs[i], (lv, rv)[i], fs, progress=step, **options),
                                options)
    return _pair_ears(results, errors)


def pair_ears_file(clean_path: str | os.PathLike, degraded_path: str | os.PathLike, **options: Any) -> EarsResult:
    """:func:`pair_ears` of files: a two-channel degraded file (channel 0 left, 1 right)
    against a mono clean reference, or a two-channel one (each ear its own reference),
    each ear by :func:`envpredict.pair.pair_from_files` with the same ``options`` (any but
    the channels).

    Raises
    ------
    InputError
        For a degraded file without exactly two channels, a clean file with more than
        two, a channel option, or as :func:`envpredict.pair.pair_from_files` when both
        ears are refused.
    """
    from .audio import audio_info
    from .pair import pair_from_files

    _no_channel(options)
    two_channels(degraded_path, "degraded file")
    n_clean = audio_info(clean_path, "clean")[2]
    if n_clean > 2:
        raise InputError(f"the clean file has {n_clean} channels",
                         "give a mono clean reference, or a two-channel one (left, right)")
    results, errors = _each_ear(lambda i, step: pair_from_files(
        clean_path, degraded_path, clean_channel=i if n_clean == 2 else None, degraded_channel=i,
        progress=step, **options), options)
    return _pair_ears(results, errors)
