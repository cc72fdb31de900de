"""``envpredict fitmap | sweep | predict``: predicted listening-test scores."""

from __future__ import annotations

import json
from pathlib import Path

import typer

from ._app import app
from ._common import (
    CHANNEL_HELP, JSON_HELP, REPORT_HELP, Progress, check_report, emit, fmt, note, table, write_report_if,
)



# ---------------------------------------------------------------------------
# file helpers (the numeric module never reads files)
# ---------------------------------------------------------------------------

def read_csv_rows(path: Path, what: str) -> tuple[list[str], list[tuple[int, dict[str, str]]]]:
    """Read a comma-separated file: header and ``(line, {column: text})`` rows.

    Refuses, naming the file and row: a missing or unreadable file, no header, empty or
    repeated column names, and rows with more or fewer cells than the header.
    """
    import csv

    from envpredict.exceptions import InputError

    p = Path(path)
    if not p.exists():
        raise InputError(f"{what} '{p}' does not exist", "check the path")
    if p.is_dir():
        raise InputError(f"{what} '{p}' is a folder", "give the path of a CSV file")
    try:
        text = p.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(f"{what} '{p}' is not UTF-8 text", "save the table as CSV (UTF-8)") from None
    except OSError as e:
        raise InputError(f"{what} '{p}' cannot be read ({e.strerror})", "check the file permissions") from None
    import io

    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        header = next(reader, None)
        while header is not None and not any(c.strip() for c in header):
            header = next(reader, None)
        if header is None:
            raise InputError(f"{what} '{p}' is empty", "give a CSV file with a header row and data rows")
        header = [h.strip() for h in header]
        for i, h in enumerate(header):
            if not h:
                raise InputError(f"{what} '{p}', row {reader.line_num}: column {i + 1} of the header has no name",
                                 "name every column")
        dup = sorted({h for h in header if header.count(h) > 1})
        if dup:
            raise InputError(f"{what} '{p}': column '{dup[0]}' appears more than once in the header",
                             "give every column a distinct name")
        if len(header) == 1 and ";" in header[0]:
            raise InputError(f"{what} '{p}' seems to use ';' as separator",
                             "save it with commas between the columns")
        rows: list[tuple[int, dict[str, str]]] = []
        for cells in reader:
            line = reader.line_num
            if not any(c.strip() for c in cells):
                continue
            if len(cells) != len(header):
                raise InputError(
                    f"{what} '{p}', row {line}: {len(cells)} cell(s) but the header has {len(header)} columns",
                    "give every row one cell per column (quote cells that contain commas)")
            rows.append((line, dict(zip(header, cells))))
    except csv.Error as e:
        raise InputError(f"{what} '{p}', row {reader.line_num}: malformed CSV ({e})",
                         "repair the quoting in that row") from None
    return header, rows


def load_mapping_file(path: Path):
    """Read a MAP.json written by ``fitmap``."""
    from envpredict.exceptions import InputError
    from envpredict.predict import mapping_from_dict

    p = Path(path)
    if not p.exists():
        raise InputError(f"mapping '{p}' does not exist", "check the path, or write one with 'envpredict fitmap'")
    if p.is_dir():
        raise InputError(f"mapping '{p}' is a folder", "give the path of a MAP.json file")
    try:
        d = json.loads(p.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as e:
        raise InputError(f"mapping '{p}' is not valid JSON ({getattr(e, 'msg', e)})",
                         "give a MAP.json written by 'envpredict fitmap'") from None
    return mapping_from_dict(d, source=f"'{p}'")


def _csv_text(header: list[str], rows: list[dict[str, str]]) -> str:
    import csv
    import io

    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=header, lineterminator="\n")
    w.writeheader()
    w.writerows(rows)
    return buf.getvalue()


# ---------------------------------------------------------------------------
# fitmap
# ---------------------------------------------------------------------------

def render_fit(d: dict, rows: list[list[str]]) -> str:
    lines = [
        (f"Mapping from {d['index']} to proportion correct: {d['shape']} "
        f"(guess {d['guess']:g}, lapse {d['lapse']:g})"),
        f"  {d['formula']}",
        f"  fitted by binomial maximum likelihood to {d['n_points']} rows, {d['n_trials']} trials",
        "",
    ]
    lvl = f"{100 * d['ci_level']:g} % interval"
    prow = []
    labels = {"a": "a (intercept)", "b": "b (slope of eta)", "x50": f"x50 ({d['index']} at F = 1/2)",
              "slope_at_x50": "slope at x50 (per index unit)"}
    for k, v in d["params"].items():
        ci = d["ci"].get(k)
        prow.append([labels.get(k, k), fmt(v, ".4g"), "—" if ci is None else f"{ci[0]:.4g} .. {ci[1]:.4g}"])
    prof = (d.get("ci_profile") or {}).get("x50")
    if prof is not None:
        ends = [("open" if v is None else f"{v:.4g}") for v in prof]
        prow.append(["x50, profile likelihood", "", f"{ends[0]} .. {ends[1]}"])
    lines.append(table(prow, ["parameter", "estimate", lvl]))
    f = d["fit"]
    if f:
        lines += ["", (f"Goodness of fit (df = {f['df']}): deviance {fmt(f['deviance'], '.2f')} "
                      f"(p = {fmt(f['deviance_p'], '.3g')}), Pearson chi-square {fmt(f['pearson_chi2'], '.2f')} "
                      f"(p = {fmt(f['pearson_p'], '.3g')})")]
    lines += ["", table(rows, [d["index"], "correct", "trials", "observed %", "fitted %"])]
    if d["notes"]:
        lines += ["", "Notes:"] + [f"  - {n}" for n in d["notes"]]
    return "\n".join(lines)


@app.command("fitmap")
def fitmap_command(
    scores: Path = typer.Argument(..., help="CSV with one row per tested condition: index value, number correct, "
                                           "number of trials.", show_default=False),
    index: str = typer.Option(..., "--index", help="Column holding the index value (e.g. stoi, estoi, sti); "
                                                   "also the name stored in the mapping.", show_default=False),
    correct: str = typer.Option("correct", "--correct", help="Column holding the number of items correct."),
    trials: str = typer.Option("trials", "--trials", help="Column holding the number of items presented."),
    shape: str = typer.Option("logistic", "--shape", help="Curve shape: logistic or normal (cumulative normal)."),
    guess: float = typer.Option(0.0, "--guess", help="Fixed guess rate, e.g. 0.25 for a 4-alternative "
                                                     "closed-set test (0 for open-set tests)."),
    lapse: float = typer.Option(0.0, "--lapse", help="Fixed lapse rate (proportion of errors at the best "
                                                     "condition that are not due to the signal)."),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Path | None = typer.Option(None, "--out", help="Write the mapping (MAP.json) to this file, atomically."),
) -> None:
    """Fit a mapping from an index to % correct (binomial maximum likelihood) on pilot scores."""
    from envpredict.predict import check_guess_lapse, check_shape, fit_mapping, scores_from_rows

    check_shape(shape)
    check_guess_lapse(guess, lapse)
    header, rows = read_csv_rows(scores, "scores file")
    x, k, n = scores_from_rows(rows, header, index=index, correct=correct, trials=trials,
                               source=f"scores file '{scores}'")
    m = fit_mapping(x, k, n, index=index, shape=shape, guess=guess, lapse=lapse,
                    source=f"binomial maximum-likelihood fit to {len(rows)} rows of '{Path(scores).name}' "
                           f"(columns {index}, {correct}, {trials})")
    d = m.to_dict()
    fitted = m.percent(x)
    trows = [[f"{xi:.4g}", f"{ki:g}", f"{ni:g}", f"{100 * ki / ni:.1f}", f"{fi:.1f}"]
             for xi, ki, ni, fi in zip(x, k, n, fitted)]
    emit(d, lambda: render_fit(d, trows), as_json, out)
    if out is not None and not as_json:
        note(f"mapping written to {out}")


# ---------------------------------------------------------------------------
# sweep
# ---------------------------------------------------------------------------

def render_sweep(d: dict) -> str:
    lines = [
        (f"SNR sweep: {d['index']} of {d['duration_s']:.2f} s of speech"
        f"{' through the impulse response' if d['reverberant'] else ''}, {d['n_segments']} noise segment(s) per SNR"),
        f"Level convention: {d['level_convention_text']}",
        "",
    ]
    mapped = d["predicted_percent"] is not None
    head = ["SNR dB", d["index"], "sd"] + (["predicted %"] if mapped else [])
    rows = []
    for i, s in enumerate(d["snr_db"]):
        r = [f"{s:g}", fmt(d[d["index"]][i], ".3f"), fmt(d["index_sd"][i], ".3f")]
        if mapped:
            r.append(fmt(d["predicted_percent"][i], ".1f"))
        rows.append(r)
    lines.append(table(rows, head))
    if d["targets"]:
        lines += ["", "SNR at target scores, with 95 % intervals from the spread over noise segments "
                      "and from the mapping's own uncertainty:"]
        trows = []
        for t in d["targets"]:
            ci = "—" if t["ci_low"] is None else f"{t['ci_low']:.1f} .. {t['ci_high']:.1f}"
            mci = "—" if t["map_ci_low"] is None else f"{t['map_ci_low']:.1f} .. {t['map_ci_high']:.1f}"
            trows.append([f"{t['percent']:g} %", fmt(t["index_value"], ".3f"), fmt(t["snr_db"], ".1f"), ci, mci,
                          fmt(t["slope_percent_per_db"], ".1f"), t["note"] or ""])
        lines.append(table(trows, ["target", d["index"], "SNR dB", "noise segments", "mapping",
                                   "slope %/dB", ""]))
        if d["srt_db"] is not None:
            lines += ["", (f"Predicted SRT (50 %): {d['srt_db']:.1f} dB SNR, slope "
                          f"{d['slope_at_srt_percent_per_db']:.1f} %/dB")]
    if d["notes"]:
        lines += ["", "Notes:"] + [f"  - {n}" for n in d["notes"]]
    return "\n".join(line.rstrip() for line in "\n".join(lines).split("\n"))


@app.command("sweep")
def sweep_command(
    clean: Path = typer.Argument(..., help="Clean speech (WAV, FLAC or OGG).", show_default=False),
    noise: Path = typer.Argument(..., help="Noise recording, at least as long as the speech.", show_default=False),
    ir: Path | None = typer.Option(None, "--ir", help="Impulse response to apply to the speech before the noise "
                                                         "is added (noise is taken as recorded at the listener)."),
    snr: str = typer.Option("-15:15:3", "--snr", help="SNRs to sweep, FROM:TO:STEP in dB (write --snr=-20:10:2 "
                                                      "when FROM is negative)."),
    index: str | None = typer.Option(None, "--index", help="Index: stoi, estoi, ssti or ssti_regression. Default: the "
                                                              "mapping's index, or stoi without a mapping."),
    map_file: Path | None = typer.Option(None, "--map", help="Mapping (MAP.json from fitmap) for predicted "
                                                                "scores and target SNRs."),
    target: list[float] | None = typer.Option(None, "--target", help="Target score in percent; repeat for "
                                                                        "several (default: 50, the SRT)."),
    segments: int = typer.Option(5, "--segments", help="Noise segments per SNR (the interval comes from their "
                                                       "spread)."),
    level: str = typer.Option("speech", "--level", help="Level convention: speech (speech fixed, noise scaled) "
                                                        "or mixture (mixture rescaled to the speech level)."),
    channel: int | None = typer.Option(None, "--channel", help=CHANNEL_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Path | None = typer.Option(None, "--out", help="Also write the JSON result to this file (atomically)."),
    report: Path | None = typer.Option(None, "--report", help=REPORT_HELP),
) -> None:
    """Predicted index and % correct against SNR, and the SNR at target scores (the SRT)."""
    from envpredict.audio import load_audio, resample
    from envpredict.exceptions import InputError
    from envpredict.predict import (
        LEVEL_CONVENTIONS,
        MAX_SEGMENTS,
        SWEEP_INDICES,
        parse_snr_range,
        snr_sweep,
    )

    snrs = parse_snr_range(snr)
    if level not in LEVEL_CONVENTIONS:
        raise InputError(f"unknown level convention '{level}'", "use --level speech or --level mixture")
    if not 1 <= segments <= MAX_SEGMENTS:
        raise InputError(f"--segments {segments} is outside 1..{MAX_SEGMENTS}", "give e.g. --segments 5")
    mapping = load_mapping_file(map_file) if map_file is not None else None
    name = (index or (mapping.index if mapping is not None else "stoi")).strip().lower()
    if name not in SWEEP_INDICES:
        raise InputError(f"unknown index '{name}' for the sweep", f"use --index {', '.join(SWEEP_INDICES)}")
    if mapping is not None and mapping.index != name:
        raise InputError(f"the mapping '{map_file}' takes '{mapping.index}' but --index is '{name}'",
                         f"use --index {mapping.index} or a mapping fitted on {name}")
    targets = list(target) if target else [50.0]
    if mapping is not None:
        for t in targets:
            mapping.index_at(t)  # refuses unreachable targets before the slow work
    elif target:
        raise InputError("--target needs a mapping", "give --map MAP.json (write one with 'envpredict fitmap')")

    check_report(report)
    x, fs = load_audio(clean, channel, name="clean speech")
    nz, fs_n = load_audio(noise, channel, name="noise")
    if fs_n != fs:
        note(f"resampling the noise from {fs_n} Hz to {fs} Hz")
        nz = resample(nz, fs_n, fs)
    h = None
    if ir is not None:
        h, fs_h = load_audio(ir, channel, name="impulse response")
        if fs_h != fs:
            note(f"resampling the impulse response from {fs_h} Hz to {fs} Hz")
            h = resample(h, fs_h, fs)
    total = snrs.size * segments
    with Progress(f"sweeping {name}", total, quiet=as_json) as prog:
        res = snr_sweep(x, nz, fs, snr_db=snrs, index=name, mapping=mapping, targets=targets, ir=h,
                        n_segments=segments, level=level, progress=prog)
    d = res.to_dict()
    d["inputs"] = {"clean": str(clean), "noise": str(noise), "ir": None if ir is None else str(ir),
                   "map": None if map_file is None else str(map_file), "index": name, "snr": snr,
                   "segments": segments, "level": level}
    write_report_if(report, "sweep", d, as_json=as_json,
                    title=f"Predicted scores against SNR: {clean.name} in {noise.name}")
    emit(d, lambda: render_sweep(d), as_json, out)


# ---------------------------------------------------------------------------
# predict
# ---------------------------------------------------------------------------

@app.command("predict")
def predict_command(
    results: Path = typer.Argument(..., help="Results CSV (e.g. from batch) with an index column.",
                                   show_default=False),
    map_file: Path = typer.Option(..., "--map", help="Mapping (MAP.json from fitmap).", show_default=False),
    column: str | None = typer.Option(None, "--column", help="Column holding the index (default: the "
                                                                "mapping's index name)."),
    name: str = typer.Option("predicted_percent", "--name", help="Name of the added column."),
    as_json: bool = typer.Option(False, "--json", help="Print one JSON object (summary and rows) instead of "
                                                       "the CSV."),
    out: Path | None = typer.Option(None, "--out", help="Write the CSV with the added column to this file "
                                                           "(atomically; may be the input file). Without it "
                                                           "the CSV goes to standard output."),
) -> None:
    """Add a predicted % correct column to a results table, using a fitted mapping."""
    from envpredict.exceptions import InputError
    from envpredict.outputs import atomic_write_text
    from envpredict.predict import add_predictions

    from ._common import dumps

    if not name.strip():
        raise InputError("--name is empty", "give a column name")
    mapping = load_mapping_file(map_file)
    header, rows = read_csv_rows(results, "results file")
    tab = add_predictions(rows, header, mapping, index_column=column, column=name.strip(),
                          source=f"results file '{results}'")
    text = _csv_text(tab.header, tab.rows)
    if out is not None:
        atomic_write_text(out, text)
    summary = tab.to_dict()
    summary.update({"input": str(results), "map": str(map_file), "output": None if out is None else str(out)})
    if as_json:
        summary["rows"] = tab.rows
        typer.echo(dumps(summary))
        return
    if out is None:
        typer.echo(text, nl=False)
    msg = (f"{tab.n_predicted} of {tab.n_rows} rows predicted from '{tab.index_column}'"
           + (f", {tab.n_blank} without an index value" if tab.n_blank else "")
           + (f", {tab.n_extrapolated} extrapolated outside the fitted range" if tab.n_extrapolated else "")
           + (f"; written to {out}" if out is not None else ""))
    note(msg)
