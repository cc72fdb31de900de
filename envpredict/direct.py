"""STI by the direct method: analysis of recordings of the STIPA and full-STI test
signals (IEC 60268-16:2011, 6.1 and Annex B).

The path from a recording to the index:

1. **Usable part.** Energy-based: 50 ms frame energies, smoothed over 0.5 s; the
   longest run within 20 dB of the top level (troughs shorter than 2 s bridged) is
   the test signal. Noise-only stretches less than 20 dB below the signal cannot be
   told apart by energy: cut them from the file before the analysis. :data:`GUARD_S`
   at each end is left out (the room's build-up and decay, plus the edge detection).
   The test signal may start at any time in the file.
2. **Bands and envelopes.** The seven octave bands and their intensity envelopes
   (squared, 50 Hz low-pass, about 200 Hz) at the recording's own sample rate: the
   modulation frequencies are physical (Hz), so a recorder rate other than the
   generator's changes nothing. The recording is read block by block
   (:class:`envpredict.bands.EnvelopeStream`, filter states carried across blocks), so
   memory stays bounded for recordings of an hour or more, and an array in memory goes
   through the same block-wise path as a file. Each band filter runs twice in cascade,
   which gives the magnitude response of the zero-phase octave filters of
   :func:`envpredict.bands.octave_bands` (|H|^2); the delay of each band's envelope
   (twice the band filter's group delay at its centre plus the low-pass's, a few
   envelope samples) is taken off, so the analysed envelope covers the same time as
   the usable part. The filters' start-up transient (impulse-response energy -60 dB
   after about 0.15 s in the 125 Hz band, less above) lies inside the margin
   :data:`GUARD_S`. Two passes over a recording: first the frame energies
   (usable part) and the input checks, then the envelopes of the usable part only.
3. **Modulation depth.** Over a window of a whole number of periods of the band's
   lowest modulation frequency (STIPA: f2 = 5 f1, so also whole periods of f2), the
   depth at F is ``2 |sum I(t) exp(-j 2 pi F t)| / sum I(t)``, the projection of the
   envelope onto the known frequency (Houtgast & Steeneken's definition of the
   modulation index). The fluctuation of the noise carrier itself adds a random
   phasor; its mean power is estimated from the envelope spectrum at the other,
   unused frequencies of the same window and subtracted from the squared depth
   (:func:`envpredict.modulation.modulation_depths`; this module only orchestrates).
4. **MTF** = measured depth / nominal depth of the signal (0.55 for STIPA, 1 for
   full STI), then :func:`envpredict.sti.sti_from_mtf` -- the one code path for every
   STI in this tool.
5. **Uncertainty.** The usable part is split into 2-8 consecutive windows of at
   least two periods of the lowest modulation frequency; each gives an STI, and the
   standard uncertainty of the full-length result is their standard deviation divided
   by sqrt(number of windows).

Level-dependent masking and the reception threshold need absolute levels: with a
calibration (an offset in dB, or a recording of a 1 kHz calibrator at a stated level)
the A-weighted level of the received test signal is the speech level; without one the
index is computed without those corrections and the result says so.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Callable, Sequence

import numpy as np

from . import cautions as cau
from . import checks
from . import standards as std
from .audio import (
    ArraySource, FileSource, SignalCheck, Source, audio_files_in, check_calibration_db, check_rate, resolve_calibration,
    validate_signal,
)
from .bands import EnvelopeStream, check_rate_for_octaves, envelope_delays
from .exceptions import InputError
from .hearing import Audiogram
from .modulation import ClockOffset, clock_offset, modulation_depths, mtf_from_test_signal
from .results import jsonable
from .signals import SETTLE_S
from .sti import StiResult, check_requirement, check_talker, parse_noise_levels, sti_from_mtf
from .tables import load_audiogram

#: Frame length and smoothing of the energy detector of the usable part, s.
FRAME_S: float = 0.050
SMOOTH_S: float = 0.5

#: Margin left out at each end of the detected test signal, s: the settling time of
#: the signal set (room build-up and decay) plus half the detector's smoothing.
GUARD_S: float = SETTLE_S + SMOOTH_S / 2

#: The test signal is where the smoothed level is within this many dB of the top
#: level (95th percentile of the smoothed frame levels; judgement: deep enough for the
#: troughs of a fully modulated signal, high enough to leave out quiet lead-ins).
ACTIVE_THRESHOLD_DB: float = 20.0

#: Stretches below the threshold shorter than this are bridged, s: modulation troughs,
#: not gaps (a period of the lowest modulation frequency is 1.6 s).
MAX_GAP_S: float = 2.0

#: Each repeat window holds at least this many periods of the lowest modulation
#: frequency; at least MIN_WINDOWS and at most MAX_WINDOWS windows (judgement: two
#: periods keep the window estimates usable; two windows give a spread at all).
MIN_PERIODS_PER_WINDOW: int = 2
MIN_WINDOWS: int = 2
MAX_WINDOWS: int = 8

#: Longest recording analysed, s: 2 hours. The recording is processed block by block,
#: but the seven envelopes of the usable part (about 200 Hz, 40 MB per hour) are held
#: in memory, and the FFT of a whole analysis window (for the envelope noise floor)
#: needs working memory of about 100 MB per hour of window. Measured peak resident
#: memory of ``envpredict stipa`` at 48 kHz (benchmarks/bench_long_stipa.py): about
#: 280 MB for 1 h, 440 MB for 2 h, 750 MB for 4 h. The limit keeps every accepted file
#: within 600 MB. Judgement: a measurement of one condition does not last longer; a
#: longer file is almost surely a mistake.
MAX_RECORDING_S: float = 2 * 3600.0

#: Length of the blocks a recording is processed in, s (memory per block: about 60 MB
#: at 48 kHz). The block length does not change any result.
BLOCK_SECONDS: float = 20.0

#: Band filters of the envelope stream run this many times in cascade: 2 gives the
#: magnitude response of the zero-phase octave bands (:func:`envpredict.bands.octave_bands`).
#: A single causal pass has half the attenuation in dB outside the band; the neighbouring
#: STIPA bands then leak in and dilute the depths (an undistorted signal reads about 0.83).
BAND_PASSES: int = 2

#: A modulation is "found" where its depth is this many times the local RMS depth of
#: the envelope noise (for a continuous modulation spectrum -- noise, speech, music --
#: exceeding 4x its local RMS happens with probability about exp(-16)). The test
#: signal is present when at least MIN_FOUND pairs (band, frequency) are found
#: (judgement: even a channel with STI near 0.3 keeps its low-frequency modulations).
FOUND_RATIO: float = 4.0
MIN_FOUND: int = 3

#: Full STI: a recording carries modulation frequency F when the mean over the seven
#: bands of (depth / local noise depth)^2 at F exceeds this (for noise alone that mean
#: is about Gamma(7, 1/7) distributed: P(> 4) < 1e-6), and F is the candidate with
#: the largest such mean.
FULL_FOUND_SCORE: float = 4.0

#: Plausible A-weighted level of a calibrated test-signal recording, dB(A).
PLAUSIBLE_LEVEL_DBA: tuple[float, float] = std.SPEECH_LEVEL_RANGE_DBA

NO_CALIBRATION = (
    "No calibration was given: the recording's absolute level is unknown, so the "
    "level-dependent auditory masking and the speech reception threshold of IEC 60268-16 "
    "were NOT applied (the index can read too high at low or very high levels). Give "
    "--calibration-db or a calibrator recording with --calibrator and --calibrator-level."
)

ADDED_NOISE = (
    "Background noise given with --noise was added arithmetically on top of the noise "
    "already in the recording: use it only for a recording made without the site's "
    "normal noise (e.g. an empty building), or that noise is counted twice."
)

#: Above this standard uncertainty of the STI the repeat windows disagree more than
#: the carrier's own fluctuation explains for a recording of 15 s or more
#: (judgement, from the spread of undistorted recordings: about 0.01).
UNCERTAIN_STI: float = 0.03

UNSTEADY = (
    "The analysis windows disagree (standard uncertainty {u:.3f}): conditions changed during "
    "the recording (passing noise, level changes), or it crosses the seam of a test signal "
    "played in a loop whose length is not a whole number of modulation periods (use the "
    "100 s STIPA signal to loop). Repeat the measurement."
)

#: Mean amount by which an undistorted STIPA test signal recorded for 10-15 s reads low
#: (STI), the offset of a recording shorter than the standard's minimum. Source: measured
#: in tests/test_direct_honesty.py::test_short_recordings_read_low_by_the_stated_bias
#: (6 carriers and start points per length, channel of exact MTF 1: mean -0.032 at 10 s,
#: -0.041 at 12 s, -0.031 at 14 s, pooled -0.035; for comparison -0.019 at 15 and 20 s).
SHORT_RECORDING_BIAS: float = 0.035

#: A recording this much shorter than the minimum still counts as long enough: the energy
#: detector places the ends of the test signal within a few of its 50 ms frames.
SHORT_TOLERANCE_S: float = 0.25

SHORT = (
    "The test signal lasts only {have:.1f} s, less than the {need:g} s IEC 60268-16 asks for a {method} "
    "measurement: the value reads low (about {bias:.3f} for an undistorted channel recorded for 10-15 s; "
    "{offset:.3f} expected here from the envelope noise) and scatters more. Record at least {need:g} s "
    "(15-25 s for STIPA)."
)

CLOCK_FIXED = (
    "The player's and the recorder's clocks differ by {ppm:+.0f} ppm (more than {limit:g} ppm; audio clocks "
    "usually agree within about 100 ppm): the modulation frequencies were analysed where they are in the "
    "recording, but check the sample rates of the player and the recorder."
)
CLOCK_NOT_FIXED = (
    "The modulation frequencies look {ppm:+.0f} ppm off (more than {limit:g} ppm; audio clocks usually agree "
    "within about 100 ppm), seen in too few modulations to correct: the value may read low. Check the sample "
    "rates of the player and the recorder."
)

UNCERTAINTY_METHOD = (
    "standard uncertainty: the spread of the STI over {n} simulated repeats of the measurement (each depth plus a "
    "fresh phasor of the measured envelope noise), or of {w} consecutive analysis windows / sqrt({w}) where "
    "larger, combined in quadrature with the expected offset (mean of the repeats minus the value)"
)
NOTE_UNCERTAINTY = (
    "The STI is computed from the measured depths as IEC 60268-16 prescribes; the random envelope noise of the "
    "test signal's carrier makes it read slightly low (expected_offset), most for short recordings and near "
    "STI 1. The uncertainty includes that offset."
)
NOTE_CLOCK = (
    "clock_offset_ppm: the modulation frequencies found in the recording relative to the nominal ones (player "
    "clock faster than the recorder's: positive), from the phase drift of the modulations; corrected (the depths "
    "taken at the shifted frequencies) where it would cost more than 0.1 % of a depth. Full STI: one mismatch "
    "pooled from all recordings (one player, one recorder); each recording's own estimate is listed with it."
)

#: Simulated repeats of the measurement for the uncertainty (:func:`_noise_draws`) and
#: their seed: 200 give the standard deviation within about 5 % and the expected offset
#: within a fourteenth of the uncertainty (about 0.1 s of work per result).
NOISE_DRAWS: int = 200
NOISE_SEED: int = 20268

#: Clock-rate mismatch (:func:`envpredict.modulation.clock_offset`): corrected where it is
#: larger than CLOCK_SIGNIFICANCE of its standard uncertainties, estimated from at least
#: CLOCK_MIN_COMPONENTS (band, frequency) components, and would lower the highest
#: modulation's depth by more than CLOCK_DEPTH_LOSS over the analysed length (0.1 %:
#: 1 - sinc of the phase turn; about 80 ppm for 25 s of STIPA).
CLOCK_SIGNIFICANCE: float = 4.0
CLOCK_MIN_COMPONENTS: int = 3
CLOCK_DEPTH_LOSS: float = 0.001

#: Above this mismatch (ppm) the result says so among its cautions: audio clocks agree
#: within about +-100 ppm (crystal tolerance; judgement), so ten times that means a player
#: and a recorder at different nominal rates or a file whose stated rate is wrong. Below
#: it the mismatch is corrected (where it matters) and reported in ``clock_offset_ppm``.
CLOCK_CAUTION_PPM: float = 1000.0


def _clock_info(clock: ClockOffset, scale: float) -> dict:
    return {"clock_offset_ppm": round(clock.ppm, 1),
            "clock_offset_uncertainty_ppm": None if not np.isfinite(clock.sigma_ppm) else round(clock.sigma_ppm, 1),
            "clock_corrected": bool(scale != 1.0)}


@dataclass(frozen=True)
class UsablePart:
    """Where the test signal is in a recording, in samples (stop exclusive)."""

    start: int
    stop: int
    signal_start: int
    signal_stop: int
    fs: int

    def to_dict(self) -> dict:
        return {
            "signal_start_s": round(self.signal_start / self.fs, 3),
            "signal_end_s": round(self.signal_stop / self.fs, 3),
            "analysed_start_s": round(self.start / self.fs, 3),
            "analysed_end_s": round(self.stop / self.fs, 3),
        }


def _ceil1(v: float) -> float:
    """Round up to 0.1 (a stated minimum must not be below the real one)."""
    return float(np.ceil(v * 10.0 - 1e-9) / 10.0)


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    d = np.diff(np.concatenate(([0], mask.astype(np.int8), [0])))
    return list(zip(np.flatnonzero(d == 1), np.flatnonzero(d == -1)))


def find_usable_part(
    x: np.ndarray, fs: int, *, min_seconds: float, name: str = "recording", advice: str | None = None,
) -> UsablePart:
    """Find the test signal in a recording (energy-based) and leave out the settling margins.

    Parameters
    ----------
    x : 1-D recording.
    fs : sample rate, Hz.
    min_seconds : shortest analysable part (after the margins), s.
    advice : what to tell the user if the part is too short.

    Raises
    ------
    InputError if the test signal part is shorter than ``min_seconds`` + 2 margins, the
    recording is not a non-empty 1-D array of finite numbers, or the rate is outside the
    supported range.
    """
    x = checks.array(x, name)
    fs = checks.sample_rate(fs, name)
    min_seconds = checks.number(min_seconds, "shortest length", lo=0.0, hi=MAX_RECORDING_S)
    frame = _frame_length(fs)
    fe = _FrameEnergies(frame)
    fe.update(np.asarray(x, dtype=np.float64))
    return _usable_from_frames(fe.result(), x.size, fs, min_seconds=min_seconds, name=name, advice=advice)


def _frame_length(fs: int) -> int:
    return max(1, int(round(FRAME_S * fs)))


class _FrameEnergies:
    """Mean square of consecutive :data:`FRAME_S` frames of a signal fed block by block.

    Every frame is computed from its own samples in one piece, so the block split does
    not change any value.
    """

    def __init__(self, frame: int) -> None:
        self.frame = frame
        self.rest = np.zeros(0)
        self.parts: list[np.ndarray] = []
        self.n = 0

    def update(self, block: np.ndarray) -> None:
        self.n += block.size
        b = np.concatenate([self.rest, block]) if self.rest.size else block
        nfr = b.size // self.frame
        if nfr:
            self.parts.append(np.mean(np.square(b[: nfr * self.frame]).reshape(nfr, self.frame), axis=1))
        self.rest = np.array(b[nfr * self.frame:], dtype=np.float64)

    def result(self) -> np.ndarray:
        return np.concatenate(self.parts) if self.parts else np.zeros(0)


def _usable_from_frames(
    e: np.ndarray, n: int, fs: int, *, min_seconds: float, name: str, advice: str | None,
) -> UsablePart:
    """:func:`find_usable_part` from the frame energies ``e`` of a recording of ``n`` samples."""
    frame = _frame_length(fs)
    nfr = e.size
    need = _ceil1(min_seconds + 2 * GUARD_S)
    if advice is None:
        advice = f"record at least {max(need, std.STIPA_MIN_SECONDS):.0f} s of the test signal"
    if nfr < 3:
        raise InputError(
            f"{name} is {n / fs:.2f} s long; the analysis needs at least {need:.1f} s of test signal",
            advice,
        )
    w = max(1, int(round(SMOOTH_S / FRAME_S)))
    sm = np.convolve(e, np.ones(w) / w, mode="same")
    with np.errstate(divide="ignore"):
        lev = 10.0 * np.log10(np.maximum(sm, 1e-30))
    hi = float(np.percentile(lev, 95))
    runs = _runs(lev > hi - ACTIVE_THRESHOLD_DB)
    merged = [list(runs[0])]
    gap = MAX_GAP_S / FRAME_S
    for a, b in runs[1:]:
        if a - merged[-1][1] < gap:
            merged[-1][1] = b
        else:
            merged.append([a, b])
    a, b = max(merged, key=lambda r: r[1] - r[0])
    # the smoothing blurs the edges by half its length: refine them on the raw frames
    with np.errstate(divide="ignore"):
        raw = 10.0 * np.log10(np.maximum(e[a:b], 1e-30))
    above = np.flatnonzero(raw > hi - ACTIVE_THRESHOLD_DB)
    if above.size:
        a, b = a + int(above[0]), a + int(above[-1]) + 1
    s0, s1 = int(a * frame), int(min(n, b * frame))
    g = int(round(GUARD_S * fs))
    start, stop = s0 + g, s1 - g
    have = (s1 - s0) / fs
    if stop - start < min_seconds * fs:
        raise InputError(
            f"{name} holds {have:.1f} s of test signal; the analysis needs at least {need:.1f} s "
            f"({_ceil1(min_seconds):.1f} s plus {GUARD_S:g} s settling margin at each end)",
            advice,
        )
    return UsablePart(start=start, stop=stop, signal_start=s0, signal_stop=s1, fs=int(fs))




@dataclass(frozen=True)
class _Analysed:
    """One recording after bands and envelopes."""

    env: np.ndarray
    fs_env: float
    part: UsablePart
    band_ms: np.ndarray  # mean square of each band over the usable part (full scale)
    fs: int
    duration_s: float


class _Ticks:
    """Progress in steps for a ``progress(done, total)`` callback (``None``: silent)."""

    def __init__(self, progress: Callable[[int, int], None] | None, total: int) -> None:
        self.progress = progress
        self.total = max(1, int(total))
        self.done = 0

    def tick(self, n: int = 1) -> None:
        self.done = min(self.done + n, self.total)
        if self.progress:
            self.progress(self.done, self.total)

    def retotal(self, total: int) -> None:
        self.total = max(self.done, int(total))
        if self.progress:
            self.progress(self.done, self.total)

    def finish(self) -> None:
        self.tick(self.total - self.done)


def check_block_seconds(value: float) -> float:
    """Refuse a block length that is not a positive number of seconds.

    Raises
    ------
    InputError
        For a block length that is not a number in the accepted range.
    """
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"block length '{value}' is not a number", "give it in seconds, e.g. 20") from None
    if not np.isfinite(v) or not 0.0 < v <= 3600.0:
        raise InputError(f"block length {value} s is out of range", "give 0 < seconds <= 3600, e.g. 20")
    return v


def _check_length(n: int, fs: int, name: str) -> None:
    if n > MAX_RECORDING_S * fs:
        raise InputError(
            f"{name} is {n / fs / 3600:.2f} h long; at most {MAX_RECORDING_S / 3600:g} h is analysed",
            "cut the recording to the part that holds the test signal",
        )


def _analyse_source(
    src: Source, block: int, min_seconds: float, name: str,
    advice: str | None, check: SignalCheck | None, ticks: _Ticks | None,
) -> _Analysed:
    """The one path from a recording (in memory or in a file) to band envelopes.

    Pass 1: frame energies (usable part) and, for a file, the input checks. Pass 2:
    envelopes of the usable part, block by block, delays taken off.
    """
    fs = src.fs
    n_blocks = -(-src.n // block)
    if ticks is not None:
        ticks.retotal(ticks.total + 2 * n_blocks)
    fe = _FrameEnergies(_frame_length(fs))
    for b in src.blocks(block):
        if check is not None:
            check.update(b)
        fe.update(b)
        if ticks is not None:
            ticks.tick()
    if check is not None:
        check.finish()
    n = fe.n
    _check_length(n, fs, name)
    part = _usable_from_frames(fe.result(), n, fs, min_seconds=min_seconds, name=name, advice=advice)

    stream = EnvelopeStream(fs, band_passes=BAND_PASSES)
    q = stream.q
    delays = envelope_delays(fs, band_passes=BAND_PASSES)
    p0 = part.signal_start  # the margin GUARD_S absorbs the filters' start-up
    p1 = min(n, part.stop + (max(delays) + 2) * q)
    if ticks is not None:
        ticks.retotal(ticks.total - 2 * n_blocks + -(-n // block) + -(-p1 // block))
    # envelope sample j (from p0) of band k is the envelope at sample p0 + (j - delay_k) q;
    # keep those of the usable part: j - delay_k in [i0, i0 + m)
    i0 = (part.start - p0) // q
    m = (part.stop - p0) // q - i0
    env = np.empty((len(std.OCTAVE_BANDS_HZ), m))
    j = pos = 0
    for b in src.blocks(block, stop=p1):
        lo, hi = max(p0, pos), min(p1, pos + b.size)
        if hi > lo:
            e = stream.process(b[lo - pos: hi - pos])
            for k, d in enumerate(delays):
                a0, a1 = max(j, i0 + d), min(j + e.shape[1], i0 + d + m)
                if a1 > a0:
                    env[k, a0 - i0 - d: a1 - i0 - d] = e[k, a0 - j: a1 - j]
            j += e.shape[1]
        pos += b.size
        if ticks is not None:
            ticks.tick()
    if j != -(-(p1 - p0) // q):
        raise InputError(f"{name} changed while it was read (fewer samples on the second reading)",
                         "analyse a copy of the file that is not being written to")
    # mean of the intensity envelope = mean square of the band signal (unit DC gain)
    band_ms = np.mean(env, axis=1)
    return _Analysed(env=env, fs_env=stream.rate, part=part, band_ms=band_ms, fs=fs, duration_s=n / fs)


def _analyse_recording(x: np.ndarray, fs: int, min_seconds: float, name: str, advice: str | None = None, *,
                       block_seconds: float = BLOCK_SECONDS, ticks: _Ticks | None = None) -> _Analysed:
    """A recording in memory, through the same block-wise path as a file."""
    x = validate_signal(x, fs, name=name)
    fs = int(fs)
    check_rate_for_octaves(fs, name)
    _check_length(x.size, fs, name)
    block = max(1, int(check_block_seconds(block_seconds) * fs))
    # checked above by the same rule (SignalCheck) the file path feeds block by block
    return _analyse_source(ArraySource(x, fs, name), block, min_seconds, name, advice, None, ticks)


def _analyse_file(path: str | os.PathLike, channel: int | None, min_seconds: float, name: str,
                  advice: str | None = None, *, block_seconds: float = BLOCK_SECONDS,
                  ticks: _Ticks | None = None) -> _Analysed:
    """A recording in a file, read block by block twice (memory bounded by the block length)."""
    block_seconds = check_block_seconds(block_seconds)
    with FileSource(path, channel, name="recording") as src:
        fs = check_rate(src.fs, src.name)
        check_rate_for_octaves(fs, src.name)
        _check_length(src.n, fs, name)
        block = max(1, int(block_seconds * fs))
        return _analyse_source(src, block, min_seconds, name, advice, SignalCheck(src.name, subtype=src.subtype),
                               ticks)


def _window_count(n: int, fs_env: float, f_low: float) -> int:
    per = MIN_PERIODS_PER_WINDOW / f_low * fs_env
    return int(np.clip(int(n // per), MIN_WINDOWS, MAX_WINDOWS))


def _level_dba(band_ms: np.ndarray, cal: float) -> tuple[np.ndarray, float]:
    with np.errstate(divide="ignore"):
        lk = 10.0 * np.log10(np.maximum(band_ms, 1e-30)) + cal
    la = 10.0 * np.log10(np.sum(10.0 ** ((lk + np.asarray(std.A_WEIGHTING_OCTAVE_DB)) / 10.0)))
    return lk, float(la)


def _check_found(depth_raw: np.ndarray, local: np.ndarray, what: str, name: str) -> None:
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = depth_raw / np.where(local > 0, local, np.nan)
    found = np.nan_to_num(ratio, nan=0.0) > FOUND_RATIO
    if int(found.sum()) < MIN_FOUND:
        raise InputError(
            f"{name} shows no {what} modulation: only {int(found.sum())} of {found.size} band/frequency "
            "pairs stand out of the envelope's noise. It is not a recording of this test signal, or the "
            "channel destroys nearly all modulation (STI far below 0.2)",
            "check that the test signal was playing and that the right file and channel were given",
        )


@dataclass(frozen=True)
class DirectResult:
    """STI of one direct measurement (STIPA recording or full-STI recording set).

    Attributes
    ----------
    method : "STIPA" or "full STI".
    sti : the index and everything that explains it (:class:`envpredict.sti.StiResult`).
    depth : measured (noise-corrected) modulation depths, (7, F).
    nominal_depth : the test signal's own depth (0.55 STIPA, 1 full STI).
    noise_floor : RMS depth of the envelope noise per band (and recording), a measure
        of how much the carrier's own fluctuation blurs each depth.
    uncertainty : standard uncertainty of the STI from the spread of repeated windows.
    window_sti : the STI of each repeat window.
    calibrated : absolute levels known (auditory corrections applied).
    band_levels_db : measured octave-band levels, dB SPL (calibrated) or dBFS.
    level_dba : A-weighted level of the received test signal (calibrated only).
    recordings : per recording, where the test signal was found, rate, modulation.
    cautions : texts that must accompany the number.
    calibration_source : where the calibration came from: "offset" (a given
        ``calibration_db``), "calibrator" (a calibrator recording) or ``None``.
    """

    method: str
    sti: StiResult
    depth: np.ndarray
    nominal_depth: float
    noise_floor: np.ndarray
    uncertainty: float
    window_sti: tuple[float, ...]
    calibrated: bool
    calibration_db: float | None
    band_levels_db: np.ndarray
    level_dba: float | None
    recordings: tuple[dict, ...]
    cautions: tuple[str, ...] = field(default=())
    calibration_source: str | None = None
    uncertainty_windows: float = float("nan")
    uncertainty_noise: float = float("nan")
    noise_bias: float = 0.0
    clock_offset_ppm: float = 0.0

    def to_dict(self) -> dict:
        d = self.sti.to_dict()
        if not self.calibrated:
            d["speech_db"] = None
        d.update(
            {
                "method": f"direct ({self.method} recording), IEC 60268-16:2011",
                "uncertainty": round(self.uncertainty, 4),
                "uncertainty_method": UNCERTAINTY_METHOD.format(n=NOISE_DRAWS, w=len(self.window_sti)),
                "uncertainty_noise": _r4(self.uncertainty_noise),
                "uncertainty_windows": _r4(self.uncertainty_windows),
                "expected_offset": _r4(self.noise_bias),
                "clock_offset_ppm": round(self.clock_offset_ppm, 1),
                "window_sti": [round(v, 4) for v in self.window_sti],
                "modulation_depth": np.round(self.depth, 4),
                "nominal_depth": self.nominal_depth,
                "envelope_noise_depth": np.round(self.noise_floor, 4),
                "calibrated": self.calibrated,
                "calibration_db": self.calibration_db,
                "calibration_source": self.calibration_source,
                "band_levels_db": np.round(self.band_levels_db, 1),
                "band_levels_unit": "dB SPL" if self.calibrated else "dBFS",
                "level_dba": None if self.level_dba is None else round(self.level_dba, 1),
                "recordings": list(self.recordings),
                "cautions": list(self.cautions),
                "notes": [NOTE_UNCERTAINTY, NOTE_CLOCK],
            }
        )
        return jsonable(d)


def _r4(v: float) -> float | None:
    return round(float(v), 4) if np.isfinite(v) else None


def _finish(
    method: str,
    mtf_full: np.ndarray,
    mtf_windows: list[np.ndarray],
    modulation_hz,
    depth: np.ndarray,
    nominal: float,
    floor: np.ndarray,
    band_ms: np.ndarray,
    calibration_db: float | None,
    noise_db,
    talker: str,
    recordings: list[dict],
    calibration_source: str | None = None,
    *,
    local: np.ndarray,
    signal_s: Sequence[float],
    clock: Sequence[tuple[ClockOffset, float]],
    requirement: float | None = None,
    audiogram: Audiogram | None = None,
) -> DirectResult:
    calibrated = calibration_db is not None
    if calibrated:
        band_db, la = _level_dba(band_ms, calibration_db)
        lo, hi = PLAUSIBLE_LEVEL_DBA
        if not lo <= la <= hi:
            raise InputError(
                f"with the calibration given the test signal is at {la:.1f} dB(A), outside {lo:.0f}..{hi:.0f} dB(A)",
                "check the calibration offset or calibrator level (and that the calibrator was recorded "
                "with the same gain)",
            )
    else:
        band_db, _ = _level_dba(band_ms, 0.0)
        la = None
    kw = dict(modulation_hz=modulation_hz, talker=talker, noise_db=noise_db,
              speech_level_dba=la if calibrated else std.DEFAULT_SPEECH_LEVEL_DBA, auditory=calibrated,
              speech_db=band_db if calibrated else None, audiogram=audiogram if calibrated else None)
    res = replace(sti_from_mtf(mtf_full, **kw), requirement=requirement)
    win = [sti_from_mtf(m, **kw).sti for m in mtf_windows]
    unc_win = float(np.std(win, ddof=1) / np.sqrt(len(win))) if len(win) > 1 else float("nan")
    draws = np.array([sti_from_mtf(m, **kw).sti for m in _noise_draws(depth, floor, local, nominal)])
    unc_noise = float(np.std(draws, ddof=1))
    bias = float(np.mean(draws) - res.sti)
    # the random part: the envelope noise, or the windows' spread where conditions changed
    # more than the noise explains; the expected offset added in quadrature, so that the
    # stated uncertainty covers the error of a short recording (tests/test_direct_honesty.py)
    unc = float(np.hypot(max(unc_noise, unc_win if np.isfinite(unc_win) else 0.0), bias))

    cautions = [cau.LIFE_SAFETY]
    low = cau.below_target(res.sti, requirement)
    if low:
        cautions.append(low)
    if not calibrated:
        cautions.append(NO_CALIBRATION)
    if noise_db is not None:
        cautions.append(ADDED_NOISE)
    cautions.extend(cau.listener_cautions(res))
    if np.isfinite(unc_win) and unc_win > UNCERTAIN_STI:
        cautions.append(UNSTEADY.format(u=unc_win))
    need = std.STIPA_MIN_SECONDS if method == "STIPA" else std.FULL_STI_ANALYSIS_SECONDS + 2 * SETTLE_S
    shortest = float(min(signal_s))
    if shortest < need - SHORT_TOLERANCE_S:
        cautions.append(SHORT.format(have=shortest, need=need, method=method, bias=SHORT_RECORDING_BIAS,
                                     offset=-bias))
    ppm = [c.ppm for c, _ in clock]
    # a mismatch beyond the usual clocks, and beyond its own uncertainty (an estimate from a
    # noisy or slow modulation is not a finding)
    found = [(c, scale) for c, scale in clock
             if abs(c.ppm) > CLOCK_CAUTION_PPM and abs(c.ppm) > CLOCK_SIGNIFICANCE * c.sigma_ppm]
    if found:
        c, scale = max(found, key=lambda cs: abs(cs[0].ppm))
        cautions.append((CLOCK_FIXED if scale != 1.0 else CLOCK_NOT_FIXED).format(ppm=c.ppm, limit=CLOCK_CAUTION_PPM))
    return DirectResult(
        method=method, sti=res, depth=depth, nominal_depth=nominal, noise_floor=floor,
        uncertainty=unc, window_sti=tuple(float(v) for v in win), calibrated=calibrated,
        calibration_db=calibration_db, band_levels_db=band_db, level_dba=la,
        recordings=tuple(recordings), cautions=tuple(cautions),
        calibration_source=(calibration_source or "offset") if calibrated else None,
        uncertainty_windows=unc_win, uncertainty_noise=unc_noise, noise_bias=bias,
        clock_offset_ppm=float(ppm[0]) if len(ppm) == 1 else float(np.median(ppm)),
    )


def _noise_draws(depth: np.ndarray, floor: np.ndarray, local: np.ndarray, nominal: float) -> np.ndarray:
    """MTFs of :data:`NOISE_DRAWS` simulated repeats of the measurement (parametric bootstrap).

    Each measured depth is the signal's modulation plus the random phasor of the envelope
    noise, of mean power ``local^2`` (:func:`envelope_noise_floor`, the unused bins nearest to
    the frequency): a repeat adds a fresh complex Gaussian phasor of that power to the
    corrected depth and takes the same floor ``floor`` off again
    (:func:`envpredict.modulation.noise_corrected_depth`). Fixed seed: the same recording
    always gets the same uncertainty.
    """
    d = np.nan_to_num(np.asarray(depth, dtype=float))
    fl = np.broadcast_to(np.asarray(floor, dtype=float).reshape(d.shape[0], -1), d.shape)
    fl = np.where(np.isfinite(fl), fl, 0.0)
    lo = np.where(np.isfinite(local), local, fl)
    rng = np.random.default_rng(NOISE_SEED)
    z = rng.standard_normal((NOISE_DRAWS, *d.shape)) + 1j * rng.standard_normal((NOISE_DRAWS, *d.shape))
    raw = np.abs(d + z * lo / np.sqrt(2.0))
    return np.sqrt(np.clip(raw ** 2 - fl ** 2, 0.0, None)) / float(nominal)


def _check_options(calibration_db, noise_db, talker):
    talker = check_talker(talker)
    cal = check_calibration_db(calibration_db)
    noise = parse_noise_levels(noise_db) if noise_db is not None else None
    if noise is not None and cal is None:
        raise InputError("--noise needs absolute levels",
                         "give a calibration (--calibration-db or --calibrator) so the noise can be "
                         "set against the measured signal level")
    return cal, noise, talker


def _check_listener(audiogram, calibration_db) -> Audiogram | None:
    """The listener's audiogram (:func:`envpredict.tables.load_audiogram`); refused without
    a calibration (the reception threshold it raises needs absolute levels)."""
    audiogram = load_audiogram(audiogram)
    if audiogram is not None and calibration_db is None:
        raise InputError("an audiogram (or age) needs absolute levels, and no calibration was given",
                         "give --calibration-db or --calibrator with --calibrator-level")
    return audiogram


def _check_talker_and_noise(talker, noise_db):
    """The option checks that come before the calibration (and its calibrator recording)."""
    check_talker(talker)
    parse_noise_levels(noise_db)


def _clock(rec: _Analysed, freqs: np.ndarray) -> tuple[ClockOffset, float]:
    """The clock-rate mismatch of a recording and the factor its modulation frequencies are
    projected at: ``1 + ppm 1e-6`` where the mismatch is significant (more than
    :data:`CLOCK_SIGNIFICANCE` standard uncertainties) and would cost more than
    :data:`CLOCK_DEPTH_LOSS` of the highest modulation depth over the analysed length, else 1
    (a recording within the clocks' usual tolerance keeps its numbers exactly)."""
    c = clock_offset(rec.env, rec.fs_env, freqs)
    return c, _clock_scale(c, rec, freqs)


def _clock_scale(c: ClockOffset, rec: _Analysed, freqs: np.ndarray) -> float:
    """The factor of :func:`_clock` for a mismatch ``c`` (estimated from ``rec`` or pooled)."""
    eps = c.ppm * 1e-6
    x = np.pi * float(np.max(freqs)) * abs(eps) * rec.env.shape[1] / rec.fs_env
    loss = 1.0 - np.sin(x) / x if x > 0 else 0.0
    fix = c.used >= CLOCK_MIN_COMPONENTS and abs(c.ppm) > CLOCK_SIGNIFICANCE * c.sigma_ppm and loss > CLOCK_DEPTH_LOSS
    return (1.0 + eps) if fix else 1.0


def _pooled_clock(clocks: Sequence[ClockOffset]) -> ClockOffset:
    """One mismatch for a set of recordings made with the same player and recorder (full STI):
    the inverse-variance mean of the recordings' estimates; its uncertainty the larger of the
    formal one and the weighted scatter of the estimates (a single recording's stated
    uncertainty can be optimistic: few sub-windows, one frequency)."""
    ok = [c for c in clocks if c.used > 0 and np.isfinite(c.sigma_ppm) and c.sigma_ppm > 0]
    if not ok:
        return ClockOffset(0.0, float("inf"), 0)
    p = np.array([c.ppm for c in ok])
    w = 1.0 / np.array([c.sigma_ppm for c in ok]) ** 2
    mean = float(np.sum(w * p) / np.sum(w))
    scatter = float(np.sum(w * (p - mean) ** 2) / np.sum(w)) / max(1, p.size - 1) if p.size > 1 else float("inf")
    return ClockOffset(mean, float(np.sqrt(max(1.0 / np.sum(w), scatter))), int(sum(c.used for c in ok)))


def _stipa(analyse: Callable[[float, _Ticks], _Analysed], calibration_db, noise_db, talker, name: str,
           progress, calibration_source: str | None = None, requirement: float | None = None,
           audiogram: Audiogram | str | None = None) -> DirectResult:
    cal, noise, talker = _check_options(calibration_db, noise_db, talker)
    requirement = check_requirement(requirement)
    audiogram = _check_listener(audiogram, cal)
    nominal = np.asarray(std.STIPA_MODULATION_HZ, dtype=float)
    f_low = float(nominal.min())
    min_s = MIN_WINDOWS * MIN_PERIODS_PER_WINDOW / f_low
    ticks = _Ticks(progress, 1)  # the depths; the analysis adds the blocks of both passes
    ticks.retotal(1)  # reports (0, 1): started
    rec = analyse(min_s, ticks)
    clock, scale = _clock(rec, nominal)
    pairs = nominal * scale  # where the modulations are in the recording's own time
    exclude = sorted(set(pairs.ravel()))
    depth, raw, floor, local = modulation_depths(rec.env, rec.fs_env, pairs, exclude)
    _check_found(raw, local, "STIPA", name)
    nom = std.STIPA_MODULATION_DEPTH
    nwin = _window_count(rec.env.shape[1], rec.fs_env, f_low * scale)
    edges = np.linspace(0, rec.env.shape[1], nwin + 1).astype(int)
    mtf_w = [mtf_from_test_signal(rec.env[:, a:b], rec.fs_env, pairs, nom, exclude)
             for a, b in zip(edges[:-1], edges[1:])]
    info = {"name": name, "fs": rec.fs, "duration_s": round(rec.duration_s, 3), **rec.part.to_dict(),
            **_clock_info(clock, scale)}
    out = _finish("STIPA", depth / nom, mtf_w, std.STIPA_MODULATION_HZ, depth, nom, floor,
                  rec.band_ms, cal, noise, talker, [info], calibration_source,
                  local=local, signal_s=[(rec.part.signal_stop - rec.part.signal_start) / rec.fs],
                  clock=[(clock, scale)], requirement=requirement, audiogram=audiogram)
    ticks.finish()
    return out


def stipa_from_recording(
    x: np.ndarray,
    fs: int,
    *,
    calibration_db: float | None = None,
    noise_db: Sequence[float] | str | None = None,
    talker: str = "male",
    name: str = "recording",
    block_seconds: float = BLOCK_SECONDS,
    progress: Callable[[int, int], None] | None = None,
    requirement: float | None = None,
    audiogram: Audiogram | str | os.PathLike | None = None,
) -> DirectResult:
    """STI from a recording of the STIPA test signal (IEC 60268-16:2011, Annex B).

    Parameters
    ----------
    x : 1-D recording (any rate above 22.6 kHz; it need not match the generator's).
    fs : its sample rate, Hz.
    calibration_db : dB SPL of a full-scale RMS signal (``rms_dbfs(x) + C`` is the
        level in dB SPL), or ``None``: then no auditory masking or reception threshold.
    noise_db : optional octave-band noise levels added arithmetically (needs a
        calibration; only for recordings made without the site's normal noise).
    talker : band weights, "male" or "female".
    name : what the recording is, for error messages.
    block_seconds : the array is processed in blocks of this length, exactly as a file
        by :func:`stipa_from_file` (the block length does not change the result).
    progress : optional ``progress(done, total)`` callback.
    requirement : the STI the system must reach; the result states whether it is met
        (on the unrounded value).
    audiogram : a listener with hearing loss (:mod:`envpredict.hearing`): an Audiogram, its
        text form or a CSV file (:func:`envpredict.tables.load_audiogram`); it raises the
        reception threshold of each band (audibility only). Needs a calibration.

    Valid input: at least 2 x 2 periods of 0.63 Hz (6.3 s) of test signal plus 1.25 s at
    each end (8.9 s); 15-30 s is usual; at most :data:`MAX_RECORDING_S` (2 h). Not
    clipped, not silent.

    Examples
    --------
    >>> from envpredict.signals import stipa_signal
    >>> r = stipa_from_recording(stipa_signal(15, 24000), 24000)
    >>> r.sti.sti > 0.97
    True

    Raises
    ------
    InputError
        For a recording refused by the input rule (not numeric, not one channel, empty, NaN/inf,
        silent, clipped, a rate outside the supported range), too short or without a STIPA test
        signal, or an
        option out of range (calibration, noise levels, talker, block length).
    """
    return _stipa(lambda min_s, ticks: _analyse_recording(x, fs, min_s, name, block_seconds=block_seconds,
                                                          ticks=ticks),
                  calibration_db, noise_db, talker, name, progress, requirement=requirement, audiogram=audiogram)


def stipa_from_file(
    path: str | os.PathLike,
    channel: int | None = None,
    *,
    calibration_db: float | None = None,
    calibrator: str | os.PathLike | None = None,
    calibrator_level: float | None = None,
    calibrator_channel: int | None = None,
    noise_db: Sequence[float] | str | None = None,
    talker: str = "male",
    name: str | None = None,
    block_seconds: float = BLOCK_SECONDS,
    progress: Callable[[int, int], None] | None = None,
    requirement: float | None = None,
    audiogram: Audiogram | str | os.PathLike | None = None,
) -> DirectResult:
    """STI from a recording file of the STIPA test signal (IEC 60268-16:2011, Annex B).

    The file is read block by block, twice (usable part and input checks, then the
    envelopes); memory grows only with the envelopes and the noise-floor FFT of the
    usable part (measured peak about 280 MB for 1 h at 48 kHz, 440 MB for 2 h; see
    :data:`MAX_RECORDING_S`), so recordings of an hour or more can be analysed. Same numbers as
    :func:`stipa_from_recording` on the file's samples.

    Parameters
    ----------
    path : WAV, FLAC, OGG or other libsndfile-readable file.
    channel : channel of a multi-channel file (``None``: the file must be mono).
    name : what the recording is called in the result (default: the file name).
    block_seconds : length of the blocks read, s.
    calibration_db, noise_db, talker, progress, requirement, audiogram : as for
        :func:`stipa_from_recording`.
    calibrator, calibrator_level : instead of ``calibration_db``, a recording of a 1 kHz
        acoustic calibrator made with the same gain and its level in dB SPL
        (:func:`envpredict.audio.resolve_calibration`).
    calibrator_channel : channel of the calibrator recording (default: ``channel``).

    Valid input: as for :func:`stipa_from_recording`; at most :data:`MAX_RECORDING_S` (2 h).
    The result's ``calibration_source`` says where the calibration came from.

    Raises
    ------
    InputError
        For a file that cannot be read, or as :func:`stipa_from_recording`.
    """
    _check_talker_and_noise(talker, noise_db)
    audiogram = load_audiogram(audiogram)
    cal, source = resolve_calibration(calibration_db, calibrator, calibrator_level,
                                      channel if calibrator_channel is None else calibrator_channel)
    name = Path(path).name if name is None else name
    return _stipa(lambda min_s, ticks: _analyse_file(path, channel, min_s, name, block_seconds=block_seconds,
                                                     ticks=ticks),
                  cal, noise_db, talker, name, progress, source, requirement=requirement, audiogram=audiogram)


def _full_sti(
    sources: Sequence[tuple[str, Callable[[float, str], _Analysed]]],
    calibration_db, noise_db, talker, progress, calibration_source: str | None = None,
    requirement: float | None = None,
    audiogram: Audiogram | str | None = None,
) -> DirectResult:
    cal, noise, talker = _check_options(calibration_db, noise_db, talker)
    requirement = check_requirement(requirement)
    audiogram = _check_listener(audiogram, cal)
    freqs = np.asarray(std.MODULATION_FREQUENCIES_HZ, dtype=float)
    nb, nf = len(std.OCTAVE_BANDS_HZ), freqs.size
    if len(sources) > nf or not sources:
        raise InputError(f"{len(sources)} recording(s) given; the full STI needs {nf}, one per modulation "
                         "frequency", "give the recordings of all 14 full-STI test signals")
    nom = std.FULL_STI_MODULATION_DEPTH
    assigned: dict[int, tuple[str, _Analysed]] = {}
    depth = np.zeros((nb, nf))
    floor = np.zeros((nb, nf))
    local = np.zeros((nb, nf))
    band_ms = np.zeros(nb)
    infos: list[dict] = []
    scales: dict[int, float] = {}
    clocks: dict[int, ClockOffset] = {}
    signal_s: list[float] = []
    if progress:
        progress(0, nf + 1)
    for i, (name, analyse) in enumerate(sources):
        # short enough for the fastest signal; the frequency's own minimum is checked below
        rec = analyse(MIN_WINDOWS * MIN_PERIODS_PER_WINDOW / freqs.max(),
                      "record the whole generated full-STI signal (12-13 s)")
        cand = np.tile(freqs, (nb, 1))
        # each candidate over its own whole periods: band_depths windows by the lowest
        # frequency of a row, so evaluate the candidates one at a time
        raw = np.zeros((nb, nf))
        fl = np.zeros((nb, nf))
        for j in range(nf):
            _, raw[:, j:j + 1], _, fl[:, j:j + 1] = modulation_depths(rec.env, rec.fs_env, cand[:, j:j + 1], freqs)
        # evidence per candidate: mean over bands of (depth / local noise depth)^2; for
        # a continuous modulation spectrum each term is about Exp(1), so a mean above
        # FULL_FOUND_SCORE happens by chance with probability below 1e-6
        with np.errstate(invalid="ignore", divide="ignore"):
            score = np.nanmean((raw / fl) ** 2, axis=0)
        score = np.nan_to_num(score, nan=0.0)
        j = int(np.argmax(score))
        if not score[j] > FULL_FOUND_SCORE:
            raise InputError(
                f"{name} shows no full-STI modulation at any of the 14 modulation frequencies "
                "(not a recording of a full-STI test signal, or the channel destroys nearly all modulation)",
                "check that the test signal was playing and that the right files were given",
            )
        if j in assigned:
            raise InputError(f"{assigned[j][0]} and {name} both carry the {freqs[j]:g} Hz full-STI signal",
                             "give one recording of each of the 14 signals")
        need = MIN_WINDOWS * MIN_PERIODS_PER_WINDOW / freqs[j]
        if (rec.part.stop - rec.part.start) / rec.fs < need:
            raise InputError(
                f"{name} ({freqs[j]:g} Hz signal) holds {(rec.part.stop - rec.part.start) / rec.fs:.1f} s of usable "
                f"signal; at least {_ceil1(need + 2 * GUARD_S):.1f} s of test signal is needed for {freqs[j]:g} Hz",
                "record the whole generated signal",
            )
        clocks[j] = clock_offset(rec.env, rec.fs_env, freqs[j] * np.ones((nb, 1)))
        band_ms += rec.band_ms / nf
        assigned[j] = (name, rec)
        signal_s.append((rec.part.signal_stop - rec.part.signal_start) / rec.fs)
        if progress:
            progress(i + 1, nf + 1)
    if len(assigned) < nf:  # each recording is known by its content: name the ones missing
        missing = ", ".join(f"{freqs[j]:g} Hz" for j in range(nf) if j not in assigned)
        raise InputError(f"{len(sources)} recording(s) found; the full STI needs {nf}, one per modulation "
                         f"frequency: the recording of the {missing} signal is missing",
                         "record and add the missing full-STI test signal(s)")
    # the same player and recorder for the whole set: one mismatch, from all recordings
    pooled = _pooled_clock(list(clocks.values()))
    for j, (name, rec) in assigned.items():
        scales[j] = _clock_scale(pooled, rec, freqs[j] * np.ones((nb, 1)))
        d, _, f, lo = modulation_depths(rec.env, rec.fs_env, scales[j] * freqs[j] * np.ones((nb, 1)),
                                        scales[j] * freqs)
        depth[:, j], floor[:, j], local[:, j] = d[:, 0], f, lo[:, 0]
        infos.append({"name": name, "fs": rec.fs, "duration_s": round(rec.duration_s, 3),
                      "modulation_hz": float(freqs[j]), **rec.part.to_dict(), **_clock_info(clocks[j], scales[j])})
    nwin = min(_window_count(r.env.shape[1], r.fs_env, freqs[j]) for j, (_, r) in assigned.items())
    mtf_w = []
    for w in range(nwin):
        m = np.zeros((nb, nf))
        for j, (_, r) in assigned.items():
            edges = np.linspace(0, r.env.shape[1], nwin + 1).astype(int)
            seg = r.env[:, edges[w]: edges[w + 1]]
            m[:, j] = mtf_from_test_signal(seg, r.fs_env, scales[j] * freqs[j] * np.ones((nb, 1)), nom,
                                           scales[j] * freqs)[:, 0]
        mtf_w.append(m)
    infos.sort(key=lambda d: d["modulation_hz"])
    out = _finish("full STI", depth / nom, mtf_w, std.MODULATION_FREQUENCIES_HZ, depth, nom,
                  floor, band_ms, cal, noise, talker, infos, calibration_source,
                  local=local, signal_s=signal_s, clock=[(pooled, max(scales.values(), key=lambda v: abs(v - 1)))],
                  requirement=requirement, audiogram=audiogram)
    if progress:
        progress(nf + 1, nf + 1)
    return out


def full_sti_from_recordings(
    recordings: Sequence[tuple[np.ndarray, int, str]],
    *,
    calibration_db: float | None = None,
    noise_db: Sequence[float] | str | None = None,
    talker: str = "male",
    block_seconds: float = BLOCK_SECONDS,
    progress: Callable[[int, int], None] | None = None,
    requirement: float | None = None,
    audiogram: Audiogram | str | os.PathLike | None = None,
) -> DirectResult:
    """Full STI from recordings of the 14 full-STI test signals (IEC 60268-16:2011, 6.1).

    Each recording holds one signal of :func:`envpredict.signals.full_sti_plan`
    (all seven bands modulated at one frequency F, depth 1). The frequency of each
    recording is found from the recording itself (the one of the 14 whose modulation
    stands out most in the band envelopes), so the order of the recordings does not
    matter; each frequency must appear exactly once.

    Parameters
    ----------
    recordings : sequence of ``(x, fs, name)``.
    calibration_db, noise_db, talker, requirement, audiogram : as for :func:`stipa_from_recording`.
    block_seconds : the arrays are processed in blocks of this length, exactly as files
        by :func:`full_sti_from_files`.
    progress : optional ``progress(done, total)`` callback (one step per recording).

    Valid input: each recording with at least 4 periods of its modulation frequency
    plus 1.25 s at each end (the 0.63 Hz signal: 8.9 s).

    Raises
    ------
    InputError
        For recordings that are not (samples, rate, name) triples, a recording refused by
        the input rule or too short, or an option out of range.
    """
    if isinstance(recordings, (str, bytes)) or not isinstance(recordings, Sequence) or not all(
            isinstance(r, tuple) and len(r) == 3 for r in recordings):
        raise InputError("recordings are not (samples, rate, name) triples", "pass one triple per recording")
    check_block_seconds(block_seconds)

    def source(x, fs, name):
        return name, lambda min_s, advice: _analyse_recording(x, fs, min_s, name, advice,
                                                              block_seconds=block_seconds)

    return _full_sti([source(x, fs, name) for x, fs, name in recordings], calibration_db, noise_db, talker,
                     progress, requirement=requirement, audiogram=audiogram)


def recording_paths(paths: str | os.PathLike | Sequence[str | os.PathLike]) -> list[Path]:
    """The recording files of ``paths``: each folder replaced by its audio files
    (:func:`envpredict.audio.audio_files_in`), files kept as given, in order.

    Raises
    ------
    InputError
        For a path that is not usable or a folder without audio files.
    """
    if isinstance(paths, (str, os.PathLike)):
        paths = [paths]
    files: list[Path] = []
    for p in map(Path, paths):
        if p.is_dir():
            found = audio_files_in(p)
            if not found:
                raise InputError(f"folder '{p}' holds no audio files", "give the folder with the 14 recordings")
            files.extend(found)
        else:
            files.append(p)
    return files


def full_sti_from_files(
    paths: str | os.PathLike | Sequence[str | os.PathLike],
    channel: int | None = None,
    *,
    calibration_db: float | None = None,
    calibrator: str | os.PathLike | None = None,
    calibrator_level: float | None = None,
    calibrator_channel: int | None = None,
    noise_db: Sequence[float] | str | None = None,
    talker: str = "male",
    block_seconds: float = BLOCK_SECONDS,
    progress: Callable[[int, int], None] | None = None,
    requirement: float | None = None,
    audiogram: Audiogram | str | os.PathLike | None = None,
) -> DirectResult:
    """Full STI from the 14 recording files of the full-STI test signals (IEC 60268-16:2011, 6.1).

    As :func:`full_sti_from_recordings`, each file read block by block (memory bounded
    by the block length); the recordings are named by their file names.

    Parameters
    ----------
    paths : the 14 files, any order, or folders holding them (each folder's audio files,
        hidden files skipped: :func:`recording_paths`).
    channel : channel of multi-channel files (``None``: the files must be mono).
    calibration_db, noise_db, talker, block_seconds, progress, requirement, audiogram : as for
        :func:`full_sti_from_recordings`.
    calibrator, calibrator_level, calibrator_channel : as for :func:`stipa_from_file`.

    Raises
    ------
    InputError
        For files that cannot be read, or as :func:`full_sti_from_recordings`.
    """
    check_block_seconds(block_seconds)
    _check_talker_and_noise(talker, noise_db)
    audiogram = load_audiogram(audiogram)
    cal, cal_source = resolve_calibration(calibration_db, calibrator, calibrator_level,
                                          channel if calibrator_channel is None else calibrator_channel)
    files = recording_paths(paths)
    nf = len(std.MODULATION_FREQUENCIES_HZ)
    if len(files) > nf:
        raise InputError(f"{len(files)} recording(s) found; the full STI needs {nf} (one per modulation frequency)",
                         f"give the recordings of all {nf} full-STI signals, or a folder holding only them")
    # fewer: each recording is identified by its content, and the error names the missing ones

    def source(path):
        name = Path(path).name
        return name, lambda min_s, advice: _analyse_file(path, channel, min_s, name, advice,
                                                         block_seconds=block_seconds)

    return _full_sti([source(p) for p in files], cal, noise_db, talker, progress, cal_source,
                     requirement=requirement, audiogram=audiogram)
