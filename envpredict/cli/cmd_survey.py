"""``envpredict survey``: score a site survey and judge each zone against the user's requirements."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from ._app import app
from ._common import (
    AGE_HELP, AUDIOGRAM_HELP, JSON_HELP, RECORD_FIELD_HELP, RECORD_HELP, REPORT_HELP, SEX_HELP, Progress, check_outputs,
    emit, fmt, h, listed, listener, note, table, write_report_if,
)
from .cmd_batch import OVERWRITE_HELP, PROGRESS_EVERY_S, RESUME_HELP, RETRY_HELP, WORKERS_HELP

SURVEY_HELP = ("Survey CSV: one row per measurement with columns 'zone', 'position', optional 'repeat', and "
               "either 'ir' (impulse response; optional 'noise' or 'noise_recording' with 'calibration_db', "
               "'speech_level' or 'speech_levels') or 'stipa' (STIPA recording; optional 'calibration_db'); "
               "paths relative to the survey file.")
ROWS_HELP = ("Per-measurement results CSV, written as each row finishes (safe to kill; finish with --resume).")
REQUIRE_HELP = ("A rule every zone must meet, e.g. 'mean>=0.50' or 'min>=0.45' (statistics of the position "
                "means: mean, min, max, mean-sd). Repeat for several. These are examples: local codes and "
                "standards set the real requirements.")
SUMMARY_HELP = "Also write the survey summary (the --json object) to this file, atomically."
POSITIONS_HELP = "Also write the per-position table (CSV) to this file."
ZONES_HELP = "Also write the per-zone table (CSV) to this file."


def render_survey(d: dict) -> str:
    from envpredict.sti import format_index

    reqs = d["requirements"]
    # a value printed beside a rule shows enough decimals not to contradict its verdict
    threshold = max((float(r.split()[-1]) for r in reqs), default=0.5)

    def v(x, req=threshold):
        return "—" if x is None else format_index(x, req)

    lines = [f"Survey: {d['survey']}   {d['rows']} measurement(s), {d['failed_rows']} could not be scored",
             f"Requirements: {'; '.join(reqs) if reqs else 'none given (no verdicts)'}", "", "Positions:"]
    rows = [[p["zone"], p["position"], str(p["repeats"]), v(p["sti_mean"]), fmt(p["sti_sd"], ".3f"),
             fmt(p["sti_spread"], ".3f"), p["rating"] or "—",
             ", ".join(str(r) for r in p["failed_rows"]) or ""] for p in d["positions"]]
    lines.append(table(rows, [h("zone"), h("position"), h("repeats"), h("sti_mean"), h("sd"), h("spread"), h("rating"),
                              h("failed_rows")],
                       align="llrrrrlr"))
    lines += ["", "Zones (statistics of the position means):"]
    rows = []
    for z in d["zones"]:
        rows.append([z["zone"], str(z["positions"]), v(z["sti_mean"]), fmt(z["sti_sd"], ".3f"), v(z["sti_min"]),
                     v(z["sti_max"]), (z["verdict"] or "—").upper(), z["decided_by"]])
    lines.append(table(rows, [h("zone"), h("positions"), h("mean"), h("sd"), h("min"), h("max"), h("verdict"),
                              h("decided_by")],
                       align="lrrrrrll"))
    for z in d["zones"]:
        for c in z["checks"]:
            state = "holds" if c["holds"] else "fails" if c["holds"] is False else f"not judged: {c['reason']}"
            value = "—" if c["value"] is None else format_index(c["value"], float(c["rule"].split()[-1]))
            lines.append(f"  {z['zone']}: {c['rule'].split()[0]} = {value}  ({c['rule']}: {state})")
        for b in z["below"]:
            if b["positions"]:
                lines.append(f"  {z['zone']}: below {b['rule'].split()[-1]}: {', '.join(b['positions'])}")
    if d["failures"]:
        lines += ["", "Measurements that could not be scored:"]
        lines.extend(f"  row {f['row']}: {f['error']}" for f in d["failures"])
    lines += listed("Cautions:", d["cautions"])
    return "\n".join(lines)


@app.command("survey")
def survey_command(
    survey: Path = typer.Argument(..., help=SURVEY_HELP, show_default=False),
    out: Path = typer.Option(..., "--out", help=ROWS_HELP, show_default=False),
    require: Optional[List[str]] = typer.Option(None, "--require", help=REQUIRE_HELP),
    workers: Optional[int] = typer.Option(None, "--workers", help=WORKERS_HELP, show_default=False),
    resume: bool = typer.Option(False, "--resume", help=RESUME_HELP),
    retry_failed: bool = typer.Option(False, "--retry-failed", help=RETRY_HELP),
    overwrite: bool = typer.Option(False, "--overwrite", help=OVERWRITE_HELP),
    summary: Optional[Path] = typer.Option(None, "--summary", help=SUMMARY_HELP),
    positions_csv: Optional[Path] = typer.Option(None, "--positions-csv", help=POSITIONS_HELP),
    zones_csv: Optional[Path] = typer.Option(None, "--zones-csv", help=ZONES_HELP),
    report: Optional[Path] = typer.Option(None, "--report", help=REPORT_HELP),
    record: Optional[Path] = typer.Option(None, "--record", help=RECORD_HELP),
    record_field: Optional[List[str]] = typer.Option(None, "--record-field", help=RECORD_FIELD_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    audiogram: Optional[str] = typer.Option(None, "--audiogram", help=AUDIOGRAM_HELP + " The listener of rows "
                                            "without an 'audiogram' cell."),
    age: Optional[float] = typer.Option(None, "--age", help=AGE_HELP, show_default=False),
    sex: Optional[str] = typer.Option(None, "--sex", help=SEX_HELP, metavar="[f|m]"),
) -> None:
    """Score every measurement of a site survey, then summarise per position and per zone.

    Scoring runs on the batch engine (all cores, resumable, safe to kill). Each zone is
    judged against the --require rules; the exit code is 1 when a measurement could
    not be scored (the others are summarised all the same).
    """
    from envpredict.report import read_about
    from envpredict.survey import check_survey_outputs, parse_requirement, run_survey

    about = read_about(record, record_field or ())
    listener_ = listener(audiogram, age, sex)
    for r in require or ():
        parse_requirement(r)  # refused before anything is scored (run_survey checks them again)

    outputs = {"--out": out, "--summary": summary, "--positions-csv": positions_csv, "--zones-csv": zones_csv}
    check_survey_outputs(survey, outputs)
    check_outputs(out=summary, report=report, inputs=[survey, out, positions_csv, zones_csv])
    state: dict = {}

    def progress(done: int, total: int) -> None:
        if "bar" not in state:
            state["bar"] = Progress("scoring survey", total, every_s=PROGRESS_EVERY_S, quiet=False).__enter__()
        state["bar"](done, total)

    try:
        result = run_survey(survey, out, requirements=require or (), workers=workers, resume=resume,
                            overwrite=overwrite, retry_failed=retry_failed, progress=progress,
                            positions_csv=positions_csv, zones_csv=zones_csv, audiogram=listener_)
    except KeyboardInterrupt:
        if out.exists():
            note(f"the finished rows are saved in {out}; finish with: envpredict survey {survey} --out {out} "
                 "--resume")
        raise
    finally:
        if "bar" in state:
            state["bar"].__exit__(None, None, None)
    d = result.to_dict()
    d["inputs"] = {"survey": str(survey), "out": str(out), "require": list(require or []), "workers": workers,
                   "resume": resume, "retry_failed": retry_failed, "overwrite": overwrite, "about": about}
    if listener_ is not None:
        d["inputs"].update({"audiogram": audiogram, "age": age, "sex": sex})
    write_report_if(report, "survey", d, as_json=as_json, title=f"Survey {survey.name}")
    emit(d, lambda: render_survey(d), as_json, summary)
    if result.failed_rows:
        note(f"error: {result.failed_rows} of {result.rows} measurements could not be scored — see the 'error' "
             f"column of {out}; fix their inputs and rerun with --resume --retry-failed")
        raise typer.Exit(1)
