"""Corpus-scale scoring: manifests, resumable result files, process pool and dask backends.

A *manifest* is a CSV file with one row per item to score:

* **pair rows** have the columns ``clean`` and ``degraded`` (paths of a clean
  reference and its degraded version) and are scored with STOI, ESTOI and the
  speech-based STI (``envpredict.pair``);
* **IR rows** have the column ``ir`` (path of an impulse response) and are scored
  with the STI by the indirect method and the ISO 3382-1 mid-frequency decay
  figures (:func:`envpredict.indirect.sti_from_ir_file`);
* **STIPA rows** have the column ``stipa`` (path of a recording of the STIPA test
  signal) and are scored with the STI by the direct method
  (:func:`envpredict.direct.stipa_from_file`).

Relative paths are taken relative to the folder of the manifest. The kinds may be
mixed in one manifest (a row's kind is the input column it fills; one per row).
Optional columns that feed the scoring (empty cell = the batch default):

* ``channel`` -- channel of multi-channel files (0 = first; all rows);
* ``noise`` -- seven octave-band background-noise levels at the listener, dB SPL,
  125 Hz to 8 kHz, separated by ``;`` or by ``,`` inside a quoted cell (IR rows);
* ``noise_recording`` -- instead of ``noise``, a calibrated recording of the site
  noise (IR rows; needs ``calibration_db``);
* ``speech_level`` -- A-weighted speech level at the listener, dB(A) (IR rows);
* ``speech_levels`` -- instead of ``speech_level``, seven measured octave-band speech
  levels at the listener, dB SPL, separated like ``noise`` (IR rows);
* ``calibration_db`` -- dB SPL of a full-scale RMS signal in the row's recording
  (STIPA rows, optional) or noise recording (IR rows);
* ``sti_talker`` -- ``male`` or ``female`` speech spectrum and weights (IR and STIPA rows).
* ``audiogram`` -- the listener's hearing levels (:mod:`envpredict.hearing`):
  ``250:20;500:25;...`` (frequency in Hz : dB HL) or a CSV audiogram file; it raises
  the STI's reception threshold (IR rows; STIPA rows with ``calibration_db``) or adds
  the threshold-simulating noise of the pair indices (pair rows; needs
  ``calibration_db``, the level of the pair's full-scale RMS in dB SPL). Audibility only.
* ``inverted`` -- the processing's output for speech - noise (pair rows; the degraded
  file is its output for speech + noise): adds the envelope-power index
  (``sepsm_snr_env_db``) from the processed noise separated by phase inversion;
* ``delay_ms`` -- the delay of the degraded file, ms (pair rows): overrides the batch's
  alignment for that row. In the results file this column holds the delay used (the
  manifest's cell where it is given).
  (A column named ``talker`` is *not* read: in speech corpora it names the speaker,
  and it is carried through like any other column.)

Every other column (condition, talker, SNR, ...) is carried through unchanged.

Two ears (``ears=True``, ``batch --ears``): every file to score is a two-channel
recording, channel 0 the left ear and channel 1 the right (a pair's clean file may be
mono); each row is scored ear by ear and combined by the better ear
(:mod:`envpredict.binaural`). The index columns then hold the better ear's values, and
each ear's index is added (:data:`EARS_STI_COLUMNS`, :data:`EARS_PAIR_COLUMNS`); IR rows
leave out the decay columns (per-ear decay figures: ``envpredict ir --ears``), and a
``channel`` or ``inverted`` column is refused. A condition's delay is found on the left
ear and used for both; a row's own estimate is made per ear (``delay_ms`` shows the left
ear's).

Alignment of pair rows
----------------------
A processing chain has one latency, and a single pair's delay estimate can land on a
reflection. By default every pair row of one condition (the column named by
``condition_column``; a column named ``condition`` when there is one) gets one delay:
the peak of the summed GCC-PHAT curves of all its items
(:func:`envpredict.pair.common_delay`). Each row's own estimate is still made: it checks
that the files match, and a row whose estimate differs from the condition's by more
than :data:`envpredict.pair.DELAY_AGREEMENT_MS` gets a note. The other choices:
``delay_per_row`` (each pair its own estimate, as ``envpredict pair``), ``fixed_delay_ms``
(one delay for all), ``align=False`` (no delay, as ``pair --no-align``), and the
``delay_ms`` manifest column (per row, over all of these). The results record the delay
used (``delay_ms``), how it was chosen (``delay_from``: ``condition``, ``row``,
``fixed``, ``manifest`` or ``off``) and the peak ratio of the estimate it came from
(``delay_confidence``).

The results file has the columns ``row`` (1-based number of the data row in the
manifest: the key that ``resume`` uses), the manifest's own columns unchanged, the
index columns (:data:`IR_INDEX_COLUMNS` when the manifest has an ``ir`` column,
else :data:`STIPA_INDEX_COLUMNS` when it has a ``stipa`` column, and
:data:`PAIR_INDEX_COLUMNS` when it has ``clean``/``degraded``), ``notes`` (why a
figure of a scored row is empty, e.g. a pair too short for the speech-based STI or a
decay range too small for T30) and ``error`` (empty when the row was scored;
otherwise the one-line reason, and the index cells are empty). Numbers are
written with ``repr`` (the shortest text that reads back to the same float); a
figure that could not be computed is an empty cell.

Never losing work
-----------------
Each finished row is appended to the results file as one line with a single
``write`` on an ``O_APPEND`` descriptor, then ``fsync``-ed, so a kill at any moment
leaves a valid CSV file holding every finished row (while running, in completion
order). When the batch completes, the file is rewritten in manifest order through a
temporary file and an atomic rename, so it is never half-written. ``resume`` reads
the file, drops a final line that lacks its newline (a write cut short by a kill
in the middle of it, a power cut or a full disk), checks that the header and every
kept row still match the manifest, and scores only the rows that are missing: no
row is lost and none is written twice. Cells holding line breaks are refused in the
manifest, so one line is one row.

Backends
--------
* in-process (``workers=1``);
* a local :class:`concurrent.futures.ProcessPoolExecutor` (``workers=N``; default: the
  number of usable cores), each worker with single-threaded numeric libraries
  (:data:`THREAD_ENV_VARS`). The workers are forked from a fork server that imports the
  scoring modules once (:data:`WORKER_MODULES`), started as soon as ``run_batch`` is
  called so that it imports while the manifest is read; where there is no fork server
  (Windows) they are spawned and each imports on its own. A worker ends by itself
  when the batch process is killed;
* an existing dask.distributed cluster (``scheduler="tcp://HOST:PORT"``; needs the
  optional extra ``pip install 'envpredict[cluster]'``). The workers must have
  envpredict installed and must see the audio files at the same absolute paths
  (a shared filesystem): the tasks carry paths, not audio. (dask's nanny already
  starts its workers with single-threaded numeric libraries.) A cluster that fails
  mid-run (a lost scheduler, no worker left for :data:`NO_WORKER_TIMEOUT_S`) stops the
  batch with one :class:`~envpredict.exceptions.ComputationError` line instead of
  dask's own log (silenced while the batch talks to the cluster); the rows finished so
  far stay in the results file for ``resume``.

The job function :func:`score_row` is a plain top-level function of a plain dict,
so any executor can pickle it; it never raises: a row whose input is bad comes
back with an ``error`` entry and the batch goes on.

This module reads and writes files and runs executors; it holds no index maths.
"""

from __future__ import annotations

import contextlib
import math
import os
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterable, Iterator, Mapping, Sequence

from . import checks
from . import standards as std
from .audio import THREAD_LIMIT_VARS, usable_cores
from .exceptions import ComputationError, EnvpredictError, InputError

from .tables import (  # noqa: F401  (the column vocabulary, re-exported for batch users)
    AUDIOGRAM_COLUMN,
    CALIBRATION_COLUMN,
    CHANNEL_COLUMN,
    CLEAN_COLUMN,
    DEGRADED_COLUMN,
    DELAY_COLUMN,
    EARS_PAIR_COLUMNS,
    EARS_STI_COLUMNS,
    ERROR_COLUMN,
    IR_COLUMN,
    INVERTED_COLUMN,
    IR_INDEX_COLUMNS,
    MANIFEST_RESULT_COLUMNS,
    NOISE_COLUMN,
    NOISE_RECORDING_COLUMN,
    NOTES_COLUMN,
    NUMERIC_INDEX_COLUMNS,
    OPTION_COLUMNS,
    PAIR_INDEX_COLUMNS,
    PATH_COLUMNS,
    RESULT_COLUMNS,
    ROW_COLUMN,
    SEPSM_INDEX_COLUMNS,
    SPEECH_LEVEL_COLUMN,
    SPEECH_LEVELS_COLUMN,
    STI_TALKER_COLUMN,
    STIPA_COLUMN,
    STIPA_INDEX_COLUMNS,
    csv_line,
    format_cell,
    iter_records,
    parse_lines,
    read_results,
    read_text,
)

#: Rows in flight per worker: enough to keep every worker busy while results are
#: written, few enough that memory stays flat and an interrupt stops quickly
#: (judgement).
IN_FLIGHT_PER_WORKER: int = 4

#: Rows a pool worker scores per task, at most: fewer round trips between the batch
#: process and its workers (each costs the parent CPU that the workers need on a small
#: machine), while a kill loses at most this many finished but unwritten rows per
#: worker, which --resume scores again (judgement).
ROWS_PER_TASK: int = 4

#: Rows in flight on a dask cluster at least (judgement: keeps a small cluster's
#: scheduler fed while results travel back).
MIN_DASK_IN_FLIGHT: int = 8

#: Thread-count variables of the numeric libraries, set to 1 for the pool's worker
#: processes (unless the user set them): N single-threaded processes on N cores
#: instead of N processes each starting a thread per core, which oversubscribes the
#: cores and made the pair scoring no faster with 2 workers than with 1.
THREAD_ENV_VARS: tuple[str, ...] = THREAD_LIMIT_VARS + ("VECLIB_MAXIMUM_THREADS", "NUMEXPR_NUM_THREADS")

#: Modules every pool worker needs for its first row: imported once, in the fork server
#: the workers are forked from (see :func:`_pool_context`), not once per worker.
WORKER_MODULES: tuple[str, ...] = (
    "envpredict.batch", "envpredict.indirect", "envpredict.pair", "envpredict.audio", "envpredict.correlation",
    "soundfile", "scipy.signal",
)

#: Seconds between a pool worker's checks that the batch process still runs (a
#: killed batch leaves no worker behind for longer than this; judgement).
PARENT_CHECK_S: float = 1.0

#: Seconds to wait for a dask scheduler to answer (judgement).
CONNECT_TIMEOUT_S: float = 10.0

#: Seconds between checks that the dask cluster still runs while the batch waits for rows
#: (judgement).
DASK_POLL_S: float = 1.0

#: Seconds a dask cluster may go without any worker before the batch stops with an error
#: instead of waiting for ever (judgement: time for a nanny or an operator to restart a
#: worker, short enough not to stall an unattended run for long).
NO_WORKER_TIMEOUT_S: float = 60.0

#: Failures listed in the summary (all of them are in the results file).
SUMMARY_FAILURES: int = 20


# ---------------------------------------------------------------------------
# Manifest
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Manifest:
    """A validated manifest.

    Attributes
    ----------
    path : the manifest file.
    columns : its header, in order.
    cells : one tuple of strings per data row (manifest order).
    jobs : one job dict per data row, the argument of :func:`score_row`.
    index_columns : the index columns of the results file.
    """

    path: Path
    columns: tuple[str, ...]
    cells: tuple[tuple[str, ...], ...]
    jobs: tuple[dict, ...]
    index_columns: tuple[str, ...]

    @property
    def result_columns(self) -> tuple[str, ...]:
        """Header of the results file."""
        return (ROW_COLUMN,) + self.columns + self.index_columns + (NOTES_COLUMN, ERROR_COLUMN)

    def result_cells(self, row: int, values: dict) -> list[str]:
        """The manifest's cells of ``row`` as the results file shows them: a result column
        the manifest holds (``delay_ms``) shows the value used where its cell is empty."""
        cells = list(self.cells[row - 1])
        for i, c in enumerate(self.columns):
            if c in MANIFEST_RESULT_COLUMNS and not cells[i].strip() and values.get(c) is not None:
                cells[i] = format_cell(values.get(c), c)
        return cells

    def matches(self, row: int, cells: Sequence[str]) -> bool:
        """Whether results-file cells of the manifest's columns belong to ``row``."""
        own = self.cells[row - 1]
        if len(cells) != len(own):
            return False
        return all(a == b or (c in MANIFEST_RESULT_COLUMNS and not b.strip())
                   for c, a, b in zip(self.columns, cells, own))

    def __len__(self) -> int:
        return len(self.cells)


def _where(path: Path, row: int | None = None, line: int | None = None, column: str | None = None) -> str:
    s = f"manifest '{path}'"
    if row is not None:
        s += f", row {row}"
        if line is not None:
            s += f" (line {line})"
    if column is not None:
        s += f", column '{column}'"
    return s


#: Manifest option columns and the job keys they fill.
_OPTION_KEYS: dict[str, str] = {CHANNEL_COLUMN: "channel", NOISE_COLUMN: "noise", SPEECH_LEVEL_COLUMN: "speech_level",
                                SPEECH_LEVELS_COLUMN: "speech_levels", CALIBRATION_COLUMN: "calibration_db",
                                STI_TALKER_COLUMN: "talker", AUDIOGRAM_COLUMN: "audiogram"}


def _option_value(path: Path, row: int, line: int, column: str, text: str, defaults: dict) -> Any:
    """Parse one option cell (empty: the batch default); errors name file, row and column."""
    from .tables import load_audiogram

    from .sti import check_speech_level, check_talker, parse_noise_levels

    text = text.strip()
    from .audio import check_calibration_db
    from .sti import parse_speech_levels

    key = _OPTION_KEYS[column]
    if not text:
        return defaults[key]
    try:
        if column == SPEECH_LEVELS_COLUMN:
            return [float(v) for v in parse_speech_levels(text.replace(";", ","))]
        if column == CALIBRATION_COLUMN:
            return check_calibration_db(text)
        if column == CHANNEL_COLUMN:
            try:
                ch = int(text)
            except ValueError:
                raise InputError(f"channel '{text}' is not a whole number", "give 0 for the first channel") from None
            if ch < 0:
                raise InputError(f"channel {ch} is negative", "give 0 for the first channel")
            return ch
        if column == NOISE_COLUMN:
            return [float(v) for v in parse_noise_levels(text.replace(";", ","))]
        if column == SPEECH_LEVEL_COLUMN:
            return check_speech_level(text)
        if column == AUDIOGRAM_COLUMN:
            return load_audiogram(text, base=path.resolve().parent)
        return check_talker(text)
    except InputError as e:
        raise InputError(f"{_where(path, row, line, column)}: {e.what}", e.fix) from None


def _delay_cell(path: Path, row: int, line: int, text: str) -> float:
    """A ``delay_ms`` cell: a finite number of ms."""
    try:
        v = float(text)
    except ValueError:
        v = math.nan
    if not math.isfinite(v):
        raise InputError(f"{_where(path, row, line, DELAY_COLUMN)}: '{text}' is not a number of milliseconds",
                         "give the delay of the degraded file in ms (e.g. 12.5), or leave the cell empty")
    return v


def read_manifest(
    path: str | os.PathLike,
    *,
    noise_db: Sequence[float] | str | None = None,
    speech_level_dba: float = std.DEFAULT_SPEECH_LEVEL_DBA,
    talker: str = std.DEFAULT_TALKER,
    ears: bool = False,
    audiogram: Any = None,
) -> Manifest:
    """Read and validate a manifest (see the module docstring for its columns).

    Parameters
    ----------
    path : the manifest CSV file (UTF-8, comma-separated, header on the first line).
    noise_db, speech_level_dba, talker : defaults for IR rows whose ``noise``,
        ``speech_level`` or ``sti_talker`` cell is empty (or absent).
    ears : score every row's two-channel files as two ears (see the module docstring).
    audiogram : the listener of rows whose ``audiogram`` cell is empty (or absent): an
        :class:`~envpredict.hearing.Audiogram`, its text form or a CSV file
        (:func:`envpredict.tables.load_audiogram`), or ``None`` (normal hearing).

    Raises
    ------
    InputError
        For a malformed manifest, naming the file and, where it applies, the row, its
        line and the column. The audio files are not opened here: a missing or bad
        audio file is a per-row error of the batch.
    """
    from .sti import check_speech_level, check_talker, parse_noise_levels
    from .tables import load_audiogram

    p = checks.path(path, "manifest")
    ears = checks.flag(ears, "ears")
    listener = load_audiogram(audiogram)
    text = read_text(p, "manifest")
    noise = parse_noise_levels(noise_db)
    defaults = {
        "channel": None,
        "noise": None if noise is None else [float(v) for v in noise],
        "speech_level": check_speech_level(speech_level_dba),
        "speech_levels": None,
        "calibration_db": None,
        "talker": check_talker(talker),
        "audiogram": listener,
    }
    def bad(line: int, e: Exception) -> InputError:
        return InputError(f"{_where(p)}: line {line} is not valid CSV ({e})", "check the quotes on that line")

    records = iter_records(text, bad)
    header = next(records, (0, None))[1]
    if header is None or not any(h.strip() for h in header):
        raise InputError(f"manifest '{p}' is empty", "write a header line, e.g. clean,degraded,condition")
    columns = tuple(header)
    seen: set[str] = set()
    for i, c in enumerate(columns):
        if not c.strip():
            raise InputError(f"{_where(p)}: column {i + 1} of the header has no name", "name every column")
        if c in seen:
            raise InputError(f"{_where(p)}: column '{c}' appears twice in the header", "rename one of them")
        seen.add(c)
        if c in RESULT_COLUMNS and c not in MANIFEST_RESULT_COLUMNS:
            raise InputError(
                f"{_where(p, column=c)} has the name of a result column",
                f"rename it (reserved: {', '.join(sorted(RESULT_COLUMNS))})",
            )
    for c, fix in ((CHANNEL_COLUMN, "remove the column: the ears are channel 0 (left) and 1 (right)"),
                   (INVERTED_COLUMN, "score the phase-inversion rows without --ears")):
        if ears and c in seen:
            raise InputError(f"{_where(p, column=c)} is given with the two-ear scoring (--ears)", fix)
    has_ir, has_stipa = IR_COLUMN in seen, STIPA_COLUMN in seen
    has_clean, has_deg = CLEAN_COLUMN in seen, DEGRADED_COLUMN in seen
    if has_clean != has_deg:
        missing = DEGRADED_COLUMN if has_clean else CLEAN_COLUMN
        raise InputError(f"{_where(p)} has no '{missing}' column", "pair rows need both 'clean' and 'degraded'")
    has_pair = has_clean and has_deg
    if not (has_ir or has_stipa or has_pair):
        hint = ""
        if len(columns) == 1 and (";" in columns[0] or "\t" in columns[0]):
            hint = " (it looks separated by ';' or tabs: use commas)"
        raise InputError(
            f"{_where(p)} has neither an 'ir' or 'stipa' column nor 'clean' and 'degraded' columns{hint}; "
            f"found: {', '.join(columns)}",
            "name the input columns ir, stipa, or clean and degraded",
        )
    col = {c: i for i, c in enumerate(columns)}
    base = p.resolve().parent
    cells: list[tuple[str, ...]] = []
    jobs: list[dict] = []
    for line, rec in records:
        if not rec or (len(rec) == 1 and not rec[0].strip()):
            continue  # blank line
        row = len(cells) + 1
        if len(rec) != len(columns):
            raise InputError(
                f"{_where(p, row, line)} has {len(rec)} cells; the header has {len(columns)} columns",
                "give every row one cell per column (quote cells that contain commas)",
            )
        for c, v in zip(columns, rec):
            if "\n" in v or "\r" in v:
                raise InputError(f"{_where(p, row, line, c)} contains a line break", "remove it")
        get = {c: rec[i] for c, i in col.items()}
        ir = get.get(IR_COLUMN, "").strip()
        stipa = get.get(STIPA_COLUMN, "").strip()
        clean = get.get(CLEAN_COLUMN, "").strip()
        deg = get.get(DEGRADED_COLUMN, "").strip()
        filled = [name for name, v in ((IR_COLUMN, ir), (STIPA_COLUMN, stipa), ("clean'/'degraded", clean or deg))
                  if v]
        if len(filled) > 1:
            raise InputError(
                f"{_where(p, row, line)} fills both '{filled[0]}' and '{filled[1]}'",
                "give one input on each row: an impulse response, a STIPA recording or a clean/degraded pair",
            )
        if not filled:
            kinds = [k for k, has in (("'ir'", has_ir), ("'stipa'", has_stipa), ("'clean' and 'degraded'", has_pair))
                     if has]
            raise InputError(f"{_where(p, row, line)} names no input file", f"fill {', or '.join(kinds)}")
        if (clean or deg) and not (clean and deg):
            empty = CLEAN_COLUMN if not clean else DEGRADED_COLUMN
            raise InputError(f"{_where(p, row, line, empty)} is empty", "a pair row needs both files")
        opts = {key: _option_value(p, row, line, c, get[c], defaults) if c in get else defaults[key]
                for c, key in _OPTION_KEYS.items()}
        delay_text = get.get(DELAY_COLUMN, "").strip()
        inverted = get.get(INVERTED_COLUMN, "").strip()
        for col_name, text_ in ((DELAY_COLUMN, delay_text), (INVERTED_COLUMN, inverted)):
            if text_ and not (clean or deg):
                raise InputError(f"{_where(p, row, line, col_name)} is filled on a row without a pair",
                                 "it goes with a clean/degraded pair")
        noise_rec = get.get(NOISE_RECORDING_COLUMN, "").strip()
        if noise_rec and not ir:
            raise InputError(f"{_where(p, row, line, NOISE_RECORDING_COLUMN)} is filled on a row without 'ir'",
                             "a noise recording goes with an impulse response (a STIPA recording holds its noise)")

        def full(s: str) -> str:
            q = Path(s).expanduser()
            return str(q if q.is_absolute() else base / q)

        job: dict[str, Any] = {"row": row, "channel": opts["channel"], "audiogram": opts["audiogram"]}
        if ears:
            job["ears"] = True
        if ir:
            job.update(kind="ir", ir=full(ir), noise=opts["noise"], speech_level=opts["speech_level"],
                       talker=opts["talker"], speech_levels=opts["speech_levels"],
                       noise_recording=full(noise_rec) if noise_rec else None,
                       calibration_db=opts["calibration_db"])
        elif stipa:
            job.update(kind="stipa", stipa=full(stipa), talker=opts["talker"],
                       calibration_db=opts["calibration_db"])
        else:
            job.update(kind="pair", clean=full(clean), degraded=full(deg), calibration_db=opts["calibration_db"],
                       manifest_delay_ms=_delay_cell(p, row, line, delay_text) if delay_text else None,
                       inverted=full(inverted) if inverted else None)
        cells.append(tuple(rec))
        jobs.append(job)
    if not cells:
        raise InputError(f"{_where(p)} has a header but no rows", "add one row per item to score")
    sti_columns = IR_INDEX_COLUMNS if has_ir else STIPA_INDEX_COLUMNS if has_stipa else ()
    if ears and sti_columns:
        sti_columns = STIPA_INDEX_COLUMNS + EARS_STI_COLUMNS  # no decay columns: they are per ear
    index_columns = sti_columns + (PAIR_INDEX_COLUMNS if has_pair else ())
    if ears and has_pair:
        index_columns += EARS_PAIR_COLUMNS
    if has_pair and INVERTED_COLUMN in seen:
        index_columns += SEPSM_INDEX_COLUMNS
    index_columns = tuple(c for c in index_columns if c not in seen)  # delay_ms: the manifest's column
    return Manifest(path=p, columns=columns, cells=tuple(cells), jobs=tuple(jobs), index_columns=index_columns)


# ---------------------------------------------------------------------------
# The job function (runs in the workers)
# ---------------------------------------------------------------------------


def _score_ir(job: dict) -> dict:
    from .decay import mid_frequency, mid_frequency_notes
    from .indirect import sti_from_ir_file

    levels = job.get("speech_levels")
    noise_rec = job.get("noise_recording")
    kw = dict(noise_db=None if noise_rec else job.get("noise"),
              speech_level_dba=None if levels else job.get("speech_level", std.DEFAULT_SPEECH_LEVEL_DBA),
              talker=job.get("talker", std.DEFAULT_TALKER), speech_db=levels,
              noise_recording=noise_rec, calibration_db=job.get("calibration_db") if noise_rec else None,
              audiogram=job.get("audiogram"))
    if job.get("ears"):
        from .binaural import ir_ears_file

        return _ears_values(ir_ears_file(job["ir"], **kw))
    r = sti_from_ir_file(job["ir"], channel=job.get("channel"), **kw)
    values = {
        "sti": float(r.sti.sti),
        "rating": r.sti.rating,
        "t30_mid": mid_frequency(r.decay.t30, r.decay.bands_hz),
        "edt_mid": mid_frequency(r.decay.edt, r.decay.bands_hz),
    }
    notes = []
    for col, fig in (("t30_mid", "t30"), ("edt_mid", "edt")):
        if not math.isfinite(values[col]):
            why = mid_frequency_notes(r.decay, fig)
            notes.append(f"{col} not computed" + (f" ({'; '.join(why)})" if why else
                                                  f": {fig.upper()} missing at 500 Hz or 1 kHz"))
    values[NOTES_COLUMN] = "; ".join(tuple(notes) + _specific_cautions(r))
    return values


def _specific_cautions(r: Any) -> tuple[str, ...]:
    """Cautions about this response (cut off, weak decay...), without the generic ones
    that hold for every row (those are in the batch summary)."""
    from . import cautions as cau

    generic = {cau.LIFE_SAFETY, cau.NO_NOISE, cau.NO_AUDITORY, cau.below_target(r.sti.sti)}
    # the listener's audibility caution holds for every row with an audiogram (batch summary)
    return tuple(c for c in r.cautions if c not in generic and not c.startswith("Listener: "))


def _ears_values(e: Any) -> dict:
    """The results-file values of a two-ear STI result: the better ear's STI and each ear's."""
    from . import cautions as cau

    generic = {cau.LIFE_SAFETY, cau.NO_NOISE, cau.NO_AUDITORY}
    # the listener's audibility caution holds for every row with an audiogram (batch summary)
    notes = [c for c in e.to_dict()["cautions"]
             if c not in generic and not c.startswith(("Better ear: ", "Listener: "))]
    return {"sti": float(e.better.sti), "rating": e.better.rating, **e.ear_indices, NOTES_COLUMN: "; ".join(notes)}


def _score_stipa(job: dict) -> dict:
    from .direct import stipa_from_file

    if job.get("ears"):
        from .binaural import stipa_ears_file

        return _ears_values(stipa_ears_file(job["stipa"], calibration_db=job.get("calibration_db"),
                                            talker=job.get("talker", std.DEFAULT_TALKER),
                                            audiogram=job.get("audiogram")))
    r = stipa_from_file(job["stipa"], channel=job.get("channel"), calibration_db=job.get("calibration_db"),
                        talker=job.get("talker", std.DEFAULT_TALKER), audiogram=job.get("audiogram"))
    return {"sti": float(r.sti.sti), "rating": r.sti.rating, NOTES_COLUMN: "; ".join(_specific_cautions(r))}


def _score_pair(job: dict) -> dict:
    from .pair import pair_from_files

    delay_ms = job.get("delay_ms")
    kw = dict(align=job.get("align", True), max_delay_s=job.get("max_delay_s", std.PAIR_MAX_DELAY_S),
              delay_s=None if delay_ms is None else delay_ms / 1000.0, inverted_path=job.get("inverted"),
              audiogram=job.get("audiogram"), calibration_db=job.get("calibration_db"))
    if job.get("ears"):
        from .binaural import pair_ears_file

        e = pair_ears_file(job["clean"], job["degraded"], **kw)
        values = _pair_values(job, e.left or e.right)
        values.update({"stoi": e.stoi, "estoi": e.estoi, "ssti": e.ssti, "ssti_regression": e.ssti_regression,
                       **e.ear_indices})
        if e.left is None or e.right is None:
            bad = "left" if e.left is None else "right"
            why = e.errors[0 if bad == "left" else 1]
            values[NOTES_COLUMN] = "; ".join(v for v in (values[NOTES_COLUMN], f"{bad} ear: no result ({why})") if v)
        return values
    return _pair_values(job, pair_from_files(job["clean"], job["degraded"], channel=job.get("channel"), **kw))


def _pair_values(job: dict, r: Any) -> dict:
    """The results-file values of one pair result (one ear of a two-ear row)."""
    delay_from = job.get("delay_from") or ("row" if r.delay_from == "search" else r.delay_from)
    confidence = job.get("delay_confidence") if delay_from == "condition" else (
        r.delay_confidence if delay_from == "row" else None)
    notes = tuple(job.get("delay_notes") or ()) + tuple(n for n in r.notes if not n.startswith("threshold-simulating"))
    return {"stoi": float(r.stoi), "estoi": float(r.estoi), "ssti": None if r.ssti is None else float(r.ssti),
            "ssti_regression": None if r.ssti_regression is None else float(r.ssti_regression),
            "delay_ms": float(r.delay_ms), "delay_from": delay_from,
            "delay_confidence": None if confidence is None or not math.isfinite(confidence) else float(confidence),
            "sepsm_snr_env_db": None if r.sepsm is None else float(r.sepsm.snr_env_db),
            NOTES_COLUMN: "; ".join(notes)}


#: The name of a manifest column taken as the condition when none is named.
DEFAULT_CONDITION_COLUMN: str = "condition"


@dataclass(frozen=True)
class Alignment:
    """How the pair rows of a batch are aligned (see the module docstring).

    Attributes
    ----------
    align : search for delays at all (``False``: no delay, as ``pair --no-align``).
    max_delay_s : largest delay searched, s.
    condition_column : the column naming the condition (``None``: ``condition`` when the
        manifest has it, else one estimate per row).
    per_row : each pair its own estimate.
    fixed_delay_ms : one delay for every pair row, ms.
    """

    align: bool = True
    max_delay_s: float = std.PAIR_MAX_DELAY_S
    condition_column: str | None = None
    per_row: bool = False
    fixed_delay_ms: float | None = None

    def check(self, m: Manifest) -> "Alignment":
        """Refuse contradicting or malformed choices (one line each)."""
        from .pair import _check_options

        _check_options(self.max_delay_s, std.PAIR_CHUNK_S)
        chosen = [name for name, on in (("--delay-per-row", self.per_row),
                                        ("--delay-ms", self.fixed_delay_ms is not None),
                                        ("--condition-column", self.condition_column is not None)) if on]
        if len(chosen) > 1:
            raise InputError(f"{' and '.join(chosen)} contradict each other", "choose one way to align")
        if self.fixed_delay_ms is not None:
            checks.number(self.fixed_delay_ms, "--delay-ms", fix="give the delay in ms")
        if self.condition_column is not None and not isinstance(self.condition_column, str):
            raise InputError(f"--condition-column {self.condition_column!r:.40} is not a column name",
                             "name one of the manifest's columns")
        if not self.align and chosen and self.fixed_delay_ms is None:
            raise InputError(f"--no-align and {chosen[0]} contradict each other", "choose one")
        if self.condition_column is not None and self.condition_column not in m.columns:
            raise InputError(f"{_where(m.path)} has no column '{self.condition_column}' (--condition-column)",
                             f"name one of its columns: {', '.join(m.columns)}")
        return self

    def condition(self, m: Manifest) -> str | None:
        """The condition column in effect, or ``None`` (per-row estimates)."""
        if not self.align or self.per_row or self.fixed_delay_ms is not None:
            return None
        if self.condition_column is not None:
            return self.condition_column
        return DEFAULT_CONDITION_COLUMN if DEFAULT_CONDITION_COLUMN in m.columns else None


def plan_delays(m: Manifest, jobs: Sequence[dict], alignment: Alignment | None = None,
                progress: Callable[[int, int], None] | None = None) -> tuple[list[dict], tuple[str, ...]]:
    """The pair jobs with their delay choice, and notes for the batch summary.

    Pooling a condition reads every pair of that condition (also rows already done, so
    a resumed batch uses the same delay); only conditions with pending rows are pooled.

    Raises
    ------
    InputError
        For an ``m`` that is not a :class:`Manifest`, jobs that are not a list of job
        dictionaries, or alignment choices :meth:`Alignment.check` refuses.
    """
    from .pair import common_delay

    if not isinstance(m, Manifest):
        raise InputError(f"the manifest is not a Manifest ({type(m).__name__})", "read it with read_manifest")
    if alignment is not None and not isinstance(alignment, Alignment):
        raise InputError(f"the alignment is not an Alignment ({type(alignment).__name__})",
                         "give Alignment(...) or None")
    if isinstance(jobs, (str, bytes, Mapping)) or not isinstance(jobs, Sequence) or not all(
            isinstance(j, Mapping) for j in jobs):
        raise InputError("the jobs are not a list of job dictionaries", "give the jobs of read_manifest")
    al = (alignment or Alignment()).check(m)
    cond = al.condition(m)
    notes: list[str] = []
    out = [dict(j) for j in jobs]
    pairs = [j for j in out if j.get("kind") == "pair"]
    for j in pairs:
        j.update(align=al.align, max_delay_s=al.max_delay_s)
        if j.get("manifest_delay_ms") is not None:
            j.update(delay_ms=j["manifest_delay_ms"], delay_from="manifest")
        elif al.fixed_delay_ms is not None:
            j.update(delay_ms=float(al.fixed_delay_ms), delay_from="fixed")
        elif not al.align:
            j.update(delay_ms=None, delay_from="off")
        else:
            j.update(delay_ms=None, delay_from="row")
    if cond is None:
        if al.align and al.fixed_delay_ms is None and not al.per_row and pairs:
            notes.append("the manifest has no 'condition' column: each pair row has its own delay estimate "
                         "(name the column of the processing condition with --condition-column to give its "
                         "items one delay)")
        return out, tuple(notes)
    col = m.columns.index(cond)
    pending = {str(m.cells[j["row"] - 1][col]) for j in pairs if j["delay_from"] == "row"}
    groups: dict[str, list[dict]] = {}
    for j in m.jobs:
        if j.get("kind") == "pair" and j.get("manifest_delay_ms") is None:
            groups.setdefault(str(m.cells[j["row"] - 1][col]), []).append(j)
    todo = [c for c in groups if c in pending]
    found: dict[str, Any] = {}
    for k, c in enumerate(todo):
        members = groups[c]
        # two ears: the delay of the left ear (channel 0), used for both
        found[c] = common_delay([(j["clean"], j["degraded"], 0 if j.get("ears") else j.get("channel"))
                                 for j in members],
                                max_delay_s=al.max_delay_s)
        if progress is not None:
            progress(k + 1, len(todo))
    for j in pairs:
        c = str(m.cells[j["row"] - 1][col])
        if j["delay_from"] != "row" or c not in found:
            continue
        cd = found[c]
        if cd.delay_ms is None:
            j["delay_notes"] = [f"no common delay for {cond} '{c}' (no pair of it could be aligned): "
                                "this row's own estimate is used"]
            continue
        j.update(delay_ms=cd.delay_ms, delay_from="condition", delay_confidence=cd.confidence)
    for c in todo:
        cd = found[c]
        if cd.delay_ms is not None:
            notes.append(f"{cond} '{c}': one delay of {cd.delay_ms:.2f} ms for its {cd.pooled} pair(s) "
                         f"(GCC-PHAT curves pooled, peak ratio {cd.confidence:.2f})")
        notes.extend(f"{cond} '{c}': {n}" for n in cd.notes)
    return out, tuple(notes)


def score_row(job: dict) -> dict:
    """Score one manifest row; never raises.

    Parameters
    ----------
    job : one entry of :attr:`Manifest.jobs` (a plain dict: picklable for any executor).

    Returns
    -------
    dict with ``row`` (the manifest row number), ``values`` (index name -> number or
    text) and ``error`` ("" when scored; otherwise the one-line reason and ``values``
    is empty).
    """
    row = job.get("row")
    try:
        kind = job.get("kind")
        values = _score_ir(job) if kind == "ir" else _score_stipa(job) if kind == "stipa" else _score_pair(job)
        return {"row": row, "values": values, "error": ""}
    except EnvpredictError as e:
        return {"row": row, "values": {}, "error": e.one_line()}
    except MemoryError:
        return {"row": row, "values": {}, "error": "out of memory — score this file alone or free memory"}
    except Exception as e:  # a bug or an unexpected file problem must not stop the batch
        return {"row": row, "values": {}, "error": f"internal failure ({type(e).__name__}: {e})"}


# ---------------------------------------------------------------------------
# Results file
# ---------------------------------------------------------------------------


class ResultWriter:
    """Append-only results file: one ``write`` + ``fsync`` per finished row.

    Use :meth:`open`; :meth:`finish` rewrites the file in manifest order atomically.
    """

    def __init__(self, path: Path, manifest: Manifest, done: dict[int, list[str]]) -> None:
        self.path = path
        self.manifest = manifest
        self.done = done  # row number -> cells of the results line
        self._fd: int | None = None
        self._run_lock: int | None = None  # held from open() to close(), see _lock_run

    # -- opening -----------------------------------------------------------
    @classmethod
    def open(cls, path: str | os.PathLike, manifest: Manifest, *, resume: bool = False,
             overwrite: bool = False, retry_failed: bool = False) -> ResultWriter:
        """Open (or create) the results file for ``manifest``.

        ``resume`` keeps the rows already in the file (``retry_failed``: except those
        with an error, which are scored again); ``overwrite`` starts a new file.
        Without either, an existing non-empty file is refused, so that finished work
        is never discarded by accident.
        """
        from .outputs import check_output_file

        p = Path(path)
        with contextlib.suppress(OSError):
            if p.exists() and os.path.samefile(p, manifest.path):
                raise InputError(f"output '{p}' is the manifest itself", "choose another --out file")
        # not the manifest nor any file it names; not a folder, pipe or device; a writable folder
        inputs = [manifest.path] + [j[k] for j in manifest.jobs for k in ("ir", "clean", "degraded", "inverted")
                                    if j.get(k)]
        check_output_file(p, inputs=inputs, option="results file")
        header = list(manifest.result_columns)
        exists = p.exists() and p.stat().st_size > 0
        if exists and not (resume or overwrite):
            raise InputError(
                f"results file '{p}' already exists",
                "add --resume to finish it, or --overwrite to start again",
            )
        # one run per results file: a lock on a path that stays the same while the file is
        # replaced (a rewrite renames a new file over it, so a lock on the file itself
        # would let a second run that starts at the same moment lock the new one)
        run_lock = cls._lock_run(p)
        try:
            # and a run of an older version holding the file itself
            probe = cls._locked_fd(p, os.O_RDONLY) if p.exists() else None
            try:
                done, rewrite = cls._existing_rows(p, manifest, header, exists, resume, overwrite, retry_failed)
                w = cls(p, manifest, done)
                if rewrite:
                    w._rewrite(sort=False)
            finally:
                if probe is not None:
                    os.close(probe)
            w._open_append()
        except BaseException:
            os.close(run_lock)
            raise
        w._run_lock = run_lock
        return w

    @classmethod
    def _lock_run(cls, path: Path) -> int:
        """Take the run lock of results file ``path``: a lock file named by the file's
        resolved path in a folder of this user's under the temporary folder (nothing is
        added beside the user's files; the lock ends with the process)."""
        import hashlib
        import tempfile

        key = hashlib.sha256(os.fsencode(os.path.realpath(path))).hexdigest()[:32]
        folder = Path(tempfile.gettempdir()) / f"envpredict-locks-{os.getuid() if hasattr(os, 'getuid') else 0}"
        try:
            folder.mkdir(mode=0o700, exist_ok=True)
        except OSError as e:
            raise InputError(f"cannot create the lock folder '{folder}' ({e.strerror})",
                             "check the temporary folder (TMPDIR)") from None
        return cls._locked_fd(folder / f"{key}.lock", os.O_RDWR | os.O_CREAT, shown=path)

    @staticmethod
    def _existing_rows(p: Path, manifest: Manifest, header: list[str], exists: bool, resume: bool,
                       overwrite: bool, retry_failed: bool) -> tuple[dict[int, list[str]], bool]:
        """Rows kept from an existing file, and whether the file must be rewritten first."""
        done: dict[int, list[str]] = {}
        rewrite = not exists or overwrite
        if exists and resume and not overwrite:
            text = read_text(p, "results file")
            old_header, recs, torn = parse_lines(text, p)
            if old_header is None:
                rewrite = True  # killed while writing the header
            else:
                if old_header != header:
                    raise InputError(
                        f"results file '{p}' has other columns than this manifest gives "
                        f"({', '.join(old_header)})",
                        "resume with the manifest it was started with, or choose a new --out",
                    )
                n = len(manifest)
                for i, rec in enumerate(recs, start=2):
                    if len(rec) != len(header):
                        raise InputError(
                            f"results file '{p}', line {i} has {len(rec)} cells; the header has {len(header)}",
                            "repair that line, or choose a new --out",
                        )
                    try:
                        row = int(rec[0])
                    except ValueError:
                        row = -1
                    if not 1 <= row <= n:
                        raise InputError(f"results file '{p}', line {i} has row number '{rec[0]}', "
                                         f"not 1..{n}", "resume with the manifest it was started with")
                    if not manifest.matches(row, rec[1:1 + len(manifest.columns)]):
                        raise InputError(
                            f"results file '{p}', line {i}: row {row} does not match row {row} of "
                            f"manifest '{manifest.path}' (the manifest changed since the batch started)",
                            "resume with the unchanged manifest, or choose a new --out",
                        )
                    if row in done:
                        # cannot happen with this writer; keep the first and repair the file
                        rewrite = True
                        continue
                    if retry_failed and rec[-1].strip():
                        rewrite = True
                        continue
                    done[row] = rec
                rewrite = rewrite or torn
        return done, rewrite

    @staticmethod
    def _locked_fd(path: Path, flags: int, shown: Path | None = None) -> int:
        """Open ``path`` and take an exclusive advisory lock (refused if another run holds it;
        the message names ``shown``, default ``path``)."""
        fd = os.open(path, flags, 0o666)  # 0666 & ~umask, as any new file
        try:
            import fcntl
        except ImportError:  # Windows: no advisory lock
            return fd
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            os.close(fd)
            raise InputError(f"results file '{shown or path}' is being written by another batch run",
                             "wait for it to finish, or choose another --out") from None
        return fd

    def _open_append(self) -> None:
        self._fd = self._locked_fd(self.path, os.O_WRONLY | os.O_APPEND | os.O_CREAT)

    def _rewrite(self, sort: bool) -> None:
        from .outputs import atomic_write_text

        rows = sorted(self.done) if sort else list(self.done)
        text = csv_line(self.manifest.result_columns) + "".join(csv_line(self.done[r]) for r in rows)
        atomic_write_text(self.path, text)

    # -- writing -----------------------------------------------------------
    def pending(self) -> list[dict]:
        """Jobs of the rows not yet in the file, in manifest order."""
        return [j for j in self.manifest.jobs if j["row"] not in self.done]

    def add(self, result: dict) -> list[str]:
        """Append one finished row (a :func:`score_row` result), flushed to disk."""
        row = int(result["row"])
        if row in self.done:
            return self.done[row]  # a backend delivered a row twice: write it once
        values = result.get("values") or {}
        cells = ([str(row)] + self.manifest.result_cells(row, values)
                 + [format_cell(values.get(c), c) for c in self.manifest.index_columns + (NOTES_COLUMN,)]
                 + [format_cell(result.get("error"))])
        data = csv_line(cells).encode("utf-8")
        assert self._fd is not None
        view = memoryview(data)
        while view:
            n = os.write(self._fd, view)
            view = view[n:]
        os.fsync(self._fd)
        self.done[row] = cells
        return cells

    def close(self) -> None:
        for attr in ("_fd", "_run_lock"):
            fd = getattr(self, attr)
            if fd is not None:
                with contextlib.suppress(OSError):
                    os.close(fd)
                setattr(self, attr, None)

    def finish(self) -> None:
        """All rows done: rewrite the file in manifest order, atomically."""
        self._rewrite(sort=True)
        self.close()

    def failures(self) -> list[tuple[int, str]]:
        return [(r, self.done[r][-1]) for r in sorted(self.done) if self.done[r][-1].strip()]


# ---------------------------------------------------------------------------
# Executors
# ---------------------------------------------------------------------------


def _worker_init(batch_pid: int | None = None) -> None:
    """Pool workers leave Ctrl-C to the parent, which stops the batch cleanly, and end
    themselves when the batch process is gone (killed: no orphan keeps scoring)."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if batch_pid is not None:
        import threading

        threading.Thread(target=_exit_with, args=(batch_pid,), daemon=True, name="envpredict-watch").start()


def _exit_with(pid: int) -> None:
    """End this worker as soon as process ``pid`` no longer exists."""
    while True:
        time.sleep(PARENT_CHECK_S)
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            os._exit(1)
        except OSError:
            pass  # exists, owned by someone else: cannot be ours, but do not guess


def _no_op() -> None:
    """A task that only makes the pool start a worker."""


def score_rows(jobs: Sequence[dict]) -> list[dict]:
    """:func:`score_row` for each job of a pool task, in order."""
    return [score_row(job) for job in jobs]


def _tasks(jobs: Sequence[dict], workers: int) -> Iterator[list[dict]]:
    """The jobs in tasks of up to ROWS_PER_TASK rows; one row per task while there are
    too few rows to keep every worker busy with several tasks."""
    size = max(1, min(ROWS_PER_TASK, len(jobs) // (workers * IN_FLIGHT_PER_WORKER * 2)))
    for i in range(0, len(jobs), size):
        yield list(jobs[i: i + size])


def _run_serial(jobs: Sequence[dict]) -> Iterator[dict]:
    for job in jobs:
        yield score_row(job)


@contextlib.contextmanager
def _single_threaded_env() -> Iterator[None]:
    """Set :data:`THREAD_ENV_VARS` to 1 (where the user did not set them) for the processes
    started inside the block; this process has loaded its libraries already and is not
    affected."""
    added = [v for v in THREAD_ENV_VARS if v not in os.environ]
    for v in added:
        os.environ[v] = "1"
    try:
        yield
    finally:
        for v in added:
            os.environ.pop(v, None)


def _pool_context() -> Any:
    """Start method of the local pool.

    Where the platform has it (Linux, macOS), a fork server: one process, started with
    single-threaded numeric libraries, imports :data:`WORKER_MODULES` (and the main
    script) once, and every worker is forked from it with those modules loaded. The
    workers so start in milliseconds instead of each spending about 0.65 s importing
    numpy, scipy and soundfile before its first row; the server is a plain
    single-threaded process, so forking it is safe (unlike forking this process, which
    may run a progress thread). Elsewhere (Windows): ``spawn``, each worker importing
    on its own.
    """
    import multiprocessing as mp

    if "forkserver" not in mp.get_all_start_methods():
        return mp.get_context("spawn")
    ctx = mp.get_context("forkserver")
    ctx.set_forkserver_preload(["__main__", *WORKER_MODULES])
    return ctx


def start_workers_early() -> None:
    """Start the pool's fork server now, without waiting for it.

    It imports :data:`WORKER_MODULES` in its own process while this one reads the
    manifest and opens the results file; the first worker starts as soon as the
    imports are done. Does nothing where there is no fork server, or when it runs
    already (it is started once per process and serves every later pool).
    """
    ctx = _pool_context()
    if ctx.get_start_method() != "forkserver":
        return
    from multiprocessing import forkserver

    with _single_threaded_env():
        forkserver.ensure_running()


def _run_pool(jobs: Sequence[dict], workers: int) -> Iterator[dict]:
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
    from concurrent.futures.process import BrokenProcessPool

    todo = _tasks(jobs, workers)
    window = workers * IN_FLIGHT_PER_WORKER
    # spawned workers inherit the environment at their start (during the first submits);
    # with a fork server, the server's (set when it started, see start_workers_early)
    with _single_threaded_env():
        ctx = _pool_context()
        if ctx.get_start_method() == "forkserver":
            from multiprocessing import forkserver

            forkserver.ensure_running()
        ex = ProcessPoolExecutor(max_workers=workers, mp_context=ctx, initializer=_worker_init,
                                 initargs=(os.getpid(),))
        # start every worker now, while the environment holds the thread limits
        for _ in range(workers):
            ex.submit(_no_op)
    finished_cleanly = False
    try:
        running: dict = {}
        for task in todo:
            running[ex.submit(score_rows, task)] = task
            if len(running) >= window:
                break
        while running:
            finished, _ = wait(running, return_when=FIRST_COMPLETED)
            for fut in finished:
                task = running.pop(fut)
                try:
                    results = fut.result()
                except BrokenProcessPool:
                    rows = ", ".join(str(job["row"]) for job in task)
                    raise ComputationError(
                        f"a worker process died while scoring row(s) {rows} (out of memory, or killed)",
                        "the finished rows are saved: rerun with --resume, with fewer --workers if memory is short",
                    ) from None
                yield from results
                nxt = next(todo, None)
                if nxt is not None:
                    running[ex.submit(score_rows, nxt)] = nxt
        finished_cleanly = True
    finally:
        # on an interrupt or error, do not wait for the rows still running: their
        # results would not be written anyway, and --resume scores them again
        ex.shutdown(wait=finished_cleanly, cancel_futures=True)


#: Address schemes of a dask scheduler that the batch connects to (the plain and the
#: TLS transport of dask.distributed; others need extra packages and setup).
SCHEDULER_SCHEMES: tuple[str, ...] = ("tcp://", "tls://")


@contextlib.contextmanager
def _quiet_dask() -> Iterator[None]:
    """Silence dask.distributed's own log records (a lost scheduler makes its client log
    a 38-line traceback on stderr) while the batch talks to a cluster; the batch reports
    a cluster failure itself, in one line. The loggers' states are restored afterwards."""
    import logging

    with contextlib.suppress(ImportError):
        import distributed  # noqa: F401  (creates its loggers)
    names = [n for n in list(logging.root.manager.loggerDict) if n == "distributed" or n.startswith("distributed.")]
    loggers = [logging.getLogger(n) for n in {"distributed", "distributed.client", *names}]
    before = [lg.disabled for lg in loggers]
    for lg in loggers:
        lg.disabled = True
    try:
        yield
    finally:
        for lg, was in zip(loggers, before):
            lg.disabled = was


def _connect(address: str):
    try:
        from distributed import Client
    except ImportError:
        raise InputError(
            "--scheduler needs dask.distributed, which is not installed",
            "install the cluster extra: pip install 'envpredict[cluster]'",
        ) from None
    try:
        client = Client(address, timeout=f"{CONNECT_TIMEOUT_S}s")
    except (OSError, TimeoutError, ValueError) as e:
        raise InputError(f"cannot reach the dask scheduler at '{address}' ({type(e).__name__}: {_one_line(e)})",
                         "check the address (tcp://HOST:PORT) and that the scheduler is running") from None
    except Exception as e:  # a service that is not a dask scheduler: its bytes read as a message of
        # absurd length (MemoryError) or a malformed one
        raise InputError(f"the service at '{address}' does not answer as a dask scheduler ({type(e).__name__})",
                         "give the address of a dask scheduler (printed by 'dask scheduler' when it starts)") from None
    threads = sum(client.nthreads().values())
    if threads == 0:
        client.close()
        raise InputError(f"the dask cluster at '{address}' has no workers", "start workers, then rerun")
    return client, threads


def _one_line(e: BaseException) -> str:
    """An exception's message on one line (dask's messages span several)."""
    return " ".join(str(e).split())


#: What to do when the cluster fails mid-batch: the rows finished so far are in the file.
_RESUME_FIX = "the finished rows are saved in the results file: rerun with --resume"


def _cluster_lost(address: str, done: int, total: int) -> ComputationError:
    return ComputationError(
        f"the dask scheduler at '{address}' stopped answering after {done} of {total} rows (it was stopped, "
        "crashed or the network failed)",
        f"restart the cluster; {_RESUME_FIX}",
    )


def _run_dask(jobs: Sequence[dict], client: Any, threads: int, address: str = "the dask cluster") -> Iterator[dict]:
    """Score ``jobs`` on a dask cluster, yielding results in completion order.

    A cluster failure mid-run stops the batch with one :class:`ComputationError` (the
    rows yielded so far are written by the caller, so ``--resume`` continues): a lost
    scheduler, a cluster without workers for :data:`NO_WORKER_TIMEOUT_S`, or a row
    whose task failed on the cluster (e.g. workers that cannot import envpredict, or a
    row that killed its worker again and again).
    """
    import asyncio
    import uuid

    from distributed import wait

    futures: dict = {}
    done = 0
    total = len(jobs)
    try:
        run = uuid.uuid4().hex[:12]
        todo = iter(jobs)
        window = max(threads * IN_FLIGHT_PER_WORKER, MIN_DASK_IN_FLIGHT)

        def submit(job):
            try:
                futures[client.submit(score_row, job, pure=False, key=f"envpredict-row-{run}-{job['row']}")] = job
            except Exception:  # the client cannot send: the scheduler is gone
                raise _cluster_lost(address, done, total) from None

        for job in todo:
            submit(job)
            if len(futures) >= window:
                break
        no_workers_since: float | None = None
        while futures:
            try:
                finished, _ = wait(list(futures), timeout=DASK_POLL_S, return_when="FIRST_COMPLETED")
            except (TimeoutError, asyncio.TimeoutError):
                finished = set()
            except Exception as e:  # futures cancelled under it (FuturesCancelledError)
                if client.status != "running" or "scheduler-connection-lost" in str(e):
                    raise _cluster_lost(address, done, total) from None
                raise ComputationError(f"the dask cluster failed ({type(e).__name__}: {_one_line(e)})",
                                       f"check the scheduler and worker logs; {_RESUME_FIX}") from None
            if not finished:  # nothing came back for a while: is the cluster still there?
                if client.status != "running":
                    raise _cluster_lost(address, done, total)
                try:
                    workers = len(client.nthreads())
                except Exception:
                    raise _cluster_lost(address, done, total) from None
                if workers:
                    no_workers_since = None
                elif no_workers_since is None:
                    no_workers_since = time.monotonic()
                elif time.monotonic() - no_workers_since > NO_WORKER_TIMEOUT_S:
                    raise ComputationError(
                        f"the dask cluster at '{address}' has had no workers for {NO_WORKER_TIMEOUT_S:.0f} s "
                        f"after {done} of {total} rows (they were stopped or crashed)",
                        f"start workers; {_RESUME_FIX}",
                    )
                continue
            for fut in finished:
                job = futures.pop(fut)
                try:
                    res = fut.result(timeout=DASK_POLL_S)
                except (TimeoutError, asyncio.TimeoutError):
                    # finished, then lost with the worker that held it: dask computes it again
                    futures[fut] = job
                    continue
                except Exception as e:
                    # score_row never raises: this is the cluster failing
                    if client.status != "running" or "scheduler-connection-lost" in str(e):
                        raise _cluster_lost(address, done, total) from None
                    raise ComputationError(
                        f"the dask cluster failed on row {job['row']} ({type(e).__name__}: {_one_line(e)})",
                        f"install envpredict on every worker and check the worker logs; {_RESUME_FIX}",
                    ) from None
                done += 1
                yield res
                nxt = next(todo, None)
                if nxt is not None:
                    submit(nxt)
    finally:
        if futures and client.status == "running":
            with contextlib.suppress(Exception):
                client.cancel(list(futures))


# ---------------------------------------------------------------------------
# The batch
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class BatchSummary:
    """Outcome of :func:`run_batch`."""

    manifest: str
    out: str
    backend: str  # "in-process", "process pool" or "dask"
    workers: int
    total: int  # rows in the manifest
    skipped: int  # rows already in the results file (resume)
    scored: int  # rows scored in this run (including failed ones)
    failed: int  # rows of the results file with an error (this run and earlier)
    seconds: float
    failures: tuple[tuple[int, str], ...] = field(default=())  # the first few (row, error)
    cautions: tuple[str, ...] = field(default=())  # for every STI of the file
    notes: tuple[str, ...] = field(default=())  # how the pair rows were aligned

    @property
    def rows_per_s(self) -> float:
        return self.scored / self.seconds if self.seconds > 0 else float("nan")

    def to_dict(self) -> dict:
        from .results import jsonable

        return jsonable({
            "backend": self.backend, "workers": self.workers,
            "total": self.total, "skipped": self.skipped, "scored": self.scored, "failed": self.failed,
            "ok": self.total - self.failed, "seconds": round(self.seconds, 3),
            "rows_per_s": round(self.rows_per_s, 3) if self.scored else None,
            "failures": [{"row": r, "error": e} for r, e in self.failures],
            "cautions": list(self.cautions),
            "notes": list(self.notes),
        })


def run_batch(
    manifest: str | os.PathLike | Manifest,
    out: str | os.PathLike,
    *,
    workers: int | None = None,
    scheduler: str | None = None,
    resume: bool = False,
    overwrite: bool = False,
    retry_failed: bool = False,
    noise_db: Sequence[float] | str | None = None,
    speech_level_dba: float = std.DEFAULT_SPEECH_LEVEL_DBA,
    talker: str = std.DEFAULT_TALKER,
    progress: Callable[[int, int], None] | None = None,
    alignment: Alignment | None = None,
    ears: bool = False,
    audiogram: Any = None,
) -> BatchSummary:
    """Score every row of a manifest into a resumable results CSV file.

    Parameters
    ----------
    manifest : path of the manifest CSV (or a :class:`Manifest` from :func:`read_manifest`).
    out : results CSV file (see the module docstring for its columns and guarantees).
    workers : local worker processes (default: the usable cores; 1 = in this process).
    scheduler : address of a dask.distributed scheduler (``tcp://HOST:PORT``); when
        given, the rows are scored on that cluster and ``workers`` is ignored.
    resume : keep the rows already in ``out`` and score only the missing ones.
    overwrite : start ``out`` again even if it exists.
    retry_failed : with ``resume``, score again the rows that failed before.
    noise_db, speech_level_dba, talker : defaults for IR rows (see :func:`read_manifest`).
    progress : called as ``progress(done, total)`` after each row, counting the rows
        of this run only (``total`` = rows still to score), so that a rate and the
        time left computed from it are right when resuming.
    alignment : how pair rows are aligned (default: one delay per condition, see
        :class:`Alignment` and the module docstring).
    ears : score two-channel files as two ears, the better ear per octave band (see the
        module docstring; with a :class:`Manifest`, read it with ``ears`` instead).
    audiogram : the listener of rows without an ``audiogram`` cell (see :func:`read_manifest`).

    Returns
    -------
    BatchSummary (``failed > 0`` when any row of the results file has an error).

    Raises
    ------
    InputError
        For a manifest that is not a path or a :class:`Manifest`, a malformed manifest,
        an output that cannot be written or does not match the manifest on ``resume``,
        or an option out of range.
    ComputationError
        If the output cannot be written (a full disk) or the backend fails.

    Notes
    -----
    Results do not depend on the backend or on the number of workers: every row is
    scored by the same deterministic function of its files.
    """
    if not isinstance(manifest, Manifest):
        manifest = checks.path(manifest, "manifest")
    elif checks.flag(ears, "ears") and not all(j.get("ears") for j in manifest.jobs):
        raise InputError("ears=True was given with a manifest read without it", "read it with read_manifest(..., "
                         "ears=True)")
    if workers is not None:
        try:
            w = int(workers)
        except (TypeError, ValueError):
            raise InputError(f"--workers '{workers}' is not a whole number", "give 1 or more") from None
        if w < 1:
            raise InputError(f"--workers {workers} is below 1", "give 1 or more (default: the number of cores)")
        workers = w
    if scheduler is not None and not str(scheduler).strip():
        raise InputError("--scheduler is empty", "give the scheduler address, e.g. tcp://10.0.0.5:8786")
    if scheduler is not None and not str(scheduler).strip().startswith(SCHEDULER_SCHEMES):
        raise InputError(f"--scheduler '{str(scheduler).strip()}' is not a {' or '.join(SCHEDULER_SCHEMES)} address",
                         "give the dask scheduler's address, e.g. tcp://10.0.0.5:8786")
    if retry_failed and not resume:
        raise InputError("--retry-failed works only with --resume", "add --resume")
    if resume and overwrite:
        raise InputError("--resume and --overwrite contradict each other", "choose one")
    out = checks.path(out, "results file (--out)")
    if scheduler is None and (workers or usable_cores()) > 1:
        start_workers_early()  # the pool's imports run while the manifest is read
    m = manifest if isinstance(manifest, Manifest) else read_manifest(
        manifest, noise_db=noise_db, speech_level_dba=speech_level_dba, talker=talker, ears=ears,
        audiogram=audiogram)
    alignment = (alignment or Alignment()).check(m)
    with _quiet_dask() if scheduler is not None else contextlib.nullcontext():
        return _run_manifest(m, out, workers=workers, scheduler=scheduler, resume=resume, overwrite=overwrite,
                             retry_failed=retry_failed, progress=progress, alignment=alignment)


def _run_manifest(m: Manifest, out: str | os.PathLike, *, workers: int | None, scheduler: str | None, resume: bool,
                  overwrite: bool, retry_failed: bool, progress: Callable[[int, int], None] | None,
                  alignment: Alignment) -> BatchSummary:
    """The batch proper, on a read manifest with checked options (see :func:`run_batch`)."""
    client = threads = None
    if scheduler is not None:  # reach the cluster before any output is created
        client, threads = _connect(str(scheduler).strip())
    out_path = Path(out)
    created = not out_path.exists()
    try:
        writer = ResultWriter.open(out_path, m, resume=resume, overwrite=overwrite, retry_failed=retry_failed)
    except BaseException:
        if client is not None:
            client.close()
        raise
    t0 = time.monotonic()
    scored = 0
    try:
        jobs, delay_notes = plan_delays(m, writer.pending(), alignment)
        skipped = len(m) - len(jobs)
        if client is not None:
            backend, n_workers = "dask", int(threads)
            results: Iterable[dict] = _run_dask(jobs, client, int(threads), str(scheduler).strip())
        else:
            n_workers = workers or usable_cores()
            n_workers = max(1, min(n_workers, len(jobs))) if jobs else 1
            if n_workers == 1:
                backend, results = "in-process", _run_serial(jobs)
            else:
                backend, results = "process pool", _run_pool(jobs, n_workers)
        if progress:
            progress(0, len(jobs))
        if jobs:
            try:
                for res in results:
                    writer.add(res)
                    scored += 1
                    if progress:
                        progress(scored, len(jobs))
            finally:
                close = getattr(results, "close", None)
                if close is not None:
                    close()  # stop the executor now, also on an interrupt or a failed write
        writer.finish()
    except BaseException:
        writer.close()
        if created and not writer.done:
            with contextlib.suppress(OSError):
                out_path.unlink()  # nothing was scored: leave no file behind
        raise
    finally:
        writer.close()
        if client is not None:
            with contextlib.suppress(Exception):
                client.close()
    fails = writer.failures()
    return BatchSummary(
        manifest=str(m.path), out=str(out), backend=backend, workers=n_workers, total=len(m),
        skipped=skipped, scored=scored, failed=len(fails), seconds=time.monotonic() - t0,
        failures=tuple(fails[:SUMMARY_FAILURES]), cautions=_batch_cautions(m), notes=delay_notes,
    )


def _batch_cautions(m: Manifest) -> tuple[str, ...]:
    """Cautions that hold for every STI of an IR batch."""
    from . import cautions as cau

    from .hearing import CAUTION_AUDIBILITY

    ir_jobs = [j for j in m.jobs if j["kind"] == "ir"]
    listener = [CAUTION_AUDIBILITY + " (rows with an audiogram)."] if any(j.get("audiogram") for j in m.jobs) else []
    if not ir_jobs and not any(j["kind"] == "stipa" for j in m.jobs):
        return tuple(listener)
    out = [cau.LIFE_SAFETY] + listener
    if any(j.get("noise") is None and j.get("noise_recording") is None for j in ir_jobs):
        out.append("Rows without noise levels hold only for a noise-free site: give the octave-band noise "
                   "at the listener in a 'noise' column or with --noise.")
    return tuple(out)
