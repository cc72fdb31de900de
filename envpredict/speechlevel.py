"""Active speech level: ITU-T Rec. P.56, method B.

The long-term level of a recording of speech counts its pauses; a listening test sets
the level of its sentences by the level of the speech while it is active. P.56 method B
(the "speech voltmeter") finds that level from the signal alone:

1. the envelope ``q`` is the rectified signal smoothed twice by a first-order
   exponential filter with time constant ``T`` (:data:`~envpredict.standards.P56_TIME_CONSTANT_S`);
2. for each threshold ``c_j`` of a set in 2:1 steps, a sample is *active* when ``q``
   has reached ``c_j`` at that sample or within the hangover ``H`` before it
   (:data:`~envpredict.standards.P56_HANGOVER_S`); ``a_j`` counts the active samples;
3. ``A_j = 10 log10(sum x^2 / a_j)`` is the level of the signal over its active part
   at that threshold, ``C_j = 20 log10 c_j``; the active speech level is the value of
   ``A`` where ``A - C`` falls to the margin ``M``
   (:data:`~envpredict.standards.P56_MARGIN_DB`), by linear interpolation in dB between
   the two thresholds that bracket it;
4. the activity factor is the long-term mean square over the active mean square.

Levels are in dB re the square of a unit amplitude (dB re full scale, "dBov" in P.56's
terms, for audio read as floats in -1 .. 1). Pure functions on arrays: no file access,
no printing.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from . import standards as std
from .exceptions import ComputationError
from .results import jsonable

#: Shortest signal measured, s: one hangover (judgement: a shorter signal has no
#: stretch the method can call a pause).
MIN_SECONDS: float = std.P56_HANGOVER_S

#: Name of the method, as it appears in results.
METHOD: str = "ITU-T P.56 (12/2011) method B"


@dataclass(frozen=True)
class ActiveLevel:
    """The active speech level of a signal (ITU-T P.56, method B).

    Attributes
    ----------
    active_level_db : level of the speech while active, dB re unit amplitude squared
        (dB re full scale for float audio).
    long_term_level_db : level over the whole signal, pauses included, same reference.
    activity_factor : share of the signal that is active, 0 .. 1
        (``10 ** ((long_term_level_db - active_level_db) / 10)``).
    threshold_db : the threshold ``C`` at which ``A - C`` equals the margin, dB (same
        reference).
    fs : sample rate, Hz.
    duration_s : length of the signal, s.
    cautions, notes : what the user must read; method details.
    """

    active_level_db: float
    long_term_level_db: float
    activity_factor: float
    threshold_db: float
    fs: int
    duration_s: float
    cautions: tuple[str, ...] = field(default_factory=tuple)
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def active_mean_square(self) -> float:
        """Mean square of the signal over its active part (``10 ** (active_level_db / 10)``)."""
        return 10.0 ** (self.active_level_db / 10.0)

    def to_dict(self) -> dict:
        return jsonable({
            "method": METHOD,
            "active_level_db": round(self.active_level_db, 3),
            "long_term_level_db": round(self.long_term_level_db, 3),
            "activity_factor": round(self.activity_factor, 5),
            "threshold_db": round(self.threshold_db, 3),
            "fs": self.fs,
            "duration_s": self.duration_s,
            "cautions": list(self.cautions),
            "notes": list(self.notes),
        })


def p56_envelope(x: np.ndarray, fs: int) -> np.ndarray:
    """The envelope ``q`` of P.56 method B: ``|x|`` through two first-order smoothers.

    ``p[k] = g p[k-1] + (1-g) |x[k]|``, ``q[k] = g q[k-1] + (1-g) p[k]``,
    ``g = exp(-1 / (T fs))``, both starting at 0.

    Raises
    ------
    InputError
        For a signal that is not a finite 1-D array of numbers, or a rate outside the
        accepted range.
    """
    from scipy.signal import lfilter

    from .checks import array, sample_rate

    fs = sample_rate(fs, "speech")
    x = array(x, "speech", fix="give the speech as a 1-D array of samples")

    g = math.exp(-1.0 / (std.P56_TIME_CONSTANT_S * fs))
    b, a = [1.0 - g], [1.0, -g]
    return lfilter(b, a, lfilter(b, a, np.abs(x)))


def _active_counts(q: np.ndarray, thresholds: np.ndarray, hangover: int) -> np.ndarray:
    """Active samples per threshold: ``q`` reached it at the sample or at most
    ``hangover`` samples before (none before the first time it is reached)."""
    k = np.arange(q.size)
    counts = np.empty(thresholds.size, dtype=np.int64)
    for j, c in enumerate(thresholds):
        last = np.maximum.accumulate(np.where(q >= c, k, -hangover - 1))
        counts[j] = int(np.count_nonzero(k - last <= hangover))
    return counts


def active_speech_level(x: np.ndarray, fs: int) -> ActiveLevel:
    """Active speech level and activity factor by ITU-T Rec. P.56, method B.

    The thresholds step down in 2:1 steps
    (:data:`~envpredict.standards.P56_THRESHOLD_RATIO`) from the envelope's peak,
    :data:`~envpredict.standards.P56_THRESHOLD_COUNT` of them. The G.191 tool fixes its
    set at ``2**-15 .. 2**-1`` of full scale instead; placed from the peak, the
    measurement does not depend on the units or the gain of ``x`` (a gain of ``G`` dB
    shifts both levels by exactly ``G`` dB), and it differs from the fixed set only by
    where the 2:1 grid falls (the interpolation between two thresholds, about 0.2 dB at
    most on speech). Between the two thresholds that bracket the margin the level is
    interpolated linearly in dB (the exact end of the G.191 tool's bisection, which
    stops within 0.5 dB of the margin).

    Parameters
    ----------
    x : speech signal, 1-D, at ``fs``; at least :data:`MIN_SECONDS` long.
    fs : sample rate, Hz.

    Returns
    -------
    ActiveLevel

    Raises
    ------
    InputError
        For input the one validation rule refuses (empty, non-finite, silent, constant,
        too short).
    ComputationError
        When no threshold of the set has ``A - C`` at or below the margin (a signal
        with too little active time, e.g. a single click).

    References
    ----------
    ITU-T Rec. P.56 (12/2011), "Objective measurement of active speech level", method B.
    ITU-T Rec. G.191, Software Tool Library, module sv-p56 (speech voltmeter).

    Examples
    --------
    >>> import numpy as np
    >>> fs = 16000
    >>> t = np.arange(4 * fs) / fs
    >>> tone = 0.1 * np.sin(2 * np.pi * 500 * t)
    >>> lev = active_speech_level(np.concatenate([tone, np.zeros(4 * fs)]), fs)
    >>> round(float(lev.active_level_db - 20 * np.log10(0.1 / np.sqrt(2))), 1)  # the tone's level less the hangover
    -0.3
    >>> round(lev.activity_factor, 2)  # 4 s of tone, 0.2 s hangover and the envelope's fall, in 8 s
    0.53
    """
    from .audio import check_rate, validate_signal

    fs = check_rate(fs, "speech")
    s = validate_signal(x, fs, name="speech", allow_clipping=True, min_seconds=MIN_SECONDS)
    n = s.size
    sq = float(np.dot(s, s))
    long_term = 10.0 * math.log10(sq / n)
    q = p56_envelope(s, fs)
    c = float(q.max()) * std.P56_THRESHOLD_RATIO ** np.arange(1.0 - std.P56_THRESHOLD_COUNT, 1.0)
    hangover = math.ceil(std.P56_HANGOVER_S * fs - 1e-9)
    counts = _active_counts(q, c, hangover)
    ok = counts > 0
    a_db = np.full(c.size, np.inf)
    a_db[ok] = 10.0 * np.log10(sq / counts[ok])
    c_db = 20.0 * np.log10(c)
    delta = a_db - c_db
    notes = [f"{METHOD}: envelope time constant {std.P56_TIME_CONSTANT_S:g} s, hangover {std.P56_HANGOVER_S:g} s, "
             f"margin {std.P56_MARGIN_DB:g} dB, thresholds in {std.P56_THRESHOLD_RATIO:g}:1 steps"]
    if delta[0] <= std.P56_MARGIN_DB:
        # already at the lowest threshold: the signal is active throughout at this resolution
        level, thr = float(a_db[0]), float(c_db[0])
        notes.append("A - C is at the margin already at the lowest threshold: the active level is taken there")
    else:
        above = np.flatnonzero(ok & (delta <= std.P56_MARGIN_DB))
        if above.size == 0:
            raise ComputationError(
                "no threshold of the P.56 set brings the active level within the margin (too little active "
                "speech: a click or a very short burst?)", "measure a recording holding speech")
        j = int(above[0])
        d0, d1 = delta[j - 1] - std.P56_MARGIN_DB, delta[j] - std.P56_MARGIN_DB
        w = d0 / (d0 - d1)
        level = float(a_db[j - 1] + w * (a_db[j] - a_db[j - 1]))
        thr = float(c_db[j - 1] + w * (c_db[j] - c_db[j - 1]))
    activity = min(1.0, 10.0 ** ((long_term - level) / 10.0))
    return ActiveLevel(active_level_db=level, long_term_level_db=long_term, activity_factor=activity,
                       threshold_db=thr, fs=fs, duration_s=n / fs, notes=tuple(notes))
