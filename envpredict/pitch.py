"""Fundamental frequency (F0) and voicing by YIN (de Cheveigne & Kawahara 2002).

:func:`yin_f0` gives a frame-wise F0 track with a voiced/unvoiced decision. The
frame kernel (:func:`_yin_frames`) and the voicing decision (:func:`_yin_finish`) are
separate so that :mod:`envpredict.timescales` can run YIN block by block over a long
recording and decide voicing once, against the loudest frame of the whole recording.

Source
------
A. de Cheveigne, H. Kawahara, "YIN, a fundamental frequency estimator for speech and
music", J. Acoust. Soc. Am. 111(4) (2002) 1917-1930.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import checks
from . import standards as std
from .audio import resample
from .exceptions import InputError
from .results import jsonable

#: YIN runs at this rate (or the input rate if lower): 16 kHz keeps the 500 Hz period
#: at 32 samples, ample with parabolic interpolation (judgement).
YIN_RATE_HZ: int = 16000
#: Frames quieter than this many dB below the loudest frame are silence, never voiced
#: (judgement: keeps the F0 track off the noise floor between phrases).
SILENCE_BELOW_PEAK_DB: float = 50.0
#: Frames processed per block in the vectorised YIN (memory bound, not a method constant).
YIN_BLOCK_FRAMES: int = 1024
#: Widest F0 search range accepted, Hz (judgement: periodicity lies at about 50-500 Hz;
#: below 20 Hz is infrasound, above 2 kHz no voice has its fundamental).
F0_SEARCH_LIMITS_HZ: tuple[float, float] = (20.0, 2000.0)
#: Shortest lag searched, samples (lag 1 has no dip to interpolate below it).
MIN_LAG: int = 2
#: The search range must stay below this share of the YIN rate (the longest lag plus
#: the interpolation neighbours must fit in half a second of signal).
MAX_LAG_SHARE: float = 0.5
#: An estimate counts as inside the search range with this much slack on each side
#: (parabolic interpolation can move it slightly past the end lags; judgement).
RANGE_SLACK: float = 0.02
#: Step 4 refinement: the deepest dip is searched up to this multiple of the first
#: dip's lag (below twice the lag, so the period-doubling protection stays; ours).
DIP_SEARCH_FACTOR: tuple[int, int] = (3, 2)
#: A parabola with a second difference smaller than this is flat: no shift.
FLAT_PARABOLA: float = 1e-12
#: Parabolic interpolation moves the lag by at most half a sample.
MAX_SHIFT: float = 0.5

@dataclass(frozen=True)
class F0Track:
    """Frame-wise F0 and voicing. ``f0_hz`` is NaN in unvoiced frames."""

    times_s: np.ndarray
    f0_hz: np.ndarray
    aperiodicity: np.ndarray
    voiced: np.ndarray
    hop_s: float

    def to_dict(self) -> dict:
        """The track frame by frame (``f0_hz`` null where unvoiced)."""
        return jsonable({
            "hop_s": self.hop_s,
            "times_s": np.round(self.times_s, 5),
            "f0_hz": np.round(self.f0_hz, 2),
            "aperiodicity": np.round(self.aperiodicity, 4),
            "voiced": self.voiced,
            "cautions": [],
            "notes": [],
        })


def _frames(x: np.ndarray, starts: np.ndarray, length: int) -> np.ndarray:
    idx = starts[:, None] + np.arange(length)[None, :]
    return x[idx]


@dataclass(frozen=True)
class _YinSetup:
    """Lags, window and hop of YIN at the rate it runs at (``fs``)."""

    fs: int
    tau_min: int
    tau_max: int
    w: int
    hop: int
    span: int
    nfft: int
    f0_min_hz: float
    f0_max_hz: float
    threshold: float
    voicing_threshold: float


def check_f0_range(f0_min_hz: float, f0_max_hz: float) -> tuple[float, float]:
    """Refuse an empty F0 search range or one outside :data:`F0_SEARCH_LIMITS_HZ`.

    Raises
    ------
    InputError
        For an empty range, one outside :data:`F0_SEARCH_LIMITS_HZ`, or bounds that are not numbers.
    """
    f0_min_hz = checks.number(f0_min_hz, "lowest F0")
    f0_max_hz = checks.number(f0_max_hz, "highest F0")
    lo, hi = F0_SEARCH_LIMITS_HZ
    if not 0 < f0_min_hz < f0_max_hz:
        raise InputError(f"F0 search range {f0_min_hz:g}-{f0_max_hz:g} Hz is empty or negative",
                         f"give 0 < --f0-min < --f0-max (default {std.F0_MIN_HZ:g} and {std.F0_MAX_HZ:g} Hz)")
    if f0_min_hz < lo or f0_max_hz > hi:
        raise InputError(f"F0 search range {f0_min_hz:g}-{f0_max_hz:g} Hz is outside {lo:g}-{hi:g} Hz",
                         f"periodicity lies at about {std.F0_MIN_HZ:g}-{std.F0_MAX_HZ:g} Hz; keep the range "
                         f"within {lo:g}-{hi:g} Hz")
    return float(f0_min_hz), float(f0_max_hz)


def _yin_setup(fs: int, f0_min_hz: float, f0_max_hz: float, threshold: float, voicing_threshold: float,
               window_s: float, hop_s: float) -> _YinSetup:
    check_f0_range(f0_min_hz, f0_max_hz)
    fs = YIN_RATE_HZ if fs > YIN_RATE_HZ else int(fs)
    tau_min = max(MIN_LAG, int(np.floor(fs / f0_max_hz)))
    tau_max = int(np.ceil(fs / f0_min_hz))
    if tau_max + 2 >= fs * MAX_LAG_SHARE:
        raise InputError(f"F0 search range down to {f0_min_hz:g} Hz is too low", "use 50 Hz or more")
    w = round(window_s * fs)
    w = max(w, tau_max + 1)
    hop = max(1, round(hop_s * fs))
    span = w + tau_max + 1
    nfft = 1 << int(np.ceil(np.log2(span + w)))
    return _YinSetup(fs, tau_min, tau_max, w, hop, span, nfft, float(f0_min_hz), float(f0_max_hz),
                     float(threshold), float(voicing_threshold))


def _yin_frames(xp: np.ndarray, starts: np.ndarray, p: _YinSetup) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Raw F0, aperiodicity and mean energy of the frames starting at ``starts`` of ``xp``.

    ``xp`` must hold ``p.span`` samples after the last start (zeros past the signal end).
    """
    tau_min, tau_max, w = p.tau_min, p.tau_max, p.w
    n_frames = starts.size
    csum = np.concatenate([[0.0], np.cumsum(xp * xp)])
    taus = np.arange(tau_max + 2)
    f0 = np.full(n_frames, np.nan)
    ap = np.ones(n_frames)
    energy = np.zeros(n_frames)
    for b0 in range(0, n_frames, YIN_BLOCK_FRAMES):
        nb = min(YIN_BLOCK_FRAMES, n_frames - b0)
        st = starts[b0 : b0 + nb]
        fr = _frames(xp, st, p.span)
        a = np.fft.rfft(fr[:, :w], p.nfft)
        bsp = np.fft.rfft(fr, p.nfft)
        r = np.fft.irfft(np.conj(a) * bsp, p.nfft)[:, : tau_max + 2]
        e0 = csum[st + w] - csum[st]
        et = csum[st[:, None] + taus[None, :] + w] - csum[st[:, None] + taus[None, :]]
        d = np.maximum(e0[:, None] + et - 2.0 * r, 0.0)
        d[:, 0] = 0.0
        cum = np.cumsum(d[:, 1:], axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            dn = np.ones_like(d)
            dn[:, 1:] = np.where(cum > 0, d[:, 1:] * taus[1:] / cum, 1.0)
        seg = dn[:, tau_min : tau_max + 1]
        below = seg < p.threshold
        has = below.any(axis=1)
        first = np.where(has, np.argmax(below, axis=1), np.argmin(seg, axis=1))
        # walk down to the bottom of the dip (step 4: the local minimum after the crossing)
        idx = first + tau_min
        rows = np.arange(nb)
        for _ in range(tau_max):
            nxt = np.minimum(idx + 1, tau_max)
            move = has & (dn[rows, nxt] < dn[rows, idx]) & (idx < tau_max)
            if not move.any():
                break
            idx = np.where(move, nxt, idx)
        # refinement of step 4 (ours): the deepest value of d' between the first dip and
        # 1.5 times its lag. A narrow-band signal (a tone amplitude-modulated at F0) dips
        # below the threshold at every carrier period near the true period; the deepest of
        # them is the period. A dip at twice the period lies outside the window, so the
        # paper's protection against too-low F0 estimates is kept.
        lim = np.minimum((idx * DIP_SEARCH_FACTOR[0]) // DIP_SEARCH_FACTOR[1], tau_max)
        lags = np.arange(tau_max + 1)[None, :]
        win = (lags >= idx[:, None]) & (lags <= lim[:, None])
        masked = np.where(win, dn[:, : tau_max + 1], np.inf)
        idx = np.where(has, np.argmin(masked, axis=1), idx)
        # parabolic interpolation (step 5)
        i0 = np.clip(idx, 1, tau_max)
        y0, y1, y2 = dn[rows, i0 - 1], dn[rows, i0], dn[rows, i0 + 1]
        den = y0 - 2.0 * y1 + y2
        with np.errstate(invalid="ignore", divide="ignore"):
            shift = np.where(np.abs(den) > FLAT_PARABOLA, 0.5 * (y0 - y2) / den, 0.0)
        shift = np.clip(shift, -MAX_SHIFT, MAX_SHIFT)
        period = i0 + shift
        ap[b0 : b0 + nb] = np.clip(y1 - 0.25 * (y0 - y2) * shift, 0.0, None)
        f0[b0 : b0 + nb] = p.fs / period
        energy[b0 : b0 + nb] = e0 / w
    return f0, ap, energy


def _yin_finish(f0: np.ndarray, ap: np.ndarray, energy: np.ndarray, p: _YinSetup) -> F0Track:
    """Voicing decision over the whole recording (needs the loudest frame) and the track."""
    n_frames = f0.size
    peak = float(energy.max()) if energy.size else 0.0
    loud = energy > peak * 10.0 ** (-SILENCE_BELOW_PEAK_DB / 10.0) if peak > 0 else np.zeros(n_frames, bool)
    in_range = (f0 >= p.f0_min_hz * (1 - RANGE_SLACK)) & (f0 <= p.f0_max_hz * (1 + RANGE_SLACK))
    voiced = (ap < p.voicing_threshold) & loud & in_range
    f0 = np.where(voiced, f0, np.nan)
    times = (np.arange(n_frames) * p.hop + p.w / 2.0) / p.fs
    return F0Track(times_s=times, f0_hz=f0, aperiodicity=ap, voiced=voiced, hop_s=p.hop / p.fs)


def yin_f0(
    x: np.ndarray,
    fs: int,
    *,
    f0_min_hz: float = std.F0_MIN_HZ,
    f0_max_hz: float = std.F0_MAX_HZ,
    threshold: float = std.YIN_THRESHOLD,
    voicing_threshold: float = std.YIN_VOICING_THRESHOLD,
    window_s: float = std.YIN_WINDOW_S,
    hop_s: float = std.YIN_HOP_S,
) -> F0Track:
    """Frame-wise F0 by YIN (de Cheveigne & Kawahara 2002).

    Steps of the paper (Sec. II): the difference function
    ``d(tau) = sum_j (x_j - x_{j+tau})^2`` over a window of ``window_s``; the cumulative
    mean normalised difference ``d'(tau) = d(tau) / ((1/tau) sum_{j<=tau} d(j))``; the
    first dip of ``d'`` below ``threshold`` inside the search range (else the global
    minimum); parabolic interpolation of the dip. A frame is voiced if ``d'`` at the
    period (its aperiodicity) is below ``voicing_threshold`` and the frame is within
    50 dB of the loudest frame. The paper's step 6 (best local estimate) is not used;
    step 4 is refined: the deepest ``d'`` between the first dip and 1.5 times its lag
    is taken (see the code comment), which finds the period of amplitude-modulated
    tones whose carrier dips cross the threshold first.

    Parameters
    ----------
    x : 1-D signal (validated by the caller).
    fs : sample rate, Hz; signals above 16 kHz are resampled to 16 kHz first.
    f0_min_hz, f0_max_hz : search range, default 50-500 Hz (periodicity range; adult
        voices are commonly 100-300 Hz -- common practice, no source).

    Returns
    -------
    F0Track with one frame per ``hop_s``; frame times are window centres.

    Raises
    ------
    InputError
        For a signal that is not a non-empty 1-D array of finite numbers, a rate outside the
        supported range, or a search range or window refused by :func:`check_f0_range` and the setup.
    """
    x = checks.array(x, "signal")
    fs = checks.sample_rate(fs)
    p = _yin_setup(fs, f0_min_hz, f0_max_hz, threshold, voicing_threshold, window_s, hop_s)
    x = np.asarray(x, dtype=np.float64)
    if fs > YIN_RATE_HZ:
        x = resample(x, fs, YIN_RATE_HZ)
    xp = np.concatenate([x, np.zeros(p.span)])
    n_frames = max(1, int(np.ceil(x.size / p.hop)))
    f0, ap, energy = _yin_frames(xp, np.arange(n_frames) * p.hop, p)
    return _yin_finish(f0, ap, energy, p)
