"""Audio input: loading, validation, resampling, alignment.

All checks of malformed audio live here and raise :class:`~envpredict.exceptions.InputError`
with a one-line message saying what is wrong and what to do. Nothing here computes
an index.
"""

from __future__ import annotations

import os
from fractions import Fraction
from pathlib import Path

import numpy as np

from .exceptions import InputError

#: Sample rates accepted at all, Hz. Below 8 kHz no index in this tool has bandwidth
#: to work with; above 384 kHz the input is almost certainly mislabelled (common
#: practice, no source).
MIN_RATE_HZ: int = 8000
MAX_RATE_HZ: int = 384000

#: A signal whose RMS is below this (about -140 dBFS) is treated as silence: it is
#: below the noise of any 24-bit converter (common practice, no source).
SILENCE_RMS: float = 1e-7

#: Digital clipping: this many samples at full scale (|x| >= 0.999) ...
CLIP_FULL_SCALE: float = 0.999
CLIP_MIN_FULL_SCALE_SAMPLES: int = 3
#: ... or flat tops of at least this many equal samples at the peak, in at least this
#: many places (clipped, then scaled down). Judgement: honest audio almost never
#: repeats its exact peak value four times running in several places.
CLIP_RUN: int = 4
CLIP_MIN_RUNS: int = 5

AUDIO_SUFFIXES = {".wav", ".flac", ".ogg", ".oga", ".aif", ".aiff", ".caf", ".w64", ".rf64"}


def _check_path(path: str | os.PathLike, name: str) -> Path:
    p = Path(path)
    if not p.exists():
        raise InputError(f"{name} '{p}' does not exist", "check the path")
    if p.is_dir():
        raise InputError(f"{name} '{p}' is a folder, not an audio file", "give the path of a WAV, FLAC or OGG file")
    if p.stat().st_size == 0:
        raise InputError(f"{name} '{p}' is empty (0 bytes)", "give a WAV, FLAC or OGG file with audio in it")
    return p


def audio_info(path: str | os.PathLike, name: str = "input") -> tuple[int, int, int]:
    """Return ``(sample_rate, frames, channels)`` of an audio file without reading it."""
    import soundfile as sf

    p = _check_path(path, name)
    try:
        info = sf.info(str(p))
    except Exception:  # soundfile raises several types for unreadable files
        raise InputError(
            f"{name} '{p}' is not a readable audio file",
            "give a WAV, FLAC or OGG file (other formats: convert first)",
        ) from None
    return int(info.samplerate), int(info.frames), int(info.channels)


def pick_channel(data: np.ndarray, channel: int | None, name: str, source: str) -> np.ndarray:
    """Reduce a (frames, channels) array to one channel, refusing ambiguity."""
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
    check : run :func:`validate_signal` (finite, not silent, not clipped, rate).

    Returns
    -------
    x : ndarray, shape (n,), float64 in [-1, 1] full scale.
    fs : int sample rate, Hz.
    """
    import soundfile as sf

    fs, frames, _ = audio_info(path, name)
    if frames == 0:
        raise InputError(f"{name} '{path}' contains no samples", "give a file with audio in it")
    try:
        data, fs = sf.read(str(path), dtype="float64", always_2d=True)
    except Exception:
        raise InputError(
            f"{name} '{path}' could not be decoded (truncated or damaged file?)",
            "re-export the file as WAV or FLAC",
        ) from None
    x = pick_channel(data, channel, name, str(path))
    if check:
        validate_signal(x, fs, name=f"{name} '{path}'")
    return x, int(fs)


def check_rate(fs: float, name: str = "input") -> int:
    """Refuse sample rates that are not a positive whole number in the supported range."""
    try:
        fsf = float(fs)
    except (TypeError, ValueError):
        raise InputError(f"sample rate of {name} is not a number ({fs!r})", "give the rate in Hz") from None
    if not np.isfinite(fsf) or fsf != round(fsf) or fsf <= 0:
        raise InputError(f"sample rate of {name} is {fs!r}", "give a whole, positive rate in Hz")
    if not MIN_RATE_HZ <= fsf <= MAX_RATE_HZ:
        raise InputError(
            f"sample rate of {name} is {int(fsf)} Hz, outside {MIN_RATE_HZ}..{MAX_RATE_HZ} Hz",
            "resample the recording to a common rate such as 48000 Hz",
        )
    return int(fsf)


def as_mono_array(x, fs: float, name: str = "input", *, hint: str = "") -> tuple[np.ndarray, int]:
    """The shape checks of every array input: a supported rate, numeric samples, one
    channel, not empty. Returns ``(array, fs)`` without copying where possible."""
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


def validate_signal(
    x: np.ndarray,
    fs: float,
    *,
    name: str = "input",
    allow_clipping: bool = False,
    min_seconds: float = 0.0,
) -> np.ndarray:
    """Check a signal once, at the boundary, and return it as a 1-D float64 array.

    Refuses (``InputError``): non-numeric or multi-dimensional arrays, empty input,
    NaN/inf, silence, a constant (DC) signal, digital clipping, sample rates outside
    the supported range and inputs shorter than ``min_seconds``.
    """
    a, fs = as_mono_array(x, fs, name)
    a = a.astype(np.float64, copy=False)
    if not np.all(np.isfinite(a)):
        bad = int(np.count_nonzero(~np.isfinite(a)))
        raise InputError(f"{name} contains {bad} NaN or infinite sample(s)", "repair or re-export the file")
    if min_seconds and a.size < min_seconds * fs:
        raise InputError(
            f"{name} is {a.size / fs:.3f} s long; at least {min_seconds:.2f} s is needed",
            "give a longer signal",
        )
    rms = float(np.sqrt(np.mean(a * a)))
    if rms < SILENCE_RMS:
        raise InputError(f"{name} is silent (all samples zero or below -140 dBFS)",
                         "check the recording chain and file")
    if float(np.std(a)) < SILENCE_RMS:
        raise InputError(f"{name} holds only a constant (DC) value", "check the recording chain and file")
    if not allow_clipping and is_clipped(a):
        raise InputError(
            f"{name} is clipped (flat tops at the peak level)",
            "record again with less gain; a clipped signal gives wrong modulation depths",
        )
    return a


def is_clipped(x: np.ndarray) -> bool:
    """Detect digital clipping: samples at full scale, or repeated flat tops at the peak."""
    ax = np.abs(x)
    peak = float(ax.max())
    if peak >= CLIP_FULL_SCALE and np.count_nonzero(ax >= CLIP_FULL_SCALE) >= CLIP_MIN_FULL_SCALE_SAMPLES:
        return True
    at_peak = ax >= peak * (1.0 - 1e-9)
    if np.count_nonzero(at_peak) < CLIP_RUN * CLIP_MIN_RUNS:
        return False
    # runs of consecutive samples at the peak
    d = np.diff(np.concatenate(([0], at_peak.astype(np.int8), [0])))
    starts = np.flatnonzero(d == 1)
    ends = np.flatnonzero(d == -1)
    runs = ends - starts
    return int(np.count_nonzero(runs >= CLIP_RUN)) >= CLIP_MIN_RUNS


def resample(x: np.ndarray, fs_in: int, fs_out: int) -> np.ndarray:
    """Resample with a polyphase FIR (scipy.signal.resample_poly)."""
    if int(fs_in) == int(fs_out):
        return np.asarray(x, dtype=np.float64)
    from scipy.signal import resample_poly

    ratio = Fraction(int(fs_out), int(fs_in)).limit_denominator(2000)
    return resample_poly(np.asarray(x, dtype=np.float64), ratio.numerator, ratio.denominator)


def estimate_delay(
    reference: np.ndarray,
    x: np.ndarray,
    fs: int,
    max_delay_s: float = 1.0,
) -> tuple[int, float]:
    """Delay of ``x`` relative to ``reference`` by FFT cross-correlation.

    Returns ``(lag, correlation)``: ``x[n + lag]`` lines up with ``reference[n]``
    (positive lag: ``x`` is late), and the normalised cross-correlation at that lag
    over the overlapping part (1 for an exact delayed copy, near 0 for unrelated
    signals).
    """
    from scipy.signal import fftconvolve

    ref = np.asarray(reference, dtype=np.float64)
    sig = np.asarray(x, dtype=np.float64)
    max_lag = int(round(max_delay_s * fs))
    cc = fftconvolve(sig, ref[::-1], mode="full")  # index i -> lag i - (len(ref) - 1)
    lags = np.arange(cc.size) - (ref.size - 1)
    keep = np.abs(lags) <= max_lag
    cc, lags = cc[keep], lags[keep]
    i = int(np.argmax(np.abs(cc)))
    lag = int(lags[i])
    # normalised correlation over the overlap at this lag
    if lag >= 0:
        a, b = ref[: max(0, sig.size - lag)], sig[lag:]
    else:
        a, b = ref[-lag:], sig[: max(0, ref.size + lag)]
    n = min(a.size, b.size)
    a, b = a[:n], b[:n]
    den = float(np.sqrt(np.sum(a * a) * np.sum(b * b)))
    corr = float(np.sum(a * b) / den) if den > 0 else 0.0
    return lag, corr


def rms_dbfs(x: np.ndarray) -> float:
    """RMS level in dB re full scale (a full-scale sine reads -3.01 dBFS)."""
    r = float(np.sqrt(np.mean(np.square(x, dtype=np.float64))))
    return 20.0 * np.log10(r) if r > 0 else -np.inf


class StreamCheck:
    """The checks of :func:`validate_signal`, accumulated block by block for long files.

    Call :meth:`update` on every block and :meth:`finish` at the end; errors are the same
    ``InputError`` messages as for a whole signal.
    """

    def __init__(self, name: str = "input", allow_clipping: bool = False) -> None:
        self.name = name
        self.allow_clipping = allow_clipping
        self.n = 0
        self.sum = 0.0
        self.sumsq = 0.0
        self.full_scale = 0
        self.flat_runs = 0
        self.peak = 0.0

    def update(self, block: np.ndarray) -> None:
        b = np.asarray(block, dtype=np.float64)
        if not np.all(np.isfinite(b)):
            bad = int(np.count_nonzero(~np.isfinite(b)))
            raise InputError(f"{self.name} contains {bad} NaN or infinite sample(s) near {self.n} samples in",
                             "repair or re-export the file")
        self.n += b.size
        self.sum += float(b.sum())
        self.sumsq += float(b @ b)
        ab = np.abs(b)
        self.full_scale += int(np.count_nonzero(ab >= CLIP_FULL_SCALE))
        if b.size:
            self.peak = max(self.peak, float(ab.max()))
            at = ab >= float(ab.max()) * (1.0 - 1e-9)
            d = np.diff(np.concatenate(([0], at.astype(np.int8), [0])))
            runs = np.flatnonzero(d == -1) - np.flatnonzero(d == 1)
            self.flat_runs += int(np.count_nonzero(runs >= CLIP_RUN))

    def finish(self) -> None:
        if self.n == 0:
            raise InputError(f"{self.name} is empty", "give a signal with samples in it")
        mean = self.sum / self.n
        rms = np.sqrt(self.sumsq / self.n)
        if rms < SILENCE_RMS:
            raise InputError(f"{self.name} is silent (all samples zero or below -140 dBFS)",
                             "check the recording chain and file")
        if np.sqrt(max(self.sumsq / self.n - mean * mean, 0.0)) < SILENCE_RMS:
            raise InputError(f"{self.name} holds only a constant (DC) value", "check the recording chain and file")
        clipped = self.full_scale >= CLIP_MIN_FULL_SCALE_SAMPLES or self.flat_runs >= CLIP_MIN_RUNS
        if clipped and not self.allow_clipping:
            raise InputError(f"{self.name} is clipped (flat tops at the peak level)",
                             "record again with less gain; a clipped signal gives wrong modulation depths")


def iter_audio_blocks(
    path: str | os.PathLike,
    channel: int | None = None,
    *,
    block_seconds: float = 20.0,
    name: str = "input",
    check: StreamCheck | None = None,
):
    """Read one channel of a (long) audio file block by block, as float64.

    Yields ``(block, fs)``; memory stays bounded by the block length. If ``check`` is
    given, every block is fed to it (call ``check.finish()`` after the loop).
    """
    import soundfile as sf

    fs, frames, _ = audio_info(path, name)
    if frames == 0:
        raise InputError(f"{name} '{path}' contains no samples", "give a file with audio in it")
    check_rate(fs, f"{name} '{path}'")
    block = max(1, int(block_seconds * fs))
    try:
        with sf.SoundFile(str(path)) as f:
            while True:
                data = f.read(block, dtype="float64", always_2d=True)
                if data.shape[0] == 0:
                    break
                x = pick_channel(data, channel, name, str(path))
                if check is not None:
                    check.update(x)
                yield x, fs
    except InputError:
        raise
    except (RuntimeError, OSError, ValueError):
        raise InputError(f"{name} '{path}' could not be decoded (truncated or damaged file?)",
                         "re-export the file as WAV or FLAC") from None


class AudioFile:
    """Random access to one channel of an audio file, as float64 (for long files).

    ``read(start, stop)`` returns samples ``start .. stop-1`` counted from ``offset``;
    a damaged or truncated file gives the usual one-line ``InputError``. Use as a
    context manager or call :meth:`close`.
    """

    def __init__(self, path: str | os.PathLike, channel: int | None = None, *, name: str = "input",
                 offset: int = 0) -> None:
        import soundfile as sf

        fs, frames, n_ch = audio_info(path, name)
        if frames == 0:
            raise InputError(f"{name} '{path}' contains no samples", "give a file with audio in it")
        # refuse a multi-channel file without a channel before any reading
        pick_channel(np.zeros((1, n_ch)), channel, name, str(path))
        self.path, self.channel, self.name, self.offset = str(path), channel, name, int(offset)
        self.fs, self.frames = int(fs), int(frames)
        try:
            self._f = sf.SoundFile(self.path)
        except Exception:
            raise InputError(f"{name} '{path}' is not a readable audio file",
                             "give a WAV, FLAC or OGG file (other formats: convert first)") from None

    def read(self, start: int, stop: int) -> np.ndarray:
        n = int(stop) - int(start)
        try:
            self._f.seek(self.offset + int(start))
            data = self._f.read(n, dtype="float64", always_2d=True)
        except Exception:  # soundfile raises several types for damaged files
            data = np.zeros((0, 1))
        if data.shape[0] != n:
            raise InputError(f"{self.name} '{self.path}' could not be decoded (truncated or damaged file?)",
                             "re-export the file as WAV or FLAC")
        return pick_channel(data, self.channel, self.name, self.path)

    def close(self) -> None:
        self._f.close()

    def __enter__(self) -> "AudioFile":
        return self

    def __exit__(self, *exc) -> None:
        self.close()
