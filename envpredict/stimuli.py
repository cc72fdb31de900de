"""The stimuli of a listening test: speech-in-noise mixtures at chosen SNRs, written to a folder.

:func:`write_stimuli` mixes the speech with a noise segment at each SNR by the same
rules as the sweep (:mod:`envpredict.sweep`: the SNR referred to the active or the
long-term speech level, the noise at its long-term level over the segment, an optional
impulse response applied to the speech), brings every mixture to one presentation
level in dB re full scale, refuses a mixture whose true (inter-sample) peak would
exceed full scale (or scales all files by one common factor, and says so), and writes
the WAV files with a manifest CSV. With a processing chain (``process``, as the sweep's)
it writes each mixture through the chain as well, flagged in the manifest. The noise
segment of each mixture is drawn from a seeded generator: the same inputs and seed give
the same files, bit for bit. The folder must be new or empty; it appears whole or not
at all (:func:`envpredict.outputs.atomic_directory`).
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import standards as std
from .exceptions import InputError
from .results import jsonable
from .sweep import SweepResult

#: Name of the manifest written beside the stimuli.
MANIFEST_NAME: str = "manifest.csv"

#: Sample format of the stimuli (libsndfile subtype; judgement: 24-bit PCM, which every
#: audio player reads, 144 dB below full scale).
STIMULUS_SUBTYPE: str = "PCM_24"

#: A mixture clips when its true peak (:func:`envpredict.audio.true_peak`, 4x
#: oversampled as in ITU-R BS.1770-4 Annex 2) reaches this magnitude (full scale): a
#: converter's reconstruction filter clips it there even when no sample does.
CLIP_PEAK: float = 1.0

#: True peak the loudest mixture is brought to when all files are scaled to fit, dB TP
#: (judgement: 1 dB of headroom for converters and for the 4x estimate's under-reading
#: near the Nyquist frequency).
FIT_PEAK_DB: float = -1.0

#: SNRs of the stimuli are rounded to this step, dB (judgement: the resolution at which
#: test SNRs are set and reported).
SNR_STEP_DB: float = 0.1

#: Most stimuli one call writes (judgement, as the sweep's SNR limit).
MAX_STIMULI: int = 401

#: Columns of the manifest (the keys of :meth:`Stimulus.to_dict`).
MANIFEST_COLUMNS: tuple[str, ...] = (
    "file", "sentence", "processed", "snr_db", "snr_reference", "level_convention", "speech_active_level_db",
    "speech_long_term_level_db", "noise_level_db", "mixture_level_db", "peak_db", "true_peak_dbtp",
    "noise_offset_s", "noise_offset_samples", "common_gain_db", "seed",
)

#: End of the file name of a mixture through the processing chain (before ``.wav``).
PROCESSED_SUFFIX: str = "_processed"


@dataclass(frozen=True)
class Stimulus:
    """One written mixture: its file name, SNR and levels (dB re full scale).

    ``peak_db`` is the sample peak, ``true_peak_dbtp`` the true (inter-sample) peak in
    dB TP (ITU-R BS.1770-4 Annex 2). For a ``processed`` file (the mixture through the
    processing chain), the SNR and the speech and noise levels are those of the mixture
    the chain was given (at the same presentation gain); its mixture level and peaks
    are those of the processed file.
    """

    file: str
    sentence: str
    processed: bool
    snr_db: float
    snr_reference: str
    level_convention: str
    speech_active_level_db: float
    speech_long_term_level_db: float
    noise_level_db: float
    mixture_level_db: float
    peak_db: float
    true_peak_dbtp: float
    noise_offset_s: float
    noise_offset_samples: int
    common_gain_db: float
    seed: int

    def to_dict(self) -> dict:
        return jsonable({k: (round(v, 3) if isinstance(v, float) else v)
                         for k, v in ((c, getattr(self, c)) for c in MANIFEST_COLUMNS)})


@dataclass(frozen=True)
class StimuliResult:
    """The stimuli written to a folder.

    Attributes
    ----------
    folder : where the files and the manifest are.
    stimuli : one :class:`Stimulus` per file, in SNR order.
    presentation_level_db : the level asked for, dB re full scale (the speech's level
        for the ``"speech"`` convention, the mixture's for ``"mixture"``).
    common_gain_db : gain applied to every file to avoid clipping (0: none).
    fs : sample rate, Hz.
    seed : seed of the noise-segment draw.
    cautions, notes : what the user must read; method details.
    process : name of the processing chain the processed files went through, or ``None``.
    """

    folder: str
    stimuli: tuple[Stimulus, ...]
    presentation_level_db: float
    common_gain_db: float
    fs: int
    seed: int
    cautions: tuple[str, ...] = field(default_factory=tuple)
    notes: tuple[str, ...] = field(default_factory=tuple)
    process: str | None = None

    def to_dict(self) -> dict:
        return jsonable({
            "folder": self.folder,
            "manifest": MANIFEST_NAME,
            "presentation_level_db": self.presentation_level_db,
            "common_gain_db": round(self.common_gain_db, 3),
            "fs": self.fs,
            "seed": self.seed,
            "process": self.process,
            "stimuli": [s.to_dict() for s in self.stimuli],
            "cautions": list(self.cautions),
            "notes": list(self.notes),
        })


#: Lowest presentation level accepted, dB re full scale: below it the quietest file
#: holds nothing but rounding to 24 bits (about -144 dB; judgement).
MIN_LEVEL_DB: float = -140.0

#: Longest start of a stimulus file name, bytes (the file name adds about 20 to it;
#: NAME_MAX is 255 bytes).
MAX_NAME_CHARS: int = 200


def check_stimuli_folder(folder: str | os.PathLike) -> Path:
    """Refuse a stimuli folder that exists and is not empty (before any work).

    Raises
    ------
    InputError
        For something that is not a path, or a folder (or file) that exists and is not empty.
    """
    from .checks import path

    p = path(folder, "stimuli folder")
    if p.exists() and (not p.is_dir() or any(p.iterdir())):
        raise InputError(f"stimuli folder '{p}' exists and is not empty",
                         "give the name of a new or empty folder for --write-stimuli")
    return p


def _db(power: float) -> float:
    return 10.0 * math.log10(power) if power > 0 else -math.inf


def write_stimuli(
    folder: str | os.PathLike,
    clean: np.ndarray,
    noise: np.ndarray,
    fs: int,
    snr_db: Sequence[float],
    *,
    ir: np.ndarray | None = None,
    snr_reference: str = std.SWEEP_SNR_REFERENCE,
    level: str = std.SWEEP_LEVEL,
    presentation_level_db: float = std.STIMULI_LEVEL_DB,
    scale_to_fit: bool = False,
    seed: int = std.TEST_SIGNAL_SEED,
    name: str = "stimulus",
    names: Sequence[str] | None = None,
    process: Callable[[np.ndarray, int], np.ndarray] | str | None = None,
) -> StimuliResult:
    """Write speech-in-noise mixtures at the given SNRs, and their manifest, to a new folder.

    The speech (``clean``, through ``ir`` from its onset and cut to its length, as in
    :func:`envpredict.sweep.snr_sweep`) is mixed at each SNR (rounded to
    :data:`SNR_STEP_DB`) with a segment of ``noise`` whose start is drawn uniformly by
    ``numpy.random.default_rng(seed)``. The SNR is referred to the speech's active level
    (ITU-T P.56 method B) or its long-term level (``snr_reference``); the noise's level
    is its long-term level over the segment. Each mixture is then scaled so that the
    speech's reference level (``level="speech"``) or the mixture's long-term level
    (``level="mixture"``) equals ``presentation_level_db`` dB re full scale.

    With ``process``, each mixture is also passed through the chain as the sweep passes
    it (:func:`envpredict.sweep.snr_sweep`: the speech at its own level, the mixture
    rescaled to the speech's long-term level for ``level="mixture"``) and the output,
    multiplied by the same gain that brought that mixture to the presentation level, is
    written as ``NAME_snr-6.0dB_processed.wav`` (``processed`` in the manifest): a chain
    that changes the level changes the stimulus level, as it would in the test.

    Every file's true peak (:func:`envpredict.audio.true_peak`, 4x oversampling, ITU-R
    BS.1770-4 Annex 2) is in the manifest in dB TP; a file whose true peak would reach
    full scale is refused (or all are scaled by one common factor).

    Parameters
    ----------
    folder : new or empty folder to write (it appears whole or not at all).
    clean, noise : speech and noise at ``fs``; the noise at least as long as the speech.
        ``clean`` may be a list of sentences: each is brought to the presentation level
        on its own, mixed at every SNR, and named by ``names`` (default NAME01, ...).
    fs : sample rate, Hz.
    snr_db : SNRs, dB (at most :data:`MAX_STIMULI`; repeated values after rounding are
        written once).
    ir : impulse response applied to the speech, or ``None``.
    snr_reference : ``"active"`` or ``"long-term"`` (:data:`envpredict.sweep.SNR_REFERENCES`).
    level : ``"speech"`` or ``"mixture"`` (what the presentation level fixes).
    presentation_level_db : the common level, dB re full scale (a full-scale sine is
        -3 dB).
    scale_to_fit : when a file's true peak would reach full scale, scale every file by
        one common factor that brings the loudest true peak to :data:`FIT_PEAK_DB` dB TP
        (the manifest and the result give the gain) instead of refusing.
    seed : seed of the noise-segment draw (the same seed gives the same files).
    name : start of the file names (``NAME_snr-6.0dB.wav``) of one sentence.
    names : names of the sentences of a list (e.g. their file names without suffix).
    process : a processing chain ``f(mixture, fs)``, or its ``"MODULE:FUNCTION"`` name
        (:func:`envpredict.sweep.load_process`), or ``None``; it must be deterministic
        for the files to be reproducible from the seed.

    Returns
    -------
    StimuliResult

    Raises
    ------
    InputError
        A folder that exists and is not empty, bad SNRs or options, a noise shorter than
        the speech, a mixture that would clip (without ``scale_to_fit``), or a processing
        chain that cannot be imported or raises (named).
    ComputationError
        A processing chain that returns a signal of another length or non-finite values.
    """
    from scipy.signal import fftconvolve

    from .audio import check_rate, true_peak, validate_signal, write_wav
    from .decay import onset_index
    from .outputs import atomic_directory
    from .speechlevel import active_speech_level
    from .sweep import LEVEL_CONVENTIONS, _processed, check_snr_reference, load_process
    from .tables import table_text

    out = check_stimuli_folder(folder)
    reference = check_snr_reference(snr_reference)
    if level not in LEVEL_CONVENTIONS:
        raise InputError(f"unknown level convention '{level}'", "use 'speech' or 'mixture'")
    chain, chain_name = None, None
    if isinstance(process, str):
        chain, chain_name = load_process(process), process.strip()
    elif process is not None:
        if not callable(process):
            raise InputError(f"process is not a function ({type(process).__name__})",
                             "give f(mixture, fs) -> processed mixture, or 'MODULE:FUNCTION'")
        chain_name = str(getattr(process, "spec", None) or getattr(process, "__qualname__", None) or "process")

        def chain(mix: np.ndarray, fs: int, f=process, label=chain_name) -> np.ndarray:
            try:
                return f(mix, fs)
            except InputError:
                raise
            except Exception as e:  # noqa: BLE001 -- the user's chain failed: say so in one line
                raise InputError(f"the processing chain '{label}' raised {type(e).__name__}: {e}",
                                 "fix the function (it is called as FUNCTION(mixture, fs))") from None
    try:
        snrs = np.asarray(snr_db, dtype=float).reshape(-1)
        pres = float(presentation_level_db)
    except (TypeError, ValueError):
        raise InputError("SNRs and the presentation level must be numbers", "give them in dB") from None
    if snrs.size == 0 or not np.all(np.isfinite(snrs)) or not math.isfinite(pres):
        raise InputError("the stimuli need at least one finite SNR and a finite presentation level",
                         "give e.g. SNRs -9, -6, -3 dB and a level of -26 dB re full scale")
    if pres >= 0:
        raise InputError(f"presentation level {pres:g} dB re full scale is at or above full scale",
                         "give a negative level, e.g. -26")
    if pres < MIN_LEVEL_DB:
        raise InputError(f"presentation level {pres:g} dB re full scale is below {MIN_LEVEL_DB:g} dB",
                         "give a level a 24-bit file can hold, e.g. -26")
    snrs = np.unique(np.round(snrs / SNR_STEP_DB) * SNR_STEP_DB)
    per_mix = 2 if chain is not None else 1
    if snrs.size * per_mix > MAX_STIMULI:
        raise InputError(f"{snrs.size * per_mix} stimuli asked for (at most {MAX_STIMULI})", "give fewer SNRs")
    if not isinstance(seed, (int, np.integer)) or seed < 0:
        raise InputError(f"seed {seed!r} is not a whole number >= 0", "give e.g. --seed 0")
    if not isinstance(name, str) or not name or len(name.encode()) > MAX_NAME_CHARS or any(
            c in name for c in "/\\\x00"):
        raise InputError(f"stimulus name {name!r:.40} cannot start a file name",
                         f"give a short name (at most {MAX_NAME_CHARS} characters, no slashes)")
    fs = check_rate(fs, "clean speech")
    many = not isinstance(clean, np.ndarray) and isinstance(clean, (list, tuple))
    items = list(clean) if many else [clean]
    labels = [str(n) for n in names] if names is not None else (
        [f"{name}{i + 1:02d}" for i in range(len(items))] if many else [name])
    if len(labels) != len(items) or len(set(labels)) != len(labels):
        raise InputError("the sentence names are not one distinct name per sentence", "give one name per sentence")
    if len(items) * snrs.size * per_mix > MAX_STIMULI:
        raise InputError(f"{len(items) * snrs.size * per_mix} stimuli asked for (at most {MAX_STIMULI})",
                         "give fewer SNRs or sentences")
    nz = validate_signal(noise, fs, name="noise", allow_clipping=True)
    h = None if ir is None else validate_signal(ir, fs, name="impulse response", allow_clipping=True)
    target = 10.0 ** (pres / 10.0)
    rng = np.random.default_rng(int(seed))
    mixes, rows = [], []
    for label, xi in zip(labels, items):
        x = validate_signal(xi, fs, name="clean speech" if not many else f"sentence '{label}'")
        speech = x if h is None else fftconvolve(x, h[onset_index(h):])[: x.size]
        L = x.size
        if nz.size < L:
            raise InputError(f"the noise ({nz.size / fs:.2f} s) is shorter than the speech ({L / fs:.2f} s)",
                             "give a noise recording at least as long as the speech")
        lev = active_speech_level(speech, fs)
        p_long = float(np.mean(speech * speech))
        p_ref = lev.active_mean_square if reference == "active" else p_long
        offsets = rng.integers(0, nz.size - L + 1, size=snrs.size)
        for s, o in zip(snrs, offsets):
            seg = nz[o:o + L]
            p_noise = float(np.mean(seg * seg))
            if p_noise <= 0:
                raise InputError(f"noise segment at {o / fs:.2f} s is silent",
                                 "give a noise without silent stretches")
            g = math.sqrt(p_ref / (p_noise * 10.0 ** (s / 10.0)))
            mix = speech + g * seg
            p_mix = float(np.mean(mix * mix))
            k = math.sqrt(target / (p_ref if level == "speech" else p_mix))
            row = (label, float(s), int(o), k * k, g * g * p_noise, lev.active_mean_square, p_long)
            mixes.append(k * mix)
            rows.append((row, False))
            if chain is not None:
                # the chain gets the mixture the sweep gives it; its output gets the same gain as its input
                fed = mix if level == "speech" else mix * math.sqrt(p_long / p_mix)
                mixes.append((k * float(np.sqrt(p_mix / p_long)) if level == "mixture" else k)
                             * _processed(chain, fed, fs, float(s)))
                rows.append((row, True))
    peaks = np.array([float(np.max(np.abs(m))) for m in mixes])
    true_peaks = np.array([true_peak(m) for m in mixes])
    common = 1.0
    notes = [f"noise segments drawn with seed {seed}: the same inputs and seed give the same files",
             "true peaks estimated by 4x oversampling (ITU-R BS.1770-4 Annex 2)"]
    if chain is not None:
        notes.append(f"each mixture also written through the processing chain '{chain_name}' (file names ending "
                     f"{PROCESSED_SUFFIX}, processed = True in the manifest), at the gain of its input mixture")
    cautions = []
    if np.any(true_peaks >= CLIP_PEAK):
        worst = int(np.argmax(true_peaks))
        over = 20.0 * math.log10(true_peaks[worst])
        (label_w, snr_w, *_), proc_w = rows[worst]
        if not scale_to_fit:
            which = f"of {label_w} " if many else ""
            kind = "processed mixture" if proc_w else "mixture"
            raise InputError(
                f"the {kind} {which}at {snr_w:g} dB SNR would clip (true peak {over:+.1f} dB TP at a "
                f"presentation level of {pres:g} dB re full scale)",
                f"lower the presentation level by at least {over - FIT_PEAK_DB:.1f} dB, or scale all files to fit")
        common = 10.0 ** (FIT_PEAK_DB / 20.0) / float(true_peaks.max())
        cautions.append(f"every file was scaled by {20 * math.log10(common):.2f} dB (one common factor) so that "
                        f"the loudest true peak is at {FIT_PEAK_DB:g} dB TP: the presentation level is "
                        f"{pres + 20 * math.log10(common):.2f} dB, not {pres:g} dB")
    gain_db = 20.0 * math.log10(common)
    stimuli = []
    with atomic_directory(out) as tmp:
        for ((label, s, o, k2, pn, p_act, p_long), proc), mix, peak, tp in zip(rows, mixes, peaks, true_peaks):
            y = common * mix
            fname = f"{label}_snr{s:+.1f}dB{PROCESSED_SUFFIX if proc else ''}.wav"
            write_wav(Path(tmp) / fname, y, fs, subtype=STIMULUS_SUBTYPE)
            c2 = common * common
            stimuli.append(Stimulus(
                file=fname, sentence=label, processed=proc, snr_db=s, snr_reference=reference,
                level_convention=level, speech_active_level_db=_db(p_act * k2 * c2),
                speech_long_term_level_db=_db(p_long * k2 * c2), noise_level_db=_db(pn * k2 * c2),
                mixture_level_db=_db(float(np.mean(y * y))), peak_db=_db((common * peak) ** 2),
                true_peak_dbtp=_db((common * tp) ** 2), noise_offset_s=o / fs, noise_offset_samples=o,
                common_gain_db=gain_db, seed=int(seed)))
        table = table_text(MANIFEST_COLUMNS, [{k: str(v) for k, v in st.to_dict().items()} for st in stimuli])
        (Path(tmp) / MANIFEST_NAME).write_text(table, encoding="utf-8")
    return StimuliResult(folder=str(out), stimuli=tuple(stimuli), presentation_level_db=pres,
                         common_gain_db=gain_db, fs=fs, seed=int(seed), cautions=tuple(cautions), notes=tuple(notes),
                         process=chain_name)


def stimulus_snrs(sweep: SweepResult | None = None, chosen: Sequence[float] | None = None) -> list[float]:
    """The SNRs to write: ``chosen`` when given; else the target SNRs a sweep found
    (those reached inside its range); else the sweep's own SNRs.

    Raises
    ------
    InputError
        For chosen SNRs that are not finite numbers, a ``sweep`` that is not a
        :class:`~envpredict.sweep.SweepResult`, or neither.
    """
    if chosen is not None and (isinstance(chosen, (str, bytes)) or len(np.atleast_1d(chosen)) > 0):
        from .checks import array

        snrs = array(chosen, "SNRs of the stimuli", fix="give the SNRs in dB")
        if np.any(np.abs(snrs) > 200.0):
            raise InputError("an SNR of the stimuli is beyond +-200 dB", "give the SNRs in dB")
        return [float(s) for s in snrs]
    if sweep is None:
        raise InputError("no SNRs for the stimuli", "give the SNRs to write")
    if not isinstance(sweep, SweepResult):
        raise InputError(f"sweep is not a SweepResult ({type(sweep).__name__})", "give the result of snr_sweep")
    found = [t.snr_db for t in sweep.targets if t.snr_db is not None]
    return [float(s) for s in found] if found else [float(s) for s in sweep.snr_db]


def write_stimuli_files(
    folder: str | os.PathLike,
    clean: str | os.PathLike,
    noise: str | os.PathLike,
    snr_db: Sequence[float],
    *,
    ir: str | os.PathLike | None = None,
    channel: int | None = None,
    **options,
) -> StimuliResult:
    """:func:`write_stimuli` from audio files (the noise and the impulse response are
    resampled to the speech's rate when theirs differs, as for the sweep; a note says so).

    ``options`` are those of :func:`write_stimuli` (``snr_reference``, ``level``,
    ``presentation_level_db``, ``scale_to_fit``, ``seed``, ``name``).

    Raises
    ------
    InputError
        For audio files that are missing or unreadable, several sentences, and as
        :func:`write_stimuli`.
    """
    from dataclasses import replace


    from .sweep import read_at_one_rate

    check_stimuli_folder(folder)
    files, xs, nz, h, fs, notes = read_at_one_rate(clean, noise, ir, channel)
    x = xs[0]
    if len(xs) > 1:
        stems = [f.stem for f in files]
        if len(set(stems)) != len(stems):
            raise InputError("two sentence files have the same name", "give sentences with distinct file names")
        res = write_stimuli(folder, xs, nz, fs, snr_db, ir=h, names=stems, **options)
    else:
        res = write_stimuli(folder, x, nz, fs, snr_db, ir=h, **options)
    return replace(res, notes=tuple(notes) + res.notes) if notes else res
