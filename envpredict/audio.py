"""Audio input: the first stage of every job, one home for each of its steps.

* **Reading.** :func:`load_audio` for a whole file; for long inputs a *source*
  (:class:`Source`): :class:`ArraySource`, :class:`FileSource`, and the views
  :class:`Resampled` and :class:`Window`, each read as ``read(start, stop)`` (zeros
  outside the signal) or in blocks (:meth:`Source.blocks`). Memory is bounded by the
  block length.
* **Checks.** One rule, :class:`SignalCheck`, fed the whole array by
  :func:`validate_signal` or a stream block by block: the verdict does not depend on
  the block length. All checks of malformed audio raise
  :class:`~envpredict.exceptions.InputError` with a one-line message saying what is
  wrong and what to do.
* **Resampling** (:func:`resample`, :class:`Resampled`), **alignment**
  (:func:`estimate_delay`, the one delay finder) and **calibration**
  (:func:`calibration_from_tone`, :func:`check_calibration_db`, and
  :func:`resolve_calibration`, which turns an offset or a calibrator recording into one
  calibration and says where it came from).
* **Files.** :func:`audio_files_in` lists the audio files of a folder; :func:`write_wav`
  is the one WAV writer (atomic: the file appears whole or not at all).

Nothing here computes an index.
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterable, Iterator
from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache
from pathlib import Path

import numpy as np

from . import checks
from .checks import MAX_RATE_HZ, MIN_RATE_HZ  # noqa: F401 (the rate limits, read from here too)
from .exceptions import InputError

#: A signal whose RMS is below this (about -140 dBFS) is treated as silence: it is
#: below the noise of any 24-bit converter (common practice, no source).
SILENCE_RMS: float = 1e-7

#: Digital clipping of integer (PCM) samples: this many samples at full scale (|x| >= 0.999) ...
CLIP_FULL_SCALE: float = 0.999
CLIP_MIN_FULL_SCALE_SAMPLES: int = 3
#: ... or, for every format, flat tops of at least this many equal samples at the peak, in
#: at least this many places (clipped, then scaled down). Judgement: honest audio almost
#: never repeats its exact peak value four times running in several places.
CLIP_RUN: int = 4
CLIP_MIN_RUNS: int = 5

#: libsndfile sample formats (subtypes) that hold floating-point samples: they have no
#: full scale (peaks above 1.0 are legitimate), so only flat tops at the peak count as
#: clipping. Arrays given through the API are judged the same way.
FLOAT_SUBTYPES: frozenset[str] = frozenset({"FLOAT", "DOUBLE"})

#: Longest excerpt of the reference used to find a delay, s: enough for a stable
#: cross-correlation peak, small enough to bound memory on long inputs (judgement).
ALIGN_EXCERPT_S: float = 30.0

#: Largest delay :func:`estimate_delay` searches, s: the search reads 2 x this much of
#: the signal; no alignment of a recording needs more (judgement).
MAX_DELAY_S: float = 60.0

#: Plausible calibrator levels, dB SPL (IEC 60942 calibrators: 94, 104, 114 dB typical).
CALIBRATOR_LEVEL_RANGE_DB: tuple[float, float] = (60.0, 150.0)

#: A calibrator recording must put at least this share of its energy in the 1 kHz
#: octave band, and its spectral peak within this relative distance of 1 kHz (judgement).
CALIBRATOR_BAND_SHARE: float = 0.9
CALIBRATOR_FREQ_TOLERANCE: float = 0.05

#: Plausible calibration offsets, dB SPL of a full-scale RMS signal (judgement: a
#: microphone chain maps 0 dBFS somewhere between a whisper and beyond the threshold of pain).
CALIBRATION_RANGE_DB: tuple[float, float] = (0.0, 200.0)

AUDIO_SUFFIXES = {".wav", ".flac", ".ogg", ".oga", ".aif", ".aiff", ".caf", ".w64", ".rf64"}


def audio_files_in(folder: str | os.PathLike) -> list[Path]:
    """The audio files of a folder (by suffix, :data:`AUDIO_SUFFIXES`), sorted by name;
    hidden files (names starting with a dot) are skipped. Not recursive.

    Raises
    ------
    InputError
        If ``folder`` is not a path of an existing folder.
    """
    folder = checks.path(folder, "folder")
    if not folder.is_dir():
        raise InputError(f"'{folder}' is not a folder", "give the path of a folder of audio files")
    return sorted(q for q in Path(folder).iterdir()
                  if q.suffix.lower() in AUDIO_SUFFIXES and not q.name.startswith("."))


def check_wav_path(path: str | os.PathLike) -> Path:
    """Refuse an output path that :func:`write_wav` cannot write: not ending in .wav, a
    folder, or in a folder that does not exist (so that a caller can refuse it before
    its slow work).

    Raises
    ------
    InputError
        For any of these.
    """
    out = checks.path(path, "output")
    if out.suffix.lower() != ".wav":
        raise InputError(f"output '{out}' does not end in .wav", "give a file name ending in .wav")
    if out.exists() and out.is_dir():
        raise InputError(f"output '{out}' is a folder", "give a file name ending in .wav")
    parent = out.parent if str(out.parent) else Path(".")
    if not parent.exists():
        raise InputError(f"output folder '{parent}' does not exist", "create it first or choose another path")
    return out


def write_wav(path: str | os.PathLike, x: "np.ndarray | Iterable[np.ndarray]", fs: int, *,
              subtype: str = "PCM_24") -> Path:
    """Write a mono signal to a WAV file, atomically (through a temporary ``.part`` file
    and a rename: :func:`envpredict.outputs.atomic_file`).

    Parameters
    ----------
    path : file to write, ending in .wav (checked by :func:`check_wav_path`).
    x : samples, full scale +-1: one array, or an iterable of consecutive 1-D blocks (a
        long signal written block by block: memory is bounded by one block). The file
        is the same either way.
    fs : sample rate, Hz.
    subtype : sample format of libsndfile (default 24-bit PCM).

    Raises
    ------
    InputError
        For a path :func:`check_wav_path` refuses, samples that are not a 1-D or 2-D
        (frames, channels) array of finite numbers, a rate outside the supported range
        or an unknown ``subtype``.
    ComputationError
        If the file cannot be written (see :func:`envpredict.outputs.atomic_write_bytes`).
    """
    import soundfile as sf

    from .outputs import atomic_file

    out = check_wav_path(path)
    fs = check_rate(fs, "signal to write")
    if not isinstance(subtype, str) or not sf.check_format("WAV", subtype):
        raise InputError(f"sample format {subtype!r:.40} cannot be written to WAV", "give e.g. PCM_16, PCM_24 or FLOAT")
    if isinstance(x, (np.ndarray, list, tuple)) or not hasattr(x, "__iter__"):
        x = checks.array(x, "signal to write", ndim=(1, 2))
        blocks, channels = [x], 1 if x.ndim == 1 else x.shape[1]
    else:  # consecutive mono blocks (a long signal written in bounded memory)
        blocks, channels = x, 1
    with atomic_file(out) as fh:
        with sf.SoundFile(fh, "w", samplerate=fs, channels=channels, format="WAV", subtype=subtype) as f:
            for block in blocks:
                f.write(np.asarray(block))
    return out


def _check_path(path: str | os.PathLike, name: str) -> Path:
    p = checks.path(path, name)
    if not p.exists():
        raise InputError(f"{name} '{p}' does not exist", "check the path")
    if p.is_dir():
        raise InputError(f"{name} '{p}' is a folder, not an audio file", "give the path of a WAV, FLAC or OGG file")
    if p.stat().st_size == 0:
        raise InputError(f"{name} '{p}' is empty (0 bytes)", "give a WAV, FLAC or OGG file with audio in it")
    return p


def audio_info(path: str | os.PathLike, name: str = "input") -> tuple[int, int, int]:
    """Return ``(sample_rate, frames, channels)`` of an audio file without reading it.

    Raises
    ------
    InputError
        For a path that is not usable, or a missing, empty or unreadable file.
    """
    import soundfile as sf

    p = _check_path(path, name)
    try:
        info = sf.info(os.fsencode(p))  # the name's own bytes: non-UTF-8 names open too
    except Exception:  # soundfile raises several types for unreadable files
        raise InputError(
            f"{name} '{p}' is not a readable audio file",
            "give a WAV, FLAC or OGG file (other formats: convert first)",
        ) from None
    return int(info.samplerate), int(info.frames), int(info.channels)


def pick_channel(data: np.ndarray, channel: int | None, name: str, source: str) -> np.ndarray:
    """Reduce a (frames, channels) array to one channel, refusing ambiguity.

    Raises
    ------
    InputError
        For data that is not a 1-D or 2-D array, a missing ``channel`` of several, or a
        channel that does not exist.
    """
    data = checks.array(data, f"{name} '{source}'", ndim=(1, 2), min_size=0, finite=False)
    if channel is not None:
        channel = checks.number(channel, "channel", integer=True, fix="give a channel number 0, 1, ...")
    if data.ndim == 1:
        data = data[:, None]
    n_ch = data.shape[1]
    if channel is None:
        if n_ch > 1:
            raise InputError(
                f"{name} '{source}' has {n_ch} channels",
                f"choose one with --channel 0..{n_ch - 1}",
            )
        channel = 0
    if not 0 <= channel < n_ch:
        raise InputError(
            f"channel {channel} does not exist in {name} '{source}' ({n_ch} channel(s))",
            f"use --channel 0..{n_ch - 1}",
        )
    return np.ascontiguousarray(data[:, channel], dtype=np.float64)


def load_audio(
    path: str | os.PathLike,
    channel: int | None = None,
    *,
    name: str = "input",
    check: bool = True,
) -> tuple[np.ndarray, int]:
    """Load one channel of an audio file as float64.

    Parameters
    ----------
    path : path to a WAV, FLAC, OGG (or other libsndfile-readable) file.
    channel : channel index for multi-channel files; ``None`` requires a mono file.
    name : what the file is, for error messages ("impulse response", "clean"...).
    check : run :func:`validate_signal` (finite, not silent, not clipped, rate), by the
        clipping rule of the file's sample format (:attr:`FileSource.subtype`).

    Returns
    -------
    x : ndarray, shape (n,), float64, full scale +-1 (floating-point files may exceed it).
    fs : int sample rate, Hz.

    Raises
    ------
    InputError
        For a path that is not usable, a missing, empty or unreadable file, a missing or
        wrong ``channel``, or (with ``check``) samples refused by :func:`validate_signal`.
    """
    check = checks.flag(check, "check")
    with FileSource(path, channel, name=name) as src:
        x = src.read(0, src.n)
    if check:
        validate_signal(x, src.fs, name=src.name, subtype=src.subtype)
    return x, src.fs


def check_rate(fs: float, name: str = "input") -> int:
    """Refuse sample rates that are not a positive whole number in the supported range
    (the rule is :func:`envpredict.checks.sample_rate`).

    Raises
    ------
    InputError
        For any other rate.
    """
    return checks.sample_rate(fs, name)


def as_mono_array(x, fs: float, name: str = "input", *, hint: str = "") -> tuple[np.ndarray, int]:
    """The shape checks of every array input: a supported rate, numeric samples, one
    channel, not empty. Returns ``(array, fs)`` without copying where possible.

    Raises
    ------
    InputError
        For a rate outside the supported range, or samples that are not a non-empty
        one-channel array of numbers.
    """
    fs = check_rate(fs, name)
    try:
        a = np.asarray(x)
    except (TypeError, ValueError):
        raise InputError(f"{name} is not numeric audio", "pass a 1-D array of samples") from None
    if a.dtype.kind not in "fiu":
        raise InputError(f"{name} is not numeric audio (dtype {a.dtype})", "pass a 1-D array of samples")
    if a.ndim == 2 and 1 in a.shape:
        a = a.reshape(-1)
    if a.ndim != 1:
        raise InputError(
            f"{name} has shape {a.shape}; one channel is needed",
            "select one channel (e.g. x[:, 0], or --channel N)" + hint,
        )
    if a.size == 0:
        raise InputError(f"{name} is empty", "give a signal with samples in it")
    return a, fs


#: Below this ratio of (sum of squared deviations) to (sum of squares) a block's spread
#: is recomputed from the deviations themselves: the one-pass difference would lose its
#: digits to cancellation (a DC offset with little else on it).
CANCELLATION_SHARE: float = 1e-3


class SignalCheck:
    """The input checks of a signal, fed in blocks: the one rule for arrays and streams.

    :func:`validate_signal` feeds a whole array as one block; the streamed jobs feed a
    file block by block. Every figure is accumulated so that the verdict does not depend
    on where the blocks are cut:

    * NaN or infinite samples (refused at the first block that holds one);
    * empty, shorter than ``min_seconds``;
    * silent (RMS below :data:`SILENCE_RMS`) or constant (standard deviation below it);
    * clipped: at least :data:`CLIP_MIN_RUNS` flat tops of at least :data:`CLIP_RUN`
      consecutive samples whose magnitude equals the *global* peak of the signal (clipped,
      then scaled down); for integer (PCM) formats also at least
      :data:`CLIP_MIN_FULL_SCALE_SAMPLES` samples at full scale (``|x| >= CLIP_FULL_SCALE``).
      Floating-point samples (``subtype`` in :data:`FLOAT_SUBTYPES`, or ``None`` for an
      array given through the API) have no full scale: peaks above 1.0 are not clipping.
      When a later block has a higher peak the runs counted so far no longer apply; a run
      crossing a block boundary is counted once. A stretch of digital silence is never
      "at the peak" of a signal that is not silent, so it is not clipping. "At the peak"
      means exactly equal: a tolerance relative to a peak that may still rise could not be
      applied to blocks already passed (clipped tops are equal samples anyway).

    Call :meth:`update` on every block and :meth:`finish` after the last; the errors are
    one-line ``InputError`` messages.

    Parameters
    ----------
    name : what the signal is, for the messages.
    allow_clipping : count clipping (:attr:`clipped`) but do not refuse it.
    min_seconds : shortest accepted length, s (needs ``fs``).
    fs : sample rate, Hz.
    subtype : libsndfile sample format of the file the samples come from
        (:attr:`Source.subtype`, e.g. "PCM_16", "FLOAT"); ``None`` (an array) and the
        :data:`FLOAT_SUBTYPES` are judged by flat tops only, every other format also by
        samples at full scale.

    Examples
    --------
    >>> import numpy as np
    >>> x = 0.5 * np.clip(1.5 * np.sin(np.arange(4800) / 20), -1, 1)
    >>> check = SignalCheck("x", allow_clipping=True)
    >>> for i in range(0, x.size, 1000):
    ...     check.update(x[i: i + 1000])
    >>> check.finish().clipped
    True
    """

    def __init__(self, name: str = "input", *, allow_clipping: bool = False, min_seconds: float = 0.0,
                 fs: float | None = None, subtype: str | None = None, count_clipping: bool = True) -> None:
        self.name = name
        #: with ``False`` (and clipping allowed) the clipping figures are not gathered:
        #: for callers that take clipped input as it is and never ask (``clipped`` is False)
        self.count_clipping = bool(count_clipping) or not allow_clipping
        self.subtype = subtype
        #: samples at full scale count as clipping (integer formats only)
        self.full_scale_rule = subtype is not None and str(subtype).upper() not in FLOAT_SUBTYPES
        self.allow_clipping = allow_clipping
        self.min_seconds = float(min_seconds)
        self.fs = fs
        self.n = 0
        self.sumsq = 0.0
        self._mean = 0.0
        self._m2 = 0.0  # sum of squared deviations from the mean (Chan et al. 1979 update)
        self.full_scale = 0
        self.peak = 0.0
        self._closed_runs = 0  # flat tops at the current peak, ended
        self._open_run = 0  # length of the run at the current peak still open at the last block's end

    def update(self, block: np.ndarray) -> None:
        """Add the next block of samples (any real dtype)."""
        b = np.asarray(block, dtype=np.float64).reshape(-1)
        if b.size == 0:
            return
        total = float(b.sum())  # NaN or inf if any sample is (the slow search only then)
        if not math.isfinite(total):
            finite = np.isfinite(b)
            if not finite.all():
                first = self.n + int(np.argmin(finite))
                raise InputError(f"{self.name} contains NaN or infinite sample(s), the first at sample {first}",
                                 "repair or re-export the file")
        # mean and spread, merged block by block (Chan, Golub & LeVeque 1979)
        n0, nb = self.n, b.size
        m = total / nb
        sq = float(np.dot(b, b))
        m2 = sq - nb * m * m
        if m2 <= CANCELLATION_SHARE * sq:  # spread small beside the mean: the exact two-pass sum
            m2 = float(np.dot(b - m, b - m))
        n1 = n0 + nb
        delta = m - self._mean
        self._mean += delta * nb / n1
        self._m2 += m2 + delta * delta * n0 * nb / n1
        self.n = n1
        self.sumsq += sq
        if not self.count_clipping:
            return
        ab = np.abs(b)
        bp = float(ab.max())
        if bp >= CLIP_FULL_SCALE:
            self.full_scale += int(np.count_nonzero(ab >= CLIP_FULL_SCALE))
        if bp > self.peak:  # a new global peak: earlier runs were below it
            self.peak, self._closed_runs, self._open_run = bp, 0, 0
        if bp < self.peak:
            self._close_run()
            return
        # runs of consecutive samples at the peak, from the (few) positions that hold it
        at = np.flatnonzero(ab == self.peak)
        breaks = np.flatnonzero(np.diff(at) != 1)
        starts = at[np.concatenate(([0], breaks + 1))]
        ends = at[np.concatenate((breaks, [at.size - 1]))] + 1
        runs = ends - starts
        if starts[0] == 0:
            runs[0] += self._open_run  # continues the run open at the end of the last block
        else:
            self._close_run()
        if ends[-1] == b.size:  # the last run stays open
            self._open_run = int(runs[-1])
            runs = runs[:-1]
        else:
            self._open_run = 0
        self._closed_runs += int(np.count_nonzero(runs >= CLIP_RUN))

    def _close_run(self) -> None:
        if self._open_run >= CLIP_RUN:
            self._closed_runs += 1
        self._open_run = 0

    @property
    def flat_runs(self) -> int:
        """Flat tops of at least :data:`CLIP_RUN` samples at the peak so far."""
        return self._closed_runs + (1 if self._open_run >= CLIP_RUN else 0)

    @property
    def clipped(self) -> bool:
        """The clipping verdict for the samples so far."""
        return ((self.full_scale_rule and self.full_scale >= CLIP_MIN_FULL_SCALE_SAMPLES)
                or self.flat_runs >= CLIP_MIN_RUNS)

    @property
    def rms(self) -> float:
        """RMS of the samples so far (full scale 1)."""
        return float(np.sqrt(self.sumsq / self.n)) if self.n else 0.0

    def finish(self) -> "SignalCheck":
        """Refuse the signal if it breaks a rule (``InputError``); return the check."""
        if self.n == 0:
            raise InputError(f"{self.name} is empty", "give a signal with samples in it")
        if self.min_seconds and self.fs and self.n < self.min_seconds * self.fs:
            raise InputError(
                f"{self.name} is {self.n / self.fs:.3f} s long; at least {self.min_seconds:.2f} s is needed",
                "give a longer signal",
            )
        if self.rms < SILENCE_RMS:
            raise InputError(f"{self.name} is silent (all samples zero or below -140 dBFS)",
                             "check the recording chain and file")
        if np.sqrt(max(self._m2, 0.0) / self.n) < SILENCE_RMS:
            raise InputError(f"{self.name} holds only a constant (DC) value", "check the recording chain and file")
        if self.clipped and not self.allow_clipping:
            raise InputError(
                f"{self.name} is clipped (flat tops at the peak level)",
                "record again with less gain; a clipped signal gives wrong modulation depths",
            )
        return self


def validate_signal(
    x: np.ndarray,
    fs: float,
    *,
    name: str = "input",
    allow_clipping: bool = False,
    min_seconds: float = 0.0,
    subtype: str | None = None,
) -> np.ndarray:
    """Check a signal once, at the boundary, and return it as a 1-D float64 array.

    Refuses (``InputError``): non-numeric or multi-dimensional arrays, empty input,
    NaN/inf, silence, a constant (DC) signal, digital clipping, sample rates outside
    the supported range and inputs shorter than ``min_seconds``. The rule is
    :class:`SignalCheck`, fed the whole array as one block: a file streamed in blocks
    gets the same verdict.

    Parameters
    ----------
    x : 1-D signal (a (n, 1) or (1, n) array is taken as 1-D).
    fs : sample rate, Hz.
    name : what the signal is, for error messages.
    allow_clipping : accept clipped signals (a degraded signal may be clipped).
    min_seconds : shortest accepted length, s.
    subtype : sample format of the file the samples were read from (see
        :class:`SignalCheck`); ``None`` for an array, judged as floating point.

    Returns
    -------
    ndarray, shape (n,), float64 (the input itself when it already is).

    Raises
    ------
    InputError
        For any of the inputs refused above, or a ``min_seconds`` that is not a number of 0 or more.
    """
    min_seconds = checks.number(min_seconds, "shortest length", lo=0.0)
    allow_clipping = checks.flag(allow_clipping, "allow_clipping")
    a, fs = as_mono_array(x, fs, name)
    a = a.astype(np.float64, copy=False)
    # clipping allowed: its figures would not be used (only the array is returned)
    check = SignalCheck(name, allow_clipping=allow_clipping, min_seconds=min_seconds, fs=fs, subtype=subtype,
                        count_clipping=not allow_clipping)
    check.update(a)
    check.finish()
    return a


def is_clipped(x: np.ndarray, subtype: str | None = None) -> bool:
    """Digital clipping by the rule of :class:`SignalCheck` (repeated flat tops at the
    global peak, or for an integer ``subtype`` samples at full scale).

    Raises
    ------
    InputError
        If ``x`` is not an array of numbers.
    """
    check = SignalCheck(allow_clipping=True, subtype=subtype)
    check.update(checks.array(x, "signal", ndim=(1, 2), min_size=0, finite=False))
    return check.clipped


def resample(x: np.ndarray, fs_in: int, fs_out: int) -> np.ndarray:
    """Resample with a polyphase FIR: ``scipy.signal.resample_poly`` (see :func:`polyphase`).

    Raises
    ------
    InputError
        For a signal that is not a 1-D array of finite numbers or a rate outside the
        supported range.
    """
    fs_in, fs_out = check_rate(fs_in, "input"), check_rate(fs_out, "output")
    x = checks.array(x, "signal", min_size=0)
    if int(fs_in) == int(fs_out):
        return np.asarray(x, dtype=np.float64)
    up, down = resample_ratio(fs_in, fs_out)
    return polyphase(np.asarray(x, dtype=np.float64), up, down)


#: Largest polyphase matrix (entries) :func:`polyphase` builds; above it (ratios with large
#: factors on both sides) scipy's filter runs instead. 2**20 doubles = 8 MiB, cached once.
POLYPHASE_MATRIX_MAX: int = 1 << 20
#: Largest up or down factor :func:`polyphase` takes: that of two rates within
#: :data:`MIN_RATE_HZ`..:data:`MAX_RATE_HZ` with no common divisor (a larger one asks
#: for a filter of millions of taps).
POLYPHASE_MAX_FACTOR: int = MAX_RATE_HZ
#: Output periods (``up`` samples each) computed per matrix product: keeps the strided
#: input copy of one product (periods x taps doubles) small enough for the cache.
POLYPHASE_BLOCK: int = 2048


@lru_cache(maxsize=8)
def _polyphase_matrix(up: int, down: int) -> tuple[np.ndarray, int]:
    """scipy's default ``resample_poly`` filter rearranged as a (taps, up) matrix.

    ``resample_poly(x, up, down)`` is ``y[k] = sum_m x[m] h[k down - m up + half]`` with
    ``h`` the Kaiser-windowed (beta 5) sinc of ``2 half + 1`` taps, ``half = 10
    max(up, down)``, cut-off ``1 / max(up, down)``, gain ``up``. Writing ``k = p up + r``
    and ``m = p down + q`` makes ``y[p up + r] = sum_q x[p down + q] M[q - q0, r]`` with
    ``M[q - q0, r] = h[r down - q up + half]``: one matrix product per block of output
    periods. Returns ``(M, q0)``.
    """
    from scipy.signal import firwin

    rate = max(up, down)
    half = 10 * rate
    h = firwin(2 * half + 1, 1.0 / rate, window=("kaiser", 5.0)) * up
    q0 = -((h.size - 1 - half) // up) - 1
    q1 = ((up - 1) * down + half) // up + 1
    q = np.arange(q0, q1 + 1)[:, None]
    idx = np.arange(up)[None, :] * down - q * up + half
    ok = (idx >= 0) & (idx < h.size)
    m = np.where(ok, h[np.clip(idx, 0, h.size - 1)], 0.0)
    m.flags.writeable = False
    return m, int(q0)


def polyphase(x: np.ndarray, up: int, down: int) -> np.ndarray:
    """``scipy.signal.resample_poly(x, up, down)`` (default filter, zero padding) of a 1-D
    float array, equal to it within float rounding.

    Where ``up > 1`` the filter runs as blocks of matrix products (see
    :func:`_polyphase_matrix`), which uses the CPU's vector units and is about twice as
    fast as scipy's tap-by-tap loop for ratios such as 16 kHz to 10 kHz; otherwise (pure
    decimation, or a matrix above :data:`POLYPHASE_MATRIX_MAX`) scipy's filter runs.

    The checks here are O(1) (type, dimensions, the factors): ``x`` is an array the
    caller has validated (its values are not scanned again).

    Raises
    ------
    InputError
        ``x`` is not a 1-D array of real numbers, ``up`` or ``down`` is not a whole number
        from 1 to :data:`POLYPHASE_MAX_FACTOR`, or the result would hold more than
        :data:`envpredict.checks.MAX_SAMPLES` values.
    """
    from numpy.lib.stride_tricks import as_strided

    if not isinstance(x, np.ndarray) or x.ndim != 1 or x.dtype.kind not in "fiu":
        kind = f"a {x.ndim}-D array of {x.dtype}" if isinstance(x, np.ndarray) else type(x).__name__
        raise InputError(f"the signal to resample is {kind}, not a 1-D array of real numbers",
                         "pass a 1-D float array")
    for v, what in ((up, "up"), (down, "down")):
        if (isinstance(v, (bool, np.bool_)) or not isinstance(v, (int, np.integer))
                or not 1 <= v <= POLYPHASE_MAX_FACTOR):
            raise InputError(f"resampling factor {what} is not a whole number from 1 to {POLYPHASE_MAX_FACTOR}",
                             "give the factors of resample_ratio")
    up, down = int(up), int(down)
    if x.size * up // down > checks.MAX_SAMPLES:
        raise InputError(f"resampling {x.size} samples by {up}/{down} gives more than {checks.MAX_SAMPLES}",
                         "resample a shorter signal")
    x = np.ascontiguousarray(x, dtype=np.float64)
    rate = max(up, down)
    taps = -(-(20 * rate + 1) // up) + down + 2
    if up < 2 or taps * up > POLYPHASE_MATRIX_MAX or x.size == 0:
        from scipy.signal import resample_poly

        return resample_poly(x, up, down)
    m, q0 = _polyphase_matrix(up, down)
    n_out = -(-x.size * up // down)
    periods = -(-n_out // up)
    width = m.shape[0]
    padded = np.zeros((periods - 1) * down + width)
    padded[-q0 : -q0 + x.size] = x[: padded.size + q0]
    step = padded.strides[0]
    windows = as_strided(padded, shape=(periods, width), strides=(step * down, step), writeable=False)
    out = np.empty(periods * up)
    for p0 in range(0, periods, POLYPHASE_BLOCK):
        p1 = min(periods, p0 + POLYPHASE_BLOCK)
        np.matmul(windows[p0:p1], m, out=out[p0 * up : p1 * up].reshape(p1 - p0, up))
    return out[:n_out]



#: Environment variables that limit the threads of numeric libraries (batch workers set
#: them to 1).
THREAD_LIMIT_VARS: tuple[str, ...] = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")


def usable_cores() -> int:
    """Cores this process may run on."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def resample_ratio(fs_in: int, fs_out: int) -> tuple[int, int]:
    """``(up, down)`` factors of the polyphase resampling from ``fs_in`` to ``fs_out``
    (the ratio in lowest terms, denominator at most 2000).

    Raises
    ------
    InputError
        For a rate outside the supported range (:func:`check_rate`).
    """
    fs_in, fs_out = check_rate(fs_in, "input"), check_rate(fs_out, "output")
    r = Fraction(int(fs_out), int(fs_in)).limit_denominator(2000)
    return r.numerator, r.denominator


#: Delay finders of :func:`find_delay`: ``"gcc-phat"``, the generalized cross-correlation
#: with the phase transform (Knapp & Carter 1976), and ``"waveform"``, the peak of the
#: plain waveform cross-correlation.
DELAY_METHODS: tuple[str, ...] = ("gcc-phat", "waveform")

#: GCC-PHAT: width of the rectangular (Daniell) smoothing of the cross-spectrum's
#: magnitude before the phase transform divides by it, Hz. Knapp & Carter's weighting
#: uses *estimated* spectra; the raw one-periodogram magnitude makes every bin count
#: alike, noise-only bins included. On the bundled corpus (a hall with early reflections
#: at -5 dB, -3 dB SNR) 0 Hz put 5 of 24 pairs on a reflection, 8 Hz 3, 16 Hz none
#: (judgement from that trial; the delay found does not depend on it for a clean copy).
GCC_SMOOTH_HZ: float = 16.0

#: Peaks within this distance of the highest one count as the same peak when the
#: confidence (highest peak over the next one) is formed, s (judgement: wider than the
#: main lobe of a speech band's correlation, narrower than the gap to an early reflection).
DELAY_PEAK_GUARD_S: float = 0.001


@dataclass(frozen=True)
class DelayCurve:
    """A cross-correlation over the lags searched, ``values[i]`` at lag ``lags[i]`` (samples).

    GCC-PHAT curves of several pairs at one rate can be added (:func:`pooled_delay`):
    each peaks near 1 for a clean delay, whatever the level of its signals.
    """

    fs: int
    lags: np.ndarray
    values: np.ndarray
    method: str


@dataclass(frozen=True)
class DelayEstimate:
    """Delay of a signal relative to its reference, as found by :func:`find_delay`.

    Attributes
    ----------
    lag : samples at ``fs``: ``x[n + lag]`` lines up with ``reference[n]`` (positive: late).
    fs : sample rate, Hz.
    correlation : normalised waveform correlation at ``lag`` (1 for an exact copy; negative
        for inverted polarity).
    peak_correlation : the largest magnitude of the normalised waveform correlation over
        the lags searched (whether the two hold the same signal at all).
    confidence : the highest peak of the method's curve over the highest value more than
        :data:`DELAY_PEAK_GUARD_S` away from it (1: two equal candidates; larger is clearer).
    method : one of :data:`DELAY_METHODS`.
    """

    lag: int
    fs: int
    correlation: float
    peak_correlation: float
    confidence: float
    method: str

    @property
    def delay_ms(self) -> float:
        return self.lag / self.fs * 1000.0

    def to_dict(self) -> dict:
        return {"delay_ms": round(self.delay_ms, 3), "delay_samples": int(self.lag), "method": self.method,
                "correlation": round(self.correlation, 4), "peak_correlation": round(self.peak_correlation, 4),
                "confidence": round(self.confidence, 3)}


def _check_delay_method(method: str) -> str:
    if not isinstance(method, str) or method not in DELAY_METHODS:
        raise InputError(f"delay method '{method}' is not known", f"give one of {', '.join(DELAY_METHODS)}")
    return method


def _peak(values: np.ndarray, fs: int) -> tuple[int, float]:
    """Index of the largest magnitude and its ratio to the largest magnitude farther than
    :data:`DELAY_PEAK_GUARD_S` from it (inf when there is none or it is zero)."""
    a = np.abs(values)
    i = int(np.argmax(a))
    g = max(1, int(round(DELAY_PEAK_GUARD_S * fs)))
    rest = np.concatenate([a[: max(0, i - g)], a[i + g + 1:]])
    second = float(rest.max()) if rest.size else 0.0
    return i, (float(a[i]) / second if second > 0 else math.inf)


def _excerpts(ref_src: "Source", x_src: "Source", max_delay_s: float, near: int,
              excerpt_s: float | None) -> tuple[np.ndarray, np.ndarray, int, int, int]:
    """The reference excerpt (DC removed), the stretch of ``x`` widened by the search range
    (DC removed; zeros outside ``x``), the search half-width d, the excerpt start and length."""
    max_delay_s = checks.number(max_delay_s, "maximum delay", lo=0.0, hi=MAX_DELAY_S)
    near = checks.number(near, "start of the excerpt", lo=0, hi=checks.MAX_SAMPLES, integer=True)
    excerpt_s = checks.optional_number(excerpt_s, "excerpt length", lo=0.0, lo_open=True, hi=ALIGN_EXCERPT_S)
    rate = ref_src.fs
    d = round(max_delay_s * rate)
    w = min(ref_src.n, int((ALIGN_EXCERPT_S if excerpt_s is None else excerpt_s) * rate))
    s0 = max(0, min(int(near), ref_src.n - w))
    # without their DC: a constant offset (of a recorder, a processing chain) correlates
    # with itself at every lag and would outweigh the waveform
    ref = ref_src.read(s0, s0 + w)
    ref = ref - ref.mean()
    sig = x_src.read(s0 - d, s0 + w + d)
    sig = sig - sig.mean()
    return ref, sig, d, s0, w


def _normalised_at(ref: np.ndarray, x_src: "Source", s0: int, w: int, lag: int, raw: float) -> float:
    matched = x_src.read(s0 + lag, s0 + lag + w)
    matched = matched - matched.mean()
    den = math.sqrt(float(np.dot(ref, ref)) * float(np.dot(matched, matched)))
    return float(raw / den) if den > 0 else 0.0


def find_delay(
    reference: "Source | np.ndarray",
    x: "Source | np.ndarray",
    fs: int | None = None,
    max_delay_s: float = 1.0,
    *,
    near: int = 0,
    excerpt_s: float | None = None,
    method: str = "gcc-phat",
    curve: bool = False,
) -> "DelayEstimate | tuple[DelayEstimate, DelayCurve]":
    """Delay of ``x`` relative to ``reference``, with its confidence (the one delay finder).

    The search uses an excerpt of the reference of at most ``excerpt_s`` (default
    :data:`ALIGN_EXCERPT_S`) starting as close to sample ``near`` (e.g. the loudest
    stretch of a long input) as the length allows, and the matching stretch of ``x``
    widened by ``max_delay_s`` on each side (zeros outside ``x``): memory stays bounded
    however long the signals are.

    ``method="gcc-phat"``: the generalized cross-correlation with the phase transform
    (PHAT) weighting, the inverse transform of G_xy(f) / |G_xy(f)|, where the magnitude
    is the cross-spectrum's smoothed over :data:`GCC_SMOOTH_HZ`. Whitening the
    cross-spectrum turns the broad correlation of speech into a sharp peak at each path
    of the transfer: the direct sound then stands out from reflections and reverberation
    that pile up into the plain waveform correlation's peak. ``method="waveform"``: the
    peak of the plain cross-correlation (the lag of best waveform match).

    Parameters
    ----------
    reference, x : :class:`Source` objects at the same rate, or 1-D arrays (then ``fs``
        is needed).
    fs : sample rate of arrays, Hz (ignored for sources).
    max_delay_s : largest delay searched, s (both directions).
    near : sample of the reference the excerpt should start at.
    excerpt_s : longest excerpt of the reference used, s.
    method : one of :data:`DELAY_METHODS`.
    curve : also return the method's curve over the lags (to pool several pairs with
        :func:`pooled_delay`).

    Returns
    -------
    DelayEstimate, or ``(DelayEstimate, DelayCurve)`` with ``curve=True``.

    Raises
    ------
    InputError
        For signals the one validation rule refuses, sources at different rates, a
        ``max_delay_s``, ``near`` or ``excerpt_s`` out of range, or an unknown method.

    References
    ----------
    C. H. Knapp and G. C. Carter, "The generalized correlation method for estimation of
    time delay", IEEE Trans. Acoust., Speech, Signal Process. 24(4), 320-327, 1976.

    Examples
    --------
    >>> import numpy as np
    >>> ref = np.random.default_rng(0).standard_normal(8000)
    >>> est = find_delay(ref, np.concatenate([np.zeros(120), ref]), 8000, 0.1)
    >>> est.lag, round(est.correlation, 6)
    (120, 1.0)
    """
    from numpy.fft import irfft, rfft

    _check_delay_method(method)
    ref_src, x_src = _as_source(reference, fs, "reference"), _as_source(x, fs, "signal")
    rate = ref_src.fs
    ref, sig, d, s0, w = _excerpts(ref_src, x_src, max_delay_s, near, excerpt_s)
    nf = 1 << max(1, (ref.size + sig.size - 1)).bit_length()
    cross = np.conj(rfft(ref, nf)) * rfft(sig, nf)
    plain = irfft(cross, nf)[: 2 * d + 1]  # index i -> lag i - d
    i_w, conf_w = _peak(plain, rate)
    peak_corr = _normalised_at(ref, x_src, s0, w, i_w - d, float(plain[i_w]))
    if method == "waveform":
        values, i, conf = plain, i_w, conf_w
    else:
        from scipy.ndimage import uniform_filter1d

        mag = np.abs(cross)
        k = max(1, int(round(GCC_SMOOTH_HZ * nf / rate)) | 1)
        if k > 1:
            mag = uniform_filter1d(mag, k, mode="nearest")
        floor = 1e-12 * float(mag.max()) if mag.size and mag.max() > 0 else 1.0
        values = irfft(cross / np.maximum(mag, floor), nf)[: 2 * d + 1]
        i, conf = _peak(values, rate)
    lag = i - d
    corr = peak_corr if i == i_w else _normalised_at(ref, x_src, s0, w, lag, float(plain[i]))
    est = DelayEstimate(lag=int(lag), fs=int(rate), correlation=corr, peak_correlation=abs(peak_corr),
                        confidence=conf, method=method)
    if curve:
        return est, DelayCurve(fs=int(rate), lags=np.arange(-d, d + 1), values=values, method=method)
    return est


def pooled_delay(curves: "list[DelayCurve]") -> tuple[int, float]:
    """One delay for several pairs: the peak of the sum of their curves.

    A processing chain has one latency; adding the GCC-PHAT curves of its items keeps
    the peak they share and averages away the reflections and noise peaks where they
    differ (all curves must have the same rate and lags).

    Returns
    -------
    lag : samples; confidence : the peak ratio of the summed curve (see :class:`DelayEstimate`).

    Raises
    ------
    InputError
        For no curves, anything that is not a :class:`DelayCurve`, or curves of different
        rates or lags.
    """
    if isinstance(curves, (str, bytes)) or not isinstance(curves, (list, tuple)) or not curves:
        raise InputError("no delay curves to pool", "give the curves of find_delay(..., curve=True), one per pair")
    if not all(isinstance(c, DelayCurve) for c in curves):
        raise InputError("a curve to pool is not a DelayCurve", "give the curves of find_delay(..., curve=True)")
    first = curves[0]
    for c in curves[1:]:
        if c.fs != first.fs or c.lags.size != first.lags.size or c.lags[0] != first.lags[0]:
            raise InputError("delay curves to pool differ in rate or lags",
                             "pool only pairs at one rate searched over the same maximum delay")
    total = np.sum([c.values for c in curves], axis=0)
    i, conf = _peak(total, first.fs)
    return int(first.lags[i]), conf


def estimate_delay(
    reference: "Source | np.ndarray",
    x: "Source | np.ndarray",
    fs: int | None = None,
    max_delay_s: float = 1.0,
    *,
    near: int = 0,
    excerpt_s: float | None = None,
    method: str = "waveform",
) -> tuple[int, float]:
    """Delay of ``x`` relative to ``reference``: :func:`find_delay` as a plain pair.

    The default method here is the plain waveform cross-correlation peak (the sweep
    deconvolution and the direct method use it, where the signals are copies of each
    other); the pair job uses GCC-PHAT through :func:`find_delay`.

    Returns
    -------
    lag : int, samples: ``x[n + lag]`` lines up with ``reference[n]`` (positive: ``x``
        is late).
    correlation : float, the cross-correlation at ``lag`` divided by the root of the
        energies of the reference excerpt and of the stretch of ``x`` it is matched
        with (1 for an exact delayed copy, near 0 for unrelated signals; negative for
        inverted polarity).

    Raises
    ------
    InputError
        For signals refused by :func:`as_source`, a ``max_delay_s`` outside
        0..:data:`MAX_DELAY_S`, a negative ``near`` or an ``excerpt_s`` that is not positive.

    Examples
    --------
    >>> import numpy as np
    >>> ref = np.random.default_rng(0).standard_normal(8000)
    >>> lag, corr = estimate_delay(ref, np.concatenate([np.zeros(120), ref]), 8000, 0.1)
    >>> lag, round(corr, 6)
    (120, 1.0)
    """
    est = find_delay(reference, x, fs, max_delay_s, near=near, excerpt_s=excerpt_s, method=method)
    return est.lag, est.correlation


def zero_lag_correlation(reference: "Source | np.ndarray", x: "Source | np.ndarray", fs: int | None = None, *,
                         excerpt_s: float | None = None) -> float:
    """Normalised correlation of two signals taken as aligned (lag 0), over their common
    start of at most ``excerpt_s`` (default :data:`ALIGN_EXCERPT_S`).

    Raises
    ------
    InputError
        For signals refused by :func:`as_source` or an ``excerpt_s`` that is not positive.
    """
    excerpt_s = checks.optional_number(excerpt_s, "excerpt length", lo=0.0, lo_open=True, hi=ALIGN_EXCERPT_S)
    ref_src, x_src = _as_source(reference, fs, "reference"), _as_source(x, fs, "signal")
    w = min(ref_src.n, x_src.n, int((ALIGN_EXCERPT_S if excerpt_s is None else excerpt_s) * ref_src.fs))
    a, b = ref_src.read(0, w), x_src.read(0, w)
    den = math.sqrt(float(np.dot(a, a)) * float(np.dot(b, b)))
    return float(np.dot(a, b) / den) if den > 0 else 0.0


def rms_dbfs(x: np.ndarray) -> float:
    """RMS level in dB re full scale (a full-scale sine reads -3.01 dBFS).

    Raises
    ------
    InputError
        If ``x`` is not a non-empty array of finite numbers.
    """
    x = checks.array(x, "signal", ndim=(1, 2))
    r = float(np.sqrt(np.mean(np.square(x, dtype=np.float64))))
    return 20.0 * np.log10(r) if r > 0 else -np.inf


#: Oversampling factor of the true-peak estimate (ITU-R BS.1770-4 Annex 2: 4x).
TRUE_PEAK_OVERSAMPLING: int = 4


def true_peak(x: np.ndarray) -> float:
    """True (inter-sample) peak magnitude of a signal, full scale = 1, estimated as in
    ITU-R BS.1770-4 Annex 2: the signal is oversampled :data:`TRUE_PEAK_OVERSAMPLING`
    times and the largest magnitude taken (never below the sample peak).

    The interpolation filter is the polyphase low-pass of :func:`polyphase`
    (``scipy.signal.resample_poly``'s Kaiser-windowed sinc, 20 taps per phase), not the
    annex's 48-tap example filter; the annex allows any filter meeting its
    specification. As the annex says, 4x oversampling may under-read a peak near the
    Nyquist frequency (by up to about 0.7 dB at fs/2); in dB TP it is ``20 log10`` of
    the value.

    Raises
    ------
    InputError
        If ``x`` is not a non-empty 1-D array of finite numbers, or too long to oversample.

    References
    ----------
    ITU-R BS.1770-4 (10/2015), Annex 2, "Guidelines for accurate measurement of
    'true-peak' level".
    """
    x = checks.array(x, "signal")
    sample_peak = float(np.max(np.abs(x)))
    if sample_peak == 0.0:
        return 0.0
    y = polyphase(np.asarray(x, dtype=np.float64), TRUE_PEAK_OVERSAMPLING, 1)
    return max(sample_peak, float(np.max(np.abs(y))))


# ---------------------------------------------------------------------------
# Sources: one channel of a signal, read in blocks
# ---------------------------------------------------------------------------


class Source:
    """One channel of a signal, ``n`` samples at ``fs`` Hz, read a stretch at a time.

    :meth:`read` returns samples ``start .. stop-1`` as float64 with zeros outside
    ``0 .. n-1`` (so filter margins and shifted views need no special case);
    :meth:`blocks` iterates over consecutive blocks. Every job that reads a signal in
    pieces (the direct method, the pair job, inspection, STOI) reads it through a source,
    so an array in memory and a file on disk take the same path. Subclasses implement
    ``_read(start, stop)`` for ``0 <= start < stop <= n``.
    """

    n: int
    fs: int
    name: str
    #: libsndfile sample format of the file behind the source ("PCM_16", "FLOAT", ...);
    #: ``None`` for an array (judged as floating point by :class:`SignalCheck`).
    subtype: str | None = None

    def _read(self, start: int, stop: int) -> np.ndarray:  # pragma: no cover - interface
        raise NotImplementedError

    def read(self, start: int, stop: int) -> np.ndarray:
        """Samples ``start .. stop-1`` (float64), zeros outside the signal."""
        start, stop = int(start), int(stop)
        a, b = max(0, start), min(self.n, stop)
        if a >= b:
            return np.zeros(max(0, stop - start))
        core = self._read(a, b)
        if a == start and b == stop:
            return core
        return np.concatenate([np.zeros(a - start), core, np.zeros(stop - b)])

    def blocks(self, block: int, start: int = 0, stop: int | None = None) -> Iterator[np.ndarray]:
        """Consecutive blocks of ``block`` samples from ``start`` to ``stop`` (default: the end)."""
        block = max(1, int(block))
        stop = self.n if stop is None else min(self.n, int(stop))
        for a in range(int(start), stop, block):
            yield self.read(a, min(stop, a + block))

    def close(self) -> None:
        """Release the underlying file, if any."""

    def __enter__(self) -> "Source":
        return self

    def __exit__(self, *exc) -> None:
        self.close()


class ArraySource(Source):
    """A 1-D array as a source (kept as given; blocks are converted to float64 when read)."""

    def __init__(self, x: np.ndarray, fs: int, name: str = "input") -> None:
        self.a = np.asarray(x).reshape(-1)
        self.n, self.fs, self.name = int(self.a.size), int(fs), name

    def _read(self, start: int, stop: int) -> np.ndarray:
        return np.asarray(self.a[start:stop], dtype=np.float64)


class FileSource(Source):
    """One channel of an audio file as a source, read by seeking (memory: one block).

    ``name`` says what the file is ("recording", "clean"...); messages name it as
    ``name 'path'`` (attribute :attr:`name`). A multi-channel file without ``channel``
    is refused before any reading; a damaged or truncated file gives the usual one-line
    ``InputError`` when a read comes up short. The sample rate is not checked here (the
    jobs check it against their own needs).
    """

    def __init__(self, path: str | os.PathLike, channel: int | None = None, *, name: str = "input") -> None:
        import soundfile as sf

        fs, frames, n_ch = audio_info(path, name)
        if frames == 0:
            raise InputError(f"{name} '{path}' contains no samples", "give a file with audio in it")
        pick_channel(np.zeros((1, n_ch)), channel, name, str(path))
        self.path, self.channel, self.kind = str(path), channel, name
        self.fs, self.n, self.name = int(fs), int(frames), f"{name} '{path}'"
        try:
            self._f = sf.SoundFile(os.fsencode(self.path))
        except Exception:
            raise InputError(f"{name} '{path}' is not a readable audio file",
                             "give a WAV, FLAC or OGG file (other formats: convert first)") from None
        self.subtype = str(self._f.subtype)
        self._pos = 0

    def _read(self, start: int, stop: int) -> np.ndarray:
        n = stop - start
        try:
            if start != self._pos:
                self._f.seek(start)
            data = self._f.read(n, dtype="float64", always_2d=True)
        except Exception:  # soundfile raises several types for damaged files
            data = np.zeros((0, 1))
        self._pos = start + data.shape[0]
        if data.shape[0] != n:
            self._pos = -1
            raise InputError(f"{self.name} could not be decoded (truncated or damaged file?)",
                             "re-export the file as WAV or FLAC")
        return pick_channel(data, self.channel, self.kind, self.path)

    def close(self) -> None:
        self._f.close()


class Resampled(Source):
    """``scipy.signal.resample_poly`` of a source, computed per block exactly as on the
    whole signal (the ratio as in :func:`resample`).

    A block of output samples is computed from an input stretch that starts on a
    multiple of the decimation factor (so the output grids coincide) and extends by the
    filter half-length on both sides; the outputs of the margins are dropped.
    """

    def __init__(self, src: Source, fs_out: int) -> None:
        self.src = src
        self.up, self.down = resample_ratio(src.fs, fs_out)
        self.fs, self.name, self.subtype = int(fs_out), src.name, src.subtype
        self.n = -(-src.n * self.up // self.down)
        half_len = 10 * max(self.up, self.down)  # scipy's default filter half-length
        self.margin = half_len // self.up + 4 + self.down

    def _read(self, a: int, b: int) -> np.ndarray:
        i0 = max(0, ((a * self.down) // self.up - self.margin) // self.down * self.down)
        i1 = min(self.src.n, -(-(b * self.down) // self.up) + self.margin)
        seg = polyphase(self.src.read(i0, i1), self.up, self.down)
        off = i0 * self.up // self.down
        return seg[a - off: b - off]


class Window(Source):
    """Samples ``offset .. offset+n-1`` of a source as a new signal (zeros outside the source)."""

    def __init__(self, src: Source, offset: int, n: int) -> None:
        self.src, self.offset, self.n, self.fs, self.name = src, int(offset), int(n), src.fs, src.name
        self.subtype = src.subtype

    def _read(self, a: int, b: int) -> np.ndarray:
        return self.src.read(a + self.offset, b + self.offset)


def as_source(x, fs: float, name: str = "input", *, hint: str = "") -> ArraySource:
    """An array input as a source, after the shape checks of :func:`as_mono_array`.

    Raises
    ------
    InputError
        As :func:`as_mono_array`.
    """
    a, fs = as_mono_array(x, fs, name, hint=hint)
    return ArraySource(a, fs, name)


def _as_source(x, fs: int | None, name: str) -> Source:
    if isinstance(x, Source):
        return x
    if fs is None:
        raise InputError(f"no sample rate given for the {name} array", "pass fs")
    return as_source(x, fs, name)


# ---------------------------------------------------------------------------
# Calibration
# ---------------------------------------------------------------------------


def calibration_from_tone(x: np.ndarray, fs: int, level_db: float, *, name: str = "calibrator recording") -> float:
    """Calibration offset from a recording of a 1 kHz calibrator at a stated level.

    Returns ``C`` such that a signal's level in dB SPL is ``rms_dbfs(signal) + C``.
    The tone's level is taken in the 1 kHz octave band over the middle 80 % of the
    recording. Source of the method: IEC 60942:2017 (sound calibrators at 1 kHz).

    Parameters
    ----------
    x : recording of the calibrator, 1 s or more.
    fs : sample rate, Hz (the octave bands up to 8 kHz must fit).
    level_db : level printed on the calibrator, dB SPL.
    name : what the recording is, for error messages.

    Returns
    -------
    float, dB SPL of a full-scale RMS signal.

    Raises
    ------
    InputError
        For a recording that is not a steady 1 kHz calibrator tone, or a level outside
        :data:`CALIBRATOR_LEVEL_RANGE_DB`.
    """
    from . import standards as std
    from .bands import check_rate_for_octaves, octave_bands

    try:
        lvl = float(level_db)
    except (TypeError, ValueError):
        raise InputError(f"calibrator level '{level_db}' is not a number", "give it in dB SPL, e.g. 94") from None
    lo, hi = CALIBRATOR_LEVEL_RANGE_DB
    if not np.isfinite(lvl) or not lo <= lvl <= hi:
        raise InputError(f"calibrator level {level_db} dB is implausible",
                         f"give the level printed on the calibrator, {lo:.0f}..{hi:.0f} dB SPL (often 94 or 114)")
    x = validate_signal(x, fs, name=name, min_seconds=1.0)
    check_rate_for_octaves(int(fs), name)
    n = x.size
    mid = x[int(0.1 * n): int(0.9 * n)]
    spec = np.abs(np.fft.rfft(mid * np.hanning(mid.size)))
    fpk = float(np.argmax(spec)) * fs / mid.size
    k1 = std.OCTAVE_BANDS_HZ.index(std.CALIBRATOR_HZ)
    band = octave_bands(mid, fs)[k1]
    share = float(np.sum(band ** 2) / np.sum(mid ** 2))
    if abs(fpk / std.CALIBRATOR_HZ - 1.0) > CALIBRATOR_FREQ_TOLERANCE or share < CALIBRATOR_BAND_SHARE:
        raise InputError(
            f"{name} is not a 1 kHz calibrator tone (spectral peak at {fpk:.0f} Hz, "
            f"{100 * share:.0f} % of the energy in the 1 kHz octave)",
            "record the calibrator on the measurement microphone, with nothing else sounding",
        )
    return lvl - rms_dbfs(band)


def check_calibration_db(value: float | None) -> float | None:
    """Refuse a calibration offset (dB SPL of a full-scale RMS signal) that is not a
    plausible number; ``None`` (no calibration) passes.

    Raises
    ------
    InputError
        For an offset that is not a finite number in the plausible range.
    """
    if value is None:
        return None
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"calibration '{value}' is not a number",
                         "give the dB SPL of a full-scale RMS signal") from None
    lo, hi = CALIBRATION_RANGE_DB
    if not np.isfinite(v) or not lo <= v <= hi:
        raise InputError(f"calibration {value} dB is implausible",
                         "give the dB SPL that a full-scale RMS signal (0 dBFS) corresponds to, e.g. 120")
    return v


def resolve_calibration(
    calibration_db: float | None = None,
    calibrator: str | os.PathLike | None = None,
    calibrator_level: float | None = None,
    channel: int | None = None,
) -> tuple[float | None, str | None]:
    """One calibration from either an offset or a calibrator recording.

    Parameters
    ----------
    calibration_db : dB SPL of a full-scale RMS signal (:func:`check_calibration_db`).
    calibrator : recording of a 1 kHz acoustic calibrator made with the same gain
        (instead of ``calibration_db``), analysed by :func:`calibration_from_tone`.
    calibrator_level : the calibrator's level, dB SPL (required with ``calibrator``).
    channel : channel of a multi-channel calibrator recording.

    Returns
    -------
    (calibration_db, source) : the offset, or ``None`` without a calibration; ``source``
        is "offset", "calibrator" or ``None``.

    Raises
    ------
    InputError
        For an offset together with a calibrator, a calibrator without its level, a
        calibrator recording that cannot be read or is not a 1 kHz tone, or a value out of range.
    """
    if calibration_db is not None and calibrator is not None:
        raise InputError("both --calibration-db and --calibrator were given", "give one of them")
    if calibrator is not None:
        if calibrator_level is None:
            raise InputError("--calibrator needs --calibrator-level", "give the calibrator's level in dB SPL, e.g. 94")
        x, fs = load_audio(calibrator, channel, name="calibrator recording")
        return calibration_from_tone(x, fs, calibrator_level), "calibrator"
    if calibrator_level is not None:
        raise InputError("--calibrator-level was given without --calibrator", "give the calibrator recording too")
    cal = check_calibration_db(calibration_db)
    return cal, ("offset" if cal is not None else None)


# ---------------------------------------------------------------------------
# Octave-band levels of a calibrated recording
# ---------------------------------------------------------------------------

#: Shortest recording whose octave-band levels are measured, s. For steady noise the
#: standard deviation of a band level measured over T seconds is about 4.34 / sqrt(B T)
#: dB (B the bandwidth, Hz): 0.2 dB in the 125 Hz band (B = 88 Hz) after 5 s.
MIN_LEVEL_SECONDS: float = 5.0

#: Block length for reading a level recording, s (bounds memory; no result depends on it).
LEVEL_BLOCK_SECONDS: float = 20.0


def _band_levels_of(src: Source, calibration_db: float, check: SignalCheck | None) -> np.ndarray:
    from . import standards as std
    from .bands import EnvelopeStream, check_rate_for_octaves

    fs = check_rate(src.fs, src.name)
    check_rate_for_octaves(fs, src.name)
    if src.n < MIN_LEVEL_SECONDS * fs:
        raise InputError(f"{src.name} is {src.n / fs:.1f} s long; its band levels need at least "
                         f"{MIN_LEVEL_SECONDS:g} s", "record at least 10 s of the steady noise")
    # one causal pass of the STI's octave filters: its effective bandwidth is within
    # 0.2 dB of the nominal band, as a band level meter's must be (IEC 61260-1 5.5);
    # two passes (|H|^4) would read broadband noise about 0.6 dB low
    stream = EnvelopeStream(fs, band_passes=1, clip_negative=False)
    total = np.zeros(len(std.OCTAVE_BANDS_HZ))
    count = 0
    for b in src.blocks(max(1, int(LEVEL_BLOCK_SECONDS * fs))):
        if check is not None:
            check.update(b)
        e = stream.process(b)
        total += e.sum(axis=1)
        count += e.shape[1]
    if check is not None:
        check.finish()
    # the envelope is the low-passed square of the band signal (unit gain at 0 Hz): its
    # mean is the band's mean square
    with np.errstate(divide="ignore"):
        return 10.0 * np.log10(np.maximum(total / max(count, 1), 1e-30)) + calibration_db


def octave_band_levels(x: "Source | np.ndarray", fs: int | None = None, *, calibration_db: float,
                       name: str = "noise recording") -> np.ndarray:
    """Octave-band levels (Leq over the whole signal, dB SPL, 125 Hz ... 8 kHz) of a
    calibrated recording.

    The bands are the STI's octave filters (IEC 61260-1 base-2 edges, see
    :func:`envpredict.bands.octave_filterbank`), one pass, as a band level meter: the
    level of white noise is within 0.3 dB of its power in the nominal band.

    Parameters
    ----------
    x : the recording (array or :class:`Source`); at least :data:`MIN_LEVEL_SECONDS` long.
    fs : its sample rate (for an array), Hz; high enough for the 8 kHz band.
    calibration_db : dB SPL of a full-scale RMS signal (0 dBFS RMS), as for the direct method.
    name : how errors name the recording.

    Returns
    -------
    (7,) levels, dB SPL.

    Raises
    ------
    InputError
        A bad calibration or sample rate; a recording that is too short, silent, clipped
        or not finite.

    Examples
    --------
    >>> import numpy as np
    >>> noise = np.random.default_rng(0).standard_normal(10 * 48000) * 0.01  # -40 dBFS white
    >>> levels = octave_band_levels(noise, 48000, calibration_db=100.0)
    >>> bool(np.all(np.diff(levels) > 2.5))  # white noise: +3 dB per octave
    True
    """
    cal = check_calibration_db(calibration_db)
    if cal is None:
        raise InputError(f"band levels of the {name} need a calibration",
                         "give the dB SPL of a full-scale RMS signal, or a calibrator recording")
    if isinstance(x, Source):
        return _band_levels_of(x, cal, SignalCheck(x.name))
    v = validate_signal(x, fs, name=name)
    return _band_levels_of(ArraySource(v, check_rate(fs, name), name), cal, None)


def octave_band_levels_file(path: str | os.PathLike, channel: int | None = None, *, calibration_db: float,
                            name: str = "noise recording") -> np.ndarray:
    """:func:`octave_band_levels` of a recording in a file, read in blocks (bounded memory).

    Raises
    ------
    InputError
        A bad calibration, a missing or unreadable file, a bad channel, or a recording
        :func:`octave_band_levels` refuses.
    """
    cal = check_calibration_db(calibration_db)
    if cal is None:
        raise InputError(f"band levels of the {name} need a calibration",
                         "give --calibration-db or a calibrator recording")
    with FileSource(path, channel, name=name) as src:
        return _band_levels_of(src, cal, SignalCheck(src.name))
