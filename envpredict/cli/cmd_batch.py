"""``envpredict batch`` (score a manifest) and ``envpredict compare`` (compare conditions)."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from envpredict import standards as std

from ._app import app
from ._common import (
    AGE_HELP, AUDIOGRAM_HELP, JSON_HELP, OUT_HELP, REPORT_HELP, SEX_HELP, Progress, check_outputs, emit, fmt, h,
    listed, listener, note, table, write_report_if,
)

MANIFEST_HELP = ("Manifest CSV: columns 'clean' and 'degraded' (pair rows) or 'ir' (impulse-response rows), "
                 "paths relative to the manifest; optional 'channel', and for IR rows 'noise', 'speech_level', "
                 "'sti_talker'; any other columns are carried through to the results.")
RESULTS_OUT_HELP = ("Results CSV: one line per manifest row, written as each row finishes (safe to kill; "
                    "finish with --resume).")
WORKERS_HELP = "Local worker processes (default: the number of cores; 1 = no pool)."
SCHEDULER_HELP = ("Score on an existing dask.distributed cluster at this address, e.g. tcp://10.0.0.5:8786 "
                  "(needs pip install 'envpredict[cluster]'; workers must see the files at the same paths).")
RESUME_HELP = "Keep the rows already in --out and score only the missing ones."
RETRY_HELP = "With --resume: score again the rows that failed before."
OVERWRITE_HELP = "Start --out again even if it exists (its rows are discarded)."
NOISE_HELP = ("Default background noise for IR rows with an empty 'noise' cell: seven octave-band levels, "
              "dB SPL, 125 Hz to 8 kHz, comma-separated. Default: no noise.")
LEVEL_HELP = f"Default A-weighted speech level for IR rows, dB(A) (default {std.DEFAULT_SPEECH_LEVEL_DBA:g})."
TALKER_HELP = "Default speech spectrum for IR rows: male or female (IEC 60268-16)."
NO_ALIGN_HELP = "Pair rows: no delay search, compare sample by sample (a 'delay_ms' cell still applies)."
MAX_DELAY_HELP = "Pair rows: largest delay searched, seconds."
CONDITION_HELP = ("Pair rows: the column naming the processing condition; its items get one delay, pooled over "
                  "all of them (default: the column 'condition' if there is one).")
PER_ROW_HELP = "Pair rows: each row its own delay estimate (as 'envpredict pair') instead of one per condition."
DELAY_MS_HELP = "Pair rows: one fixed delay of the degraded files, ms (a 'delay_ms' cell overrides it per row)."


#: Seconds between plain progress lines when stderr is not a terminal (a long batch
#: writes a log; one line every 30 s keeps it short).
PROGRESS_EVERY_S = 30.0


def render_summary(d: dict) -> str:
    lines = []
    extra = f"; {d['skipped']} were already done" if d["skipped"] else ""
    rate = f", {d['rows_per_s']:.2f} rows/s" if d.get("rows_per_s") else ""
    workers = f", {d['workers']} worker(s)" if d["backend"] != "in-process" else ""
    lines.append(f"Scored {d['scored']} of {d['total']} rows in {d['seconds']:.1f} s "
                 f"({d['backend']}{workers}{rate}){extra}.")
    lines.append(f"OK: {d['ok']}   failed: {d['failed']}")
    if d["failures"]:
        lines.append("")
        lines.append("Failed rows (the 'error' column of the results has all of them):")
        lines.extend(f"  row {f['row']}: {f['error']}" for f in d["failures"])
    if d.get("notes"):
        lines.append("")
        lines.append("Alignment:")
        lines.extend(f"  - {n}" for n in d["notes"])
    lines.append("")
    lines.append(f"Results: {d['inputs']['out']}")
    lines += listed("Cautions:", d.get("cautions"))
    return "\n".join(lines)


EARS_HELP = ("Two ears: every file is a two-channel recording, channel 0 the left ear and channel 1 the right "
             "(a pair's clean file may be mono). The index columns hold the better ear's value (the larger "
             "MTI per octave band; STOI and ESTOI: the larger of the ears'), and each ear's is added "
             "(sti_left, sti_right, stoi_left, ...). IR rows then have no decay columns.")


@app.command("batch")
def batch_command(
    manifest: Path = typer.Argument(..., help=MANIFEST_HELP, show_default=False),
    out: Path = typer.Option(..., "--out", help=RESULTS_OUT_HELP, show_default=False),
    workers: Optional[int] = typer.Option(None, "--workers", help=WORKERS_HELP, show_default=False),
    scheduler: Optional[str] = typer.Option(None, "--scheduler", help=SCHEDULER_HELP),
    resume: bool = typer.Option(False, "--resume", help=RESUME_HELP),
    retry_failed: bool = typer.Option(False, "--retry-failed", help=RETRY_HELP),
    overwrite: bool = typer.Option(False, "--overwrite", help=OVERWRITE_HELP),
    noise: Optional[str] = typer.Option(None, "--noise", help=NOISE_HELP),
    speech_level: float = typer.Option(std.DEFAULT_SPEECH_LEVEL_DBA, "--speech-level", help=LEVEL_HELP),
    talker: str = typer.Option(std.DEFAULT_TALKER, "--talker", help=TALKER_HELP, metavar="[male|female]"),
    no_align: bool = typer.Option(False, "--no-align", help=NO_ALIGN_HELP),
    max_delay: float = typer.Option(std.PAIR_MAX_DELAY_S, "--max-delay", help=MAX_DELAY_HELP),
    condition_column: Optional[str] = typer.Option(None, "--condition-column", help=CONDITION_HELP),
    delay_per_row: bool = typer.Option(False, "--delay-per-row", help=PER_ROW_HELP),
    delay_ms: Optional[float] = typer.Option(None, "--delay-ms", help=DELAY_MS_HELP),
    ears: bool = typer.Option(False, "--ears", help=EARS_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    audiogram: Optional[str] = typer.Option(None, "--audiogram", help=AUDIOGRAM_HELP + " The listener of rows "
                                            "without an 'audiogram' cell (pair rows need 'calibration_db')."),
    age: Optional[float] = typer.Option(None, "--age", help=AGE_HELP, show_default=False),
    sex: Optional[str] = typer.Option(None, "--sex", help=SEX_HELP, metavar="[f|m]"),
) -> None:
    """Score every row of a manifest (STOI/ESTOI/speech-based STI for pairs, STI and T30/EDT for IRs).

    Uses all cores (or a dask cluster), writes each row as it finishes, survives
    interruption (--resume finishes the rest), and exits non-zero if any row failed.
    While running, the results file holds the finished rows in completion order; when
    the batch completes it is rewritten (atomically) in manifest order. Progress goes
    to stderr; with --json the summary is one JSON object on stdout.
    """
    from envpredict.batch import Alignment, read_manifest, run_batch

    listener_ = listener(audiogram, age, sex)
    m = read_manifest(manifest, noise_db=noise, speech_level_dba=speech_level, talker=talker, audiogram=listener_,
                      ears=ears)
    alignment = Alignment(align=not no_align, max_delay_s=max_delay, condition_column=condition_column,
                          per_row=delay_per_row, fixed_delay_ms=delay_ms).check(m)
    if scheduler is not None and workers is not None:
        note("note: --workers is ignored with --scheduler (the cluster's workers score the rows)")

    state: dict = {}

    def progress(done: int, total: int) -> None:
        # rows of this run only, so that the rate and the time left are right on --resume
        if "bar" not in state:
            skipped = len(m) - total
            label = "scoring" + (f" ({skipped} of {len(m)} rows already done)" if skipped else "")
            state["bar"] = Progress(label, total, every_s=PROGRESS_EVERY_S).__enter__()
        state["bar"](done, total)

    try:
        summary = run_batch(m, out, workers=workers, scheduler=scheduler, resume=resume, overwrite=overwrite,
                            retry_failed=retry_failed, progress=progress, alignment=alignment)
    except KeyboardInterrupt:
        if out.exists():
            note(f"the finished rows are saved in {out}; finish with: envpredict batch {manifest} --out {out} "
                 "--resume")
        raise
    finally:
        if "bar" in state:
            state["bar"].__exit__(None, None, None)
    d = summary.to_dict()
    d["inputs"] = {"manifest": str(manifest), "out": str(out), "workers": workers, "scheduler": scheduler,
                   "resume": resume, "retry_failed": retry_failed, "overwrite": overwrite, "noise": noise,
                   "speech_level_dba": speech_level, "talker": talker, "align": not no_align,
                   "max_delay_s": max_delay, "condition_column": condition_column, "delay_per_row": delay_per_row,
                   "delay_ms": delay_ms}
    if ears:
        d["inputs"]["ears"] = True
    if listener_ is not None:
        d["inputs"].update({"audiogram": audiogram, "age": age, "sex": sex})
    emit(d, lambda: render_summary(d), as_json, None)
    if summary.failed:
        note(f"error: {summary.failed} of {summary.total} rows failed — see the 'error' column of {out}; "
             "fix their inputs and rerun with --resume --retry-failed")
        raise typer.Exit(1)


def _signed(v, spec: str = "+.3f") -> str:
    return fmt(v, spec)


def _p(v) -> str:
    from envpredict.labels import show

    return show("p_value", v)


def _effect(c: dict) -> str:
    if c.get("effect_size") is None:
        return "—"
    return f"{c['effect_size']:+.2f} [{c['effect_ci_low']:+.2f}, {c['effect_ci_high']:+.2f}]"


def render_pairwise(d: dict) -> str:
    """Readable text for an all-pairs comparison dictionary."""
    from envpredict.labels import name

    lines = [f"Index: {name(d['index'])}   all pairs of conditions in column '{d['by']}'   diff = b - a", ""]
    rows = []
    for c in d["pairs"]:
        ci = "—" if c["ci_low"] is None else f"[{c['ci_low']:+.3f}, {c['ci_high']:+.3f}]"
        rows.append([c["a"], c["b"], str(c["n"]), _signed(c["diff"]), ci, _p(c["p_value"]), _p(c["p_holm"]),
                     c["verdict"], _effect(c)])
    lines.append(table(rows, [h("pair_a"), h("pair_b"), h("n"), h("diff"), f"CI ({100 * d['confidence']:g} %)",
                              h("p_value"), h("p_holm"), h("verdict"), "d_z (with its CI)"]))
    lines += listed("Notes:", d["notes"])
    return "\n".join(lines)


def render_comparisons(d: dict) -> str:
    """Readable text for several indices and/or all pairs."""
    parts = [render_comparison(c) for c in d["comparisons"]] + [render_pairwise(p) for p in d["pairwise"]]
    return "\n\n".join(parts)


def render_comparison(d: dict) -> str:
    from envpredict.labels import name

    lines = [
        f"Index: {name(d['index'])}   conditions: column '{d['by']}'   baseline: {d['baseline']}",
        f"Items matched on: {', '.join(d['pair_on'])}",
        f"Difference = condition - baseline, mean over matched items; {d['ci_method']} bootstrap "
        f"{100 * d['confidence']:g} % interval ({d['n_resamples']} resamples, seed {d['seed']}); "
        "two-sided Wilcoxon signed-rank p.",
        "",
    ]
    rows = []
    for c in d["conditions"]:
        base = c["verdict"] == "baseline"
        ci = "—" if c["ci_low"] is None else f"[{c['ci_low']:+.3f}, {c['ci_high']:+.3f}]"
        rows.append([c["name"], str(c["n"]), fmt(c["mean"], ".3f"), "—" if base else _signed(c["diff"]), ci,
                     _p(c["p_value"]), _p(c["p_holm"]), c["verdict"], _effect(c)])
    lines.append(table(rows, [h("condition"), h("n"), h("mean"), h("diff"), f"CI ({100 * d['confidence']:g} %)",
                              h("p_value"), h("p_holm"), h("verdict"), "d_z (with its CI)"]))
    lines += listed("Notes:", d["notes"])
    return "\n".join(lines)


@app.command("compare")
def compare_command(
    results: Path = typer.Argument(..., help="Results CSV written by 'envpredict batch'.", show_default=False),
    by: str = typer.Option(..., "--by", help="Column naming the condition, e.g. condition.", show_default=False),
    baseline: str = typer.Option(..., "--baseline", help="The condition the others are compared with.",
                                 show_default=False),
    index: Optional[str] = typer.Option(None, "--index",
                                        help="Numeric column(s) to compare, comma-separated, e.g. stoi,estoi,ssti "
                                             "(default: sti or stoi)."),
    all_pairs: bool = typer.Option(False, "--all-pairs", help="Also compare every pair of conditions "
                                   "(Holm-adjusted over all pairs)."),
    pair_on: Optional[str] = typer.Option(
        None, "--pair-on",
        help=("Column(s) identifying an item across conditions, comma-separated (default: every column "
              "except --by, the result columns and 'degraded'/'ir')."),
    ),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Optional[Path] = typer.Option(None, "--out", help=OUT_HELP),
    report: Optional[Path] = typer.Option(None, "--report", help=REPORT_HELP),
) -> None:
    """Per condition: mean index, paired difference to the baseline, bootstrap 95 % CI, Wilcoxon p, effect size."""
    from envpredict.exceptions import InputError
    from envpredict.stats import compare_all_pairs_file, compare_conditions_file

    indices = [None] if index is None else [i.strip() for i in index.split(",") if i.strip()]
    if not indices:
        raise InputError("--index is empty", "name a numeric column, e.g. stoi, or several: stoi,estoi")
    if report is not None and (len(indices) > 1 or all_pairs):
        raise InputError("--report draws one index against its baseline",
                         "give one --index without --all-pairs for a report")
    check_outputs(out=out, report=report, inputs=[results])
    inputs = {"results": str(results), "by": by, "baseline": baseline, "index": index, "pair_on": pair_on,
              "all_pairs": all_pairs}
    comps = [compare_conditions_file(results, by=by, baseline=baseline, index=i, pair_on=pair_on).to_dict()
             for i in indices]
    from envpredict.labels import name as label_name

    if len(indices) == 1 and not all_pairs:
        d = comps[0]
        d["inputs"] = inputs
        write_report_if(report, "compare", d, as_json=as_json,
                        title=f"{label_name(str(d.get('index', index)))} by {by}, against {baseline}")
        emit(d, lambda: render_comparison(d), as_json, out)
        return
    pairwise = ([compare_all_pairs_file(results, by=by, index=c["index"], pair_on=pair_on).to_dict() for c in comps]
                if all_pairs else [])
    d = {"index": [c["index"] for c in comps], "comparisons": comps, "pairwise": pairwise, "cautions": [],
         "notes": [], "inputs": inputs}
    emit(d, lambda: render_comparisons(d), as_json, out)
