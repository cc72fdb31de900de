"""The impulse response from a recorded exponential sine sweep (the sweep job).

:func:`deconvolve_sweep` (arrays) and :func:`deconvolve_sweep_file` (files) recover the linear
impulse response of the chain a sweep (:mod:`envpredict.sinesweep`) was played through:

1. the sweep is brought to the recording's own sample rate (:func:`envpredict.audio.resample`);
2. the sweep is found in the recording, at an unknown offset of up to
   :data:`MAX_OFFSET_S`, by the one delay finder (:func:`envpredict.audio.estimate_delay`);
   a recording whose cross-correlation with the sweep is weak is refused;
3. each complete repeat is cut from the recording (fractional start by a phase shift),
   the repeats are averaged and deconvolved with the inverse filter
   (:func:`inverse_filter`): the time-reversed sweep with its amplitude compensation of
   6 dB per octave (Farina 2000), realised exactly as the sweep's spectral inverse within
   its flat range and tapered outside it (Mueller & Massarani 2001, sec. 5);
4. the harmonic distortion products, which the exponential sweep places before the linear
   response (the k-th at ``T ln k / ln(f2/f1)`` earlier), are cut away by a time window:
   the response kept starts :data:`envpredict.sinesweep.PRE_ARRIVAL_S` before the
   first arrival and lasts :attr:`envpredict.sinesweep.SweepSpec.ir_seconds`; the
   level the cut-away products (orders 2 to :data:`HARMONIC_ORDERS`) would have added is
   reported per octave band;
5. the peak-to-noise ratio of the response per octave band
   (:func:`envpredict.bands.octave_filterbank`, noise floor by
   :func:`envpredict.decay.find_noise_floor`).

Memory: :func:`deconvolve_sweep_file` reads only the part of the recording that can hold the
sweep (its offset of at most ``max_offset_s`` plus the sweep signal and the response); an
array longer than :data:`MAX_RECORDING_S` is refused.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import standards as std
from .exceptions import InputError
from .results import jsonable
from .sinesweep import PRE_ARRIVAL_S, SweepSpec, check_sweep, parameter_path

#: Largest offset of the sweep in the recording searched, s (judgement: a recorder
#: started by hand some seconds before the playback).
MAX_OFFSET_S: float = 10.0

#: A recording whose normalised cross-correlation with the played sweep peaks below this
#: does not hold the sweep (judgement: a sweep recorded in a room with a reverberation
#: time of 3 s and its direct sound 15 dB below the reverberant field reads above 0.1;
#: unrelated sound of the same length reads below 0.02).
MIN_CORRELATION: float = 0.05

#: How far the first arrival may lie before the strongest path of the unweighted
#: cross-correlation, s (judgement: a reflection stronger than the direct sound arrives
#: within 0.2 s of it, about 70 m of extra path).
SEARCH_S: float = 0.2

#: Harmonic orders whose distortion products are measured (the k-th lies
#: ``T ln k / ln(f2/f1)`` before the linear response; judgement: above the 5th, a
#: loudspeaker's products are buried in the noise).
HARMONIC_ORDERS: int = 5

#: Peak level of the recovered response as returned and written, dB re full scale: the
#: chain's gain can put a response's samples above full scale or near silence, and the
#: indirect method does not depend on the scale (judgement; the gain is reported as
#: ``peak_db``).
IR_PEAK_DBFS: float = -6.0

#: Longest recording accepted, s (judgement: the whole recording is held in memory).
MAX_RECORDING_S: float = 1200.0

#: Relative level below which the sweep's spectrum is not divided by (outside the taper
#: the inverse is zero anyway; this only keeps the division finite).
TINY_SPECTRUM: float = 1e-12


def _taper(f: np.ndarray, lo: float, hi: float, f1: float, f2: float) -> np.ndarray:
    """1 on [lo, hi], raised-cosine in log frequency to 0 at f1 and f2, 0 outside."""
    w = np.zeros_like(f)
    w[(f >= lo) & (f <= hi)] = 1.0
    with np.errstate(divide="ignore", invalid="ignore"):
        for a, b in ((f1, lo), (f2, hi)):
            sel = (f > min(a, b)) & (f < max(a, b))
            u = np.log(f[sel] / a) / np.log(b / a)  # 0 at the sweep's end, 1 at the flat range
            w[sel] = 0.5 - 0.5 * np.cos(np.pi * u)
    return w


def _max_fft_length(n_sweep: int, fs: int) -> int:
    """Longest transform :func:`inverse_filter` accepts for a sweep of ``n_sweep`` samples:
    twice what :func:`deconvolve_sweep` can need (two sweeps, the longest silent tail
    :data:`~envpredict.sinesweep.MAX_TAIL_S` and 1 s), at most
    :data:`envpredict.checks.MAX_SAMPLES` (judgement: a longer one is a mistake)."""
    from . import checks
    from .sinesweep import MAX_TAIL_S

    return int(min(checks.MAX_SAMPLES, 2 * (2 * n_sweep + (MAX_TAIL_S + 1.0) * fs)))


def inverse_filter(sweep: np.ndarray, fs: int, spec: SweepSpec, n_fft: int) -> np.ndarray:
    """Spectrum (``rfft`` of length ``n_fft``) of the inverse filter of one sweep.

    The sweep's spectrum ``S`` falls by 3 dB per octave (it spends equal time per octave);
    Farina's inverse filter, the time-reversed sweep with an amplitude envelope rising
    6 dB per octave of its instantaneous frequency, has ``|G| ~ 1/|S|`` and the phase of
    ``conj(S)``, so that ``S G`` is a band-limited impulse. Here it is realised exactly:
    ``G = W conj(S) / |S|^2`` with ``W`` = 1 on the sweep's flat range
    (:attr:`~envpredict.sinesweep.SweepSpec.flat_range_hz`, capped at 0.95 x the Nyquist
    frequency of ``fs``) and a raised-cosine taper in log frequency to 0 at the start and
    end frequency (Mueller & Massarani 2001, sec. 5: deconvolution by spectral division,
    regularised outside the excited band).

    Parameters
    ----------
    sweep : one sweep at rate ``fs`` (fades included).
    fs : sample rate, Hz. spec : the sweep's parameters at rate ``fs``.
    n_fft : transform length (at least the sweep's length).

    Returns
    -------
    complex ndarray, shape (n_fft // 2 + 1,).

    Raises
    ------
    InputError
        A sweep that is not a 1-D array of finite numbers (or is silent), a bad rate, parameters
        :func:`~envpredict.sinesweep.check_sweep` refuses, or a transform length shorter
        than the sweep or longer than twice what :func:`deconvolve_sweep` can need.

    References
    ----------
    A. Farina, AES 108th Convention, preprint 5093, 2000, sec. 3 (inverse filter).
    S. Mueller and P. Massarani, J. Audio Eng. Soc. 49(6), 2001, sec. 5.
    """
    from . import checks

    check_sweep(spec, "sweep")
    sweep = checks.array(sweep, "sweep", ndim=1)
    if not np.any(sweep):
        raise InputError("the sweep is silent", "give the sweep that was played")
    fs = checks.sample_rate(fs, "sweep")
    n_fft = checks.number(n_fft, "transform length", lo=sweep.size, hi=_max_fft_length(sweep.size, fs), integer=True)
    s = np.fft.rfft(sweep, n_fft)
    f = np.fft.rfftfreq(n_fft, 1.0 / fs)
    lo, hi = spec.flat_range_hz
    top = 0.95 * fs / 2.0
    w = _taper(f, lo, min(hi, top), spec.f1_hz, min(spec.f2_hz, fs / 2.0))
    p = np.abs(s) ** 2
    return w * np.conj(s) / np.maximum(p, TINY_SPECTRUM * p.max())


@dataclass(frozen=True)
class DeconvolutionResult:
    """The impulse response recovered from a sweep recording, and how it was found.

    Attributes
    ----------
    ir : the linear impulse response (starts ``pre_arrival_s`` before its first arrival),
        scaled to a peak of :data:`IR_PEAK_DBFS`.
    peak_db : the response's peak before that scaling, dB re 1: the gain of the chain from
        the played file to the recording at the peak of the response (the response in
        the recording's units is ``ir * 10**((peak_db - IR_PEAK_DBFS) / 20)``).
    fs : its sample rate (the recording's), Hz.
    offset_s : where the sweep's first arrival lies in the recording, s (the start
        offset plus the chain's latency and time of flight).
    correlation : normalised cross-correlation of the recording with the sweep there.
    repeats_used, repeats_played : complete repeats found and averaged; repeats in the sweep.
    peak_to_noise_db : (7,) per octave band, peak of the band's squared response over its
        noise floor, dB (NaN where the response has no noise floor within it).
    distortion_db : (7,) per band, the energy of the harmonic distortion products (orders
        2..:data:`HARMONIC_ORDERS`, with the noise in their window, over the first half of the
        gap between the second harmonic's response and the linear one) relative to the linear
        response's, dB: what they would have added had they not been cut away.
    sweep : the sweep's parameters as played (at the sweep file's or the declared rate).
    ir_file : the WAV file written, if any.
    """

    ir: np.ndarray
    fs: int
    peak_db: float
    offset_s: float
    correlation: float
    repeats_used: int
    repeats_played: int
    peak_to_noise_db: np.ndarray
    distortion_db: np.ndarray
    sweep: SweepSpec
    ir_file: str | None = None
    cautions: tuple[str, ...] = field(default=())
    notes: tuple[str, ...] = field(default=())

    def to_dict(self) -> dict:
        return jsonable({
            "method": "exponential sine sweep deconvolution (Farina 2000; Mueller & Massarani 2001)",
            "ir_file": self.ir_file, "fs": self.fs, "ir_seconds": round(self.ir.size / self.fs, 6),
            "pre_arrival_s": PRE_ARRIVAL_S, "peak_dbfs": IR_PEAK_DBFS, "peak_db": round(self.peak_db, 3),
            "offset_s": round(self.offset_s, 6),
            "correlation": round(self.correlation, 4),
            "repeats_used": self.repeats_used, "repeats_played": self.repeats_played,
            "bands_hz": list(std.OCTAVE_BANDS_HZ),
            "peak_to_noise_db": np.round(self.peak_to_noise_db, 1),
            "distortion_db": np.round(self.distortion_db, 1),
            "harmonic_orders": [2, HARMONIC_ORDERS],
            "sweep": self.sweep.to_dict(),
            "cautions": list(self.cautions), "notes": list(self.notes),
        })


def _check_clipping(x: np.ndarray, name: str, fix: str) -> None:
    from .audio import is_clipped

    if is_clipped(x):
        raise InputError(f"{name} is clipped (flat tops at the peak level)", fix)


def deconvolve_sweep(
    recording: np.ndarray,
    fs: int,
    sweep: np.ndarray,
    sweep_fs: int,
    spec: SweepSpec,
    *,
    max_offset_s: float = MAX_OFFSET_S,
    name: str = "recording",
    sweep_name: str = "sweep",
) -> DeconvolutionResult:
    """The linear impulse response from a recording of a played exponential sweep.

    Parameters
    ----------
    recording : 1-D recording at ``fs`` holding the played sweep signal at an unknown offset.
    fs : the recording's sample rate, Hz (above 22.6 kHz: the 8 kHz octave band).
    sweep : the signal that was played (:func:`envpredict.sinesweep.sweep_signal`:
        ``spec.repeats`` sweeps, each with its silent tail), at ``sweep_fs``.
    sweep_fs : the rate the sweep was played at, Hz (may differ from ``fs``).
    spec : the sweep's parameters at ``sweep_fs`` (:func:`envpredict.sinesweep.sweep_spec`).
    max_offset_s : largest offset of the sweep in the recording searched, s.
    name, sweep_name : what the inputs are, for messages.

    Returns
    -------
    DeconvolutionResult

    Raises
    ------
    InputError
        A clipped, silent or too-low-rate recording or sweep, a sweep too short for the
        lowest band, or a recording that does not hold the sweep (one line, with the fix).

    References
    ----------
    A. Farina, "Simultaneous measurement of impulse response and distortion with a
    swept-sine technique", 108th AES Convention, Paris 2000, preprint 5093.
    S. Mueller and P. Massarani, "Transfer-function measurement with sweeps", J. Audio
    Eng. Soc. 49(6), 443-471, 2001.
    """
    from scipy.fft import next_fast_len

    from .audio import as_mono_array, estimate_delay, resample, validate_signal
    from .bands import check_rate_for_octaves
    from . import checks
    from .decay import onset_index

    check_sweep(spec, sweep_name)
    max_offset_s = checks.number(max_offset_s, "largest offset of the sweep", lo=0.0, lo_open=True,
                                 hi=MAX_RECORDING_S, fix="give it in seconds, e.g. 10")
    s_arr, sweep_fs = as_mono_array(sweep, sweep_fs, sweep_name)
    if sweep_fs != spec.fs:
        raise InputError(f"the parameters of {sweep_name} are for {spec.fs} Hz, the signal is at {sweep_fs} Hz",
                         "give the parameters at the rate the sweep is played at")
    _check_clipping(s_arr, sweep_name, "generate it again with 'envpredict testsignal sweep' (peak -3 dBFS)")
    s_arr = validate_signal(s_arr, sweep_fs, name=sweep_name, allow_clipping=True)
    if s_arr.size != spec.repeats * spec.period_samples:
        raise InputError(f"{sweep_name} has {s_arr.size} samples; its parameters describe "
                         f"{spec.repeats * spec.period_samples}", "give the sweep file with its own parameter file")
    x, fs = as_mono_array(recording, fs, name)
    check_rate_for_octaves(fs, name)
    if x.size / fs > MAX_RECORDING_S:
        raise InputError(f"{name} lasts {x.size / fs:.0f} s; at most {MAX_RECORDING_S:.0f} s is read",
                         "cut the recording to the sweep and a few seconds around it")
    _check_clipping(x, name, "record again with less gain: the deconvolution assumes an undistorted recorder")
    x = validate_signal(x, fs, name=name, allow_clipping=True)

    # 1. the sweep at the recording's rate: the played signal and one period of it
    played = resample(s_arr, sweep_fs, fs)
    one = resample(s_arr[: spec.period_samples], sweep_fs, fs)
    rate = fs / sweep_fs
    n_sweep = int(math.ceil(spec.sweep_samples * rate))
    # 2. where the sweep is in the recording
    lag, corr = estimate_delay(played, x, fs, max_offset_s, excerpt_s=spec.repeats * spec.period_samples / sweep_fs)
    if abs(corr) < MIN_CORRELATION:  # either polarity
        raise InputError(
            f"{name} does not contain {sweep_name} (its cross-correlation with the sweep peaks at {abs(corr):.2f}; "
            f"at least {MIN_CORRELATION:.2f} is expected within {max_offset_s:g} s of its start)",
            "record the sweep played through the system, starting the recorder before the playback, "
            "and give the sweep file that was played")
    # 3. the complete repeats, averaged, and deconvolved. The cross-correlation peaks at the
    # strongest path of the unweighted correlation, which may lie up to SEARCH_S after the
    # first arrival: each segment starts that much (and the part kept before the arrival) earlier.
    pre = int(round(PRE_ARRIVAL_S * fs))
    search = int(round(SEARCH_S * fs))
    n_ir = int(round(spec.ir_seconds * fs))
    n_seg = search + pre + n_sweep + n_ir
    n_fft = next_fast_len(n_seg + n_sweep)
    f = np.fft.rfftfreq(n_fft, 1.0 / fs)
    acc = np.zeros(f.size, dtype=complex)
    used = 0
    for k in range(spec.repeats):
        start = lag + k * spec.period_samples * rate - search - pre  # exact (fractional) start of the segment
        i0 = int(math.floor(start))
        if start + search + pre < 0 or i0 + n_seg > x.size:  # the sweep, or its decay, is not all recorded
            continue
        # (a recording that starts less than SEARCH_S + PRE_ARRIVAL_S before the sweep: silence before it)
        seg = np.fft.rfft(np.r_[np.zeros(max(0, -i0)), x[max(0, i0): i0 + n_seg]], n_fft)
        acc += seg * np.exp(2j * np.pi * f * (start - i0) / fs)  # advance by the fraction of a sample
        used += 1
    if used == 0:
        raise InputError(
            f"{name} holds no complete sweep with its {spec.ir_seconds:.2f} s of decay (the sweep starts at "
            f"{lag / fs:.2f} s)", "record from before the playback starts until the last tail has ended")
    g = inverse_filter(one[:n_sweep], fs, spec, n_fft)
    h = np.fft.irfft(acc / used * g, n_fft)
    # 4. the first arrival (ISO 3382-1 onset before the strongest arrival near the correlation
    # peak), the linear part from just before it, and the distortion products before that
    peak = int(np.argmax(np.abs(h[: pre + 2 * search + 1])))
    onset = onset_index(h[: peak + 1])
    i_ir = onset - pre
    ir = np.take(h, np.arange(i_ir, i_ir + pre + n_ir), mode="wrap")
    # the products from the K-th harmonic's arrival (less the part before an arrival) to half-way
    # between the second harmonic's arrival and the linear one: the rest of the gap is a margin
    # against the band filters' backward spread of the linear response (judgement)
    reach = int(math.ceil(spec.harmonic_advance_s(HARMONIC_ORDERS) * fs)) + pre
    half_gap = int(round(spec.harmonic_advance_s(2) * fs / 2))
    stretch = np.take(h, np.arange(onset - reach, i_ir + pre + n_ir), mode="wrap")  # filtered as one piece
    # 5. figures per octave band
    pnr, dist = _band_figures(stretch, reach - half_gap, reach - pre, fs)
    cautions, notes = _messages(pnr, dist, used, spec, fs, sweep_fs)
    peak_amp = float(np.max(np.abs(ir)))
    return DeconvolutionResult(
        ir=ir * (10.0 ** (IR_PEAK_DBFS / 20.0) / peak_amp), peak_db=20.0 * math.log10(peak_amp), fs=fs,
        offset_s=(lag - search - pre + onset) / fs, correlation=corr, repeats_used=used, repeats_played=spec.repeats,
        peak_to_noise_db=pnr, distortion_db=dist, sweep=spec, cautions=cautions, notes=notes,
    )


#: A band whose peak-to-noise ratio is below this gets a caution: T30 needs 45 dB of range
#: (ISO 3382-1:2009, 5.3.3; :data:`envpredict.standards.T30_NEEDED_RANGE_DB`).
LOW_PNR_DB: float = std.T30_NEEDED_RANGE_DB

#: Distortion products above this level (re the linear response) get a note: the
#: measurement chain is driven hard (judgement: -20 dB is 10 % distortion).
HIGH_DISTORTION_DB: float = -20.0


def _band_figures(stretch: np.ndarray, harm_end: int, lin_start: int, fs: int) -> tuple[np.ndarray, np.ndarray]:
    """Peak-to-noise ratio of the response and level of the distortion products, per octave band,
    from one stretch of the deconvolved output: the products in ``stretch[:harm_end]``, the
    linear response in ``stretch[lin_start:]`` (filtered as one piece, so that no band filter
    sees an edge between them)."""
    from .bands import octave_filterbank
    from .decay import find_noise_floor, noise_energy

    bank = octave_filterbank(int(fs))
    nb = len(std.OCTAVE_BANDS_HZ)
    pnr, dist = np.full(nb, np.nan), np.full(nb, np.nan)
    for b, fc in enumerate(std.OCTAVE_BANDS_HZ):
        y = bank.apply(stretch, b, zero_phase=True)
        e_h, e_lin = y[:harm_end] ** 2, y[lin_start:] ** 2
        lin_total = float(e_lin.sum())
        if lin_total <= 0:
            continue
        dist[b] = 10.0 * np.log10(max(float(e_h.sum()), 1e-300) / lin_total)
        i_pk = int(np.argmax(e_lin))
        e = e_lin[i_pk:]
        floor = find_noise_floor(e, fs, fc)
        if floor.has_noise:
            noise = noise_energy(e, fs, floor, fc)
            if noise > 0:
                pnr[b] = 10.0 * np.log10(float(e_lin[i_pk]) / noise)
    return pnr, dist


def _messages(pnr: np.ndarray, dist: np.ndarray, used: int, spec: SweepSpec, fs: int,
              sweep_fs: int) -> tuple[tuple[str, ...], tuple[str, ...]]:
    names = lambda sel: ", ".join(f"{fc:g} Hz" for fc, s in zip(std.OCTAVE_BANDS_HZ, sel) if s)  # noqa: E731
    cautions = []
    low = np.isfinite(pnr) & (pnr < LOW_PNR_DB)
    if np.any(low):
        cautions.append(f"The impulse response has less than {LOW_PNR_DB:.0f} dB peak-to-noise ratio at "
                        f"{names(low)}: T30 needs that much. Measure with more level, a longer sweep or more repeats.")
    if used < spec.repeats:
        cautions.append(f"Only {used} of the {spec.repeats} sweeps were recorded whole (with their decay); "
                        "the others were left out.")
    notes = [
        f"Inverse filter: the time-reversed sweep with 6 dB/octave amplitude compensation (Farina 2000), realised "
        f"as the sweep's spectral inverse over {spec.flat_range_hz[0]:.0f}-{spec.flat_range_hz[1]:.0f} Hz "
        "(tapered to its start and end frequency).",
        f"Harmonic distortion products (orders 2-{HARMONIC_ORDERS}) lie {spec.harmonic_advance_s(2):.2f} s and more "
        "before the linear response and were cut away; distortion_db is what they would have added.",
        f"{used} repeat(s) averaged; the response starts {PRE_ARRIVAL_S * 1000:.0f} ms before its first "
        f"arrival and lasts {spec.ir_seconds:.2f} s after it.",
    ]
    if fs != sweep_fs:
        notes.append(f"The sweep (played at {sweep_fs} Hz) was resampled to the recording's {fs} Hz.")
    high = np.isfinite(dist) & (dist > HIGH_DISTORTION_DB)
    if np.any(high):
        notes.append(f"Strong distortion products at {names(high)} (above {HIGH_DISTORTION_DB:.0f} dB): the "
                     "loudspeaker or amplifier is driven hard; they were cut away, but lower the level if you can.")
    return tuple(cautions), tuple(notes)


def deconvolve_sweep_file(
    recording: str | os.PathLike,
    sweep: str | os.PathLike,
    *,
    out: str | os.PathLike | None = None,
    channel: int | None = None,
    sweep_rate: int | None = None,
    max_offset_s: float = MAX_OFFSET_S,
) -> DeconvolutionResult:
    """The impulse response from a sweep recording file (:func:`deconvolve_sweep`), written
    to ``out`` (32-bit float WAV) if given.

    Parameters
    ----------
    recording : the recording (WAV, FLAC or OGG) at the recorder's own rate.
    sweep : the sweep file that was played, with its parameter file beside it (same name,
        ``.json``, written by :func:`envpredict.sinesweep.write_sweep_signal`).
    out : WAV file for the impulse response (refused before any work if it is an input,
        a folder, or in a missing folder; written atomically).
    channel : channel of a multi-channel recording.
    sweep_rate : the rate the sweep was played at, Hz, where it is not the rate in its
        file (a player running the file at another rate); default: the file's rate.
    max_offset_s : largest offset of the sweep in the recording searched, s.

    Returns
    -------
    DeconvolutionResult, with ``ir_file`` set when ``out`` was written.

    Raises
    ------
    InputError
        As :func:`deconvolve_sweep`; also a missing or unreadable file or parameter file,
        parameters that do not describe the sweep file, and an ``out`` that cannot be
        written (before any work).
    """
    from . import checks
    from .audio import audio_info, check_rate, check_wav_path, load_audio, write_wav
    from .outputs import check_output_file
    from .sinesweep import read_sweep_parameters

    max_offset_s = checks.number(max_offset_s, "largest offset of the sweep (--max-offset)", lo=0.0, lo_open=True,
                                 hi=MAX_RECORDING_S, fix="give it in seconds, e.g. 10")

    if out is not None:
        check_wav_path(out)
        check_output_file(out, inputs=[recording, sweep, parameter_path(sweep)], option="--out")
    s_fs, s_frames, _ = audio_info(sweep, "sweep")
    spec = read_sweep_parameters(sweep, s_fs, s_frames, "sweep")
    if sweep_rate is not None:
        sweep_rate = check_rate(sweep_rate, "the sweep (--sweep-rate)")
        spec = spec.at_rate(sweep_rate)
        check_sweep(spec, f"sweep '{sweep}' at {sweep_rate} Hz")
    from .audio import FileSource
    from .bands import check_rate_for_octaves

    r_fs, _, _ = audio_info(recording, "recording")
    check_rate_for_octaves(r_fs, f"recording '{recording}'")
    s, _ = load_audio(sweep, name="sweep", check=False)
    # only the part of the recording that can hold the sweep: memory bounded by the sweep's length
    needed_s = max_offset_s + spec.repeats * spec.period_samples / spec.fs + spec.ir_seconds + 2 * SEARCH_S + 1.0
    with FileSource(recording, channel, name="recording") as src:
        x, fs = src.read(0, min(src.n, int(math.ceil(needed_s * src.fs)))), src.fs
    res = deconvolve_sweep(x, fs, s, spec.fs, spec, max_offset_s=max_offset_s, name=f"recording '{recording}'",
                           sweep_name=f"sweep '{sweep}'")
    if out is None:
        return res
    write_wav(out, res.ir, res.fs, subtype="FLOAT")
    from dataclasses import replace

    return replace(res, ir_file=str(Path(out)))


__all__ = ["DeconvolutionResult", "deconvolve_sweep_file", "deconvolve_sweep", "inverse_filter"]
