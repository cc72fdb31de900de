"""Direct STI method: ``envpredict testsignal stipa|full`` to generate the test signals,
``envpredict stipa`` and ``envpredict fullsti`` to analyse their recordings."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from envpredict import standards as std

from ._app import app
from ._ears import EARS_HELP, render_ears_sti
from ._common import (
    AGE_HELP, AUDIOGRAM_HELP, JSON_HELP, OUT_HELP, RECORD_FIELD_HELP, RECORD_HELP, REPORT_HELP, SEX_HELP, Progress,
    bands, check_report, emit, fmt, format_sti, h, listed, listener, listener_lines, table, write_report_if,
)

testsignal_app = typer.Typer(
    help="Generate test signals: STIPA or the full-STI set (direct method, IEC 60268-16), or a sweep (for an IR).",
    no_args_is_help=True,
    add_completion=False,
    rich_markup_mode=None,
)
app.add_typer(testsignal_app, name="testsignal")

RATE_HELP = f"Sample rate of the generated file(s), Hz (above 22627 Hz; default {std.TEST_SIGNAL_RATE_HZ})."
SEED_HELP = "Seed of the noise generator: the same seed gives the same signal."
CHANNEL_HELP = "Channel to use from a multi-channel recording (0 = first). Required for multi-channel files."
CAL_HELP = ("Calibration: the dB SPL that a full-scale RMS signal (0 dBFS RMS) in the recording "
            "corresponds to. Enables the level-dependent masking and reception threshold.")
CALIBRATOR_HELP = "Recording of a 1 kHz acoustic calibrator made with the same gain (instead of --calibration-db)."
CAL_LEVEL_HELP = "Level of the calibrator in --calibrator, dB SPL (as printed on it, e.g. 94)."
CAL_CHANNEL_HELP = "Channel of the calibrator recording (default: same as --channel)."
TALKER_HELP = "Band weights: male or female (IEC 60268-16). The test signal itself is male-speech shaped."
NOISE_HELP = ("Optional: octave-band noise levels to ADD arithmetically, dB SPL, 125 Hz to 8 kHz, "
              "comma-separated. Only for a recording made without the site's normal noise (the "
              "direct method measures the noise in the recording). Needs a calibration.")


@testsignal_app.command("stipa")
def testsignal_stipa(
    out_file: Path = typer.Argument(..., help="WAV file to write (24-bit PCM).", show_default=False),
    seconds: float = typer.Option(std.STIPA_DEFAULT_SECONDS, "--seconds",
                                  help="Length in seconds (at least 15). Multiples of 100 s loop without a seam "
                                       "(the common period of the STIPA modulations)."),
    rate: int = typer.Option(std.TEST_SIGNAL_RATE_HZ, "--rate", help=RATE_HELP),
    seed: int = typer.Option(std.TEST_SIGNAL_SEED, "--seed", help=SEED_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
) -> None:
    """Write the STIPA test signal (IEC 60268-16 Annex B): seven speech-shaped noise bands, each
    intensity-modulated at its two modulation frequencies (depth 0.55), peak -3 dBFS."""
    from envpredict.signals import write_stipa_signal

    d = write_stipa_signal(out_file, seconds, rate, seed=seed).to_dict()
    d["inputs"] = {"out_file": str(out_file), "seconds": seconds, "rate": rate, "seed": seed}
    fs = d["fs"]
    loop = ("It loops without a seam." if d["loopable"] else
            "Do not loop it (only multiples of 100 s loop without a seam).")
    emit(d, lambda: (f"wrote {out_file}: STIPA test signal, {d['seconds']:g} s at {fs} Hz, seed {seed}, "
                     f"peak {d['peak_dbfs']:g} dBFS, RMS {d['rms_dbfs']:.1f} dBFS. {loop}\n"
                     "Play it at the level of speech through the sound system and record at least 15 s "
                     "at each listener position; analyse with 'envpredict stipa RECORDING.wav'."),
         as_json, None)


@testsignal_app.command("full")
def testsignal_full(
    out_folder: Path = typer.Argument(..., help="Folder to create for the 14 WAV files.", show_default=False),
    rate: int = typer.Option(std.TEST_SIGNAL_RATE_HZ, "--rate", help=RATE_HELP),
    seed: int = typer.Option(std.TEST_SIGNAL_SEED, "--seed", help=SEED_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
) -> None:
    """Write the full-STI test signal set: 14 files, one per modulation frequency (0.63 ... 12.5 Hz,
    ascending), all seven speech-shaped noise bands modulated at that frequency (depth 1), plus
    signals.json listing order and durations."""
    from envpredict.signals import write_full_sti_signals

    with Progress("writing full-STI signals", None, quiet=as_json) as prog:
        d = write_full_sti_signals(out_folder, rate, seed=seed, progress=prog).to_dict()
    d["inputs"] = {"out_folder": str(out_folder), "rate": rate, "seed": seed}

    def human() -> str:
        rows = [[str(s["number"]), f"{s['modulation_hz']:g}", f"{s['seconds']:.2f}", s["file"]] for s in d["signals"]]
        return (f"wrote {len(rows)} full-STI test signals to {out_folder} ({d['fs']} Hz, seed {seed}, "
                f"{d['total_seconds']:.0f} s in all):\n"
                + table(rows, [h("number"), h("modulation_hz"), h("seconds"), h("file")])
                + "\nRecord each signal completely; analyse with 'envpredict fullsti FOLDER_OF_RECORDINGS'.")

    emit(d, human, as_json, None)


def render_direct(d: dict) -> str:
    """Readable text for a direct-method result dictionary."""
    import numpy as np

    from envpredict import standards as std
    from envpredict.labels import rating_text, uncertainty_decimals
    from envpredict.sti import verdict_decimals

    req = std.VOICE_ALARM_TARGET_STI if d.get("requirement") is None else d["requirement"]
    # the uncertainty with as many decimals as the STI, or more until it shows a digit
    unc_spec = f".{uncertainty_decimals(d['uncertainty'], verdict_decimals(d['sti'], req))}f"

    lines = [f"Method: {d['method']}"]
    for r in d["recordings"]:
        mod = f", {r['modulation_hz']:g} Hz signal" if "modulation_hz" in r else ""
        lines.append(f"  {r['name']}: {r['fs']} Hz, {r['duration_s']:.1f} s; test signal "
                     f"{r['signal_start_s']:.2f}-{r['signal_end_s']:.2f} s, analysed "
                     f"{r['analysed_start_s']:.2f}-{r['analysed_end_s']:.2f} s{mod}"
                     + (f"; clock {r['clock_offset_ppm']:+.0f} ppm, corrected" if r.get("clock_corrected") else ""))
    cal = (f"calibrated ({d['calibration_source']}, {d['calibration_db']:.1f} dB), level "
           f"{d['level_dba']:.1f} dB(A)" if d["calibrated"] else "NOT calibrated (no auditory corrections)")
    lines += [f"Talker weights: {d['talker']}   {cal}"] + listener_lines(d)
    lines += [
        "",
        f"STI = {format_sti(d)} ± {fmt(d['uncertainty'], unc_spec)}   qualification band "
        f"{rating_text(d['rating'], d['subjective'])}",
        "(± is the standard uncertainty: envelope noise or window spread, and the expected offset "
        f"{fmt(d.get('expected_offset'), '+.3f')})",
        "",
    ]
    if d.get("requirement") is not None:
        lines[-1:-1] = [f"Required: STI {d['requirement']:g} or more — "
                        f"{'met' if d['meets_requirement'] else 'NOT met'}"]
    level = "band_levels_db" if d["band_levels_unit"] == "dB SPL" else "band_levels_dbfs"
    head = [h("band"), h("mti"), h(level), h("envelope_noise_depth")]
    nmod = len(d["mtf"][0])
    if nmod == 2:
        head += [h("f1"), h("m_f1"), h("f2"), h("m_f2")]
    rows = []
    for k, fc in enumerate(bands(d["bands_hz"])):
        nd = d["envelope_noise_depth"][k]
        if isinstance(nd, list):  # full STI: one per recording; show the median
            nd = float(np.median([v for v in nd if v is not None])) if any(v is not None for v in nd) else None
        row = [fc, fmt(d["mti"][k]) if d["bands_used"][k] else "not used", fmt(d["band_levels_db"][k], ".1f"),
               fmt(nd, ".3f")]
        if nmod == 2:
            for f, m in zip(d["modulation_hz"][k], d["mtf"][k]):
                row += [f"{f:g}", fmt(m)]
        rows.append(row)
    lines.append(table(rows, head))
    if nmod != 2:
        lines.append("")
        lines.append("Modulation transfer m used for the index (rows: octave bands; columns: modulation "
                     "frequency, Hz)")
        mh = [h("band")] + [f"{f:g}" for f in d["modulation_hz"][0]]
        lines.append(table([[fc] + [f"{v:.2f}" for v in row] for fc, row in zip(bands(d["bands_hz"]), d["mtf"])],
                           mh))
    lines += listed("Cautions:", d["cautions"])
    return "\n".join(lines)


@app.command("stipa")
def stipa_command(
    recording: Path = typer.Argument(..., help="Recording of the STIPA test signal (WAV, FLAC or OGG).",
                                     show_default=False),
    calibration_db: Optional[float] = typer.Option(None, "--calibration-db", help=CAL_HELP),
    calibrator: Optional[Path] = typer.Option(None, "--calibrator", help=CALIBRATOR_HELP),
    calibrator_level: Optional[float] = typer.Option(None, "--calibrator-level", help=CAL_LEVEL_HELP),
    calibrator_channel: Optional[int] = typer.Option(None, "--calibrator-channel", help=CAL_CHANNEL_HELP),
    talker: str = typer.Option(std.DEFAULT_TALKER, "--talker", help=TALKER_HELP, metavar="[male|female]"),
    noise: Optional[str] = typer.Option(None, "--noise", help=NOISE_HELP),
    channel: Optional[int] = typer.Option(None, "--channel", help=CHANNEL_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Optional[Path] = typer.Option(None, "--out", help=OUT_HELP),
    report: Optional[Path] = typer.Option(None, "--report", help=REPORT_HELP),
    require: Optional[float] = typer.Option(
        None, "--require", help="The STI the system must reach (set by the local code, e.g. 0.50): the result "
        "states whether it is met, judged on the unrounded value.", show_default=False),
    record: Optional[Path] = typer.Option(None, "--record", help=RECORD_HELP),
    record_field: Optional[List[str]] = typer.Option(None, "--record-field", help=RECORD_FIELD_HELP),
    ears: bool = typer.Option(False, "--ears", help=EARS_HELP),
    audiogram: Optional[str] = typer.Option(None, "--audiogram", help=AUDIOGRAM_HELP + " Needs a calibration."),
    age: Optional[float] = typer.Option(None, "--age", help=AGE_HELP, show_default=False),
    sex: Optional[str] = typer.Option(None, "--sex", help=SEX_HELP, metavar="[f|m]"),
) -> None:
    """STI from a recording of the STIPA test signal (IEC 60268-16 direct method, Annex B).
    The file is read in blocks, so recordings of an hour or more (up to 2 h) are analysed in
    bounded memory."""
    from envpredict.direct import stipa_from_file
    from envpredict.report import read_about

    about = read_about(record, record_field or ())
    listener_ = listener(audiogram, age, sex)
    check_report(report)
    opts = dict(calibration_db=calibration_db, calibrator=calibrator, calibrator_level=calibrator_level,
                calibrator_channel=calibrator_channel, noise_db=noise, talker=talker, requirement=require)
    # steps: the blocks of both passes over the file, then the modulation depths
    with Progress("analysing STIPA recording", None, quiet=as_json) as prog:
        if ears:
            from envpredict.binaural import stipa_ears_file

            result = stipa_ears_file(recording, channel=channel, progress=prog, audiogram=listener_, **opts)
        else:
            result = stipa_from_file(recording, channel, progress=prog, audiogram=listener_, **opts)
    d = result.to_dict()
    d["inputs"] = {"recording": str(recording), "channel": channel, **_calibration_inputs(
        calibration_db, calibrator, calibrator_level, calibrator_channel), "noise": noise, "talker": talker,
        "require": require, "about": about, **_listener_inputs(listener_, audiogram, age, sex)}
    if ears:
        d["inputs"]["ears"] = True
    write_report_if(report, "stipa", d, as_json=as_json,
                    title=f"STIPA{' of two ears' if ears else ''}: {recording.name}")
    emit(d, lambda: render_ears_sti(d, str(recording)) if ears else render_direct(d), as_json, out)


def _listener_inputs(listener_, audiogram, age, sex) -> dict:
    return {} if listener_ is None else {"audiogram": audiogram, "age": age, "sex": sex}


def _calibration_inputs(calibration_db, calibrator, calibrator_level, calibrator_channel) -> dict:
    return {"calibration_db": calibration_db, "calibrator": None if calibrator is None else str(calibrator),
            "calibrator_level": calibrator_level, "calibrator_channel": calibrator_channel}


@app.command("fullsti")
def fullsti_command(
    recordings: List[Path] = typer.Argument(..., help="The 14 recordings of the full-STI signals, or a folder "
                                            "holding them (any order).", show_default=False),
    calibration_db: Optional[float] = typer.Option(None, "--calibration-db", help=CAL_HELP),
    calibrator: Optional[Path] = typer.Option(None, "--calibrator", help=CALIBRATOR_HELP),
    calibrator_level: Optional[float] = typer.Option(None, "--calibrator-level", help=CAL_LEVEL_HELP),
    calibrator_channel: Optional[int] = typer.Option(None, "--calibrator-channel", help=CAL_CHANNEL_HELP),
    talker: str = typer.Option(std.DEFAULT_TALKER, "--talker", help=TALKER_HELP, metavar="[male|female]"),
    noise: Optional[str] = typer.Option(None, "--noise", help=NOISE_HELP),
    channel: Optional[int] = typer.Option(None, "--channel", help=CHANNEL_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Optional[Path] = typer.Option(None, "--out", help=OUT_HELP),
    report: Optional[Path] = typer.Option(None, "--report", help=REPORT_HELP),
    require: Optional[float] = typer.Option(
        None, "--require", help="The STI the system must reach (set by the local code, e.g. 0.50): the result "
        "states whether it is met, judged on the unrounded value.", show_default=False),
    record: Optional[Path] = typer.Option(None, "--record", help=RECORD_HELP),
    record_field: Optional[List[str]] = typer.Option(None, "--record-field", help=RECORD_FIELD_HELP),
    audiogram: Optional[str] = typer.Option(None, "--audiogram", help=AUDIOGRAM_HELP + " Needs a calibration."),
    age: Optional[float] = typer.Option(None, "--age", help=AGE_HELP, show_default=False),
    sex: Optional[str] = typer.Option(None, "--sex", help=SEX_HELP, metavar="[f|m]"),
) -> None:
    """Full STI from recordings of the 14 full-STI test signals (IEC 60268-16 direct method)."""
    from envpredict.direct import full_sti_from_files
    from envpredict.report import read_about

    about = read_about(record, record_field or ())
    listener_ = listener(audiogram, age, sex)
    check_report(report)
    with Progress("analysing full-STI recordings", None, quiet=as_json) as prog:
        result = full_sti_from_files(recordings, channel, calibration_db=calibration_db, calibrator=calibrator,
                                     calibrator_level=calibrator_level, calibrator_channel=calibrator_channel,
                                     noise_db=noise, talker=talker, progress=prog, requirement=require,
                                     audiogram=listener_)
    d = result.to_dict()
    d["inputs"] = {"recordings": [str(f) for f in recordings], "channel": channel, **_calibration_inputs(
        calibration_db, calibrator, calibrator_level, calibrator_channel), "noise": noise, "talker": talker,
        "require": require, "about": about, **_listener_inputs(listener_, audiogram, age, sex)}
    write_report_if(report, "fullsti", d, as_json=as_json)
    emit(d, lambda: render_direct(d), as_json, out)
