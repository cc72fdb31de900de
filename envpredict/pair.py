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
*source* read block by block (:class:`envpredict.audio.Source`: an array, an audio
file, a resampled or shifted view of another source), and each index is computed in chunks whose results equal the
unchunked ones (resampling is exact per block with margins; STOI keeps silent-frame
removal global with two passes; the speech-based STI uses causal filters whose state
is carried from chunk to chunk).
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from . import checks
from . import standards as std
from .audio import (
    CLIP_MIN_FULL_SCALE_SAMPLES,
    FileSource,
    Resampled,
    SignalCheck,
    Source,
    Window,
    as_source,
    audio_info,
    find_delay,
    zero_lag_correlation,
)
from .bands import EnvelopeStream
from .correlation import CorrelationResult, frame_count, stoi_estoi_stream
from .envpower import SepsmResult
from .exceptions import ComputationError, InputError
from .hearing import (
    CAUTION_AUDIBILITY, DEFAULT_NOISE_SEED, Audiogram, audiogram_summary, threshold_noise, threshold_noise_band_db,
)
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

#: Default delay finder of the pair job (:data:`envpredict.audio.DELAY_METHODS`):
#: GCC-PHAT finds the direct sound where the waveform peak jumps to reflections.
DEFAULT_DELAY_METHOD: str = "gcc-phat"

#: A delay given to the pair (a condition's, a fixed one) and the pair's own estimate
#: disagree when they differ by more than this, ms: GCC-PHAT is sample-accurate on a
#: direct path, so a larger gap means another path or another latency (judgement).
DELAY_AGREEMENT_MS: float = 1.0

#: Phase inversion: the derived noise may correlate with the clean speech at most this
#: share of the derived speech's correlation (peak normalised waveform correlation within
#: the delay range). A true counterpart leaves only what nonlinear processing fails to
#: cancel; a file that is not the counterpart (the same mixture again, another gain, the
#: unprocessed one) leaves speech in the difference (judgement).
INVERTED_SPEECH_SHARE: float = 0.5

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


def _scan(src: Source) -> dict:
    """Check a source block by block by the one input rule (:class:`envpredict.audio.SignalCheck`):
    finite, not silent, not constant (clipping is a legitimate degradation here, so it
    is only counted). Returns stats and where the loudest block starts."""
    check = SignalCheck(src.name, allow_clipping=True)
    sec = max(1, int(src.fs))
    energy = np.zeros(max(1, -(-src.n // sec)))  # per second of signal
    pos = 0
    for x in src.blocks(SCAN_BLOCK):
        check.update(x)
        first = pos // sec
        per = np.bincount((pos + np.arange(x.size)) // sec - first, weights=x * x)
        energy[first: first + per.size] += per
        pos += x.size
    check.finish()
    return {"rms": check.rms, "full_scale_samples": check.full_scale, "energy_per_second": energy}


def _loudest_excerpt_start(energy_per_second: np.ndarray, n: int, fs: int) -> int:
    """Start (sample) of the alignment excerpt (ALIGN_EXCERPT_S, or the whole signal)
    holding the most energy: a stretch of silence (30 s of digital zeros before the
    speech) never becomes the excerpt the delay is searched with."""
    from .audio import ALIGN_EXCERPT_S

    width = max(1, min(energy_per_second.size, int(math.ceil(min(n, ALIGN_EXCERPT_S * fs) / fs))))
    sums = np.convolve(energy_per_second, np.ones(width), mode="valid")
    return int(np.argmax(sums)) * int(fs)


def _as_pair_source(x: np.ndarray, fs: int, name: str) -> Source:
    return as_source(x, fs, name, hint="; mono and stereo signals cannot be compared")


# ---------------------------------------------------------------------------
# Speech-based STI, streamed
# ---------------------------------------------------------------------------


def _ssti_envelopes(
    clean: Source, degraded: Source, chunk_s: float, progress: Callable[[], None] | None = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    """Octave-band intensity envelopes (7, m) of both signals, causal filters streamed.

    :class:`envpredict.bands.EnvelopeStream` with the speech-based STI's options: band-pass
    (a band reaching the Nyquist frequency as a high-pass at its lower edge), square,
    low-pass at SSTI_ENVELOPE_LOWPASS_HZ, keep every q-th sample, no clipping of the
    low-pass's ringing below zero. The filters are causal with their state carried across
    chunks, so the result does not depend on the chunk length (both signals are delayed
    alike, which leaves the correlation unchanged). Bands without content are NaN.
    Returns the envelopes, the bands that are partial or absent, and the envelope rate.
    """
    fs = clean.fs
    streams = [EnvelopeStream(fs, cutoff_hz=SSTI_ENVELOPE_LOWPASS_HZ, order=SSTI_ENVELOPE_ORDER,
                              target_hz=SSTI_ENVELOPE_RATE_HZ, beyond_nyquist="highpass", clip_negative=False)
               for _ in range(2)]
    q = streams[0].q
    env = np.full((2, len(std.OCTAVE_BANDS_HZ), -(-clean.n // q)), np.nan)
    step = max(q, int(chunk_s * fs) // q * q)
    for a in range(0, clean.n, step):
        b = min(clean.n, a + step)
        for s, src in enumerate((clean, degraded)):
            e = streams[s].process(src.read(a, b))
            env[s, :, a // q: a // q + e.shape[1]] = e
        if progress is not None:
            progress()
    bank = streams[0].bank
    return env[0], env[1], bank.partial | ~bank.present, streams[0].rate


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
            "bands_hz": self.bands_hz,
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
    match_correlation : the largest normalised waveform cross-correlation within the
        search range (at lag 0 without a search): whether the two hold the same signal.
    aligned : whether the delay search was on.
    delay_from : how the delay was chosen: ``"search"`` (this pair's estimate),
        ``"given"`` (passed in, e.g. a condition's delay) or ``"off"``.
    delay_method : the delay finder of the search (:data:`envpredict.audio.DELAY_METHODS`).
    delay_confidence : the search's peak ratio (see :class:`envpredict.audio.DelayEstimate`).
    own_delay_ms : this pair's own estimate when the delay was given (else ``None``).
    correlation_at_delay : normalised waveform correlation at the delay used.
    sepsm : the envelope-power index (:func:`envpredict.envpower.sepsm`) of the degraded
        signal and the processed noise alone, when the noise was given; else ``None``.
    separation : the processed speech and noise separated by phase inversion (output SNR
        per octave band), when the inverted counterpart was given; else ``None``.
    audiogram, calibration_db : the listener with hearing loss whose threshold-simulating
        noise was added to the degraded signal (and to the noise of ``sepsm``), and the
        calibration (dB SPL of the degraded file's full-scale RMS) that set its level; else
        ``None`` (normal hearing).
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
    delay_from: str = "search"
    delay_method: str | None = None
    delay_confidence: float | None = None
    own_delay_ms: float | None = None
    correlation_at_delay: float | None = None
    sepsm: "SepsmResult | None" = None
    separation: "Separation | None" = None
    audiogram: Audiogram | None = None
    calibration_db: float | None = None

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
        # per band: the mean segment correlation of each one-third-octave band in the bin
        band = np.zeros((c.stoi_band_segment.shape[0], n_bins))
        np.add.at(band, (slice(None), idx), c.stoi_band_segment)
        with np.errstate(invalid="ignore", divide="ignore"):
            band /= cnt
        band[:, cnt == 0] = np.nan
        return {"step_s": float(step), "start_s": np.arange(n_bins) * step, "stoi": s, "estoi": e,
                "band_stoi": band}

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
                    "bands_hz": np.round(c.band_centres_hz, 1),
                    "stoi": np.round(c.stoi_band, 4),
                    "estoi": np.round(c.estoi_band, 4),
                },
                "octave": None if self.ssti_bands is None else self.ssti_bands.to_dict(),
            },
            "alignment": {
                "enabled": self.aligned,
                "delay_ms": round(self.delay_ms, 3),
                "delay_samples": self.delay_samples,
                "delay_from": self.delay_from,
                "method": self.delay_method,
                "confidence": None if self.delay_confidence is None else round(self.delay_confidence, 3),
                "own_delay_ms": None if self.own_delay_ms is None else round(self.own_delay_ms, 3),
                "match_correlation": round(self.match_correlation, 4),
                "correlation_at_delay": (None if self.correlation_at_delay is None
                                         else round(self.correlation_at_delay, 4)),
                "trimmed_s": [round(v, 4) for v in self.trimmed_s],
            },
            "sepsm": None if self.sepsm is None else self.sepsm.to_dict(),
            "separation": None if self.separation is None else self.separation.to_dict(),
            "fs_clean": self.fs_clean,
            "fs_degraded": self.fs_degraded,
            "duration_s": round(self.duration_s, 4),
            "frames": {"total": c.frames_total, "kept": c.frames_kept,
                       "segments": int(c.segment_stoi.size)},
            "timeline": {"step_s": tl["step_s"], "start_s": tl["start_s"],
                         "stoi": np.round(tl["stoi"], 4), "estoi": np.round(tl["estoi"], 4),
                         "band_stoi": np.round(tl["band_stoi"], 4)},
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
            "cautions": [] if self.audiogram is None else [_audibility_caution(self.audiogram)],
            "notes": list(self.notes),
            **({} if self.audiogram is None else {"audiogram": audiogram_summary(self.audiogram),
                                                  "calibration_db": self.calibration_db}),
        })


def _audibility_caution(audiogram: Audiogram) -> str:
    return (f"Listener: {audiogram.source}. {CAUTION_AUDIBILITY}: a noise shaped like the listener's raised "
            "threshold was added to the degraded signal (and to the noise of the envelope-power index), so that "
            "what the listener cannot hear stops counting.")


# ---------------------------------------------------------------------------
# The job
# ---------------------------------------------------------------------------


def _check_delay(delay_s: float | None) -> float | None:
    if delay_s is None:
        return None
    try:
        v = float(delay_s)
    except (TypeError, ValueError):
        raise InputError(f"delay '{delay_s}' is not a number", "give the delay in seconds (ms in a manifest)") from None
    if not math.isfinite(v):
        raise InputError(f"delay {delay_s} is not finite", "give the delay in seconds (ms in a manifest)")
    return v


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


@dataclass(frozen=True)
class _Aligned:
    """The pair after checks, resampling, alignment and trimming (the common part)."""

    clean: Source
    degraded: Source
    lag: int
    corr: float
    n_common: int
    drop: tuple[int, int]
    notes: tuple[str, ...]
    delay_from: str = "search"
    method: str | None = None
    confidence: float | None = None
    own_lag: int | None = None
    corr_at_delay: float | None = None


def _align(clean: Source, degraded: Source, *, align: bool, max_delay_s: float,
           delay_method: str = DEFAULT_DELAY_METHOD, delay_s: float | None = None) -> _Aligned:
    """Check both signals, resample the degraded one to the clean rate, find and remove
    the delay and trim both to their common part (every pair index starts here).

    ``delay_s`` given: that delay is removed; with ``align`` the search still runs, to
    check that the two match and to report the pair's own estimate beside it."""
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
    deg = degraded if degraded.fs == fs else Resampled(degraded, fs)
    if degraded.fs != fs:
        notes.append(f"degraded signal resampled from {degraded.fs} Hz to {fs} Hz")

    method = confidence = own_lag = None
    if align:
        near = _loudest_excerpt_start(stats_c["energy_per_second"], clean.n, fs)
        est = find_delay(clean, deg, max_delay_s=max_delay_s, near=near, method=delay_method)
        corr = est.peak_correlation
        if corr < MIN_MATCH_CORRELATION:
            raise InputError(
                f"clean and degraded do not match: peak waveform correlation {corr:.3f} within "
                f"±{max_delay_s:g} s (at least {MIN_MATCH_CORRELATION} is needed)",
                "check that both hold the same utterance; for a longer delay raise --max-delay; "
                "--no-align skips the check",
            )
        lag, method, confidence = est.lag, est.method, est.confidence
        if delay_s is not None:
            own_lag, lag = lag, int(round(delay_s * fs))
            if abs(own_lag - lag) > DELAY_AGREEMENT_MS * fs / 1000.0:
                notes.append(f"this pair's own delay estimate ({own_lag / fs * 1000:.2f} ms, {method}) differs "
                             f"from the delay used ({lag / fs * 1000:.2f} ms) by more than "
                             f"{DELAY_AGREEMENT_MS:g} ms")
    elif delay_s is not None:
        lag, corr = int(round(delay_s * fs)), math.nan
    else:
        lag, corr = 0, zero_lag_correlation(clean, deg)
    if abs(lag) >= min(clean.n, deg.n):
        raise InputError(f"the delay of {lag / fs * 1000:.1f} ms is longer than the files "
                         f"({min(clean.n, deg.n) / fs:.2f} s)", "give a delay shorter than the recording")

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
    c_win, d_win = Window(clean, s_c, n_common), Window(deg, s_c + lag, n_common)
    at_delay = zero_lag_correlation(c_win, d_win) if (align or delay_s is not None) else corr
    if not math.isfinite(corr):
        corr = at_delay
    if at_delay <= -MIN_MATCH_CORRELATION:
        notes.append("the waveforms match with inverted polarity at the delay used (an inverting chain, "
                     "or a strong reflection in a reverberant recording); the indices do not depend "
                     "on polarity")
    delay_from = "given" if delay_s is not None else "search" if align else "off"
    return _Aligned(clean=c_win, degraded=d_win, lag=int(lag),
                    corr=float(corr), n_common=int(n_common), drop=(int(drop_c), int(drop_d)), notes=tuple(notes),
                    delay_from=delay_from, method=method, confidence=confidence, own_lag=own_lag,
                    corr_at_delay=float(at_delay))


@dataclass(frozen=True)
class _Ssti:
    """The speech-based STI part of a pair result."""

    ssti: float | None
    regression: float | None
    bands: SstiBands | None
    notes: tuple[str, ...]


def _ssti(c_al: Source, d_al: Source, chunk_s: float, tick: Callable[[], None] | None) -> _Ssti:
    """Speech-based STI (NCM and envelope regression) of an aligned pair of equal length."""
    fs = c_al.fs
    n_common = c_al.n
    notes: list[str] = []
    ssti = None
    ssti_reg = None
    ssti_bands = None
    if n_common < SSTI_MIN_SECONDS * fs:
        notes.append(f"speech-based STI not computed: the common part is shorter than {SSTI_MIN_SECONDS:g} s")
        return _Ssti(None, None, None, tuple(notes))
    from .sti import sti_from_mtf

    x_env, y_env, partial, _fs_env = _ssti_envelopes(c_al, d_al, chunk_s, tick)
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
    return _Ssti(ssti, ssti_reg, ssti_bands, tuple(notes))


def _pair(
    clean: Source,
    degraded: Source,
    *,
    align: bool,
    max_delay_s: float,
    chunk_s: float,
    progress: Callable[[int, int], None] | None,
    delay_method: str = DEFAULT_DELAY_METHOD,
    delay_s: float | None = None,
    listener: tuple[Audiogram, float, int] | None = None,
) -> PairResult:
    max_delay_s, chunk_s = _check_options(max_delay_s, chunk_s)
    delay_s = _check_delay(delay_s)
    fs = clean.fs
    al = _align(clean, degraded, align=align, max_delay_s=max_delay_s, delay_method=delay_method, delay_s=delay_s)
    notes = list(al.notes)
    c_al, d_al, n_common, lag = al.clean, al.degraded, al.n_common, al.lag
    if listener is not None:  # the listener's threshold, after alignment so the delay search never sees it
        d_al, note = _with_threshold_noise(d_al, *listener)
        notes.extend(note)

    # STOI / ESTOI on the 10 kHz grid
    c10 = c_al if fs == std.STOI_FS else Resampled(c_al, std.STOI_FS)
    d10 = d_al if fs == std.STOI_FS else Resampled(d_al, std.STOI_FS)
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
    ss = _ssti(c_al, d_al, chunk_s, tick_ssti)
    notes.extend(ss.notes)
    if corr_res.frames_kept < LOW_SPEECH_SHARE * corr_res.frames_total:
        notes.append(f"only {corr_res.frames_kept} of {corr_res.frames_total} frames carry speech "
                     "(within 40 dB of the loudest); the indices rest on little speech")

    return PairResult(
        stoi=corr_res.stoi,
        estoi=corr_res.estoi,
        ssti=ss.ssti,
        ssti_regression=ss.regression,
        delay_ms=lag / fs * 1000.0,
        delay_samples=int(lag),
        match_correlation=al.corr,
        aligned=bool(align),
        fs=fs,
        fs_clean=clean.fs,
        fs_degraded=degraded.fs,
        duration_s=n_common / fs,
        trimmed_s=(al.drop[0] / fs, al.drop[1] / fs),
        correlation=corr_res,
        ssti_bands=ss.bands,
        notes=tuple(notes),
        chunks=n_stoi - 1,
        delay_from=al.delay_from,
        delay_method=al.method,
        delay_confidence=al.confidence,
        own_delay_ms=None if al.own_lag is None else al.own_lag / fs * 1000.0,
        correlation_at_delay=al.corr_at_delay,
        audiogram=None if listener is None else listener[0],
        calibration_db=None if listener is None else listener[1],
    )


class _PlusNoise(Source):
    """A source with a noise (an array of its length) added, read a stretch at a time."""

    def __init__(self, src: Source, noise: np.ndarray) -> None:
        self.src, self.noise = src, noise
        self.n, self.fs, self.name, self.subtype = src.n, src.fs, src.name, src.subtype

    def _read(self, a: int, b: int) -> np.ndarray:
        return self.src.read(a, b) + self.noise[a:b]


def _with_threshold_noise(src: Source, audiogram: Audiogram, calibration_db: float, seed: int
                          ) -> tuple[Source, tuple[str, ...]]:
    """``src`` with the listener's threshold-simulating noise added
    (:func:`envpredict.hearing.threshold_noise`), and the note that says so."""
    noise = threshold_noise(audiogram, src.n, src.fs, calibration_db, seed=seed)
    if noise is None:
        return src, ("the audiogram is nowhere above 0 dB HL: no threshold noise was added",)
    levels = threshold_noise_band_db(audiogram)
    shown = ", ".join(f"{f:g}: {'-' if not np.isfinite(v) else f'{v:.0f}'}" for f, v in zip(audiogram.bands_hz, levels))
    return _PlusNoise(src, noise), (
        f"threshold-simulating noise added to the degraded signal (octave-band levels, Hz: dB SPL, {shown}; the "
        f"excess of the listener's reception threshold over the normal one, IEC 60268-16 Table A.4 plus the "
        f"hearing loss; calibration {calibration_db:g} dB SPL for full-scale RMS; seed {seed})",)


def _check_listener(audiogram, calibration_db, seed) -> tuple[Audiogram, float, int] | None:
    """The listener of a pair job: an audiogram needs the calibration of the degraded signal."""
    from .audio import check_calibration_db
    from .tables import load_audiogram

    audiogram = load_audiogram(audiogram)
    cal = check_calibration_db(calibration_db)
    seed = checks.number(seed, "noise seed", lo=0, hi=2**63 - 1, integer=True)
    if audiogram is None:
        return None
    if cal is None:
        raise InputError("an audiogram (or age) was given without a calibration: audibility needs absolute levels",
                         "give --calibration-db, the dB SPL of a full-scale RMS signal in the degraded file")
    return audiogram, cal, seed


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
    delay_method: str = DEFAULT_DELAY_METHOD,
    delay_s: float | None = None,
    noise: np.ndarray | None = None,
    audiogram: Audiogram | str | os.PathLike | None = None,
    calibration_db: float | None = None,
    seed: int = DEFAULT_NOISE_SEED,
) -> PairResult:
    """STOI, ESTOI and speech-based STI of a clean/degraded pair, aligned and trimmed.

    Steps: check both signals (finite, not silent, one channel); resample the
    degraded one to ``fs`` if ``fs_degraded`` differs; find the delay of the degraded
    signal within ``±max_delay_s`` (GCC-PHAT by default, :func:`envpredict.audio.find_delay`)
    and refuse the pair if the peak normalised waveform correlation is below
    :data:`MIN_MATCH_CORRELATION`; trim both to the common part; then

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
    delay_method : ``"gcc-phat"`` (default) or ``"waveform"`` (the plain cross-correlation
        peak), see :func:`envpredict.audio.find_delay`.
    delay_s : remove this delay (s, positive: degraded late) instead of the estimate, e.g.
        one delay for every item of a processing condition. With ``align`` the search
        still runs: it checks the match and its estimate is reported (``own_delay_ms``,
        a note when it differs by more than :data:`DELAY_AGREEMENT_MS`).
    noise : the noise alone as it is in ``degraded`` (same rate, same length, processed
        the same way); adds the envelope-power index (``sepsm``,
        :func:`envpredict.envpower.sepsm`) of ``degraded`` and ``noise``.
    audiogram : a listener with hearing loss (:mod:`envpredict.hearing`; an Audiogram, its
        text form or a CSV file): a noise with the spectrum of the listener's raised
        threshold (:func:`envpredict.hearing.threshold_noise`) is added to the degraded
        signal after alignment, and to ``noise`` and ``degraded`` for the envelope-power
        index, so that what the listener cannot hear stops counting. Audibility only: the
        suprathreshold deficits of sensorineural loss are not modelled. Needs
        ``calibration_db``. 0 dB HL (or better) everywhere adds nothing.
    calibration_db : dB SPL of a full-scale RMS signal in ``degraded`` (with ``audiogram``).
    seed : seed of the threshold-simulating noise (the same seed, the same noise).

    Valid range
    -----------
    Alignment: one fixed delay for the whole pair. GCC-PHAT (Knapp & Carter 1976) peaks
    at the direct sound where the plain waveform correlation often peaks on the
    reverberation a few ms to tens of ms later; with strong early reflections and little
    speech a single pair can still land on a reflection (``delay_confidence`` near 1):
    a corpus should use one delay per processing condition (``envpredict batch`` does).
    Drifting clocks and time-varying delays are not corrected.
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

    Raises
    ------
    InputError
        For files or signals refused by the input rule, a pair that does not match, or an
        option out of range (``align`` not True or False, ``max_delay_s``, ``chunk_s``), or an
        audiogram refused or given without ``calibration_db``.
    """
    align = checks.flag(align, "align")
    listener = _check_listener(audiogram, calibration_db, seed)
    c = _as_pair_source(clean, fs, "clean signal")
    d = _as_pair_source(degraded, fs if fs_degraded is None else fs_degraded, "degraded signal")
    res = _pair(c, d, align=align, max_delay_s=max_delay_s, chunk_s=chunk_s, progress=progress,
                delay_method=delay_method, delay_s=delay_s, listener=listener)
    if noise is None:
        return res
    return _with_sepsm(res, np.asarray(degraded), np.asarray(noise), d.fs, d.fs, listener)


def pair_from_files(
    clean_path: str | os.PathLike,
    degraded_path: str | os.PathLike,
    *,
    channel: int | None = None,
    align: bool = True,
    max_delay_s: float = std.PAIR_MAX_DELAY_S,
    chunk_s: float = DEFAULT_CHUNK_S,
    progress: Callable[[int, int], None] | None = None,
    clean_channel: int | None = None,
    degraded_channel: int | None = None,
    delay_method: str = DEFAULT_DELAY_METHOD,
    delay_s: float | None = None,
    noise_path: str | os.PathLike | None = None,
    inverted_path: str | os.PathLike | None = None,
    audiogram: Audiogram | str | os.PathLike | None = None,
    calibration_db: float | None = None,
    seed: int = DEFAULT_NOISE_SEED,
) -> PairResult:
    """:func:`pair_indices` of two audio files, read block by block (bounded memory).

    ``channel`` selects the channel of any multi-channel file (mono files use their
    only channel); a multi-channel file without a channel is refused. ``clean_channel``
    and ``degraded_channel`` select the channel of one file each (overriding
    ``channel``): the clean and degraded signals may be two channels of one file.
    ``noise_path``: the noise alone as it is in the degraded file (same rate and length;
    channel as the degraded one), for the envelope-power index (``sepsm``), which reads
    the degraded file and the noise whole (at most
    :data:`envpredict.envpower.MAX_SECONDS`).
    ``inverted_path``: the processing's output for the speech with the noise's polarity
    inverted (the degraded file being its output for speech + noise): the processed
    speech and noise are separated by phase inversion (``separation``: output SNR per
    octave band) and the derived noise feeds the envelope-power index. A file that is not
    the counterpart (its derived noise holds speech) is refused.
    ``audiogram``, ``calibration_db``, ``seed``: the listener, as for :func:`pair_indices`
    (the calibration is that of the degraded file).

    Raises
    ------
    InputError
        For files that are missing, unreadable or refused by the input rule, a pair that does
        not match, or an option out of range.
    """
    align = checks.flag(align, "align")
    listener = _check_listener(audiogram, calibration_db, seed)
    cc = channel if clean_channel is None else clean_channel
    dc = channel if degraded_channel is None else degraded_channel
    with (FileSource(clean_path, cc if _channels(clean_path, "clean") > 1 else None, name="clean") as c,
          FileSource(degraded_path, dc if _channels(degraded_path, "degraded") > 1 else None,
                     name="degraded") as d):
        if noise_path is not None and inverted_path is not None:
            raise InputError("--noise and --inverted both give the processed noise", "give one of them")
        for extra, what in ((noise_path, "noise"), (inverted_path, "inverted")):
            if extra is not None:  # refuse a mismatched file before the (slower) pair work
                _noise_info(extra, d, what)
        res = _pair(c, d, align=align, max_delay_s=max_delay_s, chunk_s=chunk_s, progress=progress,
                    delay_method=delay_method, delay_s=delay_s, listener=listener)
        if inverted_path is not None:
            with FileSource(inverted_path, dc if _channels(inverted_path, "inverted") > 1 else None,
                            name="inverted") as inv:
                return _separate(res, c, d.read(0, d.n), inv.read(0, inv.n), d.fs, inv.fs, max_delay_s, listener)
        if noise_path is None:
            return res
        with FileSource(noise_path, dc if _channels(noise_path, "noise") > 1 else None, name="noise") as nz:
            return _with_sepsm(res, d.read(0, d.n), nz.read(0, nz.n), d.fs, nz.fs, listener)


def _noise_info(noise_path: str | os.PathLike, degraded: Source, what: str = "noise") -> None:
    from .envpower import MAX_SECONDS

    fs_n, n_n, _ = audio_info(noise_path, what)
    if degraded.n > MAX_SECONDS * degraded.fs:
        raise InputError(f"the degraded file is {degraded.n / degraded.fs:.0f} s long; the envelope-power index "
                         f"analyses at most {MAX_SECONDS:g} s", "cut the files to the utterances of interest")
    if fs_n != degraded.fs or n_n != degraded.n:
        raise InputError(
            f"the {what} file ({n_n} samples at {fs_n} Hz) does not match the degraded file "
            f"({degraded.n} samples at {degraded.fs} Hz)",
            ("give the processing's output for the same speech with the noise's polarity inverted, at the "
             "degraded file's rate and length" if what == "inverted" else
             "give the noise alone exactly as it is in the degraded file: same rate, same length, "
             "processed the same way"),
        )


def _with_sepsm(res: PairResult, degraded: np.ndarray, noise: np.ndarray, fs_d: int, fs_n: int,
                listener: tuple[Audiogram, float, int] | None = None) -> PairResult:
    """The pair result with the envelope-power index of the degraded signal and its noise
    (both with the listener's threshold noise added, when there is a listener)."""
    import dataclasses

    from .envpower import sepsm

    if fs_n != fs_d or noise.size != degraded.size:
        raise InputError(
            f"the noise ({noise.size} samples at {fs_n} Hz) does not match the degraded signal "
            f"({degraded.size} samples at {fs_d} Hz)",
            "give the noise alone exactly as it is in the degraded signal: same rate, same length",
        )
    degraded, noise = _threshold_on_both(degraded, noise, fs_d, listener)
    return dataclasses.replace(res, sepsm=sepsm(degraded, noise, fs_d))


def _threshold_on_both(degraded: np.ndarray, noise: np.ndarray, fs: int,
                       listener: tuple[Audiogram, float, int] | None) -> tuple[np.ndarray, np.ndarray]:
    """The degraded signal and its noise alone, each with the same threshold-simulating
    noise added (the envelope-power index then sees it as part of the masker)."""
    if listener is None:
        return degraded, noise
    audiogram, cal, seed = listener
    t = threshold_noise(audiogram, int(np.asarray(degraded).size), fs, cal, seed=seed)
    if t is None:
        return degraded, noise
    return np.asarray(degraded, dtype=float) + t, np.asarray(noise, dtype=float) + t


@dataclass(frozen=True)
class Separation:
    """Processed speech and processed noise separated by phase inversion.

    Attributes
    ----------
    bands_hz : octave bands (125 Hz - 8 kHz); ``output_snr_db`` per band (NaN: band absent).
    output_snr_db : band power of the processed speech over that of the processed noise, dB.
    broadband_snr_db : the same over the whole band, dB.
    speech_correlation, noise_correlation : peak normalised waveform correlation of the
        derived speech and the derived noise with the clean signal (the counterpart check).
    """

    bands_hz: tuple[float, ...]
    output_snr_db: np.ndarray
    broadband_snr_db: float
    speech_correlation: float
    noise_correlation: float

    def to_dict(self) -> dict:
        return jsonable({
            "method": "phase inversion (Hagerman & Olofsson 2004): speech = (a + b)/2, noise = (a - b)/2",
            "bands_hz": self.bands_hz, "output_snr_db": np.round(self.output_snr_db, 2),
            "broadband_snr_db": round(self.broadband_snr_db, 2),
            "speech_correlation": round(self.speech_correlation, 4),
            "noise_correlation": round(self.noise_correlation, 4),
        })


def phase_inversion_split(mixture: np.ndarray, inverted: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Processed speech and processed noise from the two processed mixtures.

    ``mixture`` is the processing's output for speech + noise, ``inverted`` for
    speech - noise (the noise's polarity inverted): their half sum is the processed
    speech and their half difference the processed noise, exactly for linear processing
    and to the extent the processing treats both alike otherwise.

    References
    ----------
    B. Hagerman and Å. Olofsson, "A method to measure the effect of noise reduction
    algorithms using simultaneous speech and noise", Acta Acustica united with Acustica
    90, 356-361 (2004).

    Raises
    ------
    InputError
        For mixtures that are not finite 1-D arrays of numbers, or that differ in length.
    """
    a = checks.array(mixture, "the mixture", fix="give the processed mixture as a 1-D array")
    b = checks.array(inverted, "the inverted mixture", fix="give the processed inverted mixture as a 1-D array")
    if a.shape != b.shape:
        raise InputError(f"the inverted mixture ({b.size} samples) and the mixture ({a.size} samples) differ in "
                         "length", "give the processing's outputs for speech+noise and speech-noise, sample for sample")
    return 0.5 * (a + b), 0.5 * (a - b)


def _band_powers(x: np.ndarray, fs: int) -> np.ndarray:
    from .bands import octave_filterbank

    bank = octave_filterbank(fs, beyond_nyquist="highpass")
    return np.array([np.mean(bank.apply(x, k, zero_phase=False) ** 2) if bank.present[k] else np.nan
                     for k in range(len(bank.bands_hz))])


def _separate(res: PairResult, clean: Source, degraded: np.ndarray, inverted: np.ndarray,
              fs_d: int, fs_i: int, max_delay_s: float,
              listener: tuple[Audiogram, float, int] | None = None) -> PairResult:
    """The pair result with the phase-inversion separation and the envelope-power index of
    the degraded signal and the derived noise."""
    import dataclasses

    from .envpower import sepsm

    if fs_i != fs_d:
        raise InputError(f"the inverted file is sampled at {fs_i} Hz, the degraded one at {fs_d} Hz",
                         "give the processing's output for speech-noise at the rate of the degraded file")
    speech, noise = phase_inversion_split(degraded, inverted)
    if float(np.max(np.abs(noise))) < 1e-9 * max(1e-30, float(np.max(np.abs(degraded)))):
        raise InputError("the inverted file equals the degraded one: the derived noise is silent",
                         "give the processing's output for the speech with the noise's polarity inverted")
    cl = clean.read(0, clean.n)
    if fs_d != clean.fs:
        from .audio import resample

        speech_c, noise_c = resample(speech, fs_d, clean.fs), resample(noise, fs_d, clean.fs)
    else:
        speech_c, noise_c = speech, noise
    rs = find_delay(cl, speech_c, clean.fs, max_delay_s).peak_correlation
    rn = find_delay(cl, noise_c, clean.fs, max_delay_s).peak_correlation
    if rn >= MIN_MATCH_CORRELATION and rn > INVERTED_SPEECH_SHARE * rs:
        raise InputError(
            f"the inverted file is not the phase-inverted counterpart of the degraded one: the derived noise "
            f"correlates with the clean speech ({rn:.2f}, the derived speech {rs:.2f})",
            "give the processing's output for the same speech with the noise's polarity inverted (speech - noise)",
        )
    ps, pn = _band_powers(speech, fs_d), _band_powers(noise, fs_d)
    with np.errstate(divide="ignore", invalid="ignore"):
        snr = 10 * np.log10(ps / pn)
        broad = 10 * math.log10(float(np.mean(speech ** 2)) / max(float(np.mean(noise ** 2)), 1e-30))
    sep = Separation(std.OCTAVE_BANDS_HZ, snr, broad, rs, rn)
    degraded, noise = _threshold_on_both(degraded, noise, fs_d, listener)
    return dataclasses.replace(res, separation=sep, sepsm=sepsm(degraded, noise, fs_d))


def _channels(path: str | os.PathLike, name: str) -> int:
    return audio_info(path, name)[2]


def speech_sti(clean: np.ndarray, degraded: np.ndarray, fs: int) -> float | None:
    """Speech-based STI (NCM) of a time-aligned pair of equal length; see :func:`pair_indices`.

    Raises ComputationError when the rate has no 8 kHz octave band content or the pair
    is shorter than 3 s.
    """
    c = _as_pair_source(clean, fs, "clean signal")
    d = _as_pair_source(degraded, fs, "degraded signal")
    if c.n != d.n:
        raise InputError(
            f"clean ({c.n} samples) and degraded ({d.n} samples) differ in length",
            "pass aligned signals of equal length, or use envpredict.pair_indices",
        )
    # the pair job's checks and trimming (no delay search), then only the speech-based STI:
    # no STOI/ESTOI pass
    al = _align(c, d, align=False, max_delay_s=0.0)
    res = _ssti(al.clean, al.degraded, DEFAULT_CHUNK_S, None)
    if res.ssti is None:
        raise ComputationError("; ".join(n for n in res.notes if "speech-based STI" in n),
                               "see the valid range in envpredict.pair_indices")
    return res.ssti


# ---------------------------------------------------------------------------
# One delay for several pairs (a processing condition of a corpus)
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class CommonDelay:
    """One delay for a set of pairs, from their pooled delay curves.

    Attributes
    ----------
    delay_ms : the pooled delay, ms (``None`` when no pair could be used).
    confidence : the peak ratio of the summed curve (see :class:`envpredict.audio.DelayEstimate`).
    method : the delay finder.
    pooled : number of pairs in the pool.
    own_delay_ms : each pair's own estimate, ms (``None`` where it could not be found).
    errors : why a pair was left out ("" where it was used).
    notes : what the user should know (pairs at another rate left out, weak pool).
    """

    delay_ms: float | None
    confidence: float | None
    method: str
    pooled: int
    own_delay_ms: tuple[float | None, ...]
    errors: tuple[str, ...]
    notes: tuple[str, ...] = field(default=())

    def to_dict(self) -> dict:
        return jsonable({"delay_ms": self.delay_ms, "confidence": self.confidence, "method": self.method,
                         "pooled": self.pooled, "own_delay_ms": list(self.own_delay_ms),
                         "errors": list(self.errors), "cautions": [], "notes": list(self.notes)})


def pair_delay_curve(
    clean_path: str | os.PathLike,
    degraded_path: str | os.PathLike,
    *,
    channel: int | None = None,
    max_delay_s: float = std.PAIR_MAX_DELAY_S,
    delay_method: str = DEFAULT_DELAY_METHOD,
):
    """The pair job's delay search on two files (the same excerpt, rate and checks as
    :func:`pair_from_files`), with its curve: ``(DelayEstimate, DelayCurve)``.

    Raises
    ------
    InputError
        When the files do not match (peak waveform correlation below
        :data:`MIN_MATCH_CORRELATION`), fail the input checks, or for a ``max_delay_s``
        out of range or an unknown delay method.
    """
    max_delay_s, _ = _check_options(max_delay_s, DEFAULT_CHUNK_S)
    with (FileSource(clean_path, channel if _channels(clean_path, "clean") > 1 else None, name="clean") as c,
          FileSource(degraded_path, channel if _channels(degraded_path, "degraded") > 1 else None,
                     name="degraded") as d):
        fs = c.fs
        deg = d if d.fs == fs else Resampled(d, fs)
        stats = _scan(c)
        _scan(d)
        near = _loudest_excerpt_start(stats["energy_per_second"], c.n, fs)
        est, curve = find_delay(c, deg, max_delay_s=max_delay_s, near=near, method=delay_method, curve=True)
    if est.peak_correlation < MIN_MATCH_CORRELATION:
        raise InputError(f"clean and degraded do not match: peak waveform correlation {est.peak_correlation:.3f}",
                         "check that both hold the same utterance")
    return est, curve


def common_delay(
    pairs: list[tuple[str | os.PathLike, str | os.PathLike, int | None]],
    *,
    max_delay_s: float = std.PAIR_MAX_DELAY_S,
    delay_method: str = DEFAULT_DELAY_METHOD,
) -> CommonDelay:
    """One delay for several clean/degraded pairs (e.g. every item of one processing chain).

    Each pair's delay curve (:func:`pair_delay_curve`) is computed and the curves are
    added (:func:`envpredict.audio.pooled_delay`): a chain has one latency, and the path
    every item shares (the direct sound) adds up while the reflections and noise peaks
    of single items, which differ from item to item, do not. Pairs at another clean rate
    than the most common one, and pairs that fail (missing file, no match), are left out
    of the pool.

    Parameters
    ----------
    pairs : ``(clean path, degraded path, channel)`` per item.
    max_delay_s, delay_method : as for :func:`pair_from_files`.

    Raises
    ------
    InputError
        For ``pairs`` that are not a list of ``(clean, degraded, channel)``, a
        ``max_delay_s`` out of range or an unknown delay method (a pair whose files fail
        is left out, with its error, not raised).
    """
    from collections import Counter

    from .audio import _check_delay_method, pooled_delay
    from .exceptions import EnvpredictError

    _check_options(max_delay_s, DEFAULT_CHUNK_S)
    _check_delay_method(delay_method)
    if isinstance(pairs, (str, bytes)) or not isinstance(pairs, (list, tuple)) or not all(
            isinstance(p, (list, tuple)) and len(p) == 3 for p in pairs):
        raise InputError("pairs are not a list of (clean path, degraded path, channel)",
                         "give one (clean, degraded, channel) per item")

    ests, curves, errors = [], [], []
    for clean_path, degraded_path, channel in pairs:
        try:
            est, curve = pair_delay_curve(clean_path, degraded_path, channel=channel, max_delay_s=max_delay_s,
                                          delay_method=delay_method)
            ests.append(est)
            curves.append(curve)
            errors.append("")
        except EnvpredictError as e:
            ests.append(None)
            curves.append(None)
            errors.append(e.one_line())
    notes: list[str] = []
    usable = [c for c in curves if c is not None]
    if not usable:
        return CommonDelay(None, None, delay_method, 0, tuple(None for _ in pairs), tuple(errors),
                           ("no pair could be used for the common delay",))
    fs = Counter(c.fs for c in usable).most_common(1)[0][0]
    pool = [c for c in usable if c.fs == fs]
    if len(pool) < len(usable):
        notes.append(f"{len(usable) - len(pool)} pair(s) at another rate than {fs} Hz left out of the common delay")
    lag, conf = pooled_delay(pool)
    own = tuple(None if e is None else e.delay_ms for e in ests)
    return CommonDelay(lag / fs * 1000.0, conf, delay_method, len(pool), own, tuple(errors), tuple(notes))
