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

**Generated in blocks.** A signal is made block by block (:class:`BlockSignal`), so that
writing it needs memory for one block and one period of the noise, however long it is:
the seven band noises are made whole (they are circular) and kept, outside memory, in an
anonymous temporary file; the modulation, the per-band level, the fades and the peak
normalisation are applied block by block, in three passes (the per-band RMS and the
peak are figures of the whole signal). A signal up to :data:`NOISE_PERIOD_S` long is
the same as when it was made as one array (to the last bit when made as one block;
within float rounding, about 1e-16 relative, in shorter blocks: the sums of squares are
added in another order). A longer one uses noise of period :data:`NOISE_PERIOD_S`
(the first :data:`NOISE_PERIOD_S` of noise, repeated: seamless, since the noise is
circular), under a modulation that runs on without repeating its phase error; it is
the :data:`NOISE_PERIOD_S` signal played in a loop when its length is a multiple of it.
"""

from __future__ import annotations

import contextlib
import json
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterator

import numpy as np

from . import checks
from . import standards as std
from .audio import check_rate, check_wav_path, write_wav
from .bands import check_rate_for_octaves
from .exceptions import InputError

#: Margin at each end of a test signal that the analysis leaves out: the build-up and
#: decay of the room's reverberation (1 s covers reverberation times up to about 3 s
#: to within 1 %). Shared with :mod:`envpredict.direct`.
SETTLE_S: float = 1.0

#: Fade-in / fade-out length, s (only to avoid clicks at the file ends).
FADE_S: float = 0.010

#: Longest signal generated, s (1 hour; beyond that the request is almost certainly a
#: mistake: a recording needs 15 s to a few minutes).
MAX_SECONDS: float = 3600.0

#: Period of the noise carriers, s: a signal longer than this repeats its first
#: NOISE_PERIOD_S of noise (memory and temporary storage stay those of this length).
#: 100 s is the common period of the STIPA modulation frequencies (IEC 60268-16:2011
#: Table B.1: every f1, f2 is a multiple of 0.01 Hz), so a signal whose length is a
#: multiple of it still loops without a seam.
NOISE_PERIOD_S: float = 100.0

#: Block length of generation, s (memory: a few arrays of 7 x BLOCK_S x fs samples).
BLOCK_S: float = 2.0

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
        a rate outside the supported range or too low for the 8 kHz band, an ``rng`` that is not a
        Generator, a width outside (0, 2] octaves, or a length too short to hold any frequency of
        a band that wide.
    """
    n = checks.samples(n, "signal length", lo=1)
    fs = check_rate(fs, "test signal")
    check_rate_for_octaves(fs, "test signal")  # a band above the Nyquist frequency would be all NaN
    if not isinstance(rng, np.random.Generator):
        raise InputError("rng is not a numpy Generator", "pass numpy.random.default_rng(seed)")
    width_octaves = checks.number(width_octaves, "carrier width", lo=0.0, lo_open=True, hi=2.0)
    out = np.empty((len(std.OCTAVE_BANDS_HZ), n))
    for k, b in enumerate(_band_noises(n, fs, rng, width_octaves)):
        out[k] = b
    return out


def _band_noises(n: int, fs: int, rng: np.random.Generator,
                 width_octaves: float = std.TEST_SIGNAL_CARRIER_OCTAVES) -> Iterator[np.ndarray]:
    """The bands of :func:`octave_band_noise`, one at a time (the same draws, in order)."""
    freqs = np.fft.rfftfreq(n, 1.0 / fs)
    half = 2.0 ** (float(width_octaves) / 2.0)
    for fc in std.OCTAVE_BANDS_HZ:
        spec = np.fft.rfft(rng.standard_normal(n))
        keep = (freqs >= fc / half) & (freqs < fc * half)
        if not keep.any():  # a unit-RMS noise of no frequencies would be 0/0
            raise InputError(f"{n} samples at {fs} Hz hold no frequency of the {fc:g} Hz band "
                             f"{width_octaves:g} octave wide", "give a longer signal or a wider band")
        spec[~keep] = 0.0
        b = np.fft.irfft(spec, n)
        del spec
        b /= np.sqrt(np.mean(b * b))
        yield b


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


class BlockSignal:
    """A test signal made block by block: band noises (period at most
    :data:`NOISE_PERIOD_S`), each modulated by its envelope, brought to its
    speech-spectrum level, summed, faded (unless loopable) and normalised to a peak of
    ``TEST_SIGNAL_PEAK_DBFS``.

    The per-band RMS and the peak are figures of the whole signal: :meth:`blocks`
    computes them in two passes over the blocks before it yields the final samples in a
    third (memory: a few blocks; the band noises are kept in an anonymous temporary file,
    8 bytes per sample and band of one noise period).

    Parameters
    ----------
    n, fs : length (samples) and rate, Hz (checked by the callers).
    seed : seed of the noise generator.
    envelope : ``envelope(t)`` for times ``t`` (s) of a block: the intensity envelopes,
        shape (7, len(t)) (one per band) or (len(t),) (the same for every band).
    loopable : no fades (the signal loops without a seam).
    """

    def __init__(self, n: int, fs: int, seed: int, envelope: Callable[[np.ndarray], np.ndarray],
                 loopable: bool) -> None:
        self.n, self.fs, self.seed, self.envelope, self.loopable = int(n), int(fs), int(seed), envelope, loopable
        self.period = min(self.n, int(round(NOISE_PERIOD_S * self.fs)))
        self.rms_dbfs: float | None = None  # of the final signal, after a complete pass of blocks()

    def _noise_block(self, store, a: int, b: int) -> np.ndarray:
        """Band noises of samples a .. b-1, shape (7, b - a) (the noise repeats with its period)."""
        out = np.empty((len(std.OCTAVE_BANDS_HZ), b - a))
        if isinstance(store, np.ndarray):
            for i0 in range(a, b, self.period):  # at most 2 pieces unless a block spans periods
                j = i0 % self.period
                m = min(b - i0, self.period - j)
                out[:, i0 - a: i0 - a + m] = store[:, j: j + m]
            return out
        pos = a
        while pos < b:
            j = pos % self.period
            m = min(b - pos, self.period - j)
            for k in range(out.shape[0]):
                store.seek((k * self.period + j) * 8)
                if store.readinto(memoryview(out[k, pos - a: pos - a + m]).cast("B")) != 8 * m:
                    raise OSError(f"the temporary file of the test signal's noise is short ({store.name})")
            pos += m
        return out

    def _modulated(self, store, a: int, b: int) -> np.ndarray:
        """Modulated band noises (before the per-band level), shape (7, b - a)."""
        env = self.envelope(np.arange(a, b) / self.fs)
        amp = np.sqrt(np.clip(env, 0.0, None))
        return self._noise_block(store, a, b) * (amp if amp.ndim == 2 else amp[None, :])

    def _fade(self, x: np.ndarray, a: int) -> None:
        """Raised-cosine fades of the signal's ends, on the block starting at sample ``a``."""
        nf = max(1, int(round(FADE_S * self.fs)))
        ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(nf) / nf)
        b = a + x.size
        if a < nf:
            x[: min(b, nf) - a] *= ramp[a: min(b, nf)]
        if b > self.n - nf:
            s0 = max(a, self.n - nf)
            x[s0 - a:] *= ramp[::-1][s0 - (self.n - nf): b - (self.n - nf)]

    def _summed(self, store, a: int, b: int, rms: np.ndarray) -> np.ndarray:
        gains = 10.0 ** (np.asarray(std.STIPA_BAND_LEVELS_DB) / 20.0)
        mod = self._modulated(store, a, b)
        # each modulated band at exactly its speech-spectrum level (the random correlation
        # of carrier and envelope would otherwise move it by up to a few tenths of a dB)
        mod /= rms
        x = gains @ mod
        if not self.loopable:
            self._fade(x, a)
        return x

    def blocks(self, block: int | None = None, *, in_memory: bool = False,
               spill_dir: str | os.PathLike | None = None) -> Iterator[np.ndarray]:
        """The signal's samples in consecutive blocks of ``block`` samples (default
        :data:`BLOCK_S`; ``block >= n``: one block, the whole signal as one array).

        ``in_memory`` keeps the band noises in memory instead of an anonymous temporary
        file in ``spill_dir`` (default: the system's temporary folder; the file has no
        name, so nothing is left behind, even after a kill).
        """
        import tempfile

        block = max(1, int(block if block is not None else round(BLOCK_S * self.fs)))
        edges = [(a, min(self.n, a + block)) for a in range(0, self.n, block)]
        rng = np.random.default_rng(self.seed)
        noises = _band_noises(self.period, self.fs, rng)
        with contextlib.ExitStack() as stack:
            if in_memory:
                store = np.empty((len(std.OCTAVE_BANDS_HZ), self.period))
                for k, b in enumerate(noises):
                    store[k] = b
            else:
                store = stack.enter_context(tempfile.TemporaryFile(dir=spill_dir))
                for noise in noises:
                    store.write(memoryview(noise))
                    del noise
            sumsq = np.zeros(len(std.OCTAVE_BANDS_HZ))
            for a, b in edges:  # pass 1: the RMS of every modulated band
                mod = self._modulated(store, a, b)
                sumsq += np.sum(mod * mod, axis=1)
            rms = np.sqrt(sumsq / self.n)[:, None]
            peak = 0.0
            for a, b in edges:  # pass 2: the peak of the sum
                peak = max(peak, float(np.max(np.abs(self._summed(store, a, b, rms)))))
            scale = 10.0 ** (std.TEST_SIGNAL_PEAK_DBFS / 20.0) / peak
            total = 0.0
            for a, b in edges:  # pass 3: the samples
                x = self._summed(store, a, b, rms) * scale
                total += float(np.dot(x, x))
                yield x
            self.rms_dbfs = 10.0 * np.log10(total / self.n) if total > 0 else -np.inf

    def array(self) -> np.ndarray:
        """The whole signal as one array (made in blocks, noises kept in memory)."""
        out = np.empty(self.n)
        pos = 0
        for x in self.blocks(in_memory=True):
            out[pos: pos + x.size] = x
            pos += x.size
        return out


def stipa_test_signal(seconds: float = std.STIPA_DEFAULT_SECONDS, fs: int = DEFAULT_RATE_HZ, *,
                      seed: int = 0) -> BlockSignal:
    """The STIPA test signal of :func:`stipa_signal` as a :class:`BlockSignal` (to be read
    in blocks); the options are checked here.

    Raises
    ------
    InputError
        As :func:`stipa_signal`.
    """
    fs = check_generation(fs, seconds)
    seed = check_seed(seed)
    n = int(round(float(seconds) * fs))
    pairs = tuple(std.STIPA_MODULATION_HZ)

    def envelope(t: np.ndarray) -> np.ndarray:
        return np.stack([stipa_envelope(t, f1, f2) for f1, f2 in pairs])

    return BlockSignal(n, fs, seed, envelope, is_loopable(n, fs, np.ravel(pairs)))


def full_sti_test_signal(modulation_hz: float, seconds: float, fs: int = DEFAULT_RATE_HZ, *,
                         seed: int = 0) -> BlockSignal:
    """One full-STI test signal of :func:`full_sti_signal` as a :class:`BlockSignal`.

    Raises
    ------
    InputError
        As :func:`full_sti_signal`.
    """
    modulation_hz = checks.number(modulation_hz, "modulation frequency", lo=0.0, lo_open=True,
                                  hi=max(std.MODULATION_FREQUENCIES_HZ))
    seconds = checks.number(seconds, "signal length", lo=0.0, lo_open=True, hi=MAX_SECONDS)
    fs = check_generation(fs)
    seed = check_seed(seed)
    n = int(round(float(seconds) * fs))
    f = float(modulation_hz)
    return BlockSignal(n, fs, seed, lambda t: full_sti_envelope(t, f), is_loopable(n, fs, [f]))


def stipa_signal(seconds: float = std.STIPA_DEFAULT_SECONDS, fs: int = DEFAULT_RATE_HZ, *, seed: int = 0) -> np.ndarray:
    """The STIPA test signal, IEC 60268-16:2011 Annex B.

    Seven octave bands of Gaussian noise (125 Hz ... 8 kHz) at the male speech
    spectrum levels (Table A.2), band k intensity-modulated by
    ``1 + 0.55 (sin 2 pi f1 t - sin 2 pi f2 t)`` with its two modulation
    frequencies of Table B.1.

    Parameters
    ----------
    seconds : length, s (15 s ... 1 h; default 100 s, which loops without a seam).
        Beyond :data:`NOISE_PERIOD_S` (100 s) the noise carriers repeat with that
        period; the modulation runs on.
    fs : sample rate, Hz (above 22.6 kHz so the 8 kHz octave fits; default 48000).
    seed : seed of the noise generator (same seed, same signal).

    Returns
    -------
    ndarray (round(seconds * fs),), peak at -3 dBFS. Made in blocks
    (:class:`BlockSignal`); to write a long signal without holding it, use
    :func:`write_stipa_signal`.

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
    return stipa_test_signal(seconds, fs, seed=seed).array()


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
    return full_sti_test_signal(modulation_hz, seconds, fs, seed=seed).array()


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
    """Write the STIPA test signal (:func:`stipa_signal`) to a 24-bit WAV file, atomically,
    block by block (memory does not grow with ``seconds``; see :class:`BlockSignal`).

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
    sig = stipa_test_signal(seconds, fs, seed=seed)
    # block by block: memory does not grow with the length
    write_wav(path, sig.blocks(spill_dir=Path(path).parent), sig.fs)
    return StipaSignalResult(
        file=str(path), fs=sig.fs, seconds=round(sig.n / sig.fs, 6), seed=sig.seed, rms_dbfs=round(sig.rms_dbfs, 2),
        loopable=sig.loopable,
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
        for i, spec in enumerate(plan, start=1):  # block by block, one file after the other
            sig = full_sti_test_signal(spec.modulation_hz, spec.seconds, fs, seed=seed + spec.index - 1)
            write_wav(tmp / spec.filename, sig.blocks(spill_dir=tmp), fs)
            if progress:
                progress(i, len(plan))
        (tmp / FULL_STI_LISTING).write_text(json.dumps(result.listing(), indent=2) + "\n")
    return result
