"""``envpredict fitmap | sweep | predict``: predicted listening-test scores."""

from __future__ import annotations

from pathlib import Path

import typer

from envpredict import standards as std
from envpredict.tables import CORRECT_COLUMN, PREDICTED_COLUMN, TRIALS_COLUMN

from ._app import app
from ._common import (
    CHANNEL_HELP, JSON_HELP, REPORT_HELP, Progress, check_outputs, dumps, echo, emit, fmt, h, listed, note, table,
    write_report_if,
)


#: Names of the built-in published mappings, for --map's help (envpredict.mapping.published_mapping).
_BUILTIN_MAPS = ", ".join(sorted(std.TAAL2011_MAPPINGS))

# ---------------------------------------------------------------------------
# fitmap
# ---------------------------------------------------------------------------

def _decimals(v) -> int:
    """Decimals that show four significant digits of ``v``, for an estimate and both ends of
    its interval alike (``envpredict.labels.significant_decimals``)."""
    from envpredict.labels import significant_decimals

    return significant_decimals(v)


def render_fit(d: dict, rows: list[list[str]]) -> str:
    lines = [
        (f"Mapping from {d['index']} to proportion correct: {d['shape']} "
        f"(guess {d['guess']:g}, lapse {d['lapse']:g})"),
        f"  {d['formula']}",
        f"  fitted by binomial maximum likelihood to {d['n_points']} rows, {d['n_trials']} trials",
        "",
    ]
    from envpredict.labels import name, show

    lvl = f"interval ({100 * d['ci_level']:g} %)"
    prow = []
    labels = {"a": "a (intercept)", "b": "b (slope of eta)", "x50": f"x50 ({d['index']} at F = 1/2)",
              "slope_at_x50": "slope at x50 (per index unit)"}
    for k, v in d["params"].items():
        ci = d["ci"].get(k)
        spec = f".{_decimals(v)}f"  # four significant digits of the estimate; its interval the same
        prow.append([labels.get(k, k), fmt(v, spec), "—" if ci is None else f"{ci[0]:{spec}} .. {ci[1]:{spec}}"])
    prof = (d.get("ci_profile") or {}).get("x50")
    if prof is not None:
        spec = f".{_decimals(d['params'].get('x50'))}f"
        ends = [("open" if v is None else f"{v:{spec}}") for v in prof]
        prow.append(["x50, profile likelihood", "", f"{ends[0]} .. {ends[1]}"])
    lines.append(table(prow, [h("parameter"), h("estimate"), lvl]))
    f = d["fit"]
    if f:
        lines += ["", (f"Goodness of fit (df = {f['df']}): deviance {fmt(f['deviance'], '.2f')} "
                      f"(p = {show('p_value', f['deviance_p'])}), Pearson chi-square {fmt(f['pearson_chi2'], '.2f')} "
                      f"(p = {show('p_value', f['pearson_p'])})")]
    est = d.get("dispersion_estimate")
    if d.get("interval_method") == "quasi-binomial":
        lines.append(f"Intervals: quasi-binomial, dispersion (Pearson chi-square / df) {d['dispersion']:.3g}: "
                     f"covariance x {d['dispersion']:.3g}, Student t with {d['ci_df']} df")
    elif est is not None:
        lines.append(f"Intervals: binomial (dispersion, Pearson chi-square / df, {est:.3g}"
                     + (": at most 1, none applied)" if est <= 1 else ": not applied, --dispersion binomial)"))
    if d.get("listeners"):
        sp = d["listener_spread"]
        lines += ["", (f"Per listener ({sp['n_fitted']} of {sp['n_listeners']} fitted, binomial): x50 mean "
                       f"{fmt(sp['x50_mean'], '#.4g')}, sd {fmt(sp['x50_sd'], '#.3g')}; slope at x50 mean "
                       f"{fmt(sp['slope_at_x50_mean'], '#.4g')}, sd {fmt(sp['slope_at_x50_sd'], '#.3g')}")]
        why = any(f["error"] for f in d["listeners"])  # a column of reasons only when a listener has one
        head = [h("listener"), h("rows"), h("trials"), h("x50"), h("slope_at_x50")] + \
            ([h("no_curve_because")] if why else [])
        lines.append(table([[f["listener"], f"{f['n_points']}", f"{f['n_trials']}", fmt(f["x50"], "#.4g"),
                             fmt(f["slope_at_x50"], "#.4g")] + ([f["error"] or ""] if why else [])
                            for f in d["listeners"]], head))
    lines += ["", table(rows, [name(d["index"]), h("correct"), h("trials"), h("observed_percent"),
                               h("fitted_percent")])]
    lines += listed("Notes:", d["notes"])
    return "\n".join(lines)


@app.command("fitmap")
def fitmap_command(
    scores: Path = typer.Argument(..., help="CSV with one row per tested condition: index value, number correct, "
                                           "number of trials.", show_default=False),
    index: str = typer.Option(..., "--index", help="Column holding the index value (e.g. stoi, estoi, sti); "
                                                   "also the name stored in the mapping.", show_default=False),
    correct: str = typer.Option(CORRECT_COLUMN, "--correct", help="Column holding the number of items correct."),
    trials: str = typer.Option(TRIALS_COLUMN, "--trials", help="Column holding the number of items presented."),
    shape: str = typer.Option(std.MAPPING_SHAPE, "--shape", metavar="[logistic|normal]",
                              help="Curve shape: logistic or normal (cumulative normal)."),
    guess: float = typer.Option(std.MAPPING_GUESS, "--guess", help="Fixed guess rate, e.g. 0.25 for a 4-alternative "
                                                     "closed-set test (0 for open-set tests)."),
    lapse: float = typer.Option(std.MAPPING_LAPSE, "--lapse", help="Fixed lapse rate (proportion of errors at the best "
                                                     "condition that are not due to the signal)."),
    listener: str | None = typer.Option(None, "--listener", help="Column naming the listener of each row: fit each "
                                                                 "listener as well as the group, with the spread "
                                                                 "across listeners."),
    dispersion: str = typer.Option(std.MAPPING_DISPERSION, "--dispersion", metavar="[quasi|binomial]",
                                   help="Intervals: quasi (widened by the estimated dispersion, Pearson chi-square / "
                                        "df, when the pilot scatters more than binomial sampling allows) or "
                                        "binomial (never widened)."),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Path | None = typer.Option(None, "--out", help="Write the mapping (MAP.json) to this file, atomically."),
    report: Path | None = typer.Option(None, "--report", help=REPORT_HELP + " (the fitted curve with its band, "
                                                               "the pilot rows with their intervals, the residuals)"),
) -> None:
    """Fit a mapping from an index to % correct (binomial maximum likelihood) on pilot scores."""
    from envpredict.mapping import fit_mapping_file, fit_report_data

    check_outputs(out=out, report=report, inputs=[scores])
    m, data = fit_mapping_file(scores, index=index, correct=correct, trials=trials, shape=shape, guess=guess,
                               lapse=lapse, dispersion=dispersion, listener=listener)
    d = m.to_dict()
    d["inputs"] = {"scores": str(scores), "index": index, "correct": correct, "trials": trials, "shape": shape,
                   "guess": guess, "lapse": lapse, "dispersion": dispersion, "listener": listener}
    write_report_if(report, "fitmap", {**d, "fit_data": fit_report_data(m, data)}, as_json=as_json,
                    title=f"Mapping from {index} to % correct: {scores.name}")
    trows = [[f"{xi:.4g}", f"{ki:g}", f"{ni:g}", f"{oi:.1f}", f"{fi:.1f}"]
             for xi, ki, ni, oi, fi in zip(data.index_values, data.correct, data.trials, data.observed_percent,
                                           data.fitted_percent)]
    emit(d, lambda: render_fit(d, trows), as_json, out)
    if out is not None and not as_json:
        note(f"mapping written to {out}")


# ---------------------------------------------------------------------------
# sweep
# ---------------------------------------------------------------------------

def render_sweep(d: dict) -> str:
    from envpredict.labels import name

    many = d.get("n_sentences", 1) > 1
    what = f"{d['n_sentences']} sentences ({d['duration_s']:.2f} s)" if many else f"{d['duration_s']:.2f} s"
    lines = [
        (f"SNR sweep: {name(d['index'])} of {what} of speech"
        f"{' through the impulse response' if d['reverberant'] else ''}, {d['n_segments']} noise segment(s) per SNR"),
        f"SNR reference: {d['snr_reference_text']}",
        f"Level convention: {d['level_convention_text']}",
    ]
    if d.get("activity_factor") is not None:
        lines.append(f"Speech: active level {d['speech_active_level_db']:.1f} dB, long-term "
                     f"{d['speech_long_term_level_db']:.1f} dB re full scale, activity factor "
                     f"{100 * d['activity_factor']:.1f} % (ITU-T P.56 method B)")
    lines.append("")
    mapped = d["predicted_percent"] is not None
    # the envelope-power index is an object (its SNR_env in dB per SNR), the others a list
    obj = isinstance(d[d["index"]], dict)
    values = d[d["index"]]["snr_env_db"] if obj else d[d["index"]]
    head = [h("snr_db"), h("sepsm_snr_env_db") if obj else name(d["index"]), h("index_sd")] + \
        ([h("sentence_sd")] if many else []) + ([h("predicted_percent")] if mapped else [])
    rows = []
    spec = ".2f" if obj else ".3f"  # SNR_env in dB with the vocabulary's 2 decimals, an index with 3
    for i, s in enumerate(d["snr_db"]):
        r = [f"{s:g}", fmt(values[i], spec), fmt(d["index_sd"][i], spec)]
        if many:
            r.append(fmt(d["sentence_sd"][i], ".3f"))
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
            trows.append([f"{t['percent']:g}", fmt(t["index_value"], spec), fmt(t["snr_db"], ".1f"), ci, mci,
                          fmt(t["slope_percent_per_db"], ".1f"), t["note"] or ""])
        lines.append(table(trows, [h("target_percent"), head[1], h("snr_db"), h("segments_ci"),
                                   h("mapping_ci"), h("slope_percent_per_db"), ""]))
        if many:
            def iv(t, key):
                lo, hi = t[f"{key}_ci_low"], t[f"{key}_ci_high"]
                return "—" if lo is None else f"{lo:.1f} .. {hi:.1f}"

            lines += ["", "With the spread over sentences (95 %): sentences alone, sentences and noise segments "
                          "combined, and all three with the mapping:"]
            lines.append(table([[f"{t['percent']:g}", fmt(t["snr_db"], ".1f"), fmt(t["sentence_sd_db"], ".2f"),
                                 iv(t, "sentence"), iv(t, "combined"), iv(t, "total")] for t in d["targets"]],
                               [h("target_percent"), h("snr_db"), h("sentence_sd_db"), h("sentences_ci"),
                                h("combined_ci"), h("total_ci")]))
        if d["srt_db"] is not None:
            lines += ["", (f"Predicted SRT (50 %): {d['srt_db']:.1f} dB SNR, slope "
                          f"{d['slope_at_srt_percent_per_db']:.1f} %/dB")]
        if d.get("processed") and any(t.get("unprocessed_snr_db") is not None for t in d["targets"]):
            lines += ["", "Predicted benefit of the processing chain (SNR without it minus SNR with it):"]
            lines.append(table([[f"{t['percent']:g}", fmt(t["unprocessed_snr_db"], ".1f"), fmt(t["snr_db"], ".1f"),
                                 fmt(t["benefit_db"], "+.1f")] for t in d["targets"]],
                               [h("target_percent"), h("unprocessed_db"), h("processed_db"), h("benefit_db")]))
    st = d.get("stimuli")
    if st:
        lines += ["", (f"Stimuli: {len(st['stimuli'])} file(s) in {st['folder']} (with {st['manifest']}), "
                       f"presentation level {st['presentation_level_db'] + st['common_gain_db']:g} dB re full scale "
                       f"({d['level_convention']} level), noise segments from seed {st['seed']}")]
        lines.append(table([[s["file"], f"{s['snr_db']:g}", f"{s['speech_active_level_db']:.1f}",
                             f"{s['noise_level_db']:.1f}", f"{s['peak_db']:.1f}", fmt(s.get("true_peak_dbtp"), ".1f")]
                            for s in st["stimuli"]],
                           [h("file"), h("snr_db"), h("speech_active_level_db"), h("noise_level_db"), h("peak_db"),
                            h("true_peak_dbtp")]))
        if st.get("process"):
            lines.append(f"  files ending _processed went through the processing chain {st['process']}, at the "
                         "gain of their input mixture (its SNR and speech and noise levels are shown)")
        lines += [f"  caution: {c}" for c in st["cautions"]]
    lines += listed("Notes:", d["notes"])
    return "\n".join(line.rstrip() for line in "\n".join(lines).split("\n"))


#: Default of --snr, FROM:TO:STEP (the API's default SNRs, envpredict.sweep.DEFAULT_SNR_RANGE).
_SNR_RANGE = f"{std.SWEEP_SNR_FROM_DB:g}:{std.SWEEP_SNR_TO_DB:g}:{std.SWEEP_SNR_STEP_DB:g}"


@app.command("sweep")
def sweep_command(
    clean: Path = typer.Argument(..., help="Clean speech (WAV, FLAC or OGG), or several sentences: a folder of "
                                           "them or a .txt list (one file per line).", show_default=False),
    noise: Path = typer.Argument(..., help="Noise recording, at least as long as the speech.", show_default=False),
    ir: Path | None = typer.Option(None, "--ir", help="Impulse response to apply to the speech before the noise "
                                                         "is added (noise is taken as recorded at the listener)."),
    snr: str = typer.Option(_SNR_RANGE, "--snr", help="SNRs to sweep, FROM:TO:STEP in dB (write --snr=-20:10:2 "
                                                      "when FROM is negative)."),
    index: str | None = typer.Option(None, "--index", help="Index: stoi, estoi, ssti, ssti_regression or sepsm "
                                                              "(envelope power; SNR_env in dB, scored by its ideal "
                                                              "observer without --map). Default: the mapping's "
                                                              "index, or stoi without a mapping."),
    map_file: Path | None = typer.Option(None, "--map", help="Mapping (MAP.json from fitmap, or a built-in "
                                                                f"published one: {_BUILTIN_MAPS}) for predicted "
                                                                "scores and target SNRs. A MAP.json fitted with "
                                                                "--listener gives the group fit; MAP.json#NAME "
                                                                "gives listener NAME's."),
    target: list[float] | None = typer.Option(None, "--target", help="Target score in percent; repeat for "
                                              f"several (default: {std.SRT_PERCENT:g}, the SRT)."),
    segments: int = typer.Option(std.SWEEP_SEGMENTS, "--segments",
                                 help="Noise segments per SNR (the interval comes from their spread)."),
    level: str = typer.Option(std.SWEEP_LEVEL, "--level", metavar="[speech|mixture]",
                              help="Level convention: speech (speech fixed, noise "
                                                               "scaled) or mixture (mixture rescaled to the speech "
                                                               "level)."),
    snr_reference: str = typer.Option(std.SWEEP_SNR_REFERENCE, "--snr-reference", metavar="[active|long-term]",
                                      help="Speech level the SNR is referred to: active (ITU-T P.56 active speech "
                                           "level, pauses excluded, as speech tests set levels) or long-term "
                                           "(pauses included; envpredict's earlier convention)."),
    process: str | None = typer.Option(None, "--process", metavar="MODULE:FUNCTION",
                                       help="Processing chain applied to each mixture before the index: a function "
                                            "f(mixture, fs) -> processed mixture (module on the Python path or in "
                                            "the current folder, or path/to/file.py:FUNCTION). With --map the "
                                            "predicted benefit in dB is given per target."),
    write_stimuli: Path | None = typer.Option(None, "--write-stimuli", metavar="DIR",
                                              help="Also write the mixtures (WAV) and a manifest.csv to this new or "
                                                   "empty folder: at --stimuli-snr, else at the target SNRs found, "
                                                   "else at the swept SNRs. With --process, each mixture also "
                                                   "through the chain (NAME_processed.wav)."),
    stimuli_snr: list[float] | None = typer.Option(None, "--stimuli-snr", help="SNR of a stimulus, dB; repeat "
                                                   "for several (write --stimuli-snr=-6 when negative)."),
    presentation_level: float = typer.Option(std.STIMULI_LEVEL_DB, "--presentation-level",
                                             help="Level of the stimuli, dB re full scale: of the speech (--level "
                                                  "speech, by the SNR reference) or of the mixture (--level "
                                                  "mixture)."),
    scale_to_fit: bool = typer.Option(False, "--scale-to-fit", help="When a stimulus would clip, scale all of "
                                                                     "them by one common factor (else refuse)."),
    seed: int = typer.Option(std.TEST_SIGNAL_SEED, "--seed", help="Seed of the noise segments of the stimuli "
                                                                  "(the same seed gives the same files)."),
    channel: int | None = typer.Option(None, "--channel", help=CHANNEL_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Path | None = typer.Option(None, "--out", help="Also write the JSON result to this file (atomically)."),
    report: Path | None = typer.Option(None, "--report", help=REPORT_HELP),
) -> None:
    """Predicted index and % correct against SNR, and the SNR at target scores (the SRT)."""
    from envpredict.sweep import DEFAULT_INDEX, snr_sweep_files

    check_outputs(out=out, report=report, inputs=[clean, noise, ir, map_file])
    if write_stimuli is not None:
        from envpredict.stimuli import check_stimuli_folder

        check_stimuli_folder(write_stimuli)
    chain = None
    if process is not None:
        from envpredict.sweep import load_process

        chain = load_process(process)
    shown = index or (None if map_file is not None else DEFAULT_INDEX)  # the mapping's index is read by the API
    with Progress(f"sweeping {shown}" if shown else "sweeping", None, quiet=as_json) as prog:
        res = snr_sweep_files(clean, noise, ir=ir, snr_db=snr, index=index, mapping=map_file, targets=target,
                              n_segments=segments, level=level, snr_reference=snr_reference, channel=channel,
                              process=chain, progress=prog)
    name = res.index_name
    d = res.to_dict()
    d["inputs"] = {"clean": str(clean), "noise": str(noise), "ir": None if ir is None else str(ir),
                   "map": None if map_file is None else str(map_file), "index": name, "snr": snr,
                   "segments": segments, "level": level, "snr_reference": res.snr_reference,
                   "write_stimuli": None if write_stimuli is None else str(write_stimuli), "process": process}
    if write_stimuli is not None:
        from envpredict.stimuli import stimulus_snrs, write_stimuli_files

        stim = write_stimuli_files(write_stimuli, clean, noise, stimulus_snrs(res, stimuli_snr), ir=ir,
                                   channel=channel, snr_reference=res.snr_reference, level=level,
                                   presentation_level_db=presentation_level, scale_to_fit=scale_to_fit, seed=seed,
                                   process=chain)
        d["stimuli"] = stim.to_dict()
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
    map_file: Path = typer.Option(..., "--map", help="Mapping (MAP.json from fitmap, or a built-in published one: "
                                                     f"{_BUILTIN_MAPS}). A MAP.json fitted with --listener gives the "
                                                     "group fit; MAP.json#NAME gives listener NAME's.",
                                  show_default=False),
    column: str | None = typer.Option(None, "--column", help="Column holding the index (default: the "
                                                                "mapping's index name)."),
    name: str = typer.Option(PREDICTED_COLUMN, "--name", help="Name of the added column."),
    as_json: bool = typer.Option(False, "--json", help="Print one JSON object (summary and rows) instead of "
                                                       "the CSV."),
    out: Path | None = typer.Option(None, "--out", help="Write the CSV with the added column to this file "
                                                           "(atomically; may be the input file). Without it "
                                                           "the CSV goes to standard output."),
) -> None:
    """Add a predicted % correct column to a results table, using a fitted mapping."""
    from envpredict.mapping import predict_file

    check_outputs(out=out, inputs=[map_file])  # --out may be RESULTS itself (an in-place update, atomic)
    tab = predict_file(results, map_file, index_column=column, column=name, out=out)
    summary = tab.to_dict()
    summary["inputs"] = {"results": str(results), "map": str(map_file), "out": None if out is None else str(out),
                         "column": column, "name": name}
    if as_json:
        echo(dumps(summary))
        return
    if out is None:
        echo(tab.csv_text(), nl=False)
    msg = (f"{tab.n_predicted} of {tab.n_rows} rows predicted from '{tab.index_column}'"
           + (f", {tab.n_blank} without an index value" if tab.n_blank else "")
           + (f", {tab.n_extrapolated} extrapolated outside the fitted range" if tab.n_extrapolated else "")
           + (f"; written to {out}" if out is not None else ""))
    note(msg)
