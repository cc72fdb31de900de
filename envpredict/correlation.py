"""Envelope-correlation intelligibility indices: STOI and extended STOI (ESTOI).

Both indices compare the short-time one-third-octave envelopes of a clean reference
and a degraded version of the same utterance, on the grid published with them:

* the signals are at 10 kHz (callers resample, see :func:`stoi`);
* 256-sample Hann frames, 50 % overlap; frames of the clean signal more than 40 dB
  below its loudest frame are removed from both signals, which are then rebuilt by
  overlap-add of the remaining frames (silent-frame removal);
* 512-point DFT of the rebuilt signals with the same framing; 15 one-third-octave
  bands from 150 Hz, each TF unit the root of the summed DFT power of its band;
* analysis segments of 30 frames (384 ms), one per frame position.

STOI (Taal 2011, Sec. II) scales each band of a degraded segment to the clean energy,
clips it to at most (1 + 10**(-beta/20)) times the clean envelope (beta = -15 dB),
and averages the correlation coefficients over bands and segments. ESTOI (Jensen
2016, Sec. III) normalises each segment matrix over time (rows) and then over
frequency (columns), and averages the inner products of the columns (spectral
correlation), without clipping.

The computation runs over the signal in chunks (:func:`stoi_estoi_stream`): a first
pass gets the clean frame energies of the whole signal (the 40 dB rule is global), a
second pass builds the TF envelopes of the kept frames chunk by chunk; the envelopes
are small (15 values per 12.8 ms), so the segment statistics are then computed over
the whole signal at once. Chunked and unchunked results are identical.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from . import checks
from . import standards as std
from .exceptions import InputError
from .results import jsonable

#: Guard against division by zero in normalisations (double-precision machine epsilon).
EPS: float = float(np.finfo(np.float64).eps)

#: Segments processed at once in the vectorised segment statistics (bounds memory: a
#: STOI block's temporaries are 15 bands x 256 segments x 30 frames x 8 bytes = 0.9 MB,
#: which stays in cache; the result does not depend on it).
SEGMENT_BLOCK: int = 256

#: The same for the ESTOI statistics, which loop over a segment's 30 frames as (15,
#: segments) views: 15 x 2048 x 8 bytes = 0.25 MB per array.
ESTOI_SEGMENT_BLOCK: int = 2048


#: Frames per chunk of the streamed passes (about 52 s of signal at 10 kHz).
DEFAULT_CHUNK_FRAMES: int = 4096

#: Kept frames sent at once through the spectra (bounds the working set: 512 frames x
#: 512 DFT points x 8 bytes = 2 MB, which stays in cache; the result does not depend on it).
SPECTRUM_BLOCK: int = 512

Reader = Callable[[int, int], np.ndarray]


# ---------------------------------------------------------------------------
# The analysis grid
# ---------------------------------------------------------------------------


@lru_cache(maxsize=1)
def analysis_window() -> np.ndarray:
    """The 256-point Hann window, without the zero end points.

    w[n] = 0.5 (1 - cos(2 pi (n + 1) / (N + 1))), n = 0..N-1. Source: Taal 2011,
    Sec. II (Hann-windowed 256-sample frames).
    """
    n = std.STOI_FRAME_LEN
    w = np.hanning(n + 2)[1:-1]
    w.flags.writeable = False
    return w


@lru_cache(maxsize=1)
def third_octave_matrix() -> tuple[np.ndarray, np.ndarray]:
    """Band matrix (15, 257) grouping DFT bins into one-third-octave bands, and centres.

    Centre k is 150 Hz * 2**(k/3); band edges are the geometric means of neighbouring
    centres (cf * 2**(-1/6), cf * 2**(1/6)); each edge is moved to the nearest DFT bin
    and a band holds the bins from its lower edge up to, not including, its upper edge.
    Source: Taal 2011, Sec. II (15 one-third-octave bands, lowest centre 150 Hz, 512-point
    DFT at 10 kHz).
    """
    nbins = std.STOI_NFFT // 2 + 1
    f = np.arange(nbins) * std.STOI_FS / std.STOI_NFFT
    k = np.arange(std.STOI_NUM_BANDS)
    cf = std.STOI_MIN_FREQ_HZ * 2.0 ** (k / 3.0)
    lo = cf * 2.0 ** (-1.0 / 6.0)
    hi = cf * 2.0 ** (1.0 / 6.0)
    lo_bin = np.argmin(np.abs(f[None, :] - lo[:, None]), axis=1)
    hi_bin = np.argmin(np.abs(f[None, :] - hi[:, None]), axis=1)
    a = np.zeros((std.STOI_NUM_BANDS, nbins))
    for j in range(std.STOI_NUM_BANDS):
        a[j, lo_bin[j] : hi_bin[j]] = 1.0
    a.flags.writeable = False
    cf.flags.writeable = False
    return a, cf


@lru_cache(maxsize=1)
def _band_bin_edges() -> np.ndarray:
    """The 16 DFT-bin edges of the contiguous bands of :func:`third_octave_matrix`.

    Band j holds bins ``edges[j] .. edges[j+1]-1``; summing the power over those bins
    (``np.add.reduceat``) equals the product with the 0/1 band matrix without a
    (15 x 257) matrix product per frame.
    """
    a, _ = third_octave_matrix()
    lo = a.argmax(axis=1)
    hi = lo + a.sum(axis=1).astype(int)
    if not (np.all(hi[:-1] == lo[1:]) and np.all(hi > lo) and a.sum() == (hi - lo).sum()):
        raise AssertionError("the one-third-octave bands are expected to be contiguous and non-empty")
    edges = np.append(lo, hi[-1])
    edges.flags.writeable = False
    return edges


def band_envelopes(dft_frames: np.ndarray) -> np.ndarray:
    """One-third-octave TF envelopes (15, K) of K windowed 256-sample frames.

    ``dft_frames`` is (K, 256), or (K, 512) already zero-padded to the DFT length (which
    spares the FFT a copy). Each value is the root of the summed 512-point DFT power of the
    band's bins (Taal 2011, eq. 1): ``sqrt(A @ |X|**2)`` with ``A`` from
    :func:`third_octave_matrix`.

    Raises
    ------
    InputError
        For frames that are not a (K, 256) or (K, 512) array of finite numbers.
    """
    dft_frames = checks.array(dft_frames, "DFT frames", ndim=2, min_size=0)
    if dft_frames.shape[1] not in (std.STOI_FRAME_LEN, std.STOI_NFFT):
        raise InputError(f"DFT frames have {dft_frames.shape[1]} values each",
                         f"pass (K, {std.STOI_FRAME_LEN}) or (K, {std.STOI_NFFT}) frames")
    return _band_envelopes(dft_frames)


def _band_envelopes(dft_frames: np.ndarray) -> np.ndarray:
    """:func:`band_envelopes` of frames already known good (the envelope builder's own)."""
    edges = _band_bin_edges()
    spec = np.fft.rfft(dft_frames, n=std.STOI_NFFT, axis=1)
    sq = spec[:, edges[0] : edges[-1]].view(np.float64)  # real and imaginary parts side by side
    sq *= sq
    # each band sums re**2 + im**2 over its bins: columns 2 * (edges[j] .. edges[j+1]) - 1
    return np.sqrt(np.add.reduceat(sq, 2 * (edges[:-1] - edges[0]), axis=1)).T


def frame_count(n_samples: int) -> int:
    """Number of analysis frames of a signal: starts 0, 128, ... below n - 256.

    Raises
    ------
    InputError
        If ``n_samples`` is not a whole number of samples.
    """
    n_samples = checks.samples(n_samples, "signal length")
    return len(range(0, max(0, n_samples - std.STOI_FRAME_LEN), std.STOI_HOP))


def _frames(x: np.ndarray, count: int) -> np.ndarray:
    """(count, 256) view of consecutive frames of ``x`` (hop 128)."""
    from numpy.lib.stride_tricks import sliding_window_view

    return sliding_window_view(x, std.STOI_FRAME_LEN)[:: std.STOI_HOP][:count]


def _chunk_samples(x_read: Reader, f0: int, f1: int) -> np.ndarray:
    """Samples covering frames f0..f1-1."""
    return np.asarray(x_read(f0 * std.STOI_HOP, (f1 - 1) * std.STOI_HOP + std.STOI_FRAME_LEN), dtype=np.float64)


def frame_energies_db(x_read: Reader, n_samples: int, chunk_frames: int = DEFAULT_CHUNK_FRAMES) -> np.ndarray:
    """Energy of each windowed frame of the clean signal, dB (20 log10 of the frame norm).

    Raises
    ------
    InputError
        For a reader that is not callable, or a length or chunk that is not a whole number.
    """
    if not callable(x_read):
        raise InputError("x_read is not a function read(start, stop)", "pass a reader of the 10 kHz signal")
    n_samples = checks.samples(n_samples, "signal length")
    chunk_frames = checks.number(chunk_frames, "chunk", lo=1, hi=checks.MAX_SAMPLES, integer=True)
    w = analysis_window()
    w2 = w * w
    total = frame_count(n_samples)
    out = np.empty(total)
    for f0 in range(0, total, chunk_frames):
        f1 = min(total, f0 + chunk_frames)
        # sum over a frame of (w x)**2 = (frames of x**2) . w**2: one pass, no frame copy
        chunk = _chunk_samples(x_read, f0, f1)
        fr = _frames(chunk * chunk, f1 - f0)
        out[f0:f1] = 20.0 * np.log10(np.sqrt(np.einsum("ij,j->i", fr, w2)) + EPS)
    return out


class _EnvelopeBuilder:
    """One-third-octave envelopes of the silence-removed signal, fed kept frames in order.

    The rebuilt signal is the overlap-add of the windowed kept frames; its half-frame
    block j is the first half of kept frame j plus the second half of kept frame j-1.
    Its DFT frame j joins blocks j and j+1, so K kept frames give K-1 DFT frames.
    """

    def __init__(self) -> None:
        self.tail = np.zeros(std.STOI_HOP)  # second half of the last windowed kept frame
        self.pending: np.ndarray | None = None  # last half-block, waiting for its successor
        self.parts: list[np.ndarray] = []

    def add(self, frames: np.ndarray) -> None:
        if frames.shape[0] == 0:
            return
        w = analysis_window()
        h = std.STOI_HOP
        a = frames * w
        # half-frame blocks of the overlap-add, after the one still pending (if any)
        first = 0 if self.pending is None else 1
        blocks = np.empty((a.shape[0] + first, h))
        if first:
            blocks[0] = self.pending
        np.add(a[:, :h], 0.0, out=blocks[first:])
        blocks[first] += self.tail
        blocks[first + 1:] += a[:-1, h:]
        self.tail = a[-1, h:].copy()
        self.pending = blocks[-1].copy()
        if blocks.shape[0] < 2:
            return
        # DFT frame j = blocks j and j+1, windowed, zero-padded to the DFT length
        dft_frames = np.empty((blocks.shape[0] - 1, std.STOI_NFFT))
        dft_frames[:, 2 * h:] = 0.0
        np.multiply(blocks[:-1], w[:h], out=dft_frames[:, :h])
        np.multiply(blocks[1:], w[h:], out=dft_frames[:, h : 2 * h])
        self.parts.append(_band_envelopes(dft_frames))  # (15, frames)

    def result(self) -> np.ndarray:
        if not self.parts:
            return np.zeros((std.STOI_NUM_BANDS, 0))
        return np.concatenate(self.parts, axis=1)


def _check_stream(clean_read, degraded_read, n_samples, chunk_frames, progress) -> tuple[int, int]:
    """The arguments of the streamed functions: two readers, a length, a chunk, a callback."""
    if not callable(clean_read):
        raise InputError("clean_read is not a function read(start, stop)", "pass a reader of the 10 kHz signal")
    if not callable(degraded_read):
        raise InputError("degraded_read is not a function read(start, stop)", "pass a reader of the 10 kHz signal")
    n_samples = checks.samples(n_samples, "signal length")
    chunk_frames = checks.number(chunk_frames, "chunk", lo=1, hi=checks.MAX_SAMPLES, integer=True)
    if progress is not None and not callable(progress):
        raise InputError("progress is not a function", "pass a function (done, total) or None")
    return n_samples, chunk_frames


def tf_envelopes(
    clean_read: Reader,
    degraded_read: Reader,
    n_samples: int,
    *,
    chunk_frames: int = DEFAULT_CHUNK_FRAMES,
    progress: Callable[[int, int], None] | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """TF envelopes (15, M) of clean and degraded after silent-frame removal.

    Two passes over the 10 kHz signals: clean frame energies first (the 40 dB range
    is relative to the loudest frame of the whole signal), then the spectra of the
    kept frames. Returns ``(X, Y, kept_frame_indices, total_frames)``.

    Raises
    ------
    InputError
        For readers or ``progress`` that are not callable, or a length or chunk that is not a whole number.
    """
    n_samples, chunk_frames = _check_stream(clean_read, degraded_read, n_samples, chunk_frames, progress)
    total = frame_count(n_samples)
    n_chunks = max(1, -(-total // chunk_frames))
    energy = frame_energies_db(clean_read, n_samples, chunk_frames)
    if progress is not None:
        progress(1, n_chunks + 1)
    keep = energy > (energy.max() - std.STOI_DYNAMIC_RANGE_DB) if total else np.zeros(0, bool)
    kept_idx = np.flatnonzero(keep)
    bx, by = _EnvelopeBuilder(), _EnvelopeBuilder()
    for i, f0 in enumerate(range(0, total, chunk_frames)):
        f1 = min(total, f0 + chunk_frames)
        sel = np.flatnonzero(keep[f0:f1])
        if sel.size:
            fx = _frames(_chunk_samples(clean_read, f0, f1), f1 - f0)
            fy = _frames(_chunk_samples(degraded_read, f0, f1), f1 - f0)

            def spectra(frames: np.ndarray, builder: _EnvelopeBuilder) -> None:
                for k0 in range(0, sel.size, SPECTRUM_BLOCK):
                    builder.add(frames[sel[k0 : k0 + SPECTRUM_BLOCK]])

            spectra(fx, bx)
            spectra(fy, by)
        if progress is not None:
            progress(i + 2, n_chunks + 1)
    return bx.result(), by.result(), kept_idx, total


# ---------------------------------------------------------------------------
# Segment statistics
# ---------------------------------------------------------------------------


#: The per-segment statistics :func:`segment_scores` computes (both by default).
SCORES: tuple[str, ...] = ("stoi_band_segment", "estoi_band_segment")


def _row_stats(windows: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Mean over the frames of each segment and 1 / (norm of the centred rows + EPS).

    ``windows[n]`` is the (J, S) array of frame n of every segment (a view of the
    envelopes); the results are (J, S).
    """
    mean = windows[0].copy()
    for w in windows[1:]:
        mean += w
    mean /= len(windows)
    ss = np.zeros_like(mean)
    for w in windows:
        d = w - mean
        d *= d
        ss += d
    np.sqrt(ss, out=ss)
    ss += EPS
    return mean, np.reciprocal(ss, out=ss)


def _stoi_block(xw: np.ndarray, yw: np.ndarray, cxw: np.ndarray) -> np.ndarray:
    """Correlation of each band in each segment after normalisation and clipping (J, S).

    Taal 2011 eqs. (3)-(5): alpha = ||x|| / ||y|| over the segment's frames;
    y' = min(alpha y, clip x); d = sum((x - mean x)(y' - mean y')) / (norms of both).
    ``xw``, ``yw`` are (J, S, 30) sliding-window views of the envelopes (segment s holds
    frames s .. s+29) and ``cxw`` the same view of ``clip x``: every sum over a segment's
    frames is one contiguous reduction along the last axis.
    """
    sxx = np.einsum("jsn,jsn->js", xw, xw)
    syy = np.einsum("jsn,jsn->js", yw, yw)
    syy += EPS
    alpha = np.sqrt(sxx / syy)
    yp = yw * alpha[..., None]
    np.minimum(yp, cxw, out=yp)
    yp -= yp.mean(axis=-1, keepdims=True)
    xc = xw - xw.mean(axis=-1, keepdims=True)
    num = np.einsum("jsn,jsn->js", xc, yp)
    nx = np.sqrt(np.einsum("jsn,jsn->js", xc, xc))
    nx += EPS
    ny = np.sqrt(np.einsum("jsn,jsn->js", yp, yp))
    ny += EPS
    num /= nx
    num /= ny
    return num


def _estoi_block(xw: list[np.ndarray], yw: list[np.ndarray]) -> np.ndarray:
    """Each band's share of the spectral correlation of each segment (J, S).

    Jensen 2016 Sec. III: the segment matrix is normalised to zero mean and unit norm
    along time per band (rows), then along frequency per frame (columns); the segment's
    score is the mean over frames of the inner products of the clean and degraded columns.
    """
    mx, ix = _row_stats(xw)
    my, iy = _row_stats(yw)
    share = np.zeros_like(mx)
    for x, y in zip(xw, yw):
        xr = x - mx
        xr *= ix
        xr -= xr.mean(axis=0)
        yr = y - my
        yr *= iy
        yr -= yr.mean(axis=0)
        norm = np.sqrt(np.einsum("js,js->s", xr, xr)) + EPS
        norm *= np.sqrt(np.einsum("js,js->s", yr, yr)) + EPS
        xr *= yr
        xr /= norm
        share += xr
    share /= len(xw)
    return share


def segment_scores(x_env: np.ndarray, y_env: np.ndarray, which: tuple[str, ...] = SCORES) -> dict[str, np.ndarray]:
    """STOI and ESTOI statistics of every 30-frame segment of the TF envelopes.

    Returns the arrays named in ``which`` (default both): ``stoi_band_segment``
    (15, S): correlation of band j in segment m after normalisation and clipping
    (Taal 2011, eqs. 3-5); ``estoi_band_segment`` (15, S): band j's share of the
    spectral correlation of segment m (row then column normalisation, Jensen 2016
    Sec. III; summed over bands it is the segment's ESTOI). S = M - 29 for M frames.
    All segments are processed at once (blocks of :data:`SEGMENT_BLOCK`): the sums over
    a segment's 30 frames run as 30 vector operations over all segments, on views of the
    envelopes, so the working set stays small (no 30-fold copy of the envelopes).

    Raises
    ------
    InputError
        For envelopes that are not arrays of finite numbers of the same shape, or unknown names in ``which``.
    """
    x_env = checks.array(x_env, "clean envelopes", ndim=2, min_size=0)
    y_env = checks.array(y_env, "degraded envelopes", ndim=2, min_size=0)
    if x_env.shape != y_env.shape:
        raise InputError(f"envelope shapes differ: {x_env.shape} and {y_env.shape}", "pass the envelopes of one pair")
    if isinstance(which, str) or not all(isinstance(w, str) for w in which):
        raise InputError(f"which {which!r:.40} is not a tuple of names", f"choose from {SCORES}")
    unknown = set(which) - set(SCORES)
    if unknown:
        raise InputError(f"unknown segment statistics {sorted(unknown)}", f"choose from {', '.join(SCORES)}")
    n = std.STOI_SEGMENT_FRAMES
    n_bands, m_frames = x_env.shape
    n_seg = m_frames - n + 1
    if n_seg < 1:
        raise InputError(
            f"after silent-frame removal {m_frames} frames remain; one analysis segment needs {n} "
            f"({n * std.STOI_HOP / std.STOI_FS * 1000:.0f} ms of speech)",
            "give a longer pair with more speech in it",
        )
    from numpy.lib.stride_tricks import sliding_window_view

    clip = 1.0 + 10.0 ** (-std.STOI_BETA_DB / 20.0)
    out = {k: np.empty((n_bands, n_seg)) for k in SCORES if k in which}
    if SCORES[0] in out:
        x_win = sliding_window_view(x_env, n, axis=1)  # (15, S, 30) views, no copy
        y_win = sliding_window_view(y_env, n, axis=1)
        cx_win = sliding_window_view(clip * x_env, n, axis=1)

    def part(s0: int, s1: int) -> None:
        if SCORES[0] in out:
            for b0 in range(s0, s1, SEGMENT_BLOCK):
                b1 = min(s1, b0 + SEGMENT_BLOCK)
                out[SCORES[0]][:, b0:b1] = _stoi_block(x_win[:, b0:b1], y_win[:, b0:b1], cx_win[:, b0:b1])
        if SCORES[1] in out:
            for b0 in range(s0, s1, ESTOI_SEGMENT_BLOCK):
                b1 = min(s1, b0 + ESTOI_SEGMENT_BLOCK)
                # frame k of every segment b0..b1-1: a (15, b1 - b0) view of the envelopes
                xw = [x_env[:, b0 + k : b1 + k] for k in range(n)]
                yw = [y_env[:, b0 + k : b1 + k] for k in range(n)]
                out[SCORES[1]][:, b0:b1] = _estoi_block(xw, yw)

    part(0, n_seg)
    return out


@dataclass(frozen=True)
class CorrelationResult:
    """STOI and ESTOI of a pair with their per-band and per-segment values.

    Attributes
    ----------
    stoi, estoi : the indices (STOI in [-1, 1], in practice 0..1; ESTOI likewise).
    band_centres_hz : centres of the 15 one-third-octave bands.
    stoi_band : mean correlation of each band over all segments (their mean is STOI).
    estoi_band : 15 x each band's mean share of the spectral correlation (their mean is
        ESTOI); low values show the bands whose spectro-temporal pattern is lost.
    segment_stoi, segment_estoi : the index of each 384 ms segment.
    segment_end_s : time in the (aligned) input where each segment ends, s.
    frames_total, frames_kept : analysis frames before and after silent-frame removal.
    stoi_band_segment : (15, segments) correlation of each band in each segment (the
        per-band envelope correlation over time; its mean is STOI).
    """

    stoi: float
    estoi: float
    band_centres_hz: np.ndarray
    stoi_band: np.ndarray
    estoi_band: np.ndarray
    segment_stoi: np.ndarray
    segment_estoi: np.ndarray
    segment_end_s: np.ndarray
    frames_total: int
    frames_kept: int
    stoi_band_segment: np.ndarray | None = field(default=None, repr=False, compare=False)

    def to_dict(self) -> dict:
        """The indices, their per-band values and the local index of every segment."""
        return jsonable({
            "stoi": round(self.stoi, 4),
            "estoi": round(self.estoi, 4),
            "bands_hz": np.round(self.band_centres_hz, 1),
            "stoi_band": np.round(self.stoi_band, 4),
            "estoi_band": np.round(self.estoi_band, 4),
            "segment_end_s": np.round(self.segment_end_s, 4),
            "segment_stoi": np.round(self.segment_stoi, 4),
            "segment_estoi": np.round(self.segment_estoi, 4),
            "frames": {"total": self.frames_total, "kept": self.frames_kept},
            "cautions": [],
            "notes": [],
        })


def correlation_from_envelopes(
    x_env: np.ndarray, y_env: np.ndarray, kept_idx: np.ndarray, frames_total: int
) -> CorrelationResult:
    """STOI, ESTOI and their diagnostics from the TF envelopes of a pair.

    Raises
    ------
    InputError
        For envelopes that are not (15, M) arrays of finite numbers of the same shape, frame
        indices that are not numbers, or a frame count that is not a whole number.
    """
    x_env = checks.array(x_env, "clean envelopes", ndim=2, min_size=0)
    y_env = checks.array(y_env, "degraded envelopes", ndim=2, min_size=0)
    if x_env.shape != y_env.shape:
        raise InputError(f"envelope shapes differ: {x_env.shape} and {y_env.shape}", "pass the envelopes of one pair")
    kept_idx = checks.array(kept_idx, "kept frames", min_size=0)
    frames_total = checks.samples(frames_total, "number of frames")
    if x_env.shape[0] != std.STOI_NUM_BANDS:
        raise InputError(f"envelopes have {x_env.shape[0]} bands", f"pass {std.STOI_NUM_BANDS} one-third-octave bands")
    sc = segment_scores(x_env, y_env)
    rho, share = sc["stoi_band_segment"], sc["estoi_band_segment"]
    n_bands = rho.shape[0]
    n_seg = rho.shape[1]
    # segment m covers DFT frames m..m+29, i.e. kept frames m..m+30; it ends with kept
    # frame m+30 (frame start + frame length, in seconds of the input)
    last = np.minimum(np.arange(n_seg) + std.STOI_SEGMENT_FRAMES, kept_idx.size - 1)
    end_s = (kept_idx[last] * std.STOI_HOP + std.STOI_FRAME_LEN) / std.STOI_FS
    _, cf = third_octave_matrix()
    return CorrelationResult(
        stoi=float(rho.mean()),
        estoi=float(share.sum(axis=0).mean()),
        band_centres_hz=cf,
        stoi_band=rho.mean(axis=1),
        estoi_band=n_bands * share.mean(axis=1),
        segment_stoi=rho.mean(axis=0),
        segment_estoi=share.sum(axis=0),
        segment_end_s=end_s,
        frames_total=int(frames_total),
        frames_kept=int(kept_idx.size),
        stoi_band_segment=rho,
    )


def stoi_estoi_stream(
    clean_read: Reader,
    degraded_read: Reader,
    n_samples: int,
    *,
    chunk_frames: int = DEFAULT_CHUNK_FRAMES,
    progress: Callable[[int, int], None] | None = None,
) -> CorrelationResult:
    """STOI and ESTOI of a pair of 10 kHz signals read in chunks.

    Parameters
    ----------
    clean_read, degraded_read : callables ``read(start, stop)`` returning the samples
        ``start..stop-1`` of the 10 kHz clean and degraded signals (same length,
        time-aligned).
    n_samples : length of both signals.
    chunk_frames : frames per chunk; memory grows with it, the result does not change.
    progress : optional ``progress(done, total)`` callback.

    Raises
    ------
    InputError
        For readers or ``progress`` that are not callable, or a length or chunk that is not a whole number.
    """
    n_samples, chunk_frames = _check_stream(clean_read, degraded_read, n_samples, chunk_frames, progress)
    x_env, y_env, kept, total = tf_envelopes(
        clean_read, degraded_read, n_samples, chunk_frames=chunk_frames, progress=progress
    )
    return correlation_from_envelopes(x_env, y_env, kept, total)


# ---------------------------------------------------------------------------
# Public functions on arrays
# ---------------------------------------------------------------------------


def _prepare(clean: np.ndarray, degraded: np.ndarray, fs: int) -> tuple[np.ndarray, np.ndarray]:
    from .audio import polyphase, resample_ratio, validate_signal

    def checked(a: np.ndarray, name: str) -> tuple[int, np.ndarray]:
        v = validate_signal(a, fs, name=name, allow_clipping=True)
        if int(fs) < std.STOI_FS:
            raise InputError(
                f"sample rate {int(fs)} Hz is below the {std.STOI_FS} Hz that STOI analyses",
                f"give signals sampled at {std.STOI_FS} Hz or more (upsampling cannot restore the missing band)",
            )
        if int(fs) == std.STOI_FS:
            return v.size, v
        # validated above: the polyphase filter itself (audio.resample would check again)
        return v.size, polyphase(v, *resample_ratio(int(fs), std.STOI_FS))

    # one after the other: on a machine of two virtual cores, threads for the two signals
    # (and their spectra, and halves of the segments) made the calls about 1.4x slower
    (nx, x), (ny, y) = checked(clean, "clean signal"), checked(degraded, "degraded signal")
    if nx != ny:
        raise InputError(
            f"clean ({nx} samples) and degraded ({ny} samples) differ in length",
            "pass time-aligned signals of equal length, or use envpredict.pair_indices to align them",
        )
    return x, y


def _array_reader(a: np.ndarray) -> Reader:
    from .audio import ArraySource

    return ArraySource(a, std.STOI_FS).read


def _array_envelopes(
    clean: np.ndarray, degraded: np.ndarray, fs: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """Checked, resampled arrays through the streamed envelope kernel (:func:`tf_envelopes`)."""
    x, y = _prepare(clean, degraded, fs)
    return tf_envelopes(_array_reader(x), _array_reader(y), x.size)


def correlation_indices(clean: np.ndarray, degraded: np.ndarray, fs: int) -> CorrelationResult:
    """STOI and ESTOI with per-band and per-segment diagnostics (arrays of equal length).

    See :func:`stoi` for the method and the valid range.

    Raises
    ------
    InputError
        For signals refused by the input rule (not numeric, not one channel, empty, NaN/inf,
        silent, clipped, a rate outside the supported range), of different lengths, or too short or
        silent for one
        30-frame segment after silent-frame removal.
    """
    return correlation_from_envelopes(*_array_envelopes(clean, degraded, fs))


def _estoi_segments(x_env: np.ndarray, y_env: np.ndarray) -> np.ndarray:
    """The ESTOI of every segment (the sum over bands of :func:`segment_scores`'
    ``estoi_band_segment``), without the per-band shares: per frame the inner product of
    the column-centred, row-normalised spectra is ``(sum a b - J mean(a) mean(b)) /
    (|a - mean a| |b - mean b|)``, which needs no centred copy of the columns."""
    n = std.STOI_SEGMENT_FRAMES
    nb, m = x_env.shape
    n_seg = m - n + 1
    out = np.empty(n_seg)
    for b0 in range(0, n_seg, ESTOI_SEGMENT_BLOCK):
        b1 = min(n_seg, b0 + ESTOI_SEGMENT_BLOCK)
        xw = [x_env[:, b0 + k : b1 + k] for k in range(n)]
        yw = [y_env[:, b0 + k : b1 + k] for k in range(n)]
        mx, ix = _row_stats(xw)
        my, iy = _row_stats(yw)
        acc = np.zeros(b1 - b0)
        for x, y in zip(xw, yw):
            a = x - mx
            a *= ix
            b = y - my
            b *= iy
            sa, sb = a.sum(axis=0), b.sum(axis=0)
            num = np.einsum("js,js->s", a, b) - sa * sb / nb
            va = np.einsum("js,js->s", a, a) - sa * sa / nb
            vb = np.einsum("js,js->s", b, b) - sb * sb / nb
            den = (np.sqrt(np.maximum(va, 0.0)) + EPS) * (np.sqrt(np.maximum(vb, 0.0)) + EPS)
            acc += num / den
        out[b0:b1] = acc / n
    return out


def _one_index(clean: np.ndarray, degraded: np.ndarray, fs: int, score: str) -> float:
    """The mean of one segment statistic: what :func:`stoi` or :func:`estoi` alone needs."""
    x_env, y_env, _, _ = _array_envelopes(clean, degraded, fs)
    if score == "estoi_band_segment" and x_env.shape[1] >= std.STOI_SEGMENT_FRAMES:
        return float(_estoi_segments(x_env, y_env).mean())
    values = segment_scores(x_env, y_env, which=(score,))[score]
    if score == "estoi_band_segment":  # a segment's ESTOI is the sum of its bands' shares
        return float(values.sum(axis=0).mean())
    return float(values.mean())


def stoi(clean: np.ndarray, degraded: np.ndarray, fs: int) -> float:
    """Short-Time Objective Intelligibility (STOI) of a degraded signal.

    Source: C. H. Taal, R. C. Hendriks, R. Heusdens, J. Jensen, "An algorithm for
    intelligibility prediction of time-frequency weighted noisy speech", IEEE Trans.
    ASLP 19(7), 2125-2136, 2011, Sec. II.

    The signals are resampled to 10 kHz (polyphase FIR), silent frames (40 dB below
    the loudest clean frame) are removed from both, and the correlation of clipped,
    energy-normalised one-third-octave envelopes over 384 ms segments is averaged over
    15 bands (150 Hz ... 4.3 kHz) and all segments.

    Parameters
    ----------
    clean : 1-D clean reference signal.
    degraded : 1-D degraded signal, same length, time-aligned with ``clean``
        (:func:`envpredict.pair_indices` aligns and trims a pair first).
    fs : sample rate of both, Hz, at least 10000.

    Returns
    -------
    float, typically 0..1 (1 for ``degraded == clean``).

    Valid range: additive noise, reverberation, time-frequency weighting (noise
    reduction, separation) and other processing that keeps the signals aligned; at
    least 384 ms of speech after silent-frame removal (in practice whole utterances of
    several seconds: the index was validated on sentences). It is not calibrated for
    strongly nonlinear or time-warping processing.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> t = np.arange(30000) / 10000
    >>> x = rng.standard_normal(t.size) * (1 + np.sin(2 * np.pi * 4 * t))
    >>> round(stoi(x, x, 10000), 6)
    1.0

    Raises
    ------
    InputError
        As :func:`correlation_indices`.
    """
    return _one_index(clean, degraded, fs, "stoi_band_segment")


def estoi(clean: np.ndarray, degraded: np.ndarray, fs: int) -> float:
    """Extended STOI (ESTOI) of a degraded signal.

    Source: J. Jensen, C. H. Taal, "An algorithm for predicting the intelligibility of
    speech masked by modulated noise maskers", IEEE/ACM Trans. ASLP 24(11),
    2009-2022, 2016, Sec. III.

    Same TF representation as :func:`stoi` (10 kHz, silent-frame removal, 15
    one-third-octave bands, 30-frame segments); each segment matrix is normalised to
    zero mean and unit norm along time per band, then along frequency per frame, and
    the mean inner product of the clean and degraded spectra (columns) gives the
    segment's score; ESTOI is the mean over segments. No clipping.

    Parameters and valid range as :func:`stoi`; ESTOI also covers modulated
    (fluctuating) maskers, for which it was designed.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> t = np.arange(30000) / 10000
    >>> x = rng.standard_normal(t.size) * (1 + np.sin(2 * np.pi * 4 * t))
    >>> round(estoi(x, x, 10000), 6)
    1.0
    >>> bool(estoi(x, x + 3 * rng.standard_normal(t.size), 10000) < 0.5)
    True

    Raises
    ------
    InputError
        As :func:`correlation_indices`.
    """
    return _one_index(clean, degraded, fs, "estoi_band_segment")
