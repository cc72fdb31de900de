"""STI by the indirect method: from an impulse response (IEC 60268-16:2011, 6.2),
with the ISO 3382-1 decay figures of the same response."""

from __future__ import annotations

from dataclasses import dataclass, replace
import os
from typing import TYPE_CHECKING, Callable, Sequence

import numpy as np

from . import cautions as cau
from . import standards as std
from .audio import validate_signal
from .bands import check_rate_for_octaves, octave_bands
from .decay import DecayResult, check_impulse_response, decay_figures, onset_index
from .exceptions import InputError
from .hearing import Audiogram, check_auditory
from .modulation import mtf_from_ir
from .results import jsonable
from .sti import (
    StiResult,
    a_weighted_level,
    check_requirement,
    check_speech_level,
    check_talker,
    parse_noise_levels,
    parse_speech_levels,
    sti_from_mtf,
)
from .tables import load_audiogram

if TYPE_CHECKING:
    from .deconvolve import DeconvolutionResult

#: Shortest usable impulse response after its onset: half a period of the lowest
#: modulation frequency, so that the Fourier kernel at 0.63 Hz changes sign within
#: the response (judgement; common practice, no source). 1/(2*0.63 Hz) = 0.79 s.
MIN_IR_SECONDS: float = 1.0 / (2.0 * min(std.MODULATION_FREQUENCIES_HZ))

#: Leading samples kept before the onset (the zero-phase band filters spread the
#: direct sound backwards by up to about 2/bandwidth = 23 ms at 125 Hz).
PRE_ONSET_S: float = 0.025

#: A response with no noise floor that ends less than this far below its peak was cut
#: while still decaying: its late energy is missing (45 dB, the range T30 needs:
#: ISO 3382-1:2009, 3.3 and 5.3.3, see :data:`envpredict.standards.T30_NEEDED_RANGE_DB`).
TRUNCATION_RANGE_DB: float = std.T30_NEEDED_RANGE_DB

#: A band with less decay than this above its noise floor gets a caution: its MTF rests
#: on a short stretch of decay (judgement: the range T20 would need is 35 dB; below
#: 20 dB the Schroeder integral of the band is dominated by its noise compensation).
WEAK_DECAY_DB: float = 20.0


#: An impulse response must decay by at least this much in some band; otherwise the file
#: is noise or a recording, not an impulse response (judgement).
MIN_DECAY_DB: float = 10.0


@dataclass(frozen=True)
class IrResult:
    """STI and decay figures of one impulse response."""

    sti: StiResult
    decay: DecayResult
    fs: int
    duration_s: float
    speech_level_dba: float
    cautions: tuple[str, ...]
    ir_range_db: np.ndarray  # decay range of the IR itself per band, dB
    notes: tuple[str, ...] = ()  # where the speech and noise levels came from
    deconvolution: "DeconvolutionResult | None" = None  # how the IR was recovered from a sweep recording

    def to_dict(self) -> dict:
        d = self.sti.to_dict()
        d.update(
            {
                "method": "indirect (impulse response), IEC 60268-16:2011",
                "fs": self.fs,
                "duration_s": round(self.duration_s, 4),
                "speech_level_dba": self.speech_level_dba,
                "decay": self.decay.to_dict(),
                "cautions": list(self.cautions),
                "notes": list(self.notes),
            }
        )
        if self.deconvolution is not None:
            d["deconvolution"] = self.deconvolution.to_dict()
        return jsonable(d)


def sti_from_ir(
    ir: np.ndarray,
    fs: int,
    *,
    noise_db: Sequence[float] | str | None = None,
    speech_level_dba: float | None = None,
    talker: str = std.DEFAULT_TALKER,
    auditory: bool = True,
    progress: Callable[[int, int], None] | None = None,
    speech_db: Sequence[float] | str | None = None,
    requirement: float | None = None,
    audiogram: Audiogram | str | os.PathLike | None = None,
) -> IrResult:
    """STI (indirect method) and ISO 3382-1 decay figures from an impulse response.

    The response is split into the seven octave bands (zero-phase Butterworth band
    passes, IEC 61260-1 base-2 edges); each band's MTF at the 14 modulation
    frequencies follows Schroeder's formula over the part of the response above its
    noise floor (the noise of the measurement is not the site's noise: the site's
    noise enters through ``noise_db``); the MTF is then corrected for background
    noise, auditory masking and the reception threshold and turned into the STI
    (:func:`envpredict.sti.sti_from_mtf`).

    Parameters
    ----------
    ir : 1-D impulse response.
    fs : sample rate, Hz (above 22.6 kHz so the 8 kHz band fits).
    noise_db : seven octave-band background-noise levels at the listener, dB SPL.
    speech_level_dba : A-weighted speech level at the listener, dB(A), with the standard
        speech spectrum of ``talker`` (default 60, a normal voice at 1 m).
    talker : "male" or "female".
    auditory : apply masking and reception threshold (IEC 60268-16 Ed.4).
    speech_db : instead of ``speech_level_dba``, seven measured octave-band speech levels
        at the listener, dB SPL, 125 Hz ... 8 kHz (e.g. of the test signal played at the
        system's speech level, measured with a band level meter).
    requirement : the STI the system must reach (e.g. a local code's 0.50); the result
        then states whether it is met, judged on the unrounded value.
    audiogram : a listener with hearing loss (:mod:`envpredict.hearing`): an Audiogram
        (e.g. of :func:`envpredict.hearing.age_audiogram`), its text form
        ``"250:20,500:25,..."`` or a CSV file (:func:`envpredict.tables.load_audiogram`);
        it raises the reception threshold of each band (audibility only). Needs ``auditory``.

    Valid input: at least 0.79 s of response after its onset; the response should
    decay to its noise floor within the file. The array is taken as floating-point
    samples: peaks above 1.0 are accepted, flat tops at the peak are refused as clipping
    (:class:`envpredict.audio.SignalCheck`).

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(1)
    >>> fs, T = 48000, 1.0
    >>> t = np.arange(int(2.5 * fs)) / fs
    >>> ir = rng.standard_normal(t.size) * np.exp(-6.9 * t / T)
    >>> r = sti_from_ir(ir * 0.1, fs, auditory=False)
    >>> 0.5 < r.sti.sti < 0.7
    True

    Raises
    ------
    InputError
        For an impulse response refused by the input rule (not numeric, not one channel, empty,
        NaN/inf, silent, clipped, a rate outside the supported range), too short, or not an impulse
        response, or an
        option out of range (noise levels, speech level, talker), or a refused audiogram.
    """
    talker = check_talker(talker)
    speech, speech_level_dba = _speech_levels(speech_level_dba, speech_db)
    requirement = check_requirement(requirement)
    audiogram = check_auditory(load_audiogram(audiogram), auditory)
    noise = parse_noise_levels(noise_db) if noise_db is not None else None
    x = validate_signal(ir, fs, name="impulse response")
    fs = int(fs)
    check_rate_for_octaves(fs, "impulse response")
    return _analyse(x, fs, noise=noise, speech_level_dba=speech_level_dba, talker=talker, auditory=auditory,
                    progress=progress, label="the signal", speech_db=speech,
                    notes=_speech_note(speech, speech_level_dba), requirement=requirement, audiogram=audiogram)


def _speech_levels(speech_level_dba: float | None, speech_db) -> tuple[np.ndarray | None, float]:
    """The checked speech level: ``(None, dB(A))`` for the standard spectrum, or the seven
    measured band levels with their A-weighted sum."""
    if speech_db is None:
        return None, check_speech_level(std.DEFAULT_SPEECH_LEVEL_DBA if speech_level_dba is None
                                        else speech_level_dba)
    if speech_level_dba is not None:
        raise InputError("both a speech level in dB(A) and octave-band speech levels were given",
                         "give one of them (--speech-level or --speech-levels)")
    levels = parse_speech_levels(speech_db)
    return levels, a_weighted_level(levels)


def _speech_note(speech: np.ndarray | None, level_dba: float) -> tuple[str, ...]:
    if speech is None:
        return ()
    return (f"Speech: measured octave-band levels at the listener ({level_dba:.1f} dB(A) A-weighted sum), "
            "in place of the standard speech spectrum.",)


def _analyse(x: np.ndarray, fs: int, *, noise: np.ndarray | None, speech_level_dba: float, talker: str,
             auditory: bool, progress: Callable[[int, int], None] | None, label: str,
             speech_db: np.ndarray | None = None, notes: tuple[str, ...] = (),
             requirement: float | None = None, audiogram: Audiogram | None = None) -> IrResult:
    """The indirect method on a validated response (options already checked)."""
    if x.size / fs < MIN_IR_SECONDS:  # too short to judge its shape, and for any figure
        raise InputError(
            f"impulse response is {x.size / fs:.3f} s long; at least {MIN_IR_SECONDS:.2f} s is needed for the "
            "0.63 Hz modulation frequency",
            "measure or export a longer impulse response",
        )
    check_impulse_response(x, fs, label)
    t0 = onset_index(x)
    after = (x.size - t0) / fs
    if after < MIN_IR_SECONDS:
        raise InputError(
            f"impulse response is {after:.2f} s long after its onset; at least {MIN_IR_SECONDS:.2f} s is "
            "needed for the 0.63 Hz modulation frequency",
            "measure or export a longer impulse response",
        )
    if progress:
        progress(0, 3)
    start = max(0, t0 - int(PRE_ONSET_S * fs))
    x = x[start:]
    t0 -= start
    bands = octave_bands(x, fs, zero_phase=True)
    if progress:
        progress(1, 3)
    decay = decay_figures(bands, fs, t0)
    if np.all(decay.range_db < MIN_DECAY_DB):
        raise InputError(
            f"the file shows less than {MIN_DECAY_DB:.0f} dB of decay in every octave band: it does not look "
            "like an impulse response",
            "give a measured impulse response (for a recorded test signal use the stipa command)",
        )
    if progress:
        progress(2, 3)
    lengths = t0 + np.round(decay.crossing_s * fs).astype(int)
    mtf = mtf_from_ir(bands, fs, std.MODULATION_FREQUENCIES_HZ, lengths=lengths)
    res = replace(sti_from_mtf(mtf, noise_db=noise, speech_level_dba=speech_level_dba, talker=talker,
                               auditory=auditory, speech_db=speech_db, audiogram=audiogram), requirement=requirement)
    if progress:
        progress(3, 3)

    cautions = [cau.LIFE_SAFETY]
    low = cau.below_target(res.sti, requirement)
    if low:
        cautions.append(low)
    if noise is None:
        cautions.append(cau.NO_NOISE)
    if not auditory:
        cautions.append(cau.NO_AUDITORY)
    cautions.extend(cau.listener_cautions(res))
    no_floor = ~np.isfinite(decay.noise_floor_db)
    cut = no_floor & (decay.range_db < TRUNCATION_RANGE_DB)
    if np.any(cut):
        names = ", ".join(f"{f:g} Hz" for f, c in zip(std.OCTAVE_BANDS_HZ, cut) if c)
        cautions.append(
            f"The impulse response seems cut off before it decayed ({names}): the MTF is too high "
            "there. Export a longer response."
        )
    weak = ~cut & (decay.range_db < WEAK_DECAY_DB)
    if np.any(weak):
        names = ", ".join(f"{f:g} Hz" for f, c in zip(std.OCTAVE_BANDS_HZ, weak) if c)
        cautions.append(
            f"The impulse response has less than {WEAK_DECAY_DB:.0f} dB of decay above its noise floor at {names}: "
            "the MTF there is uncertain. Measure with more excitation level or averaging."
        )
    cautions.extend(_decay_shape_cautions(decay))
    return IrResult(
        sti=res, decay=decay, fs=fs, duration_s=x.size / fs, speech_level_dba=speech_level_dba,
        cautions=tuple(cautions), ir_range_db=decay.range_db, notes=notes,
    )


def _by_band(pairs: tuple[tuple[str, float], ...]) -> str:
    """'250 Hz (EDT), 500 Hz (EDT, T20)' from (figure, band) pairs."""
    bands: dict[float, list[str]] = {}
    for name, fc in pairs:
        bands.setdefault(fc, []).append(name.upper())
    return ", ".join(f"{fc:g} Hz ({', '.join(names)})" for fc, names in bands.items())


def _decay_shape_cautions(decay: DecayResult) -> list[str]:
    """Cautions for decay curves that are not straight (details in the decay notes)."""
    out = []
    if decay.withheld:
        out.append(
            f"Decay figures withheld at {_by_band(decay.withheld)}: a line fitted to the decay curve there "
            "gives a time the response does not support (a curve far from straight, as with a strong echo, "
            "or a decay as fast as the octave filter's own). See the decay notes."
        )
    if decay.bent:
        out.append(
            f"The decay curve is not straight at {_by_band(decay.bent)} (non-linearity above "
            f"{std.DECAY_NONLINEARITY_LIMIT_PERMILLE:.0f} per mille, ISO 3382-2 Annex B): those decay figures "
            "are suspect (an echo, a double slope or coupled spaces?)."
        )
    return out


def sti_from_ir_file(
    path: str | os.PathLike,
    *,
    channel: int | None = None,
    noise_db: Sequence[float] | str | None = None,
    speech_level_dba: float | None = None,
    talker: str = std.DEFAULT_TALKER,
    auditory: bool = True,
    progress: Callable[[int, int], None] | None = None,
    speech_db: Sequence[float] | str | None = None,
    noise_recording: str | os.PathLike | None = None,
    noise_channel: int | None = None,
    calibration_db: float | None = None,
    calibrator: str | os.PathLike | None = None,
    calibrator_level: float | None = None,
    calibrator_channel: int | None = None,
    requirement: float | None = None,
    sweep: str | os.PathLike | None = None,
    sweep_rate: int | None = None,
    audiogram: Audiogram | str | os.PathLike | None = None,
) -> IrResult:
    """STI (indirect method) and ISO 3382-1 decay figures of an impulse-response file.

    The options are checked before the file is read (a bad option is refused without
    touching the audio); then one channel of the file is loaded and validated
    (:func:`envpredict.audio.load_audio`, by the clipping rule of the file's sample
    format: a floating-point file may peak above 1.0) and analysed as by :func:`sti_from_ir`.

    Parameters
    ----------
    path : WAV, FLAC or OGG file holding the impulse response.
    channel : channel of a multi-channel file (0 = first); ``None`` requires a mono file.
    noise_db, speech_level_dba, talker, auditory, progress, speech_db, requirement, audiogram :
        as for :func:`sti_from_ir`.
    noise_recording : instead of ``noise_db``, a calibrated recording of the site's
        background noise at the listener; its octave-band levels (Leq over the whole
        file, :func:`envpredict.audio.octave_band_levels`) are the noise levels.
    noise_channel : channel of a multi-channel noise recording.
    calibration_db, calibrator, calibrator_level, calibrator_channel : the noise
        recording's calibration, as for the direct method
        (:func:`envpredict.audio.resolve_calibration`); the calibrator channel defaults
        to ``noise_channel``.
    sweep : the exponential sweep file that was played, when ``path`` is a recording of it
        rather than an impulse response: the response is first recovered by
        :func:`envpredict.deconvolve.deconvolve_sweep_file` (its report in ``deconvolution``,
        its cautions added to the result's).
    sweep_rate : the rate the sweep was played at, if not its file's (with ``sweep``).

    Returns
    -------
    IrResult, the same as ``sti_from_ir(*load_audio(path, channel), ...)``.

    Raises
    ------
    InputError
        A bad option, or a missing, unreadable, clipped or silent file, or one that is not
        an impulse response (:func:`envpredict.decay.impulse_shape`).
    """
    from .audio import load_audio, octave_band_levels_file, resolve_calibration

    talker = check_talker(talker)
    speech, speech_level_dba = _speech_levels(speech_level_dba, speech_db)
    requirement = check_requirement(requirement)
    audiogram = check_auditory(load_audiogram(audiogram), auditory)
    notes = _speech_note(speech, speech_level_dba)
    noise = parse_noise_levels(noise_db) if noise_db is not None else None
    calibrated = calibration_db is not None or calibrator is not None or calibrator_level is not None
    if noise_recording is None and (calibrated or noise_channel is not None or calibrator_channel is not None):
        raise InputError("a calibration or noise channel was given without a noise recording",
                         "give the noise recording (--noise-recording), or leave the calibration out")
    if sweep_rate is not None and sweep is None:
        raise InputError("--sweep-rate was given without --sweep", "give the sweep file that was played too")
    if noise_recording is not None:
        if noise is not None:
            raise InputError("both noise levels and a noise recording were given",
                             "give one of them (--noise or --noise-recording)")
        if not calibrated:
            raise InputError("the noise recording has no calibration",
                             "give --calibration-db (dB SPL of a full-scale RMS signal) or --calibrator with "
                             "--calibrator-level")
        cal, how = resolve_calibration(calibration_db, calibrator, calibrator_level,
                                       noise_channel if calibrator_channel is None else calibrator_channel)
        noise = octave_band_levels_file(noise_recording, noise_channel, calibration_db=cal)
        noise_name = os.path.basename(os.fsdecode(noise_recording))
        notes += (f"Noise: octave-band Leq of the recording '{_printable(noise_name)}' "
                  f"(calibration {cal:.1f} dB SPL for a full-scale RMS signal, from "
                  f"{'a calibrator recording' if how == 'calibrator' else 'the given offset'}).",)
    name = _printable(os.path.basename(os.fsdecode(path)))
    if sweep is not None:
        from .deconvolve import deconvolve_sweep_file

        dec = deconvolve_sweep_file(path, sweep, channel=channel, sweep_rate=sweep_rate)
        res = _analyse(dec.ir, dec.fs, noise=noise, speech_level_dba=speech_level_dba, talker=talker,
                       auditory=auditory, progress=progress, label=f"the response recovered from '{name}'",
                       speech_db=speech, notes=notes, requirement=requirement, audiogram=audiogram)
        return replace(res, cautions=res.cautions + dec.cautions, deconvolution=dec)
    # validated once, as it is read, by the clipping rule of the file's sample format
    # (floating-point files may peak above 1.0; see envpredict.audio.SignalCheck)
    x, fs = load_audio(path, channel, name="impulse response")
    fs = int(fs)
    check_rate_for_octaves(fs, "impulse response")
    return _analyse(x, fs, noise=noise, speech_level_dba=speech_level_dba, talker=talker, auditory=auditory,
                    progress=progress, label=f"'{name}'", speech_db=speech, notes=notes, requirement=requirement,
                    audiogram=audiogram)


def _printable(name: str) -> str:
    """A file name as text (undecodable bytes shown as replacement characters)."""
    return name.encode("utf-8", "surrogateescape").decode("utf-8", "replace")
