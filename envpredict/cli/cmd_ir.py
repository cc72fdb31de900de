"""``envpredict ir``: STI and decay figures from an impulse response."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from envpredict import standards as std

from ._app import app
from ._ears import EARS_HELP, render_ears_sti
from ._common import (
    AGE_HELP, AUDIOGRAM_HELP, CHANNEL_HELP, JSON_HELP, OUT_HELP, RECORD_FIELD_HELP, RECORD_HELP, REPORT_HELP, SEX_HELP,
    Progress, bands, check_outputs, emit, fmt, format_sti, h, listed, listener, listener_lines, table, write_report_if,
)

NOISE_HELP = ("Background noise at the listener: seven octave-band levels in dB SPL, 125 Hz to 8 kHz, "
              "comma-separated, e.g. 48,45,42,40,36,32,28. Default: no noise.")
LEVEL_HELP = (f"A-weighted speech level at the listener, dB(A), with the standard speech spectrum. Default "
              f"{std.DEFAULT_SPEECH_LEVEL_DBA:g} (normal voice at 1 m).")
LEVELS_HELP = ("Measured speech levels at the listener instead of --speech-level: seven octave-band levels in "
               "dB SPL, 125 Hz to 8 kHz, comma-separated (e.g. of the test signal played at the system's "
               "speech level).")
NOISE_REC_HELP = ("Background noise as a calibrated recording at the listener instead of --noise: its "
                  "octave-band levels (Leq over the file) are used. Needs --calibration-db or --calibrator.")
NOISE_CHANNEL_HELP = "Channel of the noise recording (0 = first). Required for multi-channel files."
CAL_HELP = "Calibration of the noise recording: the dB SPL that a full-scale RMS signal (0 dBFS RMS) corresponds to."
CALIBRATOR_HELP = ("Recording of a 1 kHz acoustic calibrator made with the same gain as the noise recording "
                   "(instead of --calibration-db).")
CAL_LEVEL_HELP = "Level of the calibrator in --calibrator, dB SPL (as printed on it, e.g. 94)."
CAL_CHANNEL_HELP = "Channel of the calibrator recording (default: same as --noise-channel)."
TALKER_HELP = "Speech spectrum and band weights: male or female (IEC 60268-16)."
SWEEP_HELP = ("The exponential sweep file that was played (from 'envpredict testsignal sweep', with its .json "
              "beside it): IR_FILE is then a recording of it, deconvolved first (see 'envpredict deconvolve').")
SWEEP_RATE_HELP = "With --sweep: the rate the sweep was played at, Hz, if not the rate in its file."
AUDITORY_HELP = ("Switch off auditory masking and the reception threshold (textbook form, for "
                 "comparison with published formulas; not for compliance work).")


def render_ir(d: dict, source: str) -> str:
    """Readable text for an ``ir`` result dictionary."""
    from envpredict.labels import rating_text

    lines = [
        f"Impulse response: {source}  ({d['fs']} Hz, {d['duration_s']:.2f} s)",
        f"Talker: {d['talker']}   speech level: {d['speech_level_dba']:.1f} dB(A)   "
        f"auditory corrections: {'on' if d['auditory_corrections'] else 'off'}",
    ]
    dec = d.get("deconvolution")
    if dec:
        pnr = ", ".join(fmt(v, ".0f") for v in dec["peak_to_noise_db"])
        lines.append(f"Recovered from a sweep recording: sweep found at {dec['offset_s']:.3f} s, "
                     f"{dec['repeats_used']} of {dec['repeats_played']} repeat(s) averaged; peak-to-noise dB "
                     f"per band {pnr}")
    lines += listener_lines(d)
    lines += [
        "",
        f"STI = {format_sti(d)}   qualification band {rating_text(d['rating'], d['subjective'])}",
        "",
    ]
    if d.get("requirement") is not None:
        lines[-1:-1] = [f"Required: STI {d['requirement']:g} or more — "
                        f"{'met' if d['meets_requirement'] else 'NOT met'}"]
    dec = d["decay"]
    rows = []
    for k, fc in enumerate(bands(d["bands_hz"])):
        rows.append([
            fc, fmt(d["mti"][k]) if d["bands_used"][k] else "not used", fmt(d["speech_db"][k], ".1f"),
            fmt(d["noise_db"][k] if d["noise_db"] else None, ".1f"),
            fmt(dec["edt"][k]), fmt(dec["t20"][k]), fmt(dec["t30"][k]),
            fmt(dec["c50"][k], ".1f"), fmt(dec["c80"][k], ".1f"), fmt(dec["d50"][k]),
            fmt(dec["decay_range_db"][k], ".0f"),
        ])
    lines.append(table(rows, [h("band"), h("mti"), h("speech_db"), h("noise_db"), h("edt"), h("t20"), h("t30"),
                              h("c50"), h("c80"), h("d50"), h("decay_range_db")]))
    lines.append(f"Mid-frequency (mean of 500 Hz and 1 kHz, ISO 3382-1): T30 {fmt(dec['t30_mid'])} s, "
                 f"EDT {fmt(dec['edt_mid'])} s")
    lines.append("")
    lines.append("Modulation transfer m used for the index (rows: octave bands; columns: modulation frequency, Hz)")
    head = [h("band")] + [f"{f:g}" for f in d["modulation_hz"][0]]
    lines.append(table([[fc] + [f"{v:.2f}" for v in row] for fc, row in zip(bands(d["bands_hz"]), d["mtf"])],
                       head))
    if dec["notes"]:
        lines.append("")
        lines.append("Decay figures not computed:")
        lines.extend(f"  - {n}" for n in dec["notes"])
    if d["notes"]:
        lines.append("")
        lines.append("Levels used:")
        lines.extend(f"  - {n}" for n in d["notes"])
    lines += listed("Cautions:", d["cautions"])
    return "\n".join(lines)


@app.command("ir")
def ir_command(
    ir_file: Path = typer.Argument(..., help="Impulse response (WAV, FLAC or OGG); with --sweep, a recording of the "
                                   "played sweep.", show_default=False),
    noise: Optional[str] = typer.Option(None, "--noise", help=NOISE_HELP),
    speech_level: Optional[float] = typer.Option(None, "--speech-level", help=LEVEL_HELP, show_default=False),
    speech_levels: Optional[str] = typer.Option(None, "--speech-levels", help=LEVELS_HELP),
    noise_recording: Optional[Path] = typer.Option(None, "--noise-recording", help=NOISE_REC_HELP),
    noise_channel: Optional[int] = typer.Option(None, "--noise-channel", help=NOISE_CHANNEL_HELP),
    calibration_db: Optional[float] = typer.Option(None, "--calibration-db", help=CAL_HELP),
    calibrator: Optional[Path] = typer.Option(None, "--calibrator", help=CALIBRATOR_HELP),
    calibrator_level: Optional[float] = typer.Option(None, "--calibrator-level", help=CAL_LEVEL_HELP),
    calibrator_channel: Optional[int] = typer.Option(None, "--calibrator-channel", help=CAL_CHANNEL_HELP),
    talker: str = typer.Option(std.DEFAULT_TALKER, "--talker", help=TALKER_HELP, metavar="[male|female]"),
    no_auditory: bool = typer.Option(False, "--no-auditory-corrections", help=AUDITORY_HELP),
    channel: Optional[int] = typer.Option(None, "--channel", help=CHANNEL_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Optional[Path] = typer.Option(None, "--out", help=OUT_HELP),
    report: Optional[Path] = typer.Option(None, "--report", help=REPORT_HELP),
    require: Optional[float] = typer.Option(
        None, "--require", help="The STI the system must reach (set by the local code, e.g. 0.50): the result "
        "states whether it is met, judged on the unrounded value.", show_default=False),
    record: Optional[Path] = typer.Option(None, "--record", help=RECORD_HELP),
    record_field: Optional[List[str]] = typer.Option(None, "--record-field", help=RECORD_FIELD_HELP),
    sweep: Optional[Path] = typer.Option(None, "--sweep", help=SWEEP_HELP),
    sweep_rate: Optional[int] = typer.Option(None, "--sweep-rate", help=SWEEP_RATE_HELP),
    ears: bool = typer.Option(False, "--ears", help=EARS_HELP),
    audiogram: Optional[str] = typer.Option(None, "--audiogram", help=AUDIOGRAM_HELP),
    age: Optional[float] = typer.Option(None, "--age", help=AGE_HELP, show_default=False),
    sex: Optional[str] = typer.Option(None, "--sex", help=SEX_HELP, metavar="[f|m]"),
) -> None:
    """STI (IEC 60268-16 indirect method) and ISO 3382-1 decay figures from an impulse response."""
    from envpredict.indirect import sti_from_ir_file
    from envpredict.report import read_about

    about = read_about(record, record_field or ())
    listener_ = listener(audiogram, age, sex)
    check_outputs(out=out, report=report, inputs=[p for p in (ir_file, noise_recording, calibrator, sweep) if p])
    if ears:
        from envpredict.binaural import ir_ears_file as analyse
    else:
        analyse = sti_from_ir_file
    with Progress("analysing impulse response", None, quiet=as_json) as prog:
        result = analyse(ir_file, channel=channel, noise_db=noise, speech_level_dba=speech_level,
                         talker=talker, auditory=not no_auditory, progress=prog, speech_db=speech_levels,
                         noise_recording=noise_recording, noise_channel=noise_channel,
                         calibration_db=calibration_db, calibrator=calibrator,
                         calibrator_level=calibrator_level, calibrator_channel=calibrator_channel,
                         requirement=require, sweep=sweep, sweep_rate=sweep_rate, audiogram=listener_)
    d = result.to_dict()
    level = (result.left or result.right).speech_level_dba if ears else result.speech_level_dba
    d["inputs"] = {"impulse_response": str(ir_file), "channel": channel,
                   "noise": noise, "noise_recording": None if noise_recording is None else str(noise_recording),
                   "noise_channel": noise_channel,
                   "calibration": ("calibrator" if calibrator else "offset" if calibration_db is not None else None),
                   "calibrator": None if calibrator is None else str(calibrator),
                   "speech_level_dba": level, "speech_levels": speech_levels,
                   "talker": talker, "auditory_corrections": not no_auditory, "require": require,
                   "about": about}
    if listener_ is not None:
        d["inputs"].update({"audiogram": audiogram, "age": age, "sex": sex})
    if sweep is not None:
        d["inputs"].update({"sweep": str(sweep), "sweep_rate": sweep_rate})
    if ears:
        d["inputs"]["ears"] = True
    write_report_if(report, "ir", d, as_json=as_json,
                    title=f"STI {'of two ears ' if ears else 'and decay figures '}of {ir_file.name}")
    emit(d, lambda: render_ears_sti(d, str(ir_file)) if ears else render_ir(d, str(ir_file)), as_json, out)
