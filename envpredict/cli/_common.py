"""Output helpers shared by the CLI commands: JSON/table output, files, progress."""

from __future__ import annotations

import json
import sys
import time
from pathlib import Path
from typing import Any, Callable, Iterable

import typer

#: Seconds between plain progress lines when stderr is not a terminal (judgement).
PROGRESS_EVERY_S = 5.0

JSON_HELP = "Print one JSON object instead of the table (for scripts)."
OUT_HELP = "Also write the JSON result to this file (written atomically)."
CHANNEL_HELP = "Channel to use from a multi-channel file (0 = first). Required for multi-channel files."
REPORT_HELP = ("Also write a report folder: PNG figures and a self-contained report.html "
               "(opens offline in a browser). A new folder, or an earlier report folder (replaced as a whole).")
RECORD_HELP = ("Measurement record for the report's top: a small file of 'key: value' lines (project, site, "
               "zone, position, operator, instrument, serial, calibration_date, measurement_date, notes).")
RECORD_FIELD_HELP = "One field of the measurement record, KEY=VALUE (e.g. operator='K. Lind'); repeatable."


def check_outputs(*, out: Path | None = None, report: Path | None = None,
                  inputs: Iterable[Path | str | None] = ()) -> None:
    """Refuse unusable outputs before the slow work: an ``--out`` file or ``--report``
    folder that is (or holds) one of the ``inputs``, ``--out`` inside ``--report``, a
    missing, read-only or unwritable folder, a pipe or device as ``--out``, a report
    folder holding files envpredict did not write."""
    from envpredict.outputs import check_distinct, check_output_file

    inputs = [i for i in inputs if i is not None]
    check_distinct(out, report)
    if out is not None:
        check_output_file(out, inputs=inputs, option="--out")
    if report is not None:
        from envpredict.report import check_report_folder

        check_report_folder(report, inputs=inputs, out=out)


def _command_paths() -> tuple[Path | None, list[Path]]:
    """``--out`` and the input paths of the running command, from its parameters."""
    import importlib

    ctx = None
    for modname in ("typer._click.globals", "click.globals"):  # typer may vendor its own click
        try:
            ctx = importlib.import_module(modname).get_current_context(silent=True)
        except (ImportError, AttributeError):
            continue
        if ctx is not None:
            break
    if ctx is None:
        return None, []
    out = ctx.params.get("out")
    inputs: list[Path] = []
    for name, v in ctx.params.items():
        if name in ("out", "report"):
            continue
        for item in (v if isinstance(v, (list, tuple)) else [v]):
            if isinstance(item, Path):
                inputs.append(item)
    return (out if isinstance(out, Path) else None), inputs


def check_report(report: Path | None) -> None:
    """Refuse unusable outputs of the running command before the slow work: as
    :func:`check_outputs`, with ``--out`` and the inputs taken from the command's own
    parameters (every path parameter other than ``--out`` and ``--report``)."""
    out, inputs = _command_paths()
    check_outputs(out=out, report=report, inputs=inputs)


def _result_inputs(d: dict) -> list[str]:
    """Strings of the result's ``inputs`` object that name existing files (a last guard)."""
    import os

    found = []
    given = d.get("inputs") if isinstance(d.get("inputs"), dict) else {}
    vals = [v for k, v in given.items() if k not in ("out", "report")]  # outputs named there are not inputs
    for v in vals:
        for item in (v if isinstance(v, (list, tuple)) else [v]):
            if isinstance(item, str) and item and os.path.exists(item):
                found.append(item)
    return found


def write_report_if(report: Path | None, kind: str, d: dict, *, title: str | None = None,
                    as_json: bool = False) -> None:
    """Write the --report folder (figures + report.html) from the JSON result ``d``
    (``to_dict()`` plus ``inputs``) when one was asked for."""
    if report is None:
        return
    from envpredict.report import check_report_folder, write_report

    check_report_folder(report, inputs=_result_inputs(d))  # the early check's last guard
    path = write_report(kind, d, report, title=title)
    if not as_json:
        note(f"report written: {path}")


def silence_stdout() -> None:
    """Point the process's standard output at the null device (after it failed), so that
    Python's own flush at exit cannot print a second error."""
    import os

    try:
        fd = sys.stdout.fileno()
        null = os.open(os.devnull, os.O_WRONLY)
        os.dup2(null, fd)
        os.close(null)
    except (OSError, ValueError, AttributeError):
        pass


def stdout_error(e: OSError):
    """The one-line error (exit 1) for a result that could not be printed."""
    import errno

    from envpredict.exceptions import ComputationError

    silence_stdout()
    why = "it is closed" if e.errno == errno.EBADF else (e.strerror or str(e))
    return ComputationError(f"the result could not be written to standard output ({why})",
                            "send the output to a file or a terminal, or use --out FILE")


def echo(text: str, nl: bool = True) -> None:
    """Print ``text`` on standard output; a closed or full output is an error, not a lost result."""
    if sys.stdout is None:
        import errno

        raise stdout_error(OSError(errno.EBADF, "standard output is closed"))
    try:
        typer.echo(text, nl=nl)
    except BrokenPipeError:
        raise
    except OSError as e:
        raise stdout_error(e) from None


def dumps(obj: Any) -> str:
    return json.dumps(obj, indent=2, allow_nan=False)


def emit(result: dict, human: Callable[[], str], as_json: bool, out: Path | None) -> None:
    """Print ``result`` as JSON or as the human text, and write ``--out`` atomically."""
    from envpredict.outputs import atomic_write_text, check_output_file

    text = dumps(result)
    if out is not None:
        check_output_file(out, inputs=_result_inputs(result), option="--out")  # the early check's last guard
        atomic_write_text(out, text + "\n")
    echo(text if as_json else human())


def note(msg: str) -> None:
    """A status line on stderr (kept out of JSON on stdout)."""
    typer.echo(msg, err=True)


class Progress:
    """Progress for long work: a bar on a terminal, plain periodic lines otherwise.

    Use as ``with Progress("scoring", total) as p: p.advance()``. It is also a
    callable ``p(done, total)`` so numeric code can report without knowing the CLI.
    """

    def __init__(self, label: str, total: int | None = None, *, quiet: bool = False,
                 every_s: float = PROGRESS_EVERY_S):
        self.label = label
        self.total = total
        self.done = 0
        self.quiet = quiet
        self.every_s = every_s
        self._tty = sys.stderr.isatty()
        self._bar = None
        self._task = None
        self._t0 = time.monotonic()
        self._last = 0.0

    def __enter__(self) -> "Progress":
        if self.quiet:
            return self
        if self._tty:
            from rich.progress import (BarColumn, MofNCompleteColumn, Progress as RichProgress,
                                       TextColumn, TimeElapsedColumn, TimeRemainingColumn)
            from rich.console import Console

            self._bar = RichProgress(
                TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                TextColumn("{task.fields[rate]}"), TimeElapsedColumn(), TextColumn("ETA"),
                TimeRemainingColumn(), console=Console(stderr=True), transient=True,
            )
            self._bar.__enter__()
            self._task = self._bar.add_task(self.label, total=self.total, rate="")
        return self

    def __call__(self, done: int, total: int | None = None) -> None:
        if total is not None:
            self.total = total
        self.update(done)

    def advance(self, n: int = 1) -> None:
        self.update(self.done + n)

    def update(self, done: int) -> None:
        self.done = done
        if self.quiet:
            return
        elapsed = time.monotonic() - self._t0
        rate = self.done / elapsed if elapsed > 0 else 0.0
        if self._bar is not None:
            self._bar.update(self._task, completed=done, total=self.total, rate=f"{rate:.1f}/s")
        elif elapsed - self._last >= self.every_s or (self.total and done >= self.total and self._last > 0):
            self._last = elapsed
            tot = f"/{self.total}" if self.total else ""
            eta = ""
            if self.total and rate > 0:
                eta = f", about {max(0.0, (self.total - done) / rate):.0f} s left"
            note(f"{self.label}: {done}{tot} done ({rate:.1f}/s{eta})")

    def __exit__(self, *exc) -> None:
        if self._bar is not None:
            self._bar.__exit__(*exc)


def listed(title: str, items) -> list[str]:
    """Text lines of a titled list ("Cautions:", "Notes:"): a blank line, the title and one
    "  - item" line each; nothing for no items."""
    items = [str(i) for i in items or ()]
    return ["", title] + [f"  - {i}" for i in items] if items else []


def table(rows: list[list[str]], header: list[str] | None = None, *, align: str | None = None,
          notes: bool = True) -> str:
    """A plain aligned text table. ``align`` has one letter per column, ``l`` (names) or
    ``r`` (numbers); default: the first column left, the others right. With ``notes``,
    columns whose term is not self-evident (``envpredict.labels.TERMS``, ``note=True``)
    get a one-line explanation under the table."""
    allrows = ([header] if header else []) + rows
    widths = [max(len(str(r[i])) for r in allrows) for i in range(len(allrows[0]))]
    align = align or "l" + "r" * (len(widths) - 1)
    lines = []
    for j, r in enumerate(allrows):
        lines.append("  ".join(str(c).ljust(w) if a == "l" else str(c).rjust(w)
                               for c, w, a in zip(r, widths, align)).rstrip())
        if header and j == 0:
            lines.append("  ".join("-" * w for w in widths))
    if notes and header:
        from envpredict.labels import column_notes

        lines += column_notes(list(header))
    return "\n".join(lines)


def bands(values) -> list[str]:
    """Nominal band labels for a terminal column headed "band, Hz" ("125", "1k", "1.6k")."""
    from envpredict.labels import band_label

    return [band_label(float(f), unit=False) for f in values]


def h(key: str) -> str:
    """The header of a quantity (``envpredict.labels.header``)."""
    from envpredict.labels import header

    return header(key)


def format_sti(d: dict) -> str:
    """The STI of a result dictionary with the decimals that keep it on its side of the
    requirement (the user's, else the common 0.50)."""
    from envpredict import standards as std
    from envpredict.sti import format_index

    req = d.get("requirement")
    return format_index(d["sti"], std.VOICE_ALARM_TARGET_STI if req is None else req)


def fmt(v: Any, spec: str = ".2f", none: str = "—") -> str:
    """Format a number, or a dash where it could not be computed."""
    if v is None:
        return none
    try:
        return format(float(v), spec)
    except (TypeError, ValueError):
        return str(v)


# --- the listener (issue 17) -------------------------------------------------------

AUDIOGRAM_HELP = ("Listener with hearing loss: hearing levels in dB HL at audiometric frequencies, "
                  "e.g. \"250:20,500:25,1000:30,2000:45,4000:60,8000:70\", or a CSV file with columns "
                  "frequency_hz,hearing_level_db. Raises each octave band's reception threshold by the loss "
                  "(audibility only). Bands not measured are interpolated on a log-frequency axis (across at "
                  "most two octaves) or take the nearest value within one octave (stated); otherwise refused.")
AGE_HELP = ("Listener of this age, years (18-80): the median hearing levels of ISO 7029:2017 for that age "
            "and --sex, instead of --audiogram (audibility only).")
SEX_HELP = "With --age: f or m (ISO 7029 gives separate medians). Default m."


def listener(audiogram: str | None, age: float | None, sex: str | None):
    """The listener of a command: ``--audiogram`` (text or CSV file), or ``--age`` with
    ``--sex`` (ISO 7029 median), or None."""
    from envpredict.hearing import listener_audiogram
    from envpredict.tables import load_audiogram

    if audiogram is not None and age is not None:
        return listener_audiogram("x", age, sex)  # refused: both given
    if audiogram is not None and not audiogram.strip():
        # (an empty manifest cell means normal hearing; an option given empty is a mistake)
        from envpredict.exceptions import InputError

        raise InputError("--audiogram is empty", 'give frequency:dB HL pairs, e.g. "250:20,500:25,1000:30,'
                         '2000:45,4000:60,8000:70", or a CSV file, or leave out --audiogram')
    return listener_audiogram(load_audiogram(audiogram), age, sex)


def listener_lines(d: dict) -> list[str]:
    """Text lines for the audiogram of a result dictionary (none without one)."""
    a = d.get("audiogram")
    if not a:
        return []
    from envpredict.labels import band_label

    pts = ", ".join(f"{band_label(f)} {round(v, 1):g}" for f, v in zip(a["measured_hz"], a["measured_hl_db"]))
    per_band = "  ".join(f"{band_label(f, unit=False)}:{v:.0f}" for f, v in zip(a["bands_hz"], a["band_hl_db"]))
    lines = [f"Listener: {a['source']} — {pts} dB HL",
             f"  hearing loss per octave band (band:dB HL): {per_band}"]
    if a.get("filled_bands_hz"):
        lines.append("  filled: " + "; ".join(a["notes"]))
    if a.get("inaudible_bands_hz") is not None:
        gone = a["inaudible_bands_hz"]
        lines.append("  bands made inaudible: " + (", ".join(band_label(f) for f in gone) if gone else "none"))
    return lines
