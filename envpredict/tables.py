"""Result tables (CSV): reading and writing them, in one place.

Every CSV file the tool reads or writes goes through this module: the manifests and
results files of :mod:`envpredict.batch`, the results tables compared by
:mod:`envpredict.stats`, the score tables fitted by :mod:`envpredict.mapping` and the
tables it adds a predicted-score column to. Nothing here computes an index; the
numeric modules receive plain rows (``{column: text}``) and never parse CSV
themselves.

Conventions
-----------
* Files are UTF-8 (a byte-order mark is accepted), comma-separated, one header line.
* A results file written by ``envpredict batch`` has the columns ``row``, the
  manifest's own columns, the index columns (:data:`IR_INDEX_COLUMNS` and/or
  :data:`PAIR_INDEX_COLUMNS`), ``notes`` and ``error``.
* Numbers are written with ``repr`` (the shortest text that reads back to the same
  float); a figure that could not be computed is an empty cell (:func:`format_cell`).
* Errors are :class:`~envpredict.exceptions.InputError` naming the file, the row and
  the column.
"""

from __future__ import annotations

import csv
import io
import math
import os
from pathlib import Path
from typing import Any, Callable, Iterator, Mapping, Sequence

from . import checks
from .exceptions import InputError

# ---------------------------------------------------------------------------
# Column vocabulary of manifests and results files
# ---------------------------------------------------------------------------

#: Manifest columns naming the input files: an impulse response, a recording of the
#: STIPA test signal, or a clean/degraded pair (one kind per row).
IR_COLUMN = "ir"
STIPA_COLUMN = "stipa"
CLEAN_COLUMN = "clean"
DEGRADED_COLUMN = "degraded"
#: IR rows: a calibrated recording of the site noise (instead of ``noise``).
NOISE_RECORDING_COLUMN = "noise_recording"
#: Pair rows: the processing's output for speech - noise (the degraded file being its
#: output for speech + noise), for the phase-inversion separation and the envelope-power index.
INVERTED_COLUMN = "inverted"
PATH_COLUMNS: tuple[str, ...] = (IR_COLUMN, STIPA_COLUMN, CLEAN_COLUMN, DEGRADED_COLUMN, NOISE_RECORDING_COLUMN,
                                 INVERTED_COLUMN)

#: Optional manifest columns that feed the scoring (see :mod:`envpredict.batch`).
CHANNEL_COLUMN = "channel"
NOISE_COLUMN = "noise"
SPEECH_LEVEL_COLUMN = "speech_level"
SPEECH_LEVELS_COLUMN = "speech_levels"
CALIBRATION_COLUMN = "calibration_db"
STI_TALKER_COLUMN = "sti_talker"
#: Pair rows: the delay of the degraded file, ms, overriding the batch's choice for that
#: row. In the results file the same column holds the delay used (the manifest's where
#: given).
DELAY_COLUMN = "delay_ms"
#: Manifest column holding a row's listener (issue 17): an audiogram's text form
#: ("250:20;500:25;..." -- ';' between points, or ',' inside a quoted cell) or a CSV
#: audiogram file (:func:`load_audiogram`).
AUDIOGRAM_COLUMN = "audiogram"
OPTION_COLUMNS: tuple[str, ...] = (CHANNEL_COLUMN, NOISE_COLUMN, SPEECH_LEVEL_COLUMN, SPEECH_LEVELS_COLUMN,
                                   CALIBRATION_COLUMN, STI_TALKER_COLUMN, DELAY_COLUMN, AUDIOGRAM_COLUMN)

#: Result columns added to the manifest's own.
ROW_COLUMN = "row"
ERROR_COLUMN = "error"
#: Why a figure of a scored row is empty (e.g. a decay range too small for T30).
NOTES_COLUMN = "notes"
#: IR rows: STI, its qualification band, and the ISO 3382-1 mid-frequency T30 and EDT
#: (mean of the 500 Hz and 1 kHz octave bands, seconds; :func:`envpredict.decay.mid_frequency`).
IR_INDEX_COLUMNS: tuple[str, ...] = ("sti", "rating", "t30_mid", "edt_mid")
#: STIPA rows: the STI (direct method) and its qualification band.
STIPA_INDEX_COLUMNS: tuple[str, ...] = ("sti", "rating")
#: Pair rows: STOI, ESTOI, speech-based STI, the delay of the degraded signal used, ms,
#: how it was chosen (``condition``, ``row``, ``fixed``, ``manifest`` or ``off``) and the
#: peak ratio of the estimate it came from (empty for a given delay).
PAIR_INDEX_COLUMNS: tuple[str, ...] = ("stoi", "estoi", "ssti", "ssti_regression", "delay_ms", "delay_from",
                                       "delay_confidence")
#: Pair rows with an ``inverted`` file: the envelope-power index's SNR_env, dB (the
#: ``snr_env_db`` of the pair's ``sepsm``).
SEPSM_INDEX_COLUMNS: tuple[str, ...] = ("sepsm_snr_env_db",)
#: Two-ear rows (``batch --ears``): each ear's index beside the better-ear one (the index
#: columns above then hold the better ear's value; see :mod:`envpredict.binaural`).
EARS_STI_COLUMNS: tuple[str, ...] = ("sti_left", "sti_right")
EARS_PAIR_COLUMNS: tuple[str, ...] = ("stoi_left", "stoi_right", "estoi_left", "estoi_right", "ssti_left",
                                      "ssti_right")
#: Index columns holding text, not numbers.
TEXT_INDEX_COLUMNS: tuple[str, ...] = ("rating", "delay_from")
#: Index columns holding numbers (all except the rating letter and the delay's origin).
NUMERIC_INDEX_COLUMNS: tuple[str, ...] = tuple(
    c for c in IR_INDEX_COLUMNS + PAIR_INDEX_COLUMNS + SEPSM_INDEX_COLUMNS + EARS_STI_COLUMNS + EARS_PAIR_COLUMNS
    if c not in TEXT_INDEX_COLUMNS
)
RESULT_COLUMNS: frozenset[str] = frozenset(
    (ROW_COLUMN, NOTES_COLUMN, ERROR_COLUMN) + IR_INDEX_COLUMNS + PAIR_INDEX_COLUMNS + SEPSM_INDEX_COLUMNS
    + EARS_STI_COLUMNS + EARS_PAIR_COLUMNS
)
#: Result columns a manifest may hold as an option column (its cell, where given, is the
#: value the row uses, and the results file shows the value used in that one column).
MANIFEST_RESULT_COLUMNS: frozenset[str] = frozenset((DELAY_COLUMN,))

#: Default columns of a scores table (number correct, number of trials) fitted by
#: :func:`envpredict.mapping.fit_mapping_file`, and the predicted-score column that
#: :func:`envpredict.mapping.predict_file` adds to a results table.
CORRECT_COLUMN: str = "correct"
TRIALS_COLUMN: str = "trials"
PREDICTED_COLUMN: str = "predicted_percent"

#: Rows of a table as read by :func:`read_table`: ``(line number, {column: text})``.
Rows = list[tuple[int, dict[str, str]]]


# ---------------------------------------------------------------------------
# Reading
# ---------------------------------------------------------------------------


def read_text(path: str | os.PathLike, what: str) -> str:
    """The text of a UTF-8 file, refusing a missing, unreadable or undecodable one.

    Parameters
    ----------
    path : the file.
    what : what it is, for the error message (e.g. ``"manifest"``).

    Raises
    ------
    InputError
        For a path that is not usable, a missing file or a folder, or text that is not UTF-8.
    """
    p = Path(path)
    if not p.exists():
        raise InputError(f"{what} '{p}' does not exist", "check the path")
    if p.is_dir():
        raise InputError(f"{what} '{p}' is a folder", "give the path of a CSV file")
    try:
        raw = p.read_bytes()
    except OSError as e:
        raise InputError(f"{what} '{p}' cannot be read ({e.strerror})", "check its permissions") from None
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as e:
        raise InputError(
            f"{what} '{p}' is not UTF-8 text (undecodable byte at offset {e.start})",
            "save it as CSV in UTF-8",
        ) from None


def iter_records(text: str, on_error: Callable[[int, csv.Error], InputError], *,
                 strict: bool = True) -> Iterator[tuple[int, list[str]]]:
    """``(line number, cells)`` of each record of CSV ``text`` (header included).

    A malformed record raises the :class:`InputError` that ``on_error(line, error)``
    builds, so each caller names its own file in the message.

    Raises
    ------
    InputError
        The one that ``on_error`` builds, for a malformed record.
    """
    reader = csv.reader(io.StringIO(text, newline=""), strict=strict)
    while True:
        try:
            rec = next(reader)
        except StopIteration:
            return
        except csv.Error as e:
            raise on_error(reader.line_num, e) from None
        yield reader.line_num, rec


def parse_lines(text: str, path: str | os.PathLike) -> tuple[list[str] | None, list[list[str]], bool]:
    """Header and complete rows of a results file; ``torn`` if the last line lacked its newline.

    A final line without its newline is a write cut short (a kill, a power cut, a full
    disk): it is dropped, so a file still being written can be read at any time.

    Raises
    ------
    InputError
        For ``text`` that is not text, or a malformed record.
    """
    text = checks.text(text, "table text")
    torn = bool(text) and not text.endswith("\n")
    if torn:
        text = text[: text.rfind("\n") + 1]
    if not text:
        return None, [], torn

    def bad(_line: int, e: csv.Error) -> InputError:
        return InputError(f"results file '{path}' is not valid CSV ({e})",
                          "give a results file written by 'envpredict batch', or a new --out")

    recs = [rec for _, rec in iter_records(text, bad)]
    return recs[0], recs[1:], torn


def read_results(path: str | os.PathLike) -> tuple[tuple[str, ...], list[dict[str, str]]]:
    """Read a results file written by :func:`envpredict.batch.run_batch` (complete or still running).

    A final line without its newline (a write cut short) is ignored, so a file that
    is still being written can be read at any time.

    Parameters
    ----------
    path : the results CSV file.

    Returns
    -------
    columns : the header.
    rows : one dict per row, column -> cell text.

    Raises
    ------
    InputError
        For a file that cannot be read or is not a results table.
    """
    p = Path(path)
    text = read_text(p, "results file")
    header, recs, _ = parse_lines(text, p)
    if header is None:
        raise InputError(f"results file '{p}' is empty", "run 'envpredict batch' first")
    rows = []
    for i, rec in enumerate(recs, start=2):
        if len(rec) != len(header):
            raise InputError(f"results file '{p}', line {i} has {len(rec)} cells; the header has {len(header)}",
                             "repair the line or score again")
        rows.append(dict(zip(header, rec)))
    return tuple(header), rows


def read_table(path: str | os.PathLike, what: str) -> tuple[list[str], Rows]:
    """Read a comma-separated table: header and ``(line, {column: text})`` rows.

    Blank lines (before the header and between rows) are skipped. Refuses, naming the
    file and row: a missing or unreadable file, no header, empty or repeated column
    names, a file separated by ``;``, rows with more or fewer cells than the header.

    Parameters
    ----------
    path : the CSV file.
    what : what it is, for the error messages (e.g. ``"scores file"``).

    Raises
    ------
    InputError
        For a file that cannot be read or is not a CSV table with a header.
    """
    p = Path(path)
    text = read_text(p, what)

    def bad(line: int, e: csv.Error) -> InputError:
        return InputError(f"{what} '{p}', row {line}: malformed CSV ({e})", "repair the quoting in that row")

    records = iter_records(text, bad, strict=False)
    header: list[str] | None = None
    for line, cells in records:
        if any(c.strip() for c in cells):
            header = [h.strip() for h in cells]
            header_line = line
            break
    if header is None:
        raise InputError(f"{what} '{p}' is empty", "give a CSV file with a header row and data rows")
    for i, h in enumerate(header):
        if not h:
            raise InputError(f"{what} '{p}', row {header_line}: column {i + 1} of the header has no name",
                             "name every column")
    dup = sorted({h for h in header if header.count(h) > 1})
    if dup:
        raise InputError(f"{what} '{p}': column '{dup[0]}' appears more than once in the header",
                         "give every column a distinct name")
    if len(header) == 1 and ";" in header[0]:
        raise InputError(f"{what} '{p}' seems to use ';' as separator", "save it with commas between the columns")
    rows: Rows = []
    for line, cells in records:
        if not any(c.strip() for c in cells):
            continue
        if len(cells) != len(header):
            raise InputError(
                f"{what} '{p}', row {line}: {len(cells)} cell(s) but the header has {len(header)} columns",
                "give every row one cell per column (quote cells that contain commas)")
        rows.append((line, dict(zip(header, cells))))
    return header, rows


# ---------------------------------------------------------------------------
# Cells
# ---------------------------------------------------------------------------


def cell_number(v: Any) -> float | None:
    """A cell as a finite number, or ``None`` (empty, not a number, or not finite)."""
    if v is None:
        return None
    if isinstance(v, (int, float)) or hasattr(v, "__float__") and not isinstance(v, str):
        f = float(v)
    else:
        s = str(v).strip()
        if not s:
            return None
        try:
            f = float(s)
        except ValueError:
            return None
    return f if math.isfinite(f) else None


def cell_float(row: Mapping[str, Any], column: str, line: int, source: str, *, blank_ok: bool = False) -> float:
    """The number in ``row[column]``; refuses text and (unless ``blank_ok``) blanks.

    With ``blank_ok`` an empty or non-finite cell gives NaN (e.g. a row whose
    computation failed). Errors name ``source``, the row ``line`` and the column.

    Raises
    ------
    InputError
        For text, a blank (unless ``blank_ok``), or a ``row`` that is not a mapping.
    """
    if not isinstance(row, Mapping):
        raise InputError(f"row {row!r:.40} is not a mapping of cells", "pass a dict column -> cell")
    v = row.get(column)
    text = "" if v is None else str(v).strip()
    if text == "":
        if blank_ok:
            return math.nan
        raise InputError(f"{source}, row {line}, column '{column}': empty cell", "fill in the value or remove the row")
    try:
        f = float(text)
    except ValueError:
        raise InputError(f"{source}, row {line}, column '{column}': '{text}' is not a number",
                         "give a plain number (decimal point, no units or % sign)") from None
    if not math.isfinite(f):
        if blank_ok:
            return math.nan
        raise InputError(f"{source}, row {line}, column '{column}': '{text}' is not finite", "repair the row")
    return f


def _check_header(header: Any) -> None:
    if isinstance(header, (str, bytes)) or not isinstance(header, Sequence) or not all(
            isinstance(h, str) for h in header):
        raise InputError(f"header {header!r:.40} is not a list of column names", "pass a list of strings")


def _check_rows(header: Any, rows: Any) -> None:
    _check_header(header)
    if isinstance(rows, (str, bytes)) or not isinstance(rows, Sequence) or not all(
            isinstance(r, Mapping) and set(r) <= set(header) for r in rows):
        raise InputError("rows are not mappings of the header's columns", "pass one dict per row, keys from the header")


def resolve_column(header: Sequence[str], name: str, source: str) -> str:
    """The header entry called ``name`` (exact, else the one case-insensitive match).

    Raises
    ------
    InputError
        If ``name`` is not in ``header`` (or matches several columns), or ``header`` is not a
        list of names.
    """
    name = checks.text(name, "column name")
    _check_header(header)
    if name in header:
        return name
    near = [h for h in header if h.lower() == name.lower()]
    if len(near) == 1:
        return near[0]
    have = ", ".join(h for h in header if h) or "(none)"
    raise InputError(f"{source} has no column '{name}' (columns: {have})",
                     "name the column with the matching option, or add it to the file")


def format_cell(v: Any, column: str | None = None) -> str:
    """A result value as CSV text, empty for missing/non-finite. A number of a ``column``
    the presentation vocabulary gives CSV decimals (:data:`envpredict.labels.TERMS`,
    ``csv_decimals``) is written with at most that many (indices 6, cut toward minus
    infinity so that no verdict against a requirement of up to 6 decimals flips; delays and
    dB 3; decay times 4); other numbers at full precision (``repr``).

    Examples
    --------
    >>> format_cell(0.39182706657172495, "stoi"), format_cell(0.4999999, "sti"), format_cell(12.0, "delay_ms")
    ('0.391827', '0.499999', '12.0')
    """
    if v is None:
        return ""
    if isinstance(v, bool):
        return str(v).lower()
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float) or hasattr(v, "__float__") and not isinstance(v, str):
        f = float(v)
        if not math.isfinite(f):
            return ""
        return _rounded(f, column) if isinstance(column, str) else repr(f)
    return " ".join(str(v).split())  # one line


def _rounded(f: float, column: str) -> str:
    """``f`` with the CSV decimals of its column (see :func:`format_cell`)."""
    from decimal import ROUND_FLOOR, ROUND_HALF_EVEN, Decimal

    from .labels import TERMS

    # an ear's column (sti_left, stoi_right) keeps the precision of its index
    t = TERMS.get(column) or TERMS.get(column.removesuffix("_left").removesuffix("_right"))
    if t is None or t.csv_decimals is None or abs(f) >= 1e15:  # (beyond the decimal context's 28 digits)
        return repr(f)
    q = Decimal(repr(f)).quantize(Decimal(1).scaleb(-t.csv_decimals), rounding=ROUND_FLOOR if t.csv_cut
                                  else ROUND_HALF_EVEN)
    text = format(q, "f")
    if "." in text:
        text = text.rstrip("0")
        text = text + "0" if text.endswith(".") else text
    return "0.0" if text in ("-0.0", "-0") else text


# ---------------------------------------------------------------------------
# Writing
# ---------------------------------------------------------------------------


def csv_line(cells: Sequence[str]) -> str:
    """One CSV record with its newline (quoting as needed).

    Raises
    ------
    InputError
        If ``cells`` is not a list.
    """
    if isinstance(cells, (str, bytes)) or not isinstance(cells, Sequence):
        raise InputError(f"cells {cells!r:.40} are not a list", "pass a list of cell texts")
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerow(cells)
    return buf.getvalue()


def table_text(header: Sequence[str], rows: Sequence[Mapping[str, str]]) -> str:
    """A whole table as CSV text: the header line and one line per row dict.

    Raises
    ------
    InputError
        For a header that is not a list of names, or rows that are not mappings of its columns.
    """
    _check_rows(header, rows)
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=list(header), lineterminator="\n")
    w.writeheader()
    w.writerows(rows)
    return buf.getvalue()


def write_table(path: str | os.PathLike, header: Sequence[str], rows: Sequence[Mapping[str, str]]) -> Path:
    """Write a table as CSV atomically (it appears whole or not at all); may replace its input.

    Raises
    ------
    InputError
        For a header or rows refused by :func:`table_text`, or a path that cannot be written.
    ComputationError
        If the file cannot be written (a full disk).
    """
    _check_rows(header, rows)
    from .outputs import atomic_write_text

    return atomic_write_text(path, table_text(header, rows))


# ---------------------------------------------------------------------------
# Audiograms (issue 17): a two-column CSV file, frequency_hz,hearing_level_db
# ---------------------------------------------------------------------------

#: Columns of an audiogram file: audiometric frequency (Hz) and hearing level (dB HL).
AUDIOGRAM_FREQUENCY_COLUMN = "frequency_hz"
AUDIOGRAM_LEVEL_COLUMN = "hearing_level_db"


def read_audiogram(path: str | os.PathLike):
    """An audiogram from a CSV file with the header ``frequency_hz,hearing_level_db``
    (one row per audiometric frequency; other columns are ignored), as
    :class:`envpredict.hearing.Audiogram`.

    Raises
    ------
    InputError
        A file that cannot be read, lacks those columns, or holds an audiogram refused by
        :func:`envpredict.hearing.audiogram_from_rows`.
    """
    from .hearing import audiogram_from_rows

    p = checks.path(path, "audiogram file")
    header, rows = read_table(p, "audiogram file")
    fcol = resolve_column(header, AUDIOGRAM_FREQUENCY_COLUMN, f"audiogram file '{p}'")
    lcol = resolve_column(header, AUDIOGRAM_LEVEL_COLUMN, f"audiogram file '{p}'")
    return audiogram_from_rows([(r[fcol], r[lcol]) for _, r in rows], source=p.name)


def load_audiogram(value, *, base: str | os.PathLike | None = None):
    """An audiogram option or manifest cell: ``None``/empty (normal hearing), an
    :class:`~envpredict.hearing.Audiogram`, the text form ``"250:20,500:25,..."``, or the
    path of a CSV audiogram file (:func:`read_audiogram`; a relative path is taken from
    ``base`` when given).

    Raises
    ------
    InputError
        As :func:`read_audiogram` and :func:`envpredict.hearing.parse_audiogram`.
    """
    from .hearing import Audiogram, parse_audiogram

    if value is None or isinstance(value, Audiogram):
        return value
    if isinstance(value, os.PathLike):
        value = os.fspath(value)
    text = checks.text(value, "audiogram", "give frequency:dB HL pairs or a CSV file").strip()
    if not text:
        return None
    if ":" in text and not text.lower().endswith(".csv"):
        return parse_audiogram(text)
    p = Path(text)
    if base is not None and not p.is_absolute():
        p = Path(base) / p
    return read_audiogram(p)
