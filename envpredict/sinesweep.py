"""Exponential sine sweeps for measuring an impulse response (Farina 2000).

:class:`SweepSpec` holds the parameters of a measurement signal: start and end frequency,
sweep length, fade-in and fade-out, the number of repeats and the silent tail after each
sweep. :func:`sweep_spec` checks them against what the deconvolution
(:mod:`envpredict.deconvolve`) and the indirect STI method need; :func:`exponential_sweep`
generates one sweep and :func:`sweep_signal` the signal to play (repeats, each followed by
its silent tail). :func:`write_sweep_signal` writes the signal to a WAV file with its parameters
in a JSON file beside it (``SWEEP.wav`` and ``SWEEP.json``), which the deconvolution reads
back with :func:`read_sweep_parameters`.

The sweep (Farina 2000, eq. 4; Mueller & Massarani 2001, sec. 4.1) is

    x(t) = A sin( 2 pi f1 T / ln(f2/f1) * (exp(t ln(f2/f1) / T) - 1) ),   0 <= t < T,

whose instantaneous frequency ``f1 exp(t ln(f2/f1) / T)`` rises by the same number of
octaves per second throughout: each octave lasts ``T ln 2 / ln(f2/f1)`` seconds, and the
k-th harmonic of a distorting system appears ``T ln k / ln(f2/f1)`` seconds before the
linear response after deconvolution, where it can be cut away. That spacing is why a sweep
must be long enough: the impulse response kept must fit between the second harmonic's
response and the linear one (:func:`sweep_spec` refuses a sweep that is too short).

Nothing here reads audio or computes an index.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from . import standards as std
from .exceptions import InputError

#: Defaults of a generated sweep (judgement, common practice of room-acoustic measurement:
#: a sweep from below the 125 Hz band to the top of hearing, long enough for 1.6 s of
#: impulse response per octave of spacing, two repeats for averaging, each followed by
#: 3 s of silence for the room to decay).
DEFAULT_F1_HZ: float = 40.0
DEFAULT_F2_HZ: float = 20000.0
DEFAULT_SECONDS: float = 15.0
DEFAULT_REPEATS: int = 2
DEFAULT_TAIL_S: float = 3.0
#: Fade-in and fade-out (half a Hann window) against the clicks of a sudden start and stop
#: (judgement; Mueller & Massarani 2001, sec. 4.1, recommend short fades at both ends).
DEFAULT_FADE_IN_S: float = 0.1
DEFAULT_FADE_OUT_S: float = 0.02

#: Shortest impulse response kept after its arrival, s: half a period of the lowest STI
#: modulation frequency (as ``envpredict.indirect.MIN_IR_SECONDS``: 1/(2 x 0.63 Hz) = 0.79 s).
MIN_IR_SECONDS: float = 1.0 / (2.0 * min(std.MODULATION_FREQUENCIES_HZ))
#: Part of the response kept before its first arrival, s (the zero-phase octave filters
#: spread an arrival backwards by up to about 2/bandwidth = 23 ms at 125 Hz; judgement).
PRE_ARRIVAL_S: float = 0.025

#: The sweep's flat range (outside its fades, and at least this many octaves inside its
#: start and end frequency, where the deconvolution is tapered) must reach from half an
#: octave below the 125 Hz band's lower edge (so that the band filter's skirt is measured
#: too) to the 8 kHz band's upper edge (judgement).
EDGE_TAPER_OCTAVES: float = 1.0 / 6.0
LOWEST_FLAT_HZ: float = min(std.OCTAVE_BANDS_HZ) / std.OCTAVE_EDGE_FACTOR / math.sqrt(2.0)
HIGHEST_FLAT_HZ: float = max(std.OCTAVE_BANDS_HZ) * std.OCTAVE_EDGE_FACTOR
#: The end frequency stays below this share of the Nyquist frequency (an exponential sweep
#: up to the Nyquist frequency aliases in its last samples; judgement).
NYQUIST_SHARE: float = 0.95

#: Limits of the parameters (judgement: beyond them the request is a mistake).
MAX_REPEATS: int = 32
MAX_TOTAL_SECONDS: float = 300.0
MAX_TAIL_S: float = 60.0

#: Suffix of the parameter file written beside a sweep's WAV file.
PARAMETER_SUFFIX: str = ".json"


@dataclass(frozen=True)
class SweepSpec:
    """Parameters of an exponential sine sweep signal (see :func:`sweep_spec`).

    Attributes
    ----------
    fs : sample rate, Hz. f1_hz, f2_hz : start and end frequency, Hz.
    seconds : length of one sweep, s (fades included). fade_in_s, fade_out_s : fades, s.
    repeats : sweeps in the signal. tail_s : silence after each sweep, s.
    peak_dbfs : peak level, dB re full scale.
    """

    fs: int
    f1_hz: float
    f2_hz: float
    seconds: float
    fade_in_s: float
    fade_out_s: float
    repeats: int
    tail_s: float
    peak_dbfs: float = std.TEST_SIGNAL_PEAK_DBFS

    @property
    def sweep_samples(self) -> int:
        """Samples of one sweep."""
        return int(round(self.seconds * self.fs))

    @property
    def period_samples(self) -> int:
        """Samples of one sweep and its silent tail."""
        return self.sweep_samples + int(round(self.tail_s * self.fs))

    @property
    def log_ratio(self) -> float:
        """ln(f2/f1)."""
        return math.log(self.f2_hz / self.f1_hz)

    @property
    def seconds_per_octave(self) -> float:
        """Time the sweep takes for one octave, s: T ln 2 / ln(f2/f1)."""
        return self.seconds * math.log(2.0) / self.log_ratio

    def harmonic_advance_s(self, k: int) -> float:
        """How far before the linear response the k-th harmonic's response appears after
        deconvolution, s: T ln k / ln(f2/f1) (Farina 2000, sec. 3)."""
        return self.seconds * math.log(k) / self.log_ratio

    def frequency_at(self, t: float) -> float:
        """Instantaneous frequency at time ``t`` of the sweep, Hz."""
        return self.f1_hz * math.exp(t * self.log_ratio / self.seconds)

    @property
    def flat_range_hz(self) -> tuple[float, float]:
        """The band the deconvolution passes at full gain: outside the fades and at least
        :data:`EDGE_TAPER_OCTAVES` inside the start and end frequency."""
        lo = max(self.frequency_at(self.fade_in_s), self.f1_hz * 2.0 ** EDGE_TAPER_OCTAVES)
        hi = min(self.frequency_at(self.seconds - self.fade_out_s), self.f2_hz * 2.0 ** -EDGE_TAPER_OCTAVES)
        return lo, hi

    @property
    def ir_seconds(self) -> float:
        """Length of impulse response kept after its arrival, s: up to the second
        harmonic's response (less the part kept before the arrival) and at most the tail."""
        return min(self.harmonic_advance_s(2) - PRE_ARRIVAL_S, self.tail_s)

    def at_rate(self, fs: int) -> "SweepSpec":
        """The same samples played at another rate: frequencies scale by ``fs/self.fs``,
        times by its inverse."""
        r = fs / self.fs
        return replace(self, fs=int(fs), f1_hz=self.f1_hz * r, f2_hz=self.f2_hz * r, seconds=self.seconds / r,
                       fade_in_s=self.fade_in_s / r, fade_out_s=self.fade_out_s / r, tail_s=self.tail_s / r)

    def to_dict(self) -> dict:
        return {
            "signal": "exponential sine sweep", "fs": self.fs, "f1_hz": self.f1_hz, "f2_hz": self.f2_hz,
            "seconds": self.seconds, "fade_in_s": self.fade_in_s, "fade_out_s": self.fade_out_s,
            "repeats": self.repeats, "tail_s": self.tail_s, "peak_dbfs": self.peak_dbfs,
            "sweep_samples": self.sweep_samples, "period_samples": self.period_samples,
            "seconds_per_octave": round(self.seconds_per_octave, 6),
            "flat_range_hz": [round(f, 3) for f in self.flat_range_hz],
            "ir_seconds": round(self.ir_seconds, 6),
        }


def _number(value, what: str, fix: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError, OverflowError):
        raise InputError(f"{what} '{str(value)[:40]}' is not a number", fix) from None
    if not math.isfinite(v):
        raise InputError(f"{what} is {value}", fix)
    return v


def sweep_spec(
    fs: int = std.TEST_SIGNAL_RATE_HZ,
    f1_hz: float = DEFAULT_F1_HZ,
    f2_hz: float = DEFAULT_F2_HZ,
    seconds: float = DEFAULT_SECONDS,
    *,
    fade_in_s: float = DEFAULT_FADE_IN_S,
    fade_out_s: float = DEFAULT_FADE_OUT_S,
    repeats: int = DEFAULT_REPEATS,
    tail_s: float = DEFAULT_TAIL_S,
    peak_dbfs: float = std.TEST_SIGNAL_PEAK_DBFS,
    name: str = "sweep",
) -> SweepSpec:
    """Check the parameters of a sweep and return them as a :class:`SweepSpec`.

    Parameters
    ----------
    fs : sample rate, Hz (the 8 kHz octave band must fit: above 22.6 kHz).
    f1_hz, f2_hz : start and end frequency, Hz; the flat range (outside the fades) must
        reach from :data:`LOWEST_FLAT_HZ` (62.5 Hz) to :data:`HIGHEST_FLAT_HZ` (11.3 kHz),
        and ``f2_hz`` stay below 0.95 x the Nyquist frequency.
    seconds : length of one sweep, s. It must spend enough time per octave that the
        impulse response kept (:attr:`SweepSpec.ir_seconds`) is at least
        :data:`MIN_IR_SECONDS` (0.79 s, the 0.63 Hz modulation frequency's need).
    fade_in_s, fade_out_s : half-Hann fades at the start and end, s.
    repeats : number of sweeps (averaged by the deconvolution), 1 to 32.
    tail_s : silence after each sweep, s; at least the impulse response kept.
    peak_dbfs : peak level, dB re full scale (at most -0.1).
    name : what the sweep is, for error messages.

    Raises
    ------
    InputError
        A parameter out of range, with the fix in the message.
    """
    spec = _build_spec(fs, f1_hz, f2_hz, seconds, fade_in_s, fade_out_s, repeats, tail_s, peak_dbfs, name)
    _check_coverage(spec, name)
    return spec


def _build_spec(fs, f1_hz, f2_hz, seconds, fade_in_s, fade_out_s, repeats, tail_s, peak_dbfs,
                name: str) -> SweepSpec:
    """The range checks of :func:`sweep_spec` (all but the coverage of the bands)."""
    from .audio import check_rate
    from .bands import check_rate_for_octaves

    fs = check_rate(fs, name)
    check_rate_for_octaves(fs, name)
    f1 = _number(f1_hz, "start frequency", "give it in Hz, e.g. 40")
    f2 = _number(f2_hz, "end frequency", "give it in Hz, e.g. 20000")
    top = NYQUIST_SHARE * fs / 2.0
    if not 0.0 < f1 < f2:
        raise InputError(f"{name} runs from {f1:g} Hz to {f2:g} Hz", "give a start frequency above 0 and below the end")
    if f2 > top:
        raise InputError(f"{name} ends at {f2:g} Hz, above {top:.0f} Hz ({NYQUIST_SHARE:g} x the Nyquist frequency "
                         f"at {fs} Hz)", f"end it at {top:.0f} Hz or lower, or use a higher sample rate")
    T = _number(seconds, "sweep length", "give it in seconds, e.g. 15")
    fin = _number(fade_in_s, "fade-in", "give it in seconds, e.g. 0.1")
    fout = _number(fade_out_s, "fade-out", "give it in seconds, e.g. 0.02")
    tail = _number(tail_s, "silent tail", "give it in seconds, e.g. 3")
    peak = _number(peak_dbfs, "peak level", "give it in dBFS, e.g. -3")
    try:
        n_rep = int(repeats)
    except (TypeError, ValueError, OverflowError):
        raise InputError(f"repeats '{str(repeats)[:40]}' is not a whole number", f"give 1 to {MAX_REPEATS}") from None
    if n_rep != repeats or not 1 <= n_rep <= MAX_REPEATS:
        shown = f"{repeats:g}" if isinstance(repeats, (int, float)) and abs(repeats) < 1e9 else "out of range"
        raise InputError(f"repeats {shown} is outside 1..{MAX_REPEATS}",
                         f"give a whole number from 1 to {MAX_REPEATS}")
    if T <= 0 or fin < 0 or fout < 0 or fin + fout >= T:
        raise InputError(f"{name} of {T:g} s with fades of {fin:g} s and {fout:g} s",
                         "give a positive length longer than its two fades")
    if not 0.0 <= tail <= MAX_TAIL_S:
        raise InputError(f"silent tail {tail:g} s is outside 0..{MAX_TAIL_S:g} s", "give it in seconds, e.g. 3")
    if peak > -0.1 or peak < -60.0:
        raise InputError(f"peak level {peak:g} dBFS is outside -60..-0.1 dBFS",
                         "leave headroom for the converter, e.g. -3")
    spec = SweepSpec(fs=fs, f1_hz=f1, f2_hz=f2, seconds=T, fade_in_s=fin, fade_out_s=fout, repeats=n_rep,
                     tail_s=tail, peak_dbfs=peak)
    total = n_rep * spec.period_samples / fs
    if total > MAX_TOTAL_SECONDS:
        raise InputError(f"{name} signal would last {total:.0f} s", f"keep repeats x (length + tail) within "
                         f"{MAX_TOTAL_SECONDS:.0f} s")
    return spec


def _checked_spec(spec: SweepSpec, name: str) -> SweepSpec:
    """``spec`` if it is a :class:`SweepSpec` whose fields pass the range checks of
    :func:`sweep_spec` (a hand-made one may hold anything); O(1)."""
    if not isinstance(spec, SweepSpec):
        raise InputError(f"the parameters of the {name} are not a SweepSpec ({type(spec).__name__})",
                         "make them with envpredict.sinesweep.sweep_spec")
    return _build_spec(spec.fs, spec.f1_hz, spec.f2_hz, spec.seconds, spec.fade_in_s, spec.fade_out_s, spec.repeats,
                       spec.tail_s, spec.peak_dbfs, name)


def check_sweep(spec: SweepSpec, name: str = "sweep") -> None:
    """Refuse a sweep that cannot measure the seven octave bands and an impulse response
    long enough for the STI: its flat range must cover :data:`LOWEST_FLAT_HZ` ..
    :data:`HIGHEST_FLAT_HZ`, and it must be long enough (per octave) and have a long enough
    tail that :attr:`SweepSpec.ir_seconds` is at least :data:`MIN_IR_SECONDS`.

    Raises
    ------
    InputError
        ``spec`` is not a :class:`SweepSpec`, a parameter is out of the range
        :func:`sweep_spec` accepts, or the sweep is too narrow or too short (with the fix).
    """
    _check_coverage(_checked_spec(spec, name), name)


def _check_coverage(spec: SweepSpec, name: str) -> None:
    lo, hi = spec.flat_range_hz
    if lo > LOWEST_FLAT_HZ:
        raise InputError(
            f"{name} is flat only from {lo:.0f} Hz; the 125 Hz band needs the sweep from {LOWEST_FLAT_HZ:.1f} Hz",
            f"start it at {LOWEST_FLAT_HZ / 2 ** EDGE_TAPER_OCTAVES:.0f} Hz or lower (--f1) with a short fade-in")
    if hi < HIGHEST_FLAT_HZ:
        raise InputError(
            f"{name} is flat only up to {hi:.0f} Hz; the 8 kHz band needs the sweep up to {HIGHEST_FLAT_HZ:.0f} Hz",
            f"end it at {HIGHEST_FLAT_HZ * 2 ** EDGE_TAPER_OCTAVES:.0f} Hz or higher (--f2) with a short fade-out "
            "(at 44.1 or 48 kHz)")
    need = MIN_IR_SECONDS + PRE_ARRIVAL_S
    if spec.harmonic_advance_s(2) < need:
        t_min = need * spec.log_ratio / math.log(2.0)
        raise InputError(
            f"{name} of {spec.seconds:g} s from {spec.f1_hz:g} to {spec.f2_hz:g} Hz is too short for the lowest "
            f"band: it spends {spec.seconds_per_octave:.2f} s per octave, and the impulse response kept before the "
            f"second harmonic's response must be at least {MIN_IR_SECONDS:.2f} s (0.63 Hz modulation)",
            f"make it {math.ceil(t_min):d} s or longer (--seconds)")
    if spec.tail_s < MIN_IR_SECONDS:
        raise InputError(f"{name}'s silent tail of {spec.tail_s:g} s is shorter than the {MIN_IR_SECONDS:.2f} s of "
                         "impulse response the STI needs", "give a tail of 1 s or more (--tail), longer than the "
                         "room's reverberation")


def exponential_sweep(spec: SweepSpec) -> np.ndarray:
    """One exponential sine sweep with its fades (Farina 2000, eq. 4), peak at ``spec.peak_dbfs``.

    Parameters
    ----------
    spec : the sweep's parameters (:func:`sweep_spec`).

    Returns
    -------
    ndarray, shape (spec.sweep_samples,), float64.

    Raises
    ------
    InputError
        ``spec`` is not a :class:`SweepSpec` or holds a parameter :func:`sweep_spec` refuses.

    References
    ----------
    A. Farina, "Simultaneous measurement of impulse response and distortion with a
    swept-sine technique", 108th AES Convention, Paris 2000, preprint 5093.
    S. Mueller and P. Massarani, "Transfer-function measurement with sweeps", J. Audio
    Eng. Soc. 49(6), 443-471, 2001.

    Examples
    --------
    >>> s = exponential_sweep(sweep_spec(48000, 40, 20000, 10, tail_s=1))
    >>> s.size, round(float(np.max(np.abs(s))), 3)
    (480000, 0.708)
    """
    spec = _checked_spec(spec, "sweep")
    n = spec.sweep_samples
    t = np.arange(n) / spec.fs
    L = spec.log_ratio
    phase = 2.0 * np.pi * spec.f1_hz * spec.seconds / L * np.expm1(t * L / spec.seconds)
    x = np.sin(phase)
    for length, at_start in ((spec.fade_in_s, True), (spec.fade_out_s, False)):
        m = int(round(length * spec.fs))
        if m > 0:
            ramp = 0.5 - 0.5 * np.cos(np.pi * (np.arange(m) + 0.5) / m)  # half Hann, 0 -> 1
            if at_start:
                x[:m] *= ramp
            else:
                x[n - m:] *= ramp[::-1]
    return x * 10.0 ** (spec.peak_dbfs / 20.0)


def sweep_signal(spec: SweepSpec) -> np.ndarray:
    """The signal to play: ``spec.repeats`` sweeps, each followed by ``spec.tail_s`` of silence.

    Raises
    ------
    InputError
        As :func:`exponential_sweep`.
    """
    spec = _checked_spec(spec, "sweep")
    one = np.zeros(spec.period_samples)
    one[: spec.sweep_samples] = exponential_sweep(spec)
    return np.tile(one, spec.repeats)


@dataclass(frozen=True)
class SweepSignalResult:
    """What :func:`write_sweep_signal` wrote: the signal file, its parameter file, the parameters."""

    file: str
    parameter_file: str
    spec: SweepSpec
    cautions: tuple[str, ...] = field(default=())
    notes: tuple[str, ...] = field(default=())

    def to_dict(self) -> dict:
        return {
            "file": self.file, "parameter_file": self.parameter_file, **self.spec.to_dict(),
            "total_seconds": round(self.spec.repeats * self.spec.period_samples / self.spec.fs, 6),
            "cautions": list(self.cautions), "notes": list(self.notes),
        }


def parameter_path(path: str | os.PathLike) -> Path:
    """The parameter file of a sweep file: the same name with ``.json``.

    Raises
    ------
    InputError
        ``path`` is not a file path (or names no file, such as ``/``).
    """
    from . import checks

    p = checks.path(path, "sweep file")
    if not p.name:
        raise InputError(f"sweep file '{p}' names no file", "give the path of the sweep's WAV file")
    return p.with_suffix(PARAMETER_SUFFIX)


def write_sweep_signal(path: str | os.PathLike, spec: SweepSpec) -> SweepSignalResult:
    """Write the sweep signal (:func:`sweep_signal`) to a 24-bit WAV file and its parameters
    to the JSON file beside it (same name, ``.json``), each atomically.

    Parameters
    ----------
    path : WAV file to write (its folder must exist).
    spec : the parameters (:func:`sweep_spec`).

    Returns
    -------
    SweepSignalResult : both files and the parameters.

    Raises
    ------
    InputError
        ``spec`` is not a valid :class:`SweepSpec`, or a file cannot be written there
        (an input, a folder, a missing folder, not a ``.wav`` name).
    """
    from .audio import check_wav_path, write_wav
    from .outputs import atomic_write_text, check_output_file

    spec = _checked_spec(spec, "sweep")
    wav = check_wav_path(path)
    side = parameter_path(wav)
    check_output_file(wav, option="output")
    check_output_file(side, option="parameter file")
    x = sweep_signal(spec)
    notes = (
        f"Exponential sine sweep (Farina 2000): {spec.seconds_per_octave:.2f} s per octave; the deconvolution "
        f"keeps {spec.ir_seconds:.2f} s of impulse response after its arrival.",
        f"Keep '{side.name}' beside '{wav.name}': 'envpredict deconvolve' reads the parameters from it.",
    )
    result = SweepSignalResult(file=str(path), parameter_file=str(side), spec=spec, notes=notes)
    existed = side.exists()
    atomic_write_text(side, json.dumps(spec.to_dict(), indent=2) + "\n")
    try:
        write_wav(wav, x, spec.fs)
    except BaseException:
        if not existed:
            side.unlink(missing_ok=True)
        raise
    return result


def read_sweep_parameters(path: str | os.PathLike, fs: int, frames: int, name: str = "sweep") -> SweepSpec:
    """The parameters of a sweep file from the JSON file beside it (:func:`write_sweep_signal`),
    checked against the file's rate and length and by :func:`check_sweep`.

    Parameters
    ----------
    path : the sweep's WAV file.
    fs, frames : its sample rate and length (:func:`envpredict.audio.audio_info`).
    name : what the file is, for messages.

    Raises
    ------
    InputError
        No readable parameter file beside ``path``, parameters that do not describe the
        file, or a sweep :func:`check_sweep` refuses.
    """
    from . import checks

    side = parameter_path(path)
    fs = checks.sample_rate(fs, f"{name} '{path}'")
    frames = checks.samples(frames, f"length of {name} '{path}'")
    label = f"{name} '{path}'"
    fix = f"keep the '{side.name}' written by 'envpredict testsignal sweep' beside '{Path(path).name}'"
    if not side.is_file():
        raise InputError(f"{label} has no parameter file '{side.name}' beside it", fix)
    try:
        d = json.loads(side.read_text(encoding="utf-8"))
        spec = SweepSpec(fs=int(d["fs"]), f1_hz=float(d["f1_hz"]), f2_hz=float(d["f2_hz"]),
                         seconds=float(d["seconds"]), fade_in_s=float(d["fade_in_s"]),
                         fade_out_s=float(d["fade_out_s"]), repeats=int(d["repeats"]), tail_s=float(d["tail_s"]),
                         peak_dbfs=float(d.get("peak_dbfs", std.TEST_SIGNAL_PEAK_DBFS)))
    except (OSError, ValueError, KeyError, TypeError, OverflowError, RecursionError):
        raise InputError(f"parameter file '{side}' of {label} is not readable", fix) from None
    if spec.fs != fs or spec.repeats * spec.period_samples != frames:
        raise InputError(f"parameter file '{side.name}' does not describe {label} ({spec.fs} Hz, "
                         f"{spec.repeats * spec.period_samples} samples there; {fs} Hz, {frames} samples in the file)",
                         fix)
    check_sweep(spec, label)
    return spec


__all__ = [
    "SweepSpec", "SweepSignalResult", "check_sweep", "exponential_sweep", "parameter_path", "read_sweep_parameters",
    "sweep_signal", "sweep_spec", "write_sweep_signal",
]
