"""Caution texts attached to results that may be used for life-safety decisions."""

from __future__ import annotations

from . import checks
from . import standards as std
from .exceptions import InputError
from .sti import format_index

LIFE_SAFETY = (
    "This STI is a prediction from the measurement and settings given, not a certification. "
    "For voice-alarm and emergency sound systems the requirement and the measurement "
    "procedure are set by local codes and standards, and a qualified person must sign off "
    f"the result. Such systems are commonly required to reach STI {std.VOICE_ALARM_TARGET_STI:.2f} "
    "or more (common practice; defer to your local code)."
)

NO_NOISE = (
    "No background noise was given: the result holds only for a noise-free site. "
    "Give the octave-band noise levels measured at the listener position with --noise."
)

NO_AUDITORY = (
    "Auditory masking and the reception threshold are switched off (textbook form); "
    "IEC 60268-16 applies them, so report the result with corrections for compliance work."
)


def below_target(sti: float, requirement: float | None = None) -> str | None:
    """The caution for an STI below the user's requirement (or, without one, the common
    voice-alarm requirement), judged on the unrounded value and shown with the decimals
    that keep the two consistent.

    Raises
    ------
    InputError
        If ``sti`` is not a finite number.
    """
    sti = checks.number(sti, "STI")
    if requirement is not None:
        if sti < requirement:
            return f"STI {format_index(sti, requirement)} is below the required {requirement:g}."
        return None
    if sti < std.VOICE_ALARM_TARGET_STI:
        return (f"STI {format_index(sti)} is below {std.VOICE_ALARM_TARGET_STI:.2f}, the value commonly "
                "required of voice-alarm systems.")
    return None


def listener_cautions(result) -> list[str]:
    """The cautions of an STI for a listener with hearing loss (an
    :class:`~envpredict.sti.StiResult` with an audiogram): audibility only, and the bands
    the loss made inaudible. Empty for normal hearing.

    Raises
    ------
    InputError
        If ``result`` is not an StiResult.
    """
    from .hearing import CAUTION_AUDIBILITY, inaudible_bands_hz
    from .sti import StiResult

    if not isinstance(result, StiResult):
        raise InputError(f"result is a {type(result).__name__}", "give an StiResult")
    if result.audiogram is None:
        return []
    out = [f"Listener: {result.audiogram.source}. {CAUTION_AUDIBILITY}."]
    gone = inaudible_bands_hz(result.speech_db, result.audiogram)
    if gone:
        out.append("The hearing loss puts the speech below the listener's threshold at "
                   + ", ".join(f"{f:g} Hz" for f in gone) + ": those bands count less (nothing once the speech is "
                   "15 dB or more below it).")
    return out
