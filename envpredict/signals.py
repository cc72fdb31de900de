"""Test signals of the direct STI method: STIPA and the full-STI set (IEC 60268-16:2011).

Both are seven bands of Gaussian noise, one per octave band, each band-limited to the
middle half octave of its octave (edges fc * 2**(-1/4) .. fc * 2**(1/4), brick-wall in
the frequency domain, ``standards.TEST_SIGNAL_CARRIER_OCTAVES``), at the levels of the
male speech spectrum, and intensity-modulated:

* **STIPA** (IEC 60268-16:2011, Annex B): every band at once, band k with its two
  modulation frequencies (f1, f2) of Table B.1,
  ``I_k(t) = 1 + 0.55 (sin 2 pi f1 t - sin 2 pi f2 t)`` (never negative, minimum +0.0014).
* **Full STI** (IEC 60268-16:2011, 6.1): one signal per modulation frequency F of the
  14, ascending from 0.63 Hz; in each signal all seven bands are modulated at F in
  phase, ``I(t) = 1 + cos 2 pi F t`` (m = 1). Each signal lasts the smallest whole
  number of periods of F covering ``FULL_STI_ANALYSIS_SECONDS`` plus a settling
  margin of :data:`SETTLE_S` at both ends (12.0-13.3 s each, about 3 minutes for the
  set). One recording per signal; the analysis tells the signals apart by their
  modulation frequency, so the files may be recorded in any order.

The carrier amplitude is the square root of the intensity envelope. Generation is
seeded (same seed, same samples) and normalised to a peak of -3 dBFS.

**Looping.** The noise is made by FFT and so is circular. A signal whose length holds
whole periods of all its modulation frequencies therefore loops without a seam, and
gets no fades: every full-STI signal, and a STIPA signal whose length is a multiple of
100 s (the common period of the STIPA frequencies; the default length). Other STIPA
lengths get 10 ms raised-cosine fades at both ends and should not be looped (a
recording across the seam reads a lower MTF). The generators return arrays;
:func:`write_stipa_signal` and :func:`write_full_sti_signals` write them to WAV files
through the one writer, :func:`envpredict.audio.write_wav`.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from . import checks
from . import standards as std
from .audio import check_rate, check_wav_path, rms_dbfs, write_wav
from .bands import check_rate_for_octaves
from .exceptions import InputError

#: Margin at each end of a test signal that the analysis leaves out: the build-up and
#: decay of the room's reverberation (1 s covers reverberation times up to about 3 s
#: to within 1 %). Shared with :mod:`envpredict.direct`.
SETTLE_S: float = 1.0

#: Fade-in / fade-out length, s (only to avoid clicks at the file ends).
FADE_S: float = 0.010

#: Longest signal generated, s (1 hour; beyond that the memory use is unreasonable and
#: the request is almost certainly a mistake).
MAX_SECONDS: float = 3600.0

#: Default sample rate of generated signals, Hz.
DEFAULT_RATE_HZ: int = std.TEST_SIGNAL_RATE_HZ


def check_seed(seed: int) -> int:
    """A seed of the noise generator: a whole number from 0 (numpy's SeedSequence rule).

    Raises
    ------
    InputError
        For a seed that is not a whole number from 0.
    """
    try:
        s = int(seed)
    except (TypeError, ValueError):
        raise InputError(f"seed '{seed}' is not a whole number", "give a whole number from 0, e.g. 0") from None
    if s != seed or s < 0:
        raise InputError(f"seed {seed} is not a whole number from 0", "give a whole number from 0, e.g. 0")
    return s


def check_generation(fs: int, seconds: float | None = None) -> int:
    """The rate (and length) of a test signal to generate.

    Raises
    ------
    InputError
        For a rate outside the supported range or too low for the 8 kHz band, or a length
        outside 15 s .. :data:`MAX_SECONDS`.
    """
    fs = check_rate(fs, "test signal")
    check_rate_for_octaves(fs, "test signal")
    if seconds is not None:
        try:
            s = float(seconds)
        except (TypeError, ValueError):
            raise InputError(f"signal length '{seconds}' is not a number", "give it in seconds, e.g. 30") from None
        if not np.isfinite(s) or not std.STIPA_MIN_SECONDS <= s <= MAX_SECONDS:
            raise InputError(
                f"signal length {seconds} s is outside {std.STIPA_MIN_SECONDS:g}..{MAX_SECONDS:g} s",
                f"give --seconds of at least {std.STIPA_MIN_SECONDS:g} (the STIPA analysis needs that "
                "much steady signal plus settling margins)",
            )
    return fs


def octave_band_noise(
    n: int, fs: int, rng: np.random.Generator, width_octaves: float = std.TEST_SIGNAL_CARRIER_OCTAVES,
) -> np.ndarray:
    """Seven independent Gaussian noises, one per octave band, unit RMS.

    Each is limited to ``width_octaves`` centred on the band's centre frequency,
    brick-wall in the frequency domain (FFT of white noise, bins outside
    fc * 2**(-w/2) .. fc * 2**(w/2) set to zero): with the default half octave the
    carrier lies in the flat part of the octave analysis filter and hardly leaks
    into the neighbouring bands.

    Returns
    -------
    ndarray (7, n).

    Raises
    ------
    InputError
        For a length that is not a positive whole number (at most :data:`envpredict.checks.MAX_SAMPLES`),
        a rate outside the supported range, an ``rng`` that is not a Generator or a width outside (0, 2] octaves.
    """
    n = checks.samples(n, "signal length", lo=1)
    fs = check_rate(fs, "test signal")
    if not isinstance(rng, np.random.Generator):
        raise InputError("rng is not a numpy Generator", "pass numpy.random.default_rng(seed)")
    width_octaves = checks.number(width_octaves, "carrier width", lo=0.0, lo_open=True, hi=2.0)
    freqs = np.fft.rfftfreq(n, 1.0 / fs)
    out = np.empty((len(std.OCTAVE_BANDS_HZ), n))
    for k, fc in enumerate(std.OCTAVE_BANDS_HZ):
        spec = np.fft.rfft(rng.standard_normal(n))
        half = 2.0 ** (float(width_octaves) / 2.0)
        keep = (freqs >= fc / half) & (freqs < fc * half)
        spec[~keep] = 0.0
        b = np.fft.irfft(spec, n)
        out[k] = b / np.sqrt(np.mean(b * b))
    return out


def stipa_envelope(t: np.ndarray, f1: float, f2: float, depth: float = std.STIPA_MODULATION_DEPTH) -> np.ndarray:
    """STIPA intensity envelope 1 + m (sin 2 pi f1 t - sin 2 pi f2 t), IEC 60268-16:2011 Annex B.

    Raises
    ------
    InputError
        For times that are not a 1-D array of finite numbers, frequencies that are not
        numbers or a depth outside 0..1.
    """
    t = checks.array(t, "times", min_size=0)
    depth = checks.number(depth, "modulation depth", lo=0.0, hi=1.0)
    f1, f2 = checks.number(f1, "modulation frequency"), checks.number(f2, "modulation frequency")
    return 1.0 + depth * (np.sin(2 * np.pi * f1 * t) + std.STIPA_MODULATION_SIGN * np.sin(2 * np.pi * f2 * t))


def full_sti_envelope(t: np.ndarray, f: float, depth: float = std.FULL_STI_MODULATION_DEPTH) -> np.ndarray:
    """Full-STI intensity envelope 1 + m cos 2 pi F t (IEC 60268-16:2011, 6.1).

    Raises
    ------
    InputError
        As :func:`stipa_envelope`.
    """
    t = checks.array(t, "times", min_size=0)
    depth = checks.number(depth, "modulation depth", lo=0.0, hi=1.0)
    f = checks.number(f, "modulation frequency")
    return 1.0 + depth * np.cos(2 * np.pi * f * t)


def is_loopable(n: int, fs: int, freqs) -> bool:
    """True if ``n`` samples at ``fs`` hold whole periods of every frequency in ``freqs``
    to within one sample (the seam of a loop then shifts no modulation phase by more
    than 2 pi F / fs).

    Raises
    ------
    InputError
        For a length that is not a whole number, a rate that is not positive or frequencies that
        are not positive numbers.
    """
    n = checks.samples(n, "signal length")
    fs = checks.number(fs, "sample rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    if not np.all(checks.array(freqs, "modulation frequencies", min_size=0) > 0):
        raise InputError("a modulation frequency is not positive", "give frequencies in Hz")
    f = np.asarray(freqs, dtype=float)
    secs = n / float(fs)
    err_s = np.abs(secs - np.round(secs * f) / f)
    return bool(np.all(err_s <= 1.0 / fs + 1e-12) and np.all(np.round(secs * f) >= 1))


def _finish(bands: np.ndarray, envelopes: np.ndarray, fs: int, loopable: bool) -> np.ndarray:
    """Modulate, weight to the speech spectrum, sum, fade and normalise to -3 dBFS.

    A loopable signal (whole periods of every modulation; the FFT-made noise is
    circular anyway) gets no fades, so that playing it in a loop has no seam.
    """
    gains = 10.0 ** (np.asarray(std.STIPA_BAND_LEVELS_DB) / 20.0)
    amp = np.sqrt(np.clip(envelopes, 0.0, None))
    mod = bands * (amp if amp.ndim == 2 else amp[None, :])
    # each modulated band at exactly its speech-spectrum level (the random correlation
    # of carrier and envelope would otherwise move it by up to a few tenths of a dB)
    mod /= np.sqrt(np.mean(mod * mod, axis=1, keepdims=True))
    x = gains @ mod
    if not loopable:
        nf = max(1, int(round(FADE_S * fs)))
        ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(nf) / nf)
        x[:nf] *= ramp
        x[-nf:] *= ramp[::-1]
    peak = float(np.max(np.abs(x)))
    return x * (10.0 ** (std.TEST_SIGNAL_PEAK_DBFS / 20.0) / peak)


def stipa_signal(seconds: float = std.STIPA_DEFAULT_SECONDS, fs: int = DEFAULT_RATE_HZ, *, seed: int = 0) -> np.ndarray:
    """The STIPA test signal, IEC 60268-16:2011 Annex B.

    Seven octave bands of Gaussian noise (125 Hz ... 8 kHz) at the male speech
    spectrum levels (Table A.2), band k intensity-modulated by
    ``1 + 0.55 (sin 2 pi f1 t - sin 2 pi f2 t)`` with its two modulation
    frequencies of Table B.1.

    Parameters
    ----------
    seconds : length, s (15 s ... 1 h; default 100 s, which loops without a seam).
    fs : sample rate, Hz (above 22.6 kHz so the 8 kHz octave fits; default 48000).
    seed : seed of the noise generator (same seed, same signal).

    Returns
    -------
    ndarray (round(seconds * fs),), peak at -3 dBFS.

    Examples
    --------
    >>> x = stipa_signal(15, 24000)
    >>> x.size, round(float(abs(x).max()), 3)
    (360000, 0.708)

    Raises
    ------
    InputError
        For a length outside 15 s .. :data:`MAX_SECONDS`, a rate outside the supported range
        or too low for the 8 kHz band, or a seed that is not a whole number from 0.
    """
    fs = check_generation(fs, seconds)
    seed = check_seed(seed)
    n = int(round(float(seconds) * fs))
    rng = np.random.default_rng(seed)
    bands = octave_band_noise(n, fs, rng)
    t = np.arange(n) / fs
    env = np.stack([stipa_envelope(t, f1, f2) for f1, f2 in std.STIPA_MODULATION_HZ])
    return _finish(bands, env, fs, is_loopable(n, fs, np.ravel(std.STIPA_MODULATION_HZ)))


@dataclass(frozen=True)
class FullStiSignalSpec:
    """One signal of the full-STI set: its place in the order, frequency and length."""

    index: int
    modulation_hz: float
    seconds: float
    filename: str

    def to_dict(self) -> dict:
        return {"number": self.index, "modulation_hz": self.modulation_hz,
                "seconds": round(self.seconds, 6), "file": self.filename}


def full_sti_plan() -> tuple[FullStiSignalSpec, ...]:
    """Order, modulation frequencies and lengths of the full-STI signal set.

    Ascending modulation frequency, 0.63 ... 12.5 Hz (IEC 60268-16:2011, Table 1). Each
    signal lasts the smallest whole number of periods of F that covers
    ``FULL_STI_ANALYSIS_SECONDS`` plus :data:`SETTLE_S` at each end (12.0-13.3 s), so
    it can also be played in a loop without a seam.
    """
    out = []
    for i, f in enumerate(std.MODULATION_FREQUENCIES_HZ, start=1):
        periods = int(np.ceil((std.FULL_STI_ANALYSIS_SECONDS + 2 * SETTLE_S) * f - 1e-9))
        secs = periods / f
        out.append(FullStiSignalSpec(i, float(f), float(secs), f"full_sti_{i:02d}_{f:g}Hz.wav"))
    return tuple(out)


def full_sti_signal(modulation_hz: float, seconds: float, fs: int = DEFAULT_RATE_HZ, *, seed: int = 0) -> np.ndarray:
    """One full-STI test signal: all seven speech-shaped octave noise bands modulated
    in phase by ``1 + cos 2 pi F t`` (IEC 60268-16:2011, 6.1; m = 1).

    Raises
    ------
    InputError
        For a modulation frequency outside (0, 12.5] Hz, a length outside (0, :data:`MAX_SECONDS`] s,
        or a rate or seed refused by :func:`check_generation` and :func:`check_seed`.
    """
    modulation_hz = checks.number(modulation_hz, "modulation frequency", lo=0.0, lo_open=True,
                                  hi=max(std.MODULATION_FREQUENCIES_HZ))
    seconds = checks.number(seconds, "signal length", lo=0.0, lo_open=True, hi=MAX_SECONDS)
    fs = check_generation(fs)
    seed = check_seed(seed)
    n = int(round(float(seconds) * fs))
    rng = np.random.default_rng(seed)
    bands = octave_band_noise(n, fs, rng)
    env = full_sti_envelope(np.arange(n) / fs, float(modulation_hz))
    return _finish(bands, env, fs, is_loopable(n, fs, [modulation_hz]))


def full_sti_signals(fs: int = DEFAULT_RATE_HZ, *, seed: int = 0):
    """The full-STI signal set, one signal per modulation frequency, in plan order.

    Yields ``(spec, signal)`` pairs (a generator, so the whole set is never in memory
    at once). The signals use seeds ``seed``, ``seed + 1``, ... so their noises differ.

    See :func:`full_sti_plan` for the order and lengths.

    Raises
    ------
    InputError
        As :func:`full_sti_signal` (raised when the generator is started).
    """
    fs = check_generation(fs)
    seed = check_seed(seed)
    for spec in full_sti_plan():
        yield spec, full_sti_signal(spec.modulation_hz, spec.seconds, fs, seed=seed + spec.index - 1)


@dataclass(frozen=True)
class StipaSignalResult:
    """What :func:`write_stipa_signal` wrote: the file and the signal's properties."""

    file: str
    fs: int
    seconds: float
    seed: int
    rms_dbfs: float
    loopable: bool
    cautions: tuple[str, ...] = field(default=())
    notes: tuple[str, ...] = field(default=())

    def to_dict(self) -> dict:
        return {
            "file": self.file, "signal": "STIPA", "fs": self.fs, "seconds": self.seconds, "seed": self.seed,
            "peak_dbfs": std.TEST_SIGNAL_PEAK_DBFS, "rms_dbfs": self.rms_dbfs,
            "bands_hz": list(std.OCTAVE_BANDS_HZ),
            "modulation_hz": [list(p) for p in std.STIPA_MODULATION_HZ],
            "modulation_depth": std.STIPA_MODULATION_DEPTH,
            "band_levels_db": list(std.STIPA_BAND_LEVELS_DB),
            "loopable": self.loopable,
            "cautions": list(self.cautions), "notes": list(self.notes),
        }


def write_stipa_signal(
    path: str | os.PathLike, seconds: float = std.STIPA_DEFAULT_SECONDS, fs: int = DEFAULT_RATE_HZ, *, seed: int = 0,
) -> StipaSignalResult:
    """Write the STIPA test signal (:func:`stipa_signal`) to a 24-bit WAV file, atomically.

    Parameters
    ----------
    path : file to write, ending in .wav, in an existing folder (checked first).
    seconds, fs, seed : as for :func:`stipa_signal`.

    Returns
    -------
    StipaSignalResult : the file, rate, length, seed, RMS level and whether it loops.

    Raises
    ------
    InputError
        As :func:`stipa_signal`, or for an output path that cannot be written.
    ComputationError
        If the file cannot be written (a full disk).
    """
    checks.number(seconds, "signal length", fix="give it in seconds, e.g. 30")
    check_wav_path(path)
    fs = check_generation(fs, seconds)
    seed = check_seed(seed)
    x = stipa_signal(seconds, fs, seed=seed)
    write_wav(path, x, fs)
    return StipaSignalResult(
        file=str(path), fs=fs, seconds=round(x.size / fs, 6), seed=seed, rms_dbfs=round(rms_dbfs(x), 2),
        loopable=is_loopable(x.size, fs, [f for p in std.STIPA_MODULATION_HZ for f in p]),
    )


#: Listing file written beside the full-STI signals.
FULL_STI_LISTING = "signals.json"


@dataclass(frozen=True)
class FullStiSignalsResult:
    """What :func:`write_full_sti_signals` wrote: the folder and its plan."""

    folder: str
    fs: int
    seed: int
    signals: tuple[FullStiSignalSpec, ...]
    cautions: tuple[str, ...] = field(default=())
    notes: tuple[str, ...] = field(default=())

    @property
    def total_seconds(self) -> float:
        return round(sum(s.seconds for s in self.signals), 3)

    def listing(self) -> dict:
        """The content of the folder's ``signals.json``."""
        return {
            "signal": "full STI", "fs": self.fs, "seed": self.seed,
            "modulation_depth": std.FULL_STI_MODULATION_DEPTH,
            "order": "ascending modulation frequency; every file has all seven octave bands "
                     "modulated in phase at its frequency; record each file once, in any order",
            "total_seconds": self.total_seconds,
            "signals": [s.to_dict() for s in self.signals],
        }

    def to_dict(self) -> dict:
        return {**self.listing(), "folder": self.folder, "cautions": list(self.cautions), "notes": list(self.notes)}


def write_full_sti_signals(
    folder: str | os.PathLike, fs: int = DEFAULT_RATE_HZ, *, seed: int = 0,
    progress: Callable[[int, int], None] | None = None,
) -> FullStiSignalsResult:
    """Write the full-STI signal set (:func:`full_sti_signals`) to a new folder: 14 WAV
    files (24-bit) and ``signals.json`` listing their order and lengths. The folder
    appears whole or not at all.

    Parameters
    ----------
    folder : a new folder (or an empty one); nothing is overwritten.
    fs, seed : as for :func:`full_sti_signals`.
    progress : optional ``progress(done, total)`` callback, one step per file.

    Raises
    ------
    InputError
        As :func:`full_sti_signals`, or for an output folder that cannot be written.
    ComputationError
        If a file cannot be written (a full disk).
    """
    from .outputs import atomic_directory

    out = checks.path(folder, "output folder")
    if out.exists() and (not out.is_dir() or any(out.iterdir())):
        raise InputError(f"'{out}' already exists and is not an empty folder",
                         "give the name of a new folder (nothing is overwritten)")
    fs = check_generation(fs)
    seed = check_seed(seed)
    plan = full_sti_plan()
    result = FullStiSignalsResult(folder=str(folder), fs=fs, seed=seed, signals=plan)
    with atomic_directory(out) as tmp:
        for i, (spec, x) in enumerate(full_sti_signals(fs, seed=seed), start=1):
            write_wav(tmp / spec.filename, x, fs)
            if progress:
                progress(i, len(plan))
        (tmp / FULL_STI_LISTING).write_text(json.dumps(result.listing(), indent=2) + "\n")
    return result
