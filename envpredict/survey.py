"""Site surveys: many measurement positions in zones, repeated, judged per zone.

A *survey file* is a batch manifest (:mod:`envpredict.batch`) whose rows are STI
measurements -- an impulse response (``ir``, with its noise and speech levels) or a
recording of the STIPA test signal (``stipa``, with its calibration) -- and that names
where each was taken:

* ``zone`` -- the area the requirement applies to (e.g. a hall, a platform);
* ``position`` -- the listening position within the zone;
* ``repeat`` -- optional: the number of the repeated measurement at that position
  (each row is its own repeat when the column is absent).

:func:`run_survey` scores every row with the batch engine (same resumable results
file, progress and worker guarantees), then :func:`summarise_survey` gives per
position the mean of its repeats and their spread, and per zone the number of
positions, the mean, standard deviation, minimum and maximum of the position means,
the positions below each required value and a verdict against the user's
requirements (:func:`parse_requirement`). A position counts once in its zone however
often it was measured.

The requirements are the user's: local codes and standards set which statistic must
reach which value (a mean, a minimum at every position, or the mean less one standard
deviation are all in use); the examples in the documentation are only examples.
Verdicts are taken on unrounded values (:func:`envpredict.sti.format_index` shows
enough decimals that the printed value never contradicts the verdict).

This module orchestrates: the scoring is :mod:`envpredict.batch`'s, the statistics
are plain means and standard deviations.
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass, field
from collections.abc import Iterable, Mapping
from typing import Any, Callable, Sequence

from .exceptions import InputError
from .results import jsonable

#: Survey columns naming where a measurement was taken.
ZONE_COLUMN = "zone"
POSITION_COLUMN = "position"
REPEAT_COLUMN = "repeat"

#: Statistics of a zone's position means a requirement may name: the mean, the lowest
#: and highest position, and the mean less one (sample) standard deviation.
STATISTICS: tuple[str, ...] = ("mean", "min", "max", "mean-sd")

#: Comparisons a requirement may use.
COMPARISONS: tuple[str, ...] = (">=", ">")

_RULE = re.compile(r"^\s*(?P<stat>mean\s*-\s*sd|mean|min|max)\s*(?P<op>>=|>)\s*(?P<value>[0-9]*\.?[0-9]+)\s*$")


@dataclass(frozen=True)
class Requirement:
    """One rule a zone must meet: ``statistic op value`` (e.g. ``mean>=0.50``).

    Attributes
    ----------
    statistic : one of :data:`STATISTICS`.
    op : ">=" or ">".
    value : the required STI, 0..1.
    text : the rule as written in normal form ("mean >= 0.50").
    """

    statistic: str
    op: str
    value: float
    text: str

    def holds(self, v: float) -> bool:
        """The rule on the unrounded value ``v``."""
        return v >= self.value if self.op == ">=" else v > self.value


def parse_requirement(text: str) -> Requirement:
    """A requirement from text such as ``"mean>=0.50"``, ``"min >= 0.45"`` or
    ``"mean-sd>=0.50"`` (see :data:`STATISTICS`).

    Raises
    ------
    InputError
        A rule that does not parse or a value outside 0..1.

    Examples
    --------
    >>> parse_requirement("min>=0.45").text
    'min >= 0.45'
    """
    m = _RULE.match(str(text))
    if m is None:
        raise InputError(f"requirement '{text}' does not parse",
                         "write STATISTIC>=VALUE with STATISTIC one of mean, min, max, mean-sd, e.g. mean>=0.50")
    value = float(m["value"])
    if not 0.0 < value <= 1.0:
        raise InputError(f"requirement '{text}' asks for an STI of {value:g}", "give a value between 0 and 1")
    stat = re.sub(r"\s+", "", m["stat"])
    return Requirement(statistic=stat, op=m["op"], value=value, text=f"{stat} {m['op']} {m['value']}")


@dataclass(frozen=True)
class PositionSummary:
    """The repeats at one position.

    Attributes
    ----------
    zone, position : where.
    rows : manifest row numbers of its measurements.
    values : STI of each scored repeat, in row order.
    failed : rows of this position that could not be scored.
    mean : mean STI of the scored repeats (None: none scored).
    sd : sample standard deviation of the repeats (None with fewer than two).
    spread : highest minus lowest repeat (None: none scored).
    rating : qualification band of the mean (IEC 60268-16 Table F.1).
    """

    zone: str
    position: str
    rows: tuple[int, ...]
    values: tuple[float, ...]
    failed: tuple[int, ...]
    mean: float | None
    sd: float | None
    spread: float | None
    rating: str | None

    def to_dict(self) -> dict:
        return jsonable({
            "zone": self.zone, "position": self.position, "rows": list(self.rows), "sti_values": list(self.values),
            "failed_rows": list(self.failed), "repeats": len(self.values), "sti_mean": self.mean,
            "sti_sd": self.sd, "sti_spread": self.spread, "rating": self.rating,
        })


@dataclass(frozen=True)
class RuleCheck:
    """One requirement applied to one zone: the statistic's value and the outcome
    (``None``: it could not be judged, see ``reason``)."""

    rule: str
    value: float | None
    holds: bool | None
    reason: str = ""

    def to_dict(self) -> dict:
        return jsonable({"rule": self.rule, "value": self.value, "holds": self.holds, "reason": self.reason})


@dataclass(frozen=True)
class ZoneSummary:
    """The positions of one zone and its verdict.

    Attributes
    ----------
    zone : its name.
    positions : number of positions with at least one scored repeat.
    unscored_positions : positions none of whose repeats could be scored.
    mean, sd, min, max : of the position means (sd: sample standard deviation, None
        with fewer than two positions).
    below : per required value, the positions whose mean is below it.
    checks : each requirement on this zone.
    verdict : "pass", "fail", "no verdict" (a position unscored, or a rule that cannot
        be judged) or None (no requirement given).
    decided_by : the rule that decided a "fail" (the first that fails), the rules that
        held for a "pass", or why there is no verdict.
    """

    zone: str
    positions: int
    unscored_positions: tuple[str, ...]
    mean: float | None
    sd: float | None
    min: float | None
    max: float | None
    below: tuple[tuple[str, tuple[str, ...]], ...]
    checks: tuple[RuleCheck, ...]
    verdict: str | None
    decided_by: str

    def to_dict(self) -> dict:
        return jsonable({
            "zone": self.zone, "positions": self.positions, "unscored_positions": list(self.unscored_positions),
            "sti_mean": self.mean, "sti_sd": self.sd, "sti_min": self.min, "sti_max": self.max,
            "below": [{"rule": r, "positions": list(p)} for r, p in self.below],
            "checks": [c.to_dict() for c in self.checks], "verdict": self.verdict, "decided_by": self.decided_by,
        })


@dataclass(frozen=True)
class SurveyResult:
    """A scored and summarised survey.

    Attributes
    ----------
    index : "sti".
    survey : the survey file; results : the per-row results file (batch format).
    requirements : the rules, in normal form.
    positions, zones : the summaries, in the order the survey first names them.
    rows, failed_rows : rows in the survey and rows that could not be scored (with
        their one-line reasons: ``failures``).
    cautions : what must accompany the numbers; notes : method details.
    """

    index: str
    survey: str
    results: str
    requirements: tuple[str, ...]
    positions: tuple[PositionSummary, ...]
    zones: tuple[ZoneSummary, ...]
    rows: int
    failed_rows: int
    failures: tuple[tuple[int, str], ...] = field(default=())
    cautions: tuple[str, ...] = field(default=())
    notes: tuple[str, ...] = field(default=())
    #: the listener of the rows without an ``audiogram`` cell (None: normal hearing)
    audiogram: Any = None

    def to_dict(self) -> dict:
        from .hearing import audiogram_summary

        listener = {} if self.audiogram is None else {"audiogram": audiogram_summary(self.audiogram)}
        return jsonable({
            **listener,
            "index": self.index, "survey": self.survey, "results": self.results,
            "requirements": list(self.requirements), "rows": self.rows, "failed_rows": self.failed_rows,
            "failures": [{"row": r, "error": e} for r, e in self.failures],
            "positions": [p.to_dict() for p in self.positions], "zones": [z.to_dict() for z in self.zones],
            "cautions": list(self.cautions), "notes": list(self.notes),
        })


def _sd(values: Sequence[float]) -> float | None:
    if len(values) < 2:
        return None
    m = sum(values) / len(values)
    return math.sqrt(sum((v - m) ** 2 for v in values) / (len(values) - 1))


def _statistic(stat: str, means: Sequence[float]) -> tuple[float | None, str]:
    if not means:
        return None, "no position of the zone was scored"
    if stat == "mean":
        return sum(means) / len(means), ""
    if stat == "min":
        return min(means), ""
    if stat == "max":
        return max(means), ""
    sd = _sd(means)
    if sd is None:
        return None, "mean-sd needs at least two positions"
    return sum(means) / len(means) - sd, ""


def summarise_survey(
    rows: Sequence[dict],
    requirements: Sequence[Requirement | str] = (),
) -> tuple[tuple[PositionSummary, ...], tuple[ZoneSummary, ...]]:
    """Per-position and per-zone summaries of scored survey rows.

    Parameters
    ----------
    rows : one dict per measurement with ``zone``, ``position``, ``row`` (number), ``sti``
        (a number, or empty/None when the row could not be scored).
    requirements : rules (:class:`Requirement` or text for :func:`parse_requirement`).

    Returns
    -------
    (positions, zones), each in the order the rows first name them.

    Raises
    ------
    InputError
        ``rows`` is not a sequence of such dicts (a key missing, a row number that is not
        a whole number, an STI that is not a number within 0..1), or a requirement does
        not parse.
    """
    from .sti import qualification_band

    reqs = _requirements(requirements)
    if isinstance(rows, (str, bytes, Mapping)) or not isinstance(rows, Iterable):
        raise InputError(f"survey rows are not a list of rows ({type(rows).__name__})",
                         "give one dict per measurement with zone, position, row and sti")
    by_pos: dict[tuple[str, str], list[tuple[int, float | None]]] = {}
    for r in rows:
        row, zone, pos, value = _summary_row(r)
        by_pos.setdefault((zone, pos), []).append((row, value))
    positions = []
    for (zone, pos), items in by_pos.items():
        vals = [v for _, v in items if v is not None]
        mean = sum(vals) / len(vals) if vals else None
        positions.append(PositionSummary(
            zone=zone, position=pos, rows=tuple(i for i, _ in items), values=tuple(vals),
            failed=tuple(i for i, v in items if v is None), mean=mean, sd=_sd(vals),
            spread=(max(vals) - min(vals)) if vals else None,
            rating=None if mean is None else qualification_band(mean),
        ))
    zones = []
    for zone in dict.fromkeys(p.zone for p in positions):
        ps = [p for p in positions if p.zone == zone]
        means = [p.mean for p in ps if p.mean is not None]
        unscored = tuple(p.position for p in ps if p.mean is None)
        below = tuple(
            (q.text, tuple(p.position for p in ps if p.mean is not None and not q.holds(p.mean)))
            for q in dict.fromkeys(reqs)
        )
        checks = []
        for q in reqs:
            value, why = _statistic(q.statistic, means)
            checks.append(RuleCheck(rule=q.text, value=value, holds=None if value is None else q.holds(value),
                                    reason=why))
        verdict, decided = _verdict(checks, unscored)
        zones.append(ZoneSummary(
            zone=zone, positions=len(means), unscored_positions=unscored,
            mean=sum(means) / len(means) if means else None, sd=_sd(means),
            min=min(means) if means else None, max=max(means) if means else None,
            below=below, checks=tuple(checks), verdict=verdict, decided_by=decided,
        ))
    return tuple(positions), tuple(zones)


def _requirements(requirements) -> list[Requirement]:
    """The rules as :class:`Requirement`: one text is one rule."""
    if isinstance(requirements, (str, Requirement)):
        requirements = (requirements,)
    if not isinstance(requirements, Iterable):
        raise InputError(f"requirements are not a list of rules ({type(requirements).__name__})",
                         "give rules such as ['mean>=0.50', 'min>=0.45']")
    return [r if isinstance(r, Requirement) else parse_requirement(r) for r in requirements]


def _summary_row(r) -> tuple[int, str, str, float | None]:
    """Row number, zone, position and STI (None: not scored) of one survey row."""
    from . import checks

    fix = "give one dict per measurement with zone, position, row and sti (a number within 0..1, or empty)"
    if not isinstance(r, Mapping):
        raise InputError(f"a survey row is not a dict ({type(r).__name__})", fix)
    missing = [k for k in ("zone", "position", "row") if k not in r]
    if missing:
        raise InputError(f"a survey row has no {', '.join(missing)}", fix)
    row = r["row"]
    if isinstance(row, str):  # as read from a table
        try:
            row = int(row)
        except ValueError:
            raise InputError(f"survey row number '{row[:40]}' is not a whole number", fix) from None
    row = checks.number(row, "survey row number", integer=True, fix=fix)
    v = r.get("sti")
    if v is None or (isinstance(v, str) and not v.strip()):
        return row, str(r["zone"]), str(r["position"]), None
    if isinstance(v, str):
        try:
            v = float(v)
        except ValueError:
            raise InputError(f"survey row {row}: the STI '{v[:40]}' is not a number", fix) from None
    value = checks.number(v, f"survey row {row}: the STI", lo=0.0, hi=1.0, fix=fix)
    return row, str(r["zone"]), str(r["position"]), value


def _verdict(checks: list[RuleCheck], unscored: tuple[str, ...]) -> tuple[str | None, str]:
    if not checks:
        return None, "no requirement given"
    failed = [c for c in checks if c.holds is False]
    if failed:  # a rule that fails decides, whatever the unscored positions would add
        return "fail", failed[0].rule
    if unscored:
        return "no verdict", f"not every position was scored ({', '.join(unscored)})"
    open_ = [c for c in checks if c.holds is None]
    if open_:
        return "no verdict", f"{open_[0].rule}: {open_[0].reason}"
    return "pass", "; ".join(c.rule for c in checks)


def check_survey_columns(columns: Sequence[str], where: str) -> None:
    """Refuse a survey file without ``zone`` and ``position``, or with pair columns.

    Raises
    ------
    InputError
        Such a file, or ``columns`` that is not a sequence of column names.
    """
    from .tables import CLEAN_COLUMN, DEGRADED_COLUMN, IR_COLUMN, STIPA_COLUMN

    if isinstance(columns, str) or not isinstance(columns, Sequence) or not all(isinstance(c, str) for c in columns):
        raise InputError(f"the columns of {where} are not a list of names", "give the header of the survey file")

    missing = [c for c in (ZONE_COLUMN, POSITION_COLUMN) if c not in columns]
    if missing:
        raise InputError(f"{where} has no {' or '.join(repr(c) for c in missing)} column",
                         "name the zone and the position of every measurement (columns zone, position)")
    if CLEAN_COLUMN in columns or DEGRADED_COLUMN in columns:
        raise InputError(f"{where} has clean/degraded columns",
                         "a survey holds STI measurements: impulse responses (ir) or STIPA recordings (stipa)")
    if IR_COLUMN not in columns and STIPA_COLUMN not in columns:
        raise InputError(f"{where} has neither an 'ir' nor a 'stipa' column",
                         "name the measurement files in a column ir (impulse responses) or stipa (recordings)")


def _check_rows(manifest) -> list[dict]:
    """Zone, position and repeat of every manifest row; refuses empty cells and a
    position measured twice under the same repeat number."""
    col = {c: i for i, c in enumerate(manifest.columns)}
    seen: dict[tuple[str, str, str], int] = {}
    out = []
    for k, cells in enumerate(manifest.cells, start=1):
        zone, pos = cells[col[ZONE_COLUMN]].strip(), cells[col[POSITION_COLUMN]].strip()
        rep = cells[col[REPEAT_COLUMN]].strip() if REPEAT_COLUMN in col else str(k)
        for name, v in ((ZONE_COLUMN, zone), (POSITION_COLUMN, pos)):
            if not v:
                raise InputError(f"survey '{manifest.path}', row {k}: the {name} is empty",
                                 f"name the {name} of every measurement")
        key = (zone, pos, rep)
        if key in seen:
            raise InputError(
                f"survey '{manifest.path}', rows {seen[key]} and {k}: zone '{zone}', position '{pos}' has "
                f"repeat '{rep}' twice",
                "number the repeats of a position 1, 2, ... (or leave the repeat column out)",
            )
        seen[key] = k
        out.append({"row": k, "zone": zone, "position": pos, "repeat": rep})
    return out


def check_survey_outputs(survey: str | os.PathLike, outputs: dict[str, str | os.PathLike | None],
                         inputs: Sequence[str | os.PathLike] = ()) -> None:
    """Refuse, before any scoring, an output (named by its option) that is the survey
    file or one of ``inputs``, that another output also names, or that cannot be written.

    Raises
    ------
    InputError
        Such an output, or ``outputs`` that is not a dict of option to path.
    """
    from .outputs import check_output_file, same_path

    if not isinstance(outputs, Mapping):
        raise InputError(f"the outputs are not a dict of option to path ({type(outputs).__name__})",
                         "give them as {'--out': path, ...}")
    if isinstance(inputs, (str, bytes, os.PathLike)) or not isinstance(inputs, Iterable):
        raise InputError(f"the inputs are not a list of paths ({type(inputs).__name__})", "give a list of paths")
    inputs = list(inputs)
    named = [(opt, p) for opt, p in outputs.items() if p is not None]
    for i, (opt, p) in enumerate(named):
        for opt2, p2 in named[i + 1:]:
            if same_path(p, p2):
                raise InputError(f"{opt} and {opt2} name the same file '{p}'", "give each output its own file")
        check_output_file(p, inputs=[survey, *inputs], option=opt)


def run_survey(
    survey: str | os.PathLike,
    out: str | os.PathLike,
    *,
    requirements: Sequence[str | Requirement] = (),
    workers: int | None = None,
    resume: bool = False,
    overwrite: bool = False,
    retry_failed: bool = False,
    progress: Callable[[int, int], None] | None = None,
    positions_csv: str | os.PathLike | None = None,
    zones_csv: str | os.PathLike | None = None,
    audiogram=None,
) -> SurveyResult:
    """Score every measurement of a survey file and summarise it per position and zone.

    Parameters
    ----------
    survey : the survey CSV (a batch manifest with ``zone``, ``position`` and optionally
        ``repeat`` columns; see the module docstring).
    out : the per-row results CSV (batch format: resumable, safe to kill).
    requirements : rules for every zone, e.g. ``["mean>=0.50", "min>=0.45"]``
        (examples only: local codes and standards set the real ones).
    workers, resume, overwrite, retry_failed, progress : as for
        :func:`envpredict.batch.run_batch`.
    positions_csv, zones_csv : also write the per-position and per-zone tables there
        (:func:`write_survey_tables`).
    audiogram : the listener of rows without an ``audiogram`` cell: an
        :class:`~envpredict.hearing.Audiogram`, its text form or a CSV file (see
        :func:`envpredict.batch.read_manifest`); ``None``: normal hearing.

    Returns
    -------
    SurveyResult (``failed_rows > 0`` when any measurement could not be scored; the
    others are summarised all the same).

    Raises
    ------
    InputError
        A malformed survey file or requirement (before anything is scored).
    """
    from . import cautions as cau
    from .batch import read_manifest, run_batch
    from .tables import read_results

    from .tables import load_audiogram

    reqs = tuple(_requirements(requirements))
    audiogram = load_audiogram(audiogram)
    m = read_manifest(survey, audiogram=audiogram)
    check_survey_columns(m.columns, f"survey '{m.path}'")
    files = [j[k] for j in m.jobs for k in ("ir", "stipa", "noise_recording") if j.get(k)]
    check_survey_outputs(survey, {"--out": out, "--positions-csv": positions_csv, "--zones-csv": zones_csv}, files)
    where = _check_rows(m)
    summary = run_batch(m, out, workers=workers, resume=resume, overwrite=overwrite, retry_failed=retry_failed,
                        progress=progress)
    _, results = read_results(out)
    by_row = {int(r["row"]): r for r in results}
    rows = []
    for w in where:
        r = by_row.get(w["row"], {})
        rows.append({**w, "sti": r.get("sti", "") if not r.get("error") else ""})
    positions, zones = summarise_survey(rows, reqs)
    failures = tuple((int(r["row"]), r["error"]) for r in results if r.get("error"))
    cautions = [cau.LIFE_SAFETY]
    cautions.extend(c for c in summary.cautions if c != cau.LIFE_SAFETY)
    if reqs:
        cautions.append("The requirements were given by the user; local codes and standards set which statistic "
                        "must reach which value, and how many positions a zone needs.")
    if failures:
        cautions.append(f"{len(failures)} measurement(s) could not be scored; see the failures. A zone with an "
                        "unscored position gets no pass verdict.")
    notes = ("Each position counts once in its zone: zone statistics are taken over the position means "
             "(the mean of each position's repeats); sd is the sample standard deviation.",
             "Verdicts are taken on unrounded values.")
    result = SurveyResult(
        index="sti", survey=str(m.path), results=str(out), requirements=tuple(q.text for q in reqs),
        positions=positions, zones=zones, rows=len(where), failed_rows=len(failures), failures=failures,
        cautions=tuple(cautions), notes=notes, audiogram=audiogram,
    )
    write_survey_tables(result, positions_csv, zones_csv)
    return result


#: Columns of the per-position table (the keys of :meth:`PositionSummary.to_dict`).
POSITION_COLUMNS: tuple[str, ...] = ("zone", "position", "repeats", "sti_mean", "sti_sd", "sti_spread", "rating",
                                     "sti_values", "rows", "failed_rows")
#: Columns of the per-zone table (the keys of :meth:`ZoneSummary.to_dict`, the lists
#: joined with "; ").
ZONE_COLUMNS: tuple[str, ...] = ("zone", "positions", "sti_mean", "sti_sd", "sti_min", "sti_max", "verdict",
                                 "decided_by", "checks", "below", "unscored_positions")


#: The results-CSV precision each survey column takes (the vocabulary's CSV decimals): STI
#: values as the STI (6 decimals, cut, so a value below a requirement stays below it), their
#: spread as a standard deviation.
_PRECISION_OF: dict[str, str] = {"sti_mean": "sti", "sti_min": "sti", "sti_max": "sti", "sti_values": "sti",
                                 "sti_sd": "sd", "sti_spread": "spread"}


def _cells(d: dict, columns: Sequence[str]) -> dict[str, str]:
    from .tables import format_cell

    out = {}
    for c in columns:
        v = d[c]
        like = _PRECISION_OF.get(c)
        if c == "checks":
            v = "; ".join(f"{k['rule']}: {format_cell(k['value'], 'sti') or '—'} "
                          f"({'holds' if k['holds'] else 'fails' if k['holds'] is False else 'not judged'})"
                          for k in v)
        elif c == "below":
            v = "; ".join(f"below {b['rule'].split()[-1]} ({b['rule']}): {', '.join(b['positions']) or 'none'}"
                          for b in v)
        elif isinstance(v, list):
            v = "; ".join(format_cell(x, like) for x in v)
        out[c] = v if isinstance(v, str) else format_cell(v, like)
    return out


def write_survey_tables(result: SurveyResult, positions_csv: str | os.PathLike | None = None,
                        zones_csv: str | os.PathLike | None = None) -> None:
    """Write the per-position and per-zone tables as CSV (atomically), where a path is given.

    Raises
    ------
    InputError
        ``result`` is not a :class:`SurveyResult`, or a table cannot be written there.
    """
    from .tables import write_table

    if not isinstance(result, SurveyResult):
        raise InputError(f"the survey result is not a SurveyResult ({type(result).__name__})",
                         "give the result of run_survey")

    d = result.to_dict()
    if positions_csv is not None:
        write_table(positions_csv, POSITION_COLUMNS, [_cells(p, POSITION_COLUMNS) for p in d["positions"]])
    if zones_csv is not None:
        write_table(zones_csv, ZONE_COLUMNS, [_cells(z, ZONE_COLUMNS) for z in d["zones"]])
