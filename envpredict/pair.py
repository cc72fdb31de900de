"""Clean/degraded pair indices: STOI, ESTOI and the speech-based STI, with alignment.

The job of this module is the pair: check both signals, bring the degraded one to
the clean one's sample rate, find and remove the delay between them, trim them to
their common part, and compute

* STOI and ESTOI (:mod:`envpredict.correlation`) on the 10 kHz grid of Taal 2011;
* the speech-based STI by the normalised-covariance method (NCM) on octave-band
  intensity envelopes (:func:`envpredict.modulation.mtf_from_pair_ncm`), turned into
  an index by :func:`envpredict.sti.sti_from_mtf` like every STI of this tool;

with per-band diagnostics and a timeline of the local STOI/ESTOI.

Long inputs are never held whole at the working precision: every signal is a
*source* read block by block (an array, an audio file, a resampled or shifted view of
another source), and each index is computed in chunks whose results equal the
unchunked ones (resampling is exact per block with margins; STOI keeps silent-frame
removal global with two passes; the speech-based STI uses causal filters whose state
is carried from chunk to chunk).
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np

from . import standards as std
from .audio import (
    CLIP_MIN_FULL_SCALE_SAMPLES,
    AudioFile,
    StreamCheck,
    as_mono_array,
    audio_info,
)
from .correlation import CorrelationResult, frame_count, stoi_estoi_stream
from .exceptions import ComputationError, InputError
from .modulation import mtf_from_pair_ncm, mtf_from_pair_regression
from .results import jsonable

# ---------------------------------------------------------------------------
# Judgement constants of the pair job (not from a standard; reasons beside them)
# ---------------------------------------------------------------------------

#: Smallest peak normalised cross-correlation between clean and degraded waveforms
#: accepted as "the same utterance". White noise at -10 dB SNR still gives about
#: sqrt(0.1/1.1) = 0.30 and unrelated signals about 1/sqrt(samples) (< 0.01 for a few
#: seconds), so 0.1 (about -20 dB SNR) separates them with margin (judgement).
MIN_MATCH_CORRELATION: float = 0.1

#: Length of the clean excerpt used to find the delay, s: enough for a stable peak,
#: small enough to bound memory on long inputs (judgement).
ALIGN_EXCERPT_S: float = 30.0

#: After alignment each signal may lose at most this much (s) or this share of the
#: common part, whichever is larger, when trimmed to the common length; more means
#: the two files do not hold the same stretch of audio (judgement).
LENGTH_SLACK_S: float = 1.0
LENGTH_SLACK_SHARE: float = 0.10

#: Samples per block when scanning a source for NaN, silence and full scale.
SCAN_BLOCK: int = 1 << 20

#: Seconds of (aligned, 10 kHz) signal per chunk of the STOI passes and of the
#: speech-based STI pass. Memory grows with it, results do not.
DEFAULT_CHUNK_S: float = std.PAIR_CHUNK_S

#: Envelope low-pass of the speech-based STI, Hz: the top modulation frequency of the
#: STI, 12.5 Hz (IEC 60268-16:2011, Table 1), so the NCM compares the envelope content
#: in the STI modulation range (choice of this tool), 4th-order Butterworth, and the
#: rate of the envelopes after decimation (about 100 Hz, > 2 x 12.5 Hz).
SSTI_ENVELOPE_LOWPASS_HZ: float = max(std.MODULATION_FREQUENCIES_HZ)
SSTI_ENVELOPE_ORDER: int = 4
SSTI_ENVELOPE_RATE_HZ: float = 100.0

#: Shortest common part for the speech-based STI, s. The standard error of a
#: correlation estimated from N independent envelope samples is about (1 - r^2)/sqrt(N);
#: a 12.5 Hz envelope gives about 25 independent samples per second, so 3 s keep it
#: near 0.1 (1 - r^2) (judgement). Shorter pairs get ssti = null with a note.
SSTI_MIN_SECONDS: float = 3.0

#: A band whose upper edge lies above this share of the Nyquist frequency cannot be
#: designed as a band-pass (the Butterworth design fails at Nyquist); it becomes a
#: high-pass at its lower edge (judgement).
NYQUIST_SHARE: float = 0.98

#: Below this share of frames with speech (within 40 dB of the loudest) the result gets
#: a note that it rests on little speech (judgement).
LOW_SPEECH_SHARE: float = 0.2

#: Valid range of the speech-based STI, shown with every result.
SSTI_VALID_RANGE: str = (
    "speech-based STI (NCM): for additive noise, reverberation and linear filtering of whole "
    "utterances of 3 s or more; it measures the loss of envelope fluctuation, so a steady masker "
    "whose envelope hardly fluctuates (wide bands, stationary noise) lowers it much less than the "
    "classical STI, and nonlinear processing can raise it without raising intelligibility"
)

#: Timeline of local STOI/ESTOI: bin width, s, and the largest number of bins (the
#: bin grows for long inputs).
TIMELINE_STEP_S: float = 1.0
TIMELINE_MAX_BINS: int = 600
WORST_MOMENTS: int = 5


# ---------------------------------------------------------------------------
# Sources: signals read block by block
# ---------------------------------------------------------------------------


class _Source:
    """A 1-D signal of ``n`` samples at ``fs``; ``read`` pads with zeros outside 0..n."""

    n: int
    fs: int
    name: str

    def read(self, start: int, stop: int) -> np.ndarray:  # pragma: no cover - interface
        raise NotImplementedError

    def _pad(self, start: int, stop: int, inner: Callable[[int, int], np.ndarray]) -> np.ndarray:
        a, b = max(0, start), min(self.n, stop)
        if a >= b:
            return np.zeros(max(0, stop - start))
        core = inner(a, b)
        if a == start and b == stop:
            return core
        return np.concatenate([np.zeros(a - start), core, np.zeros(stop - b)])


class _ArraySource(_Source):
    def __init__(self, a: np.ndarray, fs: int, name: str) -> None:
        self.a, self.n, self.fs, self.name = a, int(a.size), int(fs), name

    def read(self, start: int, stop: int) -> np.ndarray:
        return self._pad(start, stop, lambda a, b: np.asarray(self.a[a:b], dtype=np.float64))


class _FileSource(_Source):
    def __init__(self, path: str | os.PathLike, channel: int | None, name: str) -> None:
        self.file = AudioFile(path, channel, name=name)
        self.n, self.fs, self.name = self.file.frames, self.file.fs, f"{name} '{path}'"

    def read(self, start: int, stop: int) -> np.ndarray:
        return self._pad(start, stop, self.file.read)


class _Resampled(_Source):
    """``resample_poly`` of a source, computed per block exactly as on the whole signal.

    A block of output samples is computed from an input stretch that starts on a
    multiple of the decimation factor (so the output grids coincide) and extends by the
    filter half-length on both sides; the outputs of the margins are dropped.
    """

    def __init__(self, src: _Source, fs_out: int) -> None:
        r = Fraction(int(fs_out), int(src.fs)).limit_denominator(2000)
        self.src, self.up, self.down = src, r.numerator, r.denominator
        self.fs, self.name = int(fs_out), src.name
        self.n = -(-src.n * self.up // self.down)
        half_len = 10 * max(self.up, self.down)  # scipy's default filter half-length
        self.margin = half_len // self.up + 4 + self.down

    def read(self, start: int, stop: int) -> np.ndarray:
        from scipy.signal import resample_poly

        def inner(a: int, b: int) -> np.ndarray:
            i0 = max(0, ((a * self.down) // self.up - self.margin) // self.down * self.down)
            i1 = min(self.src.n, -(-(b * self.down) // self.up) + self.margin)
            seg = resample_poly(self.src.read(i0, i1), self.up, self.down)
            off = i0 * self.up // self.down
            return seg[a - off : b - off]

        return self._pad(start, stop, inner)


class _Window(_Source):
    """Samples ``offset .. offset+n-1`` of a source as a new signal (zeros outside)."""

    def __init__(self, src: _Source, offset: int, n: int) -> None:
        self.src, self.offset, self.n, self.fs, self.name = src, int(offset), int(n), src.fs, src.name

    def read(self, start: int, stop: int) -> np.ndarray:
        return self._pad(start, stop, lambda a, b: self.src.read(a + self.offset, b + self.offset))


def _as_array_source(x: np.ndarray, fs: int, name: str) -> _ArraySource:
    a, fs = as_mono_array(x, fs, name, hint="; mono and stereo signals cannot be compared")
    return _ArraySource(a, fs, name)


def _scan(src: _Source) -> dict:
    """Check a source block by block: finite, not silent, not constant (clipping is a
    legitimate degradation here, so it is only counted). Returns stats."""
    check = StreamCheck(src.name, allow_clipping=True)
    energy = []
    for a in range(0, src.n, SCAN_BLOCK):
        x = src.read(a, min(src.n, a + SCAN_BLOCK))
        check.update(x)
        energy.append(float(np.dot(x, x)))
    check.finish()
    rms = math.sqrt(check.sumsq / check.n)
    full_scale = check.full_scale
    return {"rms": rms, "full_scale_samples": full_scale, "loudest_block": int(np.argmax(energy)) * SCAN_BLOCK}


# ---------------------------------------------------------------------------
# Alignment
# ---------------------------------------------------------------------------


def _find_delay(clean: _Source, degraded: _Source, max_delay_s: float, near: int = 0) -> tuple[int, float]:
    """Lag (samples; positive: degraded late) maximising |cross-correlation| and its
    normalised value, from a clean excerpt of at most ALIGN_EXCERPT_S starting as
    close to sample ``near`` (the loudest stretch of a long input) as the length allows."""
    from scipy.signal import fftconvolve

    fs = clean.fs
    d = round(max_delay_s * fs)
    w = min(clean.n, int(ALIGN_EXCERPT_S * fs))
    s0 = max(0, min(int(near), clean.n - w))
    ref = clean.read(s0, s0 + w)
    sig = degraded.read(s0 - d, s0 + w + d)
    cc = fftconvolve(sig, ref[::-1], mode="valid")  # index i -> lag i - d
    i = int(np.argmax(np.abs(cc)))
    lag = i - d
    matched = degraded.read(s0 + lag, s0 + lag + w)
    den = math.sqrt(float(np.dot(ref, ref)) * float(np.dot(matched, matched)))
    corr = float(cc[i] / den) if den > 0 else 0.0
    return lag, corr


def _zero_lag_correlation(clean: _Source, degraded: _Source) -> float:
    w = min(clean.n, degraded.n, int(ALIGN_EXCERPT_S * clean.fs))
    a, b = clean.read(0, w), degraded.read(0, w)
    den = math.sqrt(float(np.dot(a, a)) * float(np.dot(b, b)))
    return float(np.dot(a, b) / den) if den > 0 else 0.0


# ---------------------------------------------------------------------------
# Speech-based STI, streamed
# ---------------------------------------------------------------------------


def ssti_band_filters(fs: int) -> tuple[list[np.ndarray | None], np.ndarray]:
    """Octave band-pass SOS (IEC 61260-1 base-2 edges) for the speech-based STI at ``fs``.

    A band whose upper edge lies above NYQUIST_SHARE x Nyquist is realised as a high-pass at
    its lower edge (it holds only the part of the band below Nyquist: ``partial``); a
    band whose lower edge is above that has no content (``None``).
    """
    from scipy.signal import butter

    out: list[np.ndarray | None] = []
    partial = np.zeros(len(std.OCTAVE_BANDS_HZ), dtype=bool)
    top = NYQUIST_SHARE * fs / 2.0
    for k, fc in enumerate(std.OCTAVE_BANDS_HZ):
        lo, hi = fc / std.OCTAVE_EDGE_FACTOR, fc * std.OCTAVE_EDGE_FACTOR
        if lo >= top:
            out.append(None)
            partial[k] = True
        elif hi >= top:
            out.append(butter(std.OCTAVE_FILTER_ORDER, lo, btype="highpass", fs=fs, output="sos"))
            partial[k] = True
        else:
            out.append(butter(std.OCTAVE_FILTER_ORDER, [lo, hi], btype="bandpass", fs=fs, output="sos"))
    return out, partial


def _ssti_envelopes(
    clean: _Source, degraded: _Source, chunk_s: float, progress: Callable[[], None] | None = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    """Octave-band intensity envelopes (7, m) of both signals, causal filters streamed.

    Band-pass, square, low-pass at SSTI_ENVELOPE_LOWPASS_HZ, keep every q-th sample.
    The filters are causal with their state carried across chunks, so the result does
    not depend on the chunk length (both signals are delayed alike, which leaves the
    correlation unchanged). Bands without content are NaN.
    """
    from scipy.signal import butter, sosfilt, sosfilt_zi

    fs = clean.fs
    sos_bands, _partial = ssti_band_filters(fs)
    q = max(1, int(fs // SSTI_ENVELOPE_RATE_HZ))
    lp = butter(SSTI_ENVELOPE_ORDER, SSTI_ENVELOPE_LOWPASS_HZ, btype="lowpass", fs=fs, output="sos")
    nb = len(sos_bands)
    m = -(-clean.n // q)
    env = np.full((2, nb, m), np.nan)
    zi_b = [[None if s is None else np.zeros_like(sosfilt_zi(s)) for s in sos_bands] for _ in range(2)]
    zi_l = [[np.zeros_like(sosfilt_zi(lp)) for _ in range(nb)] for _ in range(2)]
    step = max(q, int(chunk_s * fs) // q * q)
    for a in range(0, clean.n, step):
        b = min(clean.n, a + step)
        for s, src in enumerate((clean, degraded)):
            x = src.read(a, b)
            for k, sos in enumerate(sos_bands):
                if sos is None:
                    continue
                band, zi_b[s][k] = sosfilt(sos, x, zi=zi_b[s][k])
                inten, zi_l[s][k] = sosfilt(lp, band * band, zi=zi_l[s][k])
                env[s, k, a // q : a // q + -(-(b - a) // q)] = inten[::q]
        if progress is not None:
            progress()
    return env[0], env[1], _partial, fs / q


# ---------------------------------------------------------------------------
# The result
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class SstiBands:
    """Per-octave-band values of the speech-based STI (NCM)."""

    bands_hz: tuple[float, ...]
    correlation: np.ndarray  # normalised covariance r of the intensity envelopes
    mtf: np.ndarray  # equivalent modulation transfer r^2 (max(r, 0)^2)
    apparent_snr_db: np.ndarray  # 10 log10(r^2 / (1 - r^2)), limited to +-15 dB
    ti: np.ndarray  # transmission index (SNR + 15) / 30
    partial: np.ndarray  # band only partly below the Nyquist frequency (or absent)
    # envelope regression (Ludvigsen et al. 1990): modulation transfer, apparent SNR, TI
    regression_mtf: np.ndarray | None = None
    regression_snr_db: np.ndarray | None = None
    regression_ti: np.ndarray | None = None

    def to_dict(self) -> dict:
        return jsonable({
            "centre_hz": self.bands_hz,
            "correlation": np.round(self.correlation, 4),
            "mtf": np.round(self.mtf, 4),
            "apparent_snr_db": np.round(self.apparent_snr_db, 2),
            "ti": np.round(self.ti, 4),
            "partial": self.partial,
            "regression_mtf": None if self.regression_mtf is None else np.round(self.regression_mtf, 4),
            "regression_snr_db": None if self.regression_snr_db is None else np.round(self.regression_snr_db, 2),
            "regression_ti": None if self.regression_ti is None else np.round(self.regression_ti, 4),
        })


@dataclass(frozen=True)
class PairResult:
    """All pair indices of a clean/degraded pair with alignment and diagnostics.

    Attributes
    ----------
    stoi, estoi : Taal 2011 / Jensen 2016 indices.
    ssti : speech-based STI (NCM, IEC 60268-16 male weights, no auditory corrections),
        or ``None`` when it cannot be computed (see ``notes``).
    ssti_regression : speech-based STI by envelope regression (same bands, weights and
        limits), which follows the classical STI for steady noise; ``None`` like ``ssti``.
    delay_ms : delay of the degraded signal removed before the analysis (positive:
        degraded late); 0 when alignment is off.
    match_correlation : normalised waveform cross-correlation at that delay.
    aligned : whether the delay search was on.
    fs : analysis sample rate (the clean signal's), Hz; ``fs_clean``, ``fs_degraded``
        the input rates.
    duration_s : length of the common (aligned, trimmed) part, s.
    trimmed_s : seconds dropped from (clean, degraded) to reach the common part.
    correlation : STOI/ESTOI details (per band, per segment).
    ssti_bands : per-octave-band NCM values, or ``None``.
    notes : what the user should know about the numbers.
    """

    stoi: float
    estoi: float
    ssti: float | None
    delay_ms: float
    delay_samples: int
    match_correlation: float
    aligned: bool
    fs: int
    fs_clean: int
    fs_degraded: int
    duration_s: float
    trimmed_s: tuple[float, float]
    correlation: CorrelationResult
    ssti_bands: SstiBands | None
    notes: tuple[str, ...] = field(default=())
    ssti_regression: float | None = None
    chunks: int = 1

    def timeline(self) -> dict:
        """Local STOI and ESTOI in fixed time bins of the common part (NaN: no speech)."""
        c = self.correlation
        step = max(TIMELINE_STEP_S, math.ceil(self.duration_s / TIMELINE_MAX_BINS))
        n_bins = max(1, math.ceil(self.duration_s / step))
        idx = np.minimum((c.segment_end_s // step).astype(int), n_bins - 1)
        cnt = np.bincount(idx, minlength=n_bins)
        with np.errstate(invalid="ignore", divide="ignore"):
            s = np.bincount(idx, c.segment_stoi, minlength=n_bins) / cnt
            e = np.bincount(idx, c.segment_estoi, minlength=n_bins) / cnt
        s[cnt == 0] = np.nan
        e[cnt == 0] = np.nan
        return {"step_s": float(step), "start_s": np.arange(n_bins) * step, "stoi": s, "estoi": e}

    def worst_moments(self, count: int = WORST_MOMENTS) -> list[dict]:
        """The time bins with the lowest local ESTOI (where the envelope is lost most)."""
        tl = self.timeline()
        e = tl["estoi"]
        order = [i for i in np.argsort(np.where(np.isfinite(e), e, np.inf)) if np.isfinite(e[i])][:count]
        return [
            {"start_s": float(tl["start_s"][i]), "end_s": float(tl["start_s"][i] + tl["step_s"]),
             "estoi": round(float(e[i]), 4), "stoi": round(float(tl["stoi"][i]), 4)}
            for i in order
        ]

    def to_dict(self) -> dict:
        c = self.correlation
        tl = self.timeline()
        return jsonable({
            "stoi": round(self.stoi, 4),
            "estoi": round(self.estoi, 4),
            "ssti": None if self.ssti is None else round(self.ssti, 4),
            "ssti_regression": None if self.ssti_regression is None else round(self.ssti_regression, 4),
            "delay_ms": round(self.delay_ms, 3),
            "fs": self.fs,
            "bands": {
                "third_octave": {
                    "centre_hz": np.round(c.band_centres_hz, 1),
                    "stoi": np.round(c.stoi_band, 4),
                    "estoi": np.round(c.estoi_band, 4),
                },
                "octave": None if self.ssti_bands is None else self.ssti_bands.to_dict(),
            },
            "alignment": {
                "enabled": self.aligned,
                "delay_ms": round(self.delay_ms, 3),
                "delay_samples": self.delay_samples,
                "match_correlation": round(self.match_correlation, 4),
                "trimmed_s": [round(v, 4) for v in self.trimmed_s],
            },
            "fs_clean": self.fs_clean,
            "fs_degraded": self.fs_degraded,
            "duration_s": round(self.duration_s, 4),
            "frames": {"total": c.frames_total, "kept": c.frames_kept,
                       "segments": int(c.segment_stoi.size)},
            "timeline": {"step_s": tl["step_s"], "start_s": tl["start_s"],
                         "stoi": np.round(tl["stoi"], 4), "estoi": np.round(tl["estoi"], 4)},
            "worst_moments": self.worst_moments(),
            "methods": {
                "stoi": "Taal et al. 2011",
                "estoi": "Jensen & Taal 2016",
                "ssti": "normalised-covariance method (Goldsworthy & Greenberg 2004) on octave-band "
                        "intensity envelopes, IEC 60268-16:2011 male band weights, no auditory corrections",
                "ssti_valid_range": SSTI_VALID_RANGE,
                "ssti_regression": "envelope regression (Ludvigsen et al. 1990; Goldsworthy & Greenberg 2004) "
                                   "on the same envelopes: m = slope x mean(clean)/mean(degraded); follows "
                                   "m = 1/(1+N/S) for steady noise",
            },
            "notes": list(self.notes),
        })


# ---------------------------------------------------------------------------
# The job
# ---------------------------------------------------------------------------


def _check_options(max_delay_s: float, chunk_s: float) -> tuple[float, float]:
    try:
        md, cs = float(max_delay_s), float(chunk_s)
    except (TypeError, ValueError):
        raise InputError("maximum delay and chunk length must be numbers", "give them in seconds") from None
    if not math.isfinite(md) or not 0.0 <= md <= 30.0:
        raise InputError(f"maximum delay {max_delay_s} s is out of range", "give 0 to 30 s (default 1)")
    if not math.isfinite(cs) or cs < 1.0:
        raise InputError(f"chunk length {chunk_s} s is too short", "give at least 1 s (default 60)")
    return md, cs


def _pair(
    clean: _Source,
    degraded: _Source,
    *,
    align: bool,
    max_delay_s: float,
    chunk_s: float,
    progress: Callable[[int, int], None] | None,
) -> PairResult:
    max_delay_s, chunk_s = _check_options(max_delay_s, chunk_s)
    notes: list[str] = []
    fs = clean.fs
    if fs < std.STOI_FS:
        raise InputError(
            f"{clean.name} is sampled at {fs} Hz; STOI and ESTOI analyse up to 5 kHz at {std.STOI_FS} Hz",
            f"give a clean reference sampled at {std.STOI_FS} Hz or more (upsampling cannot restore the band)",
        )
    stats_c = _scan(clean)
    _scan(degraded)
    if stats_c["full_scale_samples"] >= CLIP_MIN_FULL_SCALE_SAMPLES:
        notes.append(f"the clean reference reaches full scale in {stats_c['full_scale_samples']} samples "
                     "(possibly clipped); the indices treat it as the reference as it is")
    deg = degraded if degraded.fs == fs else _Resampled(degraded, fs)
    if degraded.fs != fs:
        notes.append(f"degraded signal resampled from {degraded.fs} Hz to {fs} Hz")

    if align:
        lag, corr = _find_delay(clean, deg, max_delay_s, near=stats_c["loudest_block"])
        if abs(corr) < MIN_MATCH_CORRELATION:
            raise InputError(
                f"clean and degraded do not match: peak waveform correlation {abs(corr):.3f} within "
                f"±{max_delay_s:g} s (at least {MIN_MATCH_CORRELATION} is needed)",
                "check that both hold the same utterance; for a longer delay raise --max-delay; "
                "--no-align skips the check",
            )
        if corr < 0:
            notes.append("the best match between the waveforms has inverted polarity (an inverting chain, "
                         "or a strong reflection in a reverberant recording); the indices do not depend "
                         "on polarity")
    else:
        lag, corr = 0, _zero_lag_correlation(clean, deg)

    # common part: clean[s_c + n] with deg[s_c + lag + n]
    s_c = max(0, -lag)
    end = min(clean.n, deg.n - lag)
    n_common = end - s_c
    drop_c, drop_d = clean.n - max(0, n_common), deg.n - max(0, n_common)
    slack = max(LENGTH_SLACK_S * fs + abs(lag), LENGTH_SLACK_SHARE * max(0, n_common))
    if n_common <= 0 or max(drop_c, drop_d) > slack:
        raise InputError(
            f"clean ({clean.n / fs:.2f} s) and degraded ({deg.n / fs:.2f} s) differ in length by more "
            f"than alignment explains (common part {max(0, n_common) / fs:.2f} s, delay {lag / fs * 1000:.1f} ms)",
            "give two files holding the same stretch of audio (cut them to the same utterance)",
        )
    if max(drop_c, drop_d) > 0.01 * fs:
        notes.append(f"trimmed to the common part of {n_common / fs:.2f} s "
                     f"({drop_c / fs:.3f} s of clean, {drop_d / fs:.3f} s of degraded dropped)")
    c_al = _Window(clean, s_c, n_common)
    d_al = _Window(deg, s_c + lag, n_common)

    # STOI / ESTOI on the 10 kHz grid
    c10 = c_al if fs == std.STOI_FS else _Resampled(c_al, std.STOI_FS)
    d10 = d_al if fs == std.STOI_FS else _Resampled(d_al, std.STOI_FS)
    n10 = c10.n
    if frame_count(n10) < std.STOI_SEGMENT_FRAMES + 1:
        raise InputError(
            f"the pair's common part is {n_common / fs * 1000:.0f} ms long, shorter than one analysis "
            f"segment ({std.STOI_SEGMENT_FRAMES * std.STOI_HOP / std.STOI_FS * 1000:.0f} ms of speech)",
            "give a longer pair (whole utterances of several seconds)",
        )
    chunk_frames = max(64, int(chunk_s * std.STOI_FS) // std.STOI_HOP)
    n_stoi = max(1, -(-frame_count(n10) // chunk_frames)) + 1
    ssti_step = max(1, int(chunk_s * fs))
    n_ssti = max(1, -(-n_common // ssti_step))
    total = n_stoi + n_ssti
    done = [0]

    def tick_ssti() -> None:
        done[0] += 1
        if progress is not None:
            progress(n_stoi + done[0], total)

    def stoi_progress(d: int, _t: int) -> None:
        if progress is not None:
            progress(d, total)

    corr_res = stoi_estoi_stream(c10.read, d10.read, n10, chunk_frames=chunk_frames, progress=stoi_progress)

    # speech-based STI at the clean rate
    ssti = None
    ssti_reg = None
    ssti_bands = None
    if n_common < SSTI_MIN_SECONDS * fs:
        notes.append(f"speech-based STI not computed: the common part is shorter than {SSTI_MIN_SECONDS:g} s")
    else:
        from .sti import sti_from_mtf

        x_env, y_env, partial, _fs_env = _ssti_envelopes(c_al, d_al, chunk_s, tick_ssti)
        avail = np.all(np.isfinite(x_env), axis=1)
        r = np.full(len(std.OCTAVE_BANDS_HZ), np.nan)
        m_reg = np.full(len(std.OCTAVE_BANDS_HZ), np.nan)
        if avail.any():
            r[avail] = mtf_from_pair_ncm(x_env[avail], y_env[avail], return_correlation=True)
            m_reg[avail] = mtf_from_pair_regression(x_env[avail], y_env[avail])
        m = np.where(np.isfinite(r), np.clip(r, 0.0, None) ** 2, np.nan)
        if not avail.all():
            missing = ", ".join(f"{std.OCTAVE_BANDS_HZ[k]:g}" for k in np.flatnonzero(~avail))
            notes.append(f"speech-based STI not computed: the octave band(s) {missing} Hz lie above the "
                         f"Nyquist frequency of {fs} Hz (give signals sampled at 22.7 kHz or more)")
            snr = np.full(len(std.OCTAVE_BANDS_HZ), np.nan)
            ti = snr.copy()
            snr_reg, ti_reg = snr.copy(), snr.copy()
            if avail.any():
                from .sti import transmission_index

                s_, t_ = transmission_index(m[avail])
                snr[avail], ti[avail] = s_, t_
                s_, t_ = transmission_index(m_reg[avail])
                snr_reg[avail], ti_reg[avail] = s_, t_
        else:
            res = sti_from_mtf(m[:, None], modulation_hz=(0.0,), auditory=False)
            ssti = res.sti
            snr, ti = res.snr_eff[:, 0], res.ti[:, 0]
            res_reg = sti_from_mtf(m_reg[:, None], modulation_hz=(0.0,), auditory=False)
            ssti_reg = res_reg.sti
            snr_reg, ti_reg = res_reg.snr_eff[:, 0], res_reg.ti[:, 0]
            if partial.any():
                part = ", ".join(f"{std.OCTAVE_BANDS_HZ[k]:g}" for k in np.flatnonzero(partial))
                notes.append(f"octave band(s) {part} Hz only partly below the Nyquist frequency of {fs} Hz: "
                             "their envelope holds only the part of the band that was recorded")
        ssti_bands = SstiBands(std.OCTAVE_BANDS_HZ, r, m, snr, ti, partial, m_reg, snr_reg, ti_reg)
    if corr_res.frames_kept < LOW_SPEECH_SHARE * corr_res.frames_total:
        notes.append(f"only {corr_res.frames_kept} of {corr_res.frames_total} frames carry speech "
                     "(within 40 dB of the loudest); the indices rest on little speech")

    return PairResult(
        stoi=corr_res.stoi,
        estoi=corr_res.estoi,
        ssti=ssti,
        ssti_regression=ssti_reg,
        delay_ms=lag / fs * 1000.0,
        delay_samples=int(lag),
        match_correlation=float(corr),
        aligned=bool(align),
        fs=fs,
        fs_clean=clean.fs,
        fs_degraded=degraded.fs,
        duration_s=n_common / fs,
        trimmed_s=(drop_c / fs, drop_d / fs),
        correlation=corr_res,
        ssti_bands=ssti_bands,
        notes=tuple(notes),
        chunks=n_stoi - 1,
    )


def pair_indices(
    clean: np.ndarray,
    degraded: np.ndarray,
    fs: int,
    *,
    fs_degraded: int | None = None,
    align: bool = True,
    max_delay_s: float = std.PAIR_MAX_DELAY_S,
    chunk_s: float = DEFAULT_CHUNK_S,
    progress: Callable[[int, int], None] | None = None,
) -> PairResult:
    """STOI, ESTOI and speech-based STI of a clean/degraded pair, aligned and trimmed.

    Steps: check both signals (finite, not silent, one channel); resample the
    degraded one to ``fs`` if ``fs_degraded`` differs; find the delay of the degraded
    signal by waveform cross-correlation within ``±max_delay_s`` and refuse the pair if
    the peak normalised correlation is below :data:`MIN_MATCH_CORRELATION`; trim both
    to the common part; then

    * STOI (Taal et al., IEEE TASLP 19(7), 2011) and ESTOI (Jensen & Taal, IEEE/ACM
      TASLP 24(11), 2016), see :func:`envpredict.stoi`;
    * speech-based STI by the normalised-covariance method (Goldsworthy & Greenberg,
      JASA 116(6), 2004): octave-band intensity envelopes of both signals (low-passed
      at 12.5 Hz), their normalised covariance r_k per band, apparent SNR_k =
      10 log10(r_k^2 / (1 - r_k^2)) limited to ±15 dB, TI_k = (SNR_k + 15)/30, combined
      with the IEC 60268-16:2011 male weights and redundancy factors.

    Parameters
    ----------
    clean, degraded : 1-D signals (any float or integer dtype; float32 is kept as is,
        blocks are converted when read).
    fs : sample rate of ``clean`` (the analysis rate), Hz, at least 10000.
    fs_degraded : sample rate of ``degraded`` if different.
    align : search and remove the delay (off: lag 0, lengths must still match).
    max_delay_s : largest delay searched, s (default 1).
    chunk_s : seconds per processing chunk; results do not depend on it.
    progress : optional ``progress(done, total)`` callback.

    Valid range
    -----------
    Alignment: one fixed delay for the whole pair, taken where the waveform
    cross-correlation peaks; in a reverberant recording that can be a strong reflection
    rather than the direct sound (a few tens of ms later), which is the shift at which
    the envelopes agree best. Drifting clocks and time-varying delays are not corrected.
    STOI/ESTOI: see :func:`envpredict.stoi`. Speech-based STI: additive noise,
    reverberation and linear filtering of natural speech of at least 3 s (better whole
    sentences); the NCM only sees envelope *fluctuations*, so a perfectly steady masker
    lowers it less than the classical STI, and strongly nonlinear processing (e.g.
    spectral subtraction, peak clipping) can raise r without raising intelligibility.
    The 8 kHz band needs a rate of at least about 22.7 kHz (below: ``ssti`` is None
    at rates under 11.3 kHz; between, the band holds only its recorded part).

    Returns
    -------
    PairResult
    """
    c = _as_array_source(clean, fs, "clean signal")
    d = _as_array_source(degraded, fs if fs_degraded is None else fs_degraded, "degraded signal")
    return _pair(c, d, align=align, max_delay_s=max_delay_s, chunk_s=chunk_s, progress=progress)


def pair_from_files(
    clean_path: str | os.PathLike,
    degraded_path: str | os.PathLike,
    *,
    channel: int | None = None,
    align: bool = True,
    max_delay_s: float = std.PAIR_MAX_DELAY_S,
    chunk_s: float = DEFAULT_CHUNK_S,
    progress: Callable[[int, int], None] | None = None,
) -> PairResult:
    """:func:`pair_indices` of two audio files, read block by block (bounded memory).

    ``channel`` selects the channel of any multi-channel file (mono files use their
    only channel); a multi-channel file without ``channel`` is refused.
    """
    c = _FileSource(clean_path, channel if _channels(clean_path, "clean") > 1 else None, "clean")
    d = _FileSource(degraded_path, channel if _channels(degraded_path, "degraded") > 1 else None, "degraded")
    return _pair(c, d, align=align, max_delay_s=max_delay_s, chunk_s=chunk_s, progress=progress)


def _channels(path: str | os.PathLike, name: str) -> int:
    return audio_info(path, name)[2]


def speech_sti(clean: np.ndarray, degraded: np.ndarray, fs: int) -> float | None:
    """Speech-based STI (NCM) of a time-aligned pair of equal length; see :func:`pair_indices`.

    Raises ComputationError when the rate has no 8 kHz octave band content or the pair
    is shorter than 3 s.
    """
    c = _as_array_source(clean, fs, "clean signal")
    d = _as_array_source(degraded, fs, "degraded signal")
    if c.n != d.n:
        raise InputError(
            f"clean ({c.n} samples) and degraded ({d.n} samples) differ in length",
            "pass aligned signals of equal length, or use envpredict.pair_indices",
        )
    res = _pair(c, d, align=False, max_delay_s=0.0, chunk_s=DEFAULT_CHUNK_S, progress=None)
    if res.ssti is None:
        raise ComputationError("; ".join(n for n in res.notes if "speech-based STI" in n),
                               "see the valid range in envpredict.pair_indices")
    return res.ssti
