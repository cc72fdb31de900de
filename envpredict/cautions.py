"""Caution texts attached to results that may be used for life-safety decisions."""

from __future__ import annotations

from . import checks
from . import standards as std
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
