"""Room-acoustic decay figures from an impulse response (ISO 3382-1:2009).

EDT, T20 and T30 from linear fits to the Schroeder backward-integrated decay curve
(Schroeder 1965, "New method of measuring reverberation time", JASA 37), with the
noise floor found by the iterative method of Lundeby et al. (1995, "Uncertainties of
measurements in room acoustics", Acustica 81) and the integral truncated at the
crossing of decay and noise floor with compensation for the energy beyond it
(ISO 3382-1:2009, 5.3.3). C50, C80 and D50 from early/late energy ratios
(ISO 3382-1:2009, Annex A).

A figure whose evaluation range does not lie at least 10 dB above the noise floor
is not computed (``NaN`` in arrays, ``null`` in JSON) and a note says why.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from . import checks
from . import standards as std
from .exceptions import InputError
from .results import jsonable

#: Lundeby's procedure (Lundeby et al. 1995): see :mod:`envpredict.standards` for each
#: constant and its source.
NOISE_TAIL_FRACTION: float = std.LUNDEBY_NOISE_TAIL_FRACTION
INTERVALS_PER_10DB: float = std.LUNDEBY_INTERVALS_PER_10DB
MAX_ITERATIONS: int = std.LUNDEBY_MAX_ITERATIONS
#: The last part of the response counts as noise only if it is flatter than this
#: share of the main decay slope (judgement: a tail still falling at half the decay
#: rate is decay, not noise).
NOISE_FLATNESS: float = 0.5
#: A "noise floor" this far below the peak is digital silence (the energy floor
#: TINY_ENERGY reads as -3000 dB; no recording has 200 dB of dynamic range), dB:
#: the response decays to its end (judgement).
NO_NOISE_BELOW_DB: float = -200.0
#: Slope used where no negative slope can be fitted, dB/s: a reverberation time of 1 s,
#: so that the compensation term stays finite (judgement; such bands get no figures).
FALLBACK_SLOPE_DB_PER_S: float = -60.0
#: Where a response has no noise floor, the energy at its end is the mean over this
#: last stretch, s (judgement: a short average at the very end of the decay).
END_ENERGY_S: float = 0.005
#: Energy floor before taking logarithms (keeps log10 finite for digital silence).
TINY_ENERGY: float = 1e-300
#: Clarity and definition need at least this decay range, dB (judgement: below it
#: the late energy is mostly noise and the ratio is meaningless).
MIN_RANGE_CLARITY_DB: float = 20.0
#: Rate of the decimated Schroeder curve used for fitting, Hz: 0.25 ms steps keep more
#: than 200 points in the EDT range of a 0.3 s decay.
CURVE_RATE_HZ: float = 4000.0
#: Rate of the decay curves kept for the figures, Hz (drawing only: 1 ms steps).
PLOT_CURVE_RATE_HZ: float = 1000.0
#: Least points of a fitted decay range (below it the slope is not a fit).
MIN_FIT_POINTS: int = 4
#: A zero-phase band filter spreads the direct sound backwards by about this many
#: reciprocal bandwidths; the early energy of C50/C80 starts that much before the
#: onset (judgement).
FILTER_SPREAD_BANDWIDTHS: float = 2.0


def onset_index(x: np.ndarray) -> int:
    """Start of the impulse response: first sample whose energy is within 20 dB of the
    maximum. Source: ISO 3382-1:2009, A.3.2.

    Raises
    ------
    InputError
        If ``x`` is not a non-empty 1-D array of finite numbers.
    """
    x = checks.array(x, "impulse response")
    e = np.square(np.asarray(x, dtype=np.float64))
    thr = e.max() * 10.0 ** (-std.ONSET_THRESHOLD_DB / 10.0)
    return int(np.argmax(e >= thr))


@dataclass(frozen=True)
class ImpulseShape:
    """How much a signal looks like an impulse response (see :func:`impulse_shape`).

    ``prominence_db``: highest envelope block over the background, dB;
    ``fall_s``: time the noise-compensated Schroeder energy takes to fall
    :data:`~envpredict.standards.IR_DECAY_TEST_DB` after the onset, s (NaN: never);
    ``after_onset_s``: length of the signal from the onset on, s;
    ``steady_s``: length of the analysed envelope (the whole signal), s.
    """

    prominence_db: float
    fall_s: float
    after_onset_s: float
    steady_s: float

    @property
    def fall_share(self) -> float:
        """``fall_s`` as a share of ``after_onset_s``."""
        return self.fall_s / self.after_onset_s if self.after_onset_s > 0 else float("nan")

    @property
    def has_onset(self) -> bool:
        return bool(self.prominence_db >= std.IR_MIN_ONSET_PROMINENCE_DB)

    @property
    def has_decay(self) -> bool:
        return bool(np.isfinite(self.fall_s) and self.fall_share <= std.IR_MAX_DECAY_SHARE
                    and self.fall_s <= std.IR_MAX_REVERBERATION_S * std.IR_DECAY_TEST_DB / 60.0)

    @property
    def is_impulse_response(self) -> bool:
        return self.has_onset and self.has_decay


def impulse_shape(x: np.ndarray, fs: float) -> ImpulseShape:
    """Measure the onset and the decay of a signal: is it an impulse response?

    The squared signal (its mean removed, so that a DC offset does not count as
    energy) is averaged in blocks of :data:`~envpredict.standards.IR_ENVELOPE_BLOCK_S`.
    The *background* is the median block or the mean of the last 10 % of the blocks
    (Lundeby's first noise estimate), whichever is lower: the noise floor of an impulse
    response, or the end of one cut while still decaying. The *onset prominence* is the
    highest block over the background. The *fall* is the time the backward-integrated
    (Schroeder) energy of the blocks from the onset (ISO 3382-1:2009, A.3.2: the first
    block within 20 dB of the highest), with the background taken off each block, takes
    to fall by :data:`~envpredict.standards.IR_DECAY_TEST_DB`. An impulse response
    has a prominent onset and falls within a fraction of its length; a steady signal
    (noise, a test signal, music) has no prominent onset, and speech, whose energy goes
    on, needs most of its length to fall (the thresholds and their reasons are in
    :mod:`envpredict.standards`).

    Parameters
    ----------
    x : 1-D signal (validated).
    fs : sample rate, Hz.

    Returns
    -------
    ImpulseShape

    References
    ----------
    M. R. Schroeder, "New method of measuring reverberation time", JASA 37 (1965) 409-412.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> t = np.arange(48000 * 2) / 48000
    >>> impulse_shape(rng.standard_normal(t.size) * np.exp(-6.9 * t), 48000).is_impulse_response
    True
    >>> impulse_shape(rng.standard_normal(t.size), 48000).is_impulse_response
    False

    Raises
    ------
    InputError
        For a response that is not a non-empty 1-D array of finite numbers, or a rate that is not positive.
    """
    x = checks.array(x, "impulse response")
    fs = checks.number(fs, "sample rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    a = np.asarray(x, dtype=np.float64)
    win = max(1, int(round(std.IR_ENVELOPE_BLOCK_S * fs)))
    n = (a.size // win) * win
    if n == 0:
        return ImpulseShape(0.0, float("nan"), a.size / fs, a.size / fs)
    blocks = a[:n].reshape(-1, win)
    centred = blocks - a.mean()
    energy = np.einsum("ij,ij->i", centred, centred) / win
    top = int(np.argmax(energy))
    tail = max(1, int(energy.size * NOISE_TAIL_FRACTION))
    background = min(float(np.median(energy)), float(energy[-tail:].mean()))
    peak = float(energy[top])
    prominence = 10.0 * np.log10(max(peak, TINY_ENERGY) / max(background, TINY_ENERGY))
    start = int(np.argmax(energy >= peak * 10.0 ** (-std.ONSET_THRESHOLD_DB / 10.0)))
    excess = np.maximum(energy[start:] - background, 0.0)
    remaining = np.cumsum(excess[::-1])[::-1]
    after = excess.size * win / fs
    if remaining[0] <= 0:
        fall = float("nan")
    else:
        below = np.flatnonzero(remaining <= remaining[0] * 10.0 ** (-std.IR_DECAY_TEST_DB / 10.0))
        fall = float(below[0] * win / fs) if below.size else float("nan")
    return ImpulseShape(prominence_db=float(prominence), fall_s=fall, after_onset_s=after, steady_s=n / fs)


def check_impulse_response(x: np.ndarray, fs: float, label: str = "the input") -> ImpulseShape:
    """Refuse a signal that is not an impulse response (:func:`impulse_shape`).

    Raises
    ------
    InputError
        One line saying what the signal looks like and what to do instead.
    """
    x = checks.array(x, "impulse response")
    fs = checks.number(fs, "sample rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    shape = impulse_shape(x, fs)
    if shape.is_impulse_response:
        return shape
    fix = ("record or compute an impulse response (sweep or impulse method), or analyse a recorded STIPA "
           "signal with 'envpredict stipa'")
    if not shape.has_onset:
        what = (f"{label} does not look like an impulse response: its level stays within "
                f"{shape.prominence_db:.0f} dB of its background for {shape.steady_s:.0f} s, with no onset "
                f"{std.IR_MIN_ONSET_PROMINENCE_DB:.0f} dB above it (steady noise, speech, music or a "
                "test-signal recording?)")
    else:
        took = (f"takes {shape.fall_s:.1f} s ({100 * shape.fall_share:.0f} % of it)" if np.isfinite(shape.fall_s)
                else "does not")
        what = (f"{label} does not look like an impulse response: after its onset its energy {took} to fall "
                f"{std.IR_DECAY_TEST_DB:.0f} dB, where an impulse response falls within "
                f"{100 * std.IR_MAX_DECAY_SHARE:.0f} % of its length and "
                f"{std.IR_MAX_REVERBERATION_S * std.IR_DECAY_TEST_DB / 60.0:.0f} s (speech, music or a recording "
                "of a test signal?)")
    raise InputError(what, fix)


def _smooth_db(e: np.ndarray, win: int) -> tuple[np.ndarray, np.ndarray]:
    """Mean energy in consecutive windows of ``win`` samples: (centres, level dB)."""
    win = max(1, int(win))
    n = (e.size // win) * win
    if n == 0:
        return np.array([0.0]), np.array([10 * np.log10(max(e.mean(), TINY_ENERGY))])
    blocks = e[:n].reshape(-1, win).mean(axis=1)
    centres = (np.arange(blocks.size) + 0.5) * win
    with np.errstate(divide="ignore"):
        return centres, 10.0 * np.log10(np.maximum(blocks, TINY_ENERGY))


def _fit_line(t: np.ndarray, y: np.ndarray) -> tuple[float, float]:
    """Least-squares line y = a + b t; returns (a, b)."""
    if t.size < 2:
        return float(y[0]) if y.size else 0.0, 0.0
    tm, ym = t.mean(), y.mean()
    dt = t - tm
    var = float(dt @ dt)
    if var == 0:
        return float(ym), 0.0
    b = float(dt @ (y - ym)) / var
    return float(ym - b * tm), b


@dataclass(frozen=True)
class NoiseFloor:
    """Where a band decay meets its noise floor (samples counted from the onset)."""

    crossing: int           # index of the crossing point (or end of response)
    noise_db: float         # noise level re the peak of the smoothed envelope, dB (-inf: none)
    slope_db_per_s: float   # late decay slope used for compensation, dB/s (negative)
    range_db: float         # usable decay range: peak minus max(noise, level at the end)
    has_noise: bool


def _initial_window(fs: float, fc: float | None) -> int:
    """Samples of the first smoothing window (Lundeby step 1; longer for low bands)."""
    w0 = std.LUNDEBY_INITIAL_WINDOW_S
    return int(fs * max(w0, std.LUNDEBY_INITIAL_WINDOW_PERIODS / fc if fc else w0))


def find_noise_floor(e: np.ndarray, fs: float, fc: float | None = None) -> NoiseFloor:
    """Iterative noise-floor and crossing-point estimate (Lundeby et al. 1995).

    ``e`` is the squared response from the onset on.

    Raises
    ------
    InputError
        For a squared response that is not a non-empty 1-D array of finite numbers,
        a rate that is not positive or a band centre that is not positive.
    """
    e = checks.array(e, "squared response")
    fs = checks.number(fs, "sample rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    fc = checks.optional_number(fc, "band centre", lo=0.0, lo_open=True)
    n = e.size
    win0 = _initial_window(fs, fc)
    tail = max(1, int(n * NOISE_TAIL_FRACTION))
    peak_db = float(_smooth_db(e, win0)[1].max())

    def _levels(win):
        c, L = _smooth_db(e, win)
        return c, L - peak_db

    c, L = _levels(win0)
    noise_db = 10 * np.log10(max(e[-tail:].mean(), TINY_ENERGY)) - peak_db
    # is the tail noise at all? compare its slope to the main decay slope
    above = L > noise_db + std.LUNDEBY_REGRESSION_NOISE_MARGIN_DB
    a, b = _fit_line(c[above] / fs, L[above]) if np.any(above) else (0.0, 0.0)
    tail_sel = c >= n - tail
    _, b_tail = _fit_line(c[tail_sel] / fs, L[tail_sel]) if np.count_nonzero(tail_sel) >= 2 else (0.0, 0.0)
    if b >= 0 or (b_tail < NOISE_FLATNESS * b) or noise_db < NO_NOISE_BELOW_DB:
        # the response decays to its end: no noise floor in it
        end_db = float(L[-1])
        slope = b if b < 0 else FALLBACK_SLOPE_DB_PER_S
        return NoiseFloor(crossing=n, noise_db=-np.inf, slope_db_per_s=slope, range_db=-end_db, has_noise=False)

    crossing = n
    slope = b
    for _ in range(MAX_ITERATIONS):
        # crossing of the regression line with the noise level
        if slope >= 0:
            break
        tc = (noise_db - a) / slope
        new_cross = int(np.clip(tc * fs, 1, n))
        # new smoothing interval: INTERVALS_PER_10DB intervals per 10 dB of decay
        w_min = fs * std.LUNDEBY_MIN_WINDOW_S
        win = int(np.clip(fs * (10.0 / -slope) / INTERVALS_PER_10DB, w_min,
                          max(w_min, n * std.LUNDEBY_MAX_WINDOW_FRACTION)))
        c, L = _levels(win)
        # noise from the point where the line is LUNDEBY_NOISE_POINT_DB below the noise,
        # or the last 10 %
        t_noise = int(min(n - tail, (tc + std.LUNDEBY_NOISE_POINT_DB / -slope) * fs))
        seg = e[max(0, t_noise):]
        if seg.size:
            noise_db = 10 * np.log10(max(seg.mean(), TINY_ENERGY)) - peak_db
        # regression from 5 dB below the peak to 10 dB above the noise
        sel = ((L <= std.LUNDEBY_REGRESSION_TOP_DB) & (L >= noise_db + std.LUNDEBY_REGRESSION_NOISE_MARGIN_DB)
               & (c < new_cross))
        if np.count_nonzero(sel) < 2:
            sel = (L >= noise_db + std.LUNDEBY_FALLBACK_NOISE_MARGIN_DB) & (c < new_cross)
        if np.count_nonzero(sel) >= 2:
            a, slope = _fit_line(c[sel] / fs, L[sel])
        converged = abs(new_cross - crossing) < win
        crossing = new_cross
        if converged:
            break
    slope = slope if slope < 0 else FALLBACK_SLOPE_DB_PER_S
    return NoiseFloor(crossing=crossing, noise_db=float(noise_db), slope_db_per_s=float(slope),
                      range_db=float(-noise_db), has_noise=True)


def _check_band_energy(e, fs, fc, floor) -> tuple[np.ndarray, float, float | None]:
    """The arguments shared by the functions of a band's squared response and its noise floor."""
    e = checks.array(e, "squared response")
    fs = checks.number(fs, "sample rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    fc = checks.optional_number(fc, "band centre", lo=0.0, lo_open=True)
    if not isinstance(floor, NoiseFloor):
        raise InputError("floor is not a NoiseFloor", "pass the result of find_noise_floor")
    return e, fs, fc


def schroeder_curve(e: np.ndarray, fs: float, floor: NoiseFloor, fc: float | None = None,
                    step: int = 1) -> np.ndarray:
    """Backward-integrated decay curve in dB re its start, truncated at the crossing point
    with compensation C = e(tc) * T / 13.8 for the energy beyond it (ISO 3382-1, 5.3.3;
    :data:`envpredict.standards.DECAY_TAIL_DIVISOR`).

    The integral is taken at the full rate; the curve is returned at every ``step``-th
    sample (it is smooth, so a decimated copy loses nothing for fitting or plotting).
    Samples after the crossing are NaN.

    Raises
    ------
    InputError
        As :func:`find_noise_floor`, or for a ``floor`` that is not a :class:`NoiseFloor`.
    """
    e, fs, fc = _check_band_energy(e, fs, fc, floor)
    step = checks.number(step, "step", lo=1, hi=checks.MAX_SAMPLES, integer=True)
    tc = floor.crossing
    ee = e[:tc]
    s = (np.cumsum(ee[::-1])[::-1] + tail_energy(e, fs, floor, fc))[::step]
    out = np.full(-(-e.size // step), np.nan)
    with np.errstate(divide="ignore"):
        out[: s.size] = 10.0 * np.log10(s / s[0])
    return out


def _peak_energy(e: np.ndarray, fs: float, fc: float | None = None) -> float:
    _, L = _smooth_db(e, _initial_window(fs, fc))
    return float(10 ** (L.max() / 10.0))


def noise_energy(e: np.ndarray, fs: float, floor: NoiseFloor, fc: float | None = None) -> float:
    """Mean noise energy per sample (0 where the response has no noise floor).

    Raises
    ------
    InputError
        As :func:`find_noise_floor`, or for a ``floor`` that is not a :class:`NoiseFloor`.
    """
    e, fs, fc = _check_band_energy(e, fs, fc, floor)
    return 10 ** (floor.noise_db / 10.0) * _peak_energy(e, fs, fc) if floor.has_noise else 0.0


def tail_energy(e: np.ndarray, fs: float, floor: NoiseFloor, fc: float | None = None) -> float:
    """Energy beyond the crossing point, as a sum of samples: the decay line's energy at
    the crossing (the noise level there, or the last 5 ms where there is no noise) times
    T/13.8 (the integral of the exponential tail). Source: ISO 3382-1:2009, 5.3.3.

    Raises
    ------
    InputError
        As :func:`find_noise_floor`, or for a ``floor`` that is not a :class:`NoiseFloor`.
    """
    e, fs, fc = _check_band_energy(e, fs, fc, floor)
    if floor.has_noise:
        e_tc = noise_energy(e, fs, floor, fc)
    else:
        w = max(1, int(END_ENERGY_S * fs))
        e_tc = float(e[max(0, floor.crossing - w):floor.crossing].mean())
    T = -60.0 / floor.slope_db_per_s
    return e_tc * T / std.DECAY_TAIL_DIVISOR * fs


@dataclass(frozen=True)
class DecayFit:
    """A least-squares line over one evaluation range of a decay curve.

    ``time_s``: decay time extrapolated to 60 dB (NaN: no fit); ``xi_permille``: the
    non-linearity 1000 (1 - r^2) of ISO 3382-2:2008, Annex B (from memory); ``span_time_s``: the time the
    curve itself takes to fall through the range, scaled to 60 dB (the chord).
    """

    time_s: float
    xi_permille: float
    span_time_s: float


_NO_FIT = DecayFit(float("nan"), float("nan"), float("nan"))


def fit_decay_range(curve_db: np.ndarray, fs: float, hi_db: float, lo_db: float) -> DecayFit:
    """Fit a line to the curve between ``hi_db`` and ``lo_db`` (first passages) and measure
    how straight the curve is there (ISO 3382-2:2008, Annex B, from memory: xi = 1000 (1 - r^2)).

    Raises
    ------
    InputError
        For a curve that is not a 1-D array of numbers, a rate that is not positive or levels that are
        not finite numbers.
    """
    curve_db = checks.array(curve_db, "decay curve", min_size=0, finite=False)
    fs = checks.number(fs, "sample rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    hi_db, lo_db = checks.number(hi_db, "upper level"), checks.number(lo_db, "lower level")
    c = curve_db
    finite = np.isfinite(c)
    below_lo = np.flatnonzero(finite & (c <= lo_db))
    if below_lo.size == 0:
        return _NO_FIT
    i_lo = int(below_lo[0])
    i_hi = int(np.argmax(finite & (c <= hi_db)))
    if i_lo - i_hi < MIN_FIT_POINTS - 1:
        return _NO_FIT
    t = np.arange(i_hi, i_lo + 1) / fs
    y = c[i_hi : i_lo + 1]
    _, slope = _fit_line(t, y)
    if not slope < 0:
        return _NO_FIT
    dt, dy = t - t.mean(), y - y.mean()
    r2 = float((dt @ dy) ** 2 / ((dt @ dt) * (dy @ dy))) if (dy @ dy) > 0 else 1.0
    span = 60.0 * (t[-1] - t[0]) / max(float(y[0] - y[-1]), TINY_ENERGY)
    return DecayFit(float(-60.0 / slope), 1000.0 * (1.0 - r2), float(span))


def fit_decay_time(curve_db: np.ndarray, fs: float, hi_db: float, lo_db: float) -> float:
    """Decay time (s, extrapolated to 60 dB) from a least-squares fit of the curve between
    ``hi_db`` and ``lo_db`` (first passages). NaN if the curve does not reach ``lo_db``.

    Raises
    ------
    InputError
        For a curve that is not a 1-D array of numbers, a rate that is not positive or levels that are
        not finite numbers.
    """
    return fit_decay_range(curve_db, fs, hi_db, lo_db).time_s  # which checks the arguments


#: Sample rate of the Schroeder curves kept in a result for its figures, Hz: 5 ms steps
#: resolve the first 10 dB of any decay longer than 0.1 s at figure width (judgement).
FIGURE_CURVE_RATE_HZ: float = 200.0


@dataclass(frozen=True)
class DecayResult:
    """ISO 3382-1 figures per octave band (NaN where not computable; see ``notes``)."""

    bands_hz: tuple[float, ...]
    edt: np.ndarray
    t20: np.ndarray
    t30: np.ndarray
    c50: np.ndarray
    c80: np.ndarray
    d50: np.ndarray
    range_db: np.ndarray
    noise_floor_db: np.ndarray
    crossing_s: np.ndarray
    notes: tuple[str, ...] = field(default=())
    curves_db: np.ndarray | None = field(default=None, repr=False, compare=False)
    curve_rate_hz: float = 0.0
    #: non-linearity xi (per mille, ISO 3382-2 Annex B) of the "edt", "t20" and "t30" fits,
    #: shape (3, bands); NaN where no fit was made. Explained in ``notes``; not in to_dict().
    xi_permille: np.ndarray | None = field(default=None, repr=False, compare=False)
    #: (figure, band Hz) pairs whose curve is not straight (xi above the limit), and those
    #: whose fitted time was withheld as beyond what the curve supports.
    bent: tuple[tuple[str, float], ...] = field(default=(), compare=False)
    withheld: tuple[tuple[str, float], ...] = field(default=(), compare=False)

    def to_dict(self) -> dict:
        return jsonable(
            {
                "bands_hz": self.bands_hz,
                "edt": np.round(self.edt, 3),
                "t20": np.round(self.t20, 3),
                "t30": np.round(self.t30, 3),
                "c50": np.round(self.c50, 2),
                "c80": np.round(self.c80, 2),
                "d50": np.round(self.d50, 3),
                "decay_range_db": np.round(self.range_db, 1),
                "noise_floor_db": np.round(self.noise_floor_db, 1),
                "crossing_s": np.round(self.crossing_s, 3),
                # ISO 3382-1 single numbers (mean of 500 Hz and 1 kHz; null when either is missing)
                "t30_mid": round(mid_frequency(self.t30, self.bands_hz), 3),
                "edt_mid": round(mid_frequency(self.edt, self.bands_hz), 3),
                "notes": list(self.notes),
                **self._curves_for_figures(),
            }
        )

    def _curves_for_figures(self) -> dict:
        """The Schroeder curves at no more than FIGURE_CURVE_RATE_HZ, 0.01 dB (figure data:
        a report is drawn from the result alone)."""
        if self.curves_db is None or not self.curve_rate_hz:
            return {"curves_db": None, "curve_rate_hz": None}
        q = max(1, int(round(self.curve_rate_hz / FIGURE_CURVE_RATE_HZ)))
        return {"curves_db": np.round(self.curves_db[:, ::q], 2), "curve_rate_hz": self.curve_rate_hz / q}


def _bandwidth(fc: float) -> float:
    """Bandwidth of the octave band centred on ``fc``, Hz (IEC 61260-1 base-2 edges)."""
    return fc * (std.OCTAVE_EDGE_FACTOR - 1 / std.OCTAVE_EDGE_FACTOR)


def _needed_range(name: str) -> float:
    return -std.DECAY_RANGES_DB[name][1] + std.DECAY_NOISE_HEADROOM_DB


def band_decay(band: np.ndarray, fs: float, t0: int, fc: float | None = None) -> dict:
    """All decay figures of one band-filtered response (``t0``: onset sample).

    Raises
    ------
    InputError
        For a response that is not a non-empty 1-D array of finite numbers, a rate that is not positive, an
        onset outside the response or a band centre that is not positive.
    """
    band = checks.array(band, "band response")
    fs = checks.number(fs, "sample rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    fc = checks.optional_number(fc, "band centre", lo=0.0, lo_open=True)
    t0 = checks.number(t0, "onset sample", lo=0, hi=band.size - 1, integer=True)
    x = np.asarray(band, dtype=np.float64)
    e_all = np.square(x)
    e = e_all[t0:]
    floor = find_noise_floor(e, fs, fc)
    step = max(1, int(fs // CURVE_RATE_HZ))
    curve = schroeder_curve(e, fs, floor, fc, step=step)
    out: dict = {"floor": floor, "curve": curve, "curve_rate": fs / step, "notes": [], "xi": {},
                 "bent": [], "absurd": []}
    label = f"{fc:g} Hz" if fc else "broadband"
    for name, (hi, lo) in std.DECAY_RANGES_DB.items():
        need = _needed_range(name)
        if floor.range_db < need:
            out[name] = float("nan")
            out["notes"].append(
                f"{name.upper()} not computed at {label}: decay range {floor.range_db:.0f} dB, "
                f"{need:.0f} dB needed (ISO 3382-1: range must end 10 dB above the noise floor)"
            )
        else:
            fit = fit_decay_range(curve, fs / step, hi, lo)
            out[name] = fit.time_s
            out["xi"][name] = fit.xi_permille
            if not np.isfinite(out[name]):
                out["notes"].append(
                    f"{name.upper()} not computed at {label}: the decay curve does not reach {lo:.0f} dB")
            elif fit.time_s > e.size / fs or fit.time_s > std.DECAY_FIT_MAX_RATIO * fit.span_time_s:
                out[name] = float("nan")
                out["absurd"].append(name)
                out["notes"].append(
                    f"{name.upper()} not given at {label}: the fitted line gives {fit.time_s:.3g} s, but the curve "
                    f"falls through its range at the rate of {fit.span_time_s:.3g} s per 60 dB and the response "
                    f"lasts {e.size / fs:.3g} s after its onset: the decay is not straight "
                    f"(xi = {fit.xi_permille:.0f} per mille; ISO 3382-2:2008, Annex B)")
            elif fc and fit.time_s * _bandwidth(fc) < std.DECAY_MIN_BANDWIDTH_TIME:
                out[name] = float("nan")
                out["absurd"].append(name)
                out["notes"].append(
                    f"{name.upper()} not given at {label}: {fit.time_s:.3g} s is the octave filter's own decay, "
                    f"not the room's (bandwidth x time {fit.time_s * _bandwidth(fc):.1f}, "
                    f"{std.DECAY_MIN_BANDWIDTH_TIME:.0f} needed; ISO 3382-2:2008, 7.3)")
            elif name != "edt" and fit.xi_permille > std.DECAY_NONLINEARITY_LIMIT_PERMILLE:
                out["bent"].append(name)
                out["notes"].append(
                    f"{name.upper()} at {label} is suspect: the decay curve is not straight over its range "
                    f"(xi = {fit.xi_permille:.0f} per mille, above the "
                    f"{std.DECAY_NONLINEARITY_LIMIT_PERMILLE:.0f} per mille limit; ISO 3382-2:2008, Annex B)")
    # clarity and definition: early energy from just before the onset (the zero-phase
    # band filter spreads the direct sound by about 2/bandwidth), late energy to the
    # crossing point plus the compensated tail, noise energy removed from both.
    bw = _bandwidth(fc) if fc else fs / 4
    pre = min(t0, int(FILTER_SPREAD_BANDWIDTHS / bw * fs))
    noise_e = noise_energy(e, fs, floor, fc)
    tc = t0 + floor.crossing
    tail = tail_energy(e, fs, floor, fc)
    for name, bound in (("c50", std.C50_S), ("c80", std.C80_S)):
        split = t0 + int(round(bound * fs))
        if floor.range_db < MIN_RANGE_CLARITY_DB or split >= tc:
            out[name] = float("nan")
            if name == "c50":
                out["d50"] = float("nan")
            out["notes"].append(f"{name.upper()} not computed at {label}: decay range {floor.range_db:.0f} dB, "
                                f"{MIN_RANGE_CLARITY_DB:.0f} dB needed")
            continue
        early = max(float(e_all[t0 - pre:split].sum()) - noise_e * (split - t0 + pre), TINY_ENERGY)
        late = max(float(e_all[split:tc].sum()) - noise_e * (tc - split) + tail, TINY_ENERGY)
        out[name] = 10.0 * np.log10(early / late)
        if name == "c50":
            out["d50"] = early / (early + late)
    return out


def decay_figures(band_irs: np.ndarray, fs: float, t0: int, *, keep_curves: bool = True) -> DecayResult:
    """ISO 3382-1 figures of the seven octave-band impulse responses.

    Parameters
    ----------
    band_irs : (7, n) band-filtered impulse responses (zero-phase filtered).
    fs : sample rate, Hz.
    t0 : onset sample (ISO 3382-1 A.3.2), usually from the broadband response.

    Raises
    ------
    InputError
        For responses that are not a (7, n) array of finite numbers, a rate that is not positive or an onset
        outside the responses.
    """
    band_irs = checks.array(band_irs, "band impulse responses", ndim=2)
    if band_irs.shape[0] != len(std.OCTAVE_BANDS_HZ):
        raise InputError(f"{band_irs.shape[0]} band responses", "pass the seven octave bands, 125 Hz to 8 kHz")
    fs = checks.number(fs, "sample rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    t0 = checks.number(t0, "onset sample", lo=0, hi=band_irs.shape[1] - 1, integer=True)
    keep_curves = checks.flag(keep_curves, "keep_curves")
    per = [band_decay(b, fs, t0, fc) for b, fc in zip(band_irs, std.OCTAVE_BANDS_HZ)]
    notes = tuple(n for p in per for n in p["notes"])
    curves = None
    rate = 0.0
    if keep_curves:
        q = max(1, int(per[0]["curve_rate"] // PLOT_CURVE_RATE_HZ))  # 1 kHz is plenty for plotting
        curves = np.stack([p["curve"][::q] for p in per])
        rate = per[0]["curve_rate"] / q
    arr = lambda k: np.array([p[k] for p in per], dtype=float)  # noqa: E731
    return DecayResult(
        bands_hz=std.OCTAVE_BANDS_HZ,
        edt=arr("edt"), t20=arr("t20"), t30=arr("t30"),
        c50=arr("c50"), c80=arr("c80"), d50=arr("d50"),
        range_db=np.array([p["floor"].range_db for p in per]),
        noise_floor_db=np.array([p["floor"].noise_db for p in per]),
        crossing_s=np.array([p["floor"].crossing / fs for p in per]),
        notes=notes, curves_db=curves, curve_rate_hz=rate,
        xi_permille=np.array([[p["xi"].get(k, np.nan) for p in per] for k in std.DECAY_RANGES_DB], dtype=float),
        bent=tuple((k, fc) for p, fc in zip(per, std.OCTAVE_BANDS_HZ) for k in p["bent"]),
        withheld=tuple((k, fc) for p, fc in zip(per, std.OCTAVE_BANDS_HZ) for k in p["absurd"]),
    )


def reverberation_time(x: np.ndarray, fs: float, kind: str = "t30") -> float:
    """Broadband EDT/T20/T30 of an impulse response (NaN if the range is too small).

    Raises
    ------
    InputError
        For a response refused by :func:`onset_index`, a rate that is not positive or an unknown ``kind``.
    """
    kind = checks.choice(kind, "decay figure", tuple(std.DECAY_RANGES_DB))
    x = checks.array(x, "impulse response")
    return float(band_decay(x, fs, onset_index(x), None)[kind])


def mid_frequency(values: Sequence[float | None] | np.ndarray,
                  bands_hz: Sequence[float] = std.OCTAVE_BANDS_HZ) -> float:
    """Single-number ("mid-frequency") value of a per-octave-band figure such as T30 or EDT.

    The mean of the 500 Hz and 1 kHz octave values
    (:data:`envpredict.standards.MID_FREQUENCY_BANDS_HZ`). If either is missing (NaN or
    ``None``) the single number is missing too: the mean of the band that is left would
    be reported as if it were the standard figure.

    Parameters
    ----------
    values : one value per band of ``bands_hz`` (``None`` or NaN where not computed),
        e.g. ``DecayResult.t30`` or the ``decay["t30"]`` list of a result's JSON.
    bands_hz : centre frequencies of ``values``, Hz (default: the seven STI octave bands).

    Returns
    -------
    float, NaN when a mid-frequency band is missing.

    References
    ----------
    ISO 3382-1:2009, Annex A, Table A.1 (single-number frequency averaging, 500 Hz to
    1000 Hz, for EDT and T).

    Examples
    --------
    >>> mid_frequency([1.9, 1.8, 1.6, 1.5, 1.3, 1.1, 0.9])
    1.55
    >>> import math
    >>> math.isnan(mid_frequency([1.9, 1.8, None, 1.5, 1.3, 1.1, 0.9]))
    True

    Raises
    ------
    InputError
        If ``values`` is not one value per band or a value is not a number (or None).
    """
    bands = checks.array(bands_hz, "band centres").tolist()
    if isinstance(values, (str, bytes)) or not hasattr(values, "__len__") or len(values) != len(bands):
        raise InputError(f"{values!r:.40} is not one value per band of {len(bands)}",
                         "give one value (or None) per octave band")
    vals = []
    for fc in std.MID_FREQUENCY_BANDS_HZ:
        if fc not in bands:
            return float("nan")
        v = values[bands.index(fc)]
        missing = v is None or isinstance(v, float) and math.isnan(v)  # np.float64 NaN too
        vals.append(float("nan") if missing else checks.number(v, "value"))
    return math.fsum(vals) / len(vals) if all(math.isfinite(v) for v in vals) else float("nan")


def mid_frequency_notes(decay: DecayResult, name: str) -> tuple[str, ...]:
    """The notes of :func:`decay_figures` that explain a missing 500 Hz or 1 kHz value of
    figure ``name`` ("t30", "edt", ...): "not computed" and "not given" notes, not the
    cautions about a value that was kept; empty when there is none.

    Raises
    ------
    InputError
        For a ``decay`` that is not a :class:`DecayResult` or a ``name`` that is not text.
    """
    if not isinstance(decay, DecayResult):
        raise InputError("decay is not a DecayResult", "pass the result of decay_figures")
    name = checks.text(name, "figure name")
    fig = name.upper()
    return tuple(n for n in decay.notes if n.startswith(f"{fig} not ") and any(f" at {b:g} Hz" in n for b in
                                                                              std.MID_FREQUENCY_BANDS_HZ))
