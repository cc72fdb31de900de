"""STI by the indirect method: from an impulse response (IEC 60268-16:2011, 6.2),
with the ISO 3382-1 decay figures of the same response."""

from __future__ import annotations

from dataclasses import dataclass
import os
from typing import Callable, Sequence

import numpy as np

from . import cautions as cau
from . import standards as std
from .audio import validate_signal
from .bands import check_rate_for_octaves, octave_bands
from .decay import DecayResult, check_impulse_response, decay_figures, onset_index
from .exceptions import InputError
from .modulation import mtf_from_ir
from .results import jsonable
from .sti import StiResult, check_speech_level, check_talker, parse_noise_levels, sti_from_mtf

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
                "notes": [],
            }
        )
        return jsonable(d)


def sti_from_ir(
    ir: np.ndarray,
    fs: int,
    *,
    noise_db: Sequence[float] | str | None = None,
    speech_level_dba: float = std.DEFAULT_SPEECH_LEVEL_DBA,
    talker: str = std.DEFAULT_TALKER,
    auditory: bool = True,
    progress: Callable[[int, int], None] | None = None,
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
    speech_level_dba : A-weighted speech level at the listener, dB(A) (default 60, a
        normal voice at 1 m).
    talker : "male" or "female".
    auditory : apply masking and reception threshold (IEC 60268-16 Ed.4).

    Valid input: at least 0.79 s of response after its onset; the response should
    decay to its noise floor within the file.

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
        option out of range (noise levels, speech level, talker).
    """
    talker = check_talker(talker)
    speech_level_dba = check_speech_level(speech_level_dba)
    noise = parse_noise_levels(noise_db) if noise_db is not None else None
    x = validate_signal(ir, fs, name="impulse response")
    fs = int(fs)
    check_rate_for_octaves(fs, "impulse response")
    return _analyse(x, fs, noise=noise, speech_level_dba=speech_level_dba, talker=talker, auditory=auditory,
                    progress=progress, label="the signal")


def _analyse(x: np.ndarray, fs: int, *, noise: np.ndarray | None, speech_level_dba: float, talker: str,
             auditory: bool, progress: Callable[[int, int], None] | None, label: str) -> IrResult:
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
    res = sti_from_mtf(mtf, noise_db=noise, speech_level_dba=speech_level_dba, talker=talker, auditory=auditory)
    if progress:
        progress(3, 3)

    cautions = [cau.LIFE_SAFETY]
    low = cau.below_target(res.sti)
    if low:
        cautions.append(low)
    if noise is None:
        cautions.append(cau.NO_NOISE)
    if not auditory:
        cautions.append(cau.NO_AUDITORY)
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
        cautions=tuple(cautions), ir_range_db=decay.range_db,
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
    speech_level_dba: float = std.DEFAULT_SPEECH_LEVEL_DBA,
    talker: str = std.DEFAULT_TALKER,
    auditory: bool = True,
    progress: Callable[[int, int], None] | None = None,
) -> IrResult:
    """STI (indirect method) and ISO 3382-1 decay figures of an impulse-response file.

    The options are checked before the file is read (a bad option is refused without
    touching the audio); then one channel of the file is loaded and validated
    (:func:`envpredict.audio.load_audio`) and passed to :func:`sti_from_ir`.

    Parameters
    ----------
    path : WAV, FLAC or OGG file holding the impulse response.
    channel : channel of a multi-channel file (0 = first); ``None`` requires a mono file.
    noise_db, speech_level_dba, talker, auditory, progress : as for :func:`sti_from_ir`.

    Returns
    -------
    IrResult, the same as ``sti_from_ir(*load_audio(path, channel), ...)``.

    Raises
    ------
    InputError
        A bad option, or a missing, unreadable, clipped or silent file, or one that is not
        an impulse response (:func:`envpredict.decay.impulse_shape`).
    """
    from .audio import load_audio

    talker = check_talker(talker)
    speech_level_dba = check_speech_level(speech_level_dba)
    noise = parse_noise_levels(noise_db) if noise_db is not None else None
    x, fs = load_audio(path, channel, name="impulse response")
    x = validate_signal(x, fs, name="impulse response")
    fs = int(fs)
    check_rate_for_octaves(fs, "impulse response")
    name = os.path.basename(os.fsdecode(path)).encode("utf-8", "surrogateescape").decode("utf-8", "replace")
    return _analyse(x, fs, noise=noise, speech_level_dba=speech_level_dba, talker=talker, auditory=auditory,
                    progress=progress, label=f"'{name}'")
