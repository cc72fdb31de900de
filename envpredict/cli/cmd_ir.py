"""``envpredict ir``: STI and decay figures from an impulse response."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from envpredict import standards as std

from ._app import app
from ._common import (
    CHANNEL_HELP, JSON_HELP, OUT_HELP, REPORT_HELP, Progress, check_outputs, emit, fmt, table, write_report_if,
)

NOISE_HELP = ("Background noise at the listener: seven octave-band levels in dB SPL, 125 Hz to 8 kHz, "
              "comma-separated, e.g. 48,45,42,40,36,32,28. Default: no noise.")
LEVEL_HELP = (f"A-weighted speech level at the listener, dB(A). Default {std.DEFAULT_SPEECH_LEVEL_DBA:g} "
              "(normal voice at 1 m).")
TALKER_HELP = "Speech spectrum and band weights: male or female (IEC 60268-16)."
SWEEP_HELP = ("The exponential sweep file that was played (from 'envpredict testsignal sweep', with its .json "
              "beside it): IR_FILE is then a recording of it, deconvolved first (see 'envpredict deconvolve').")
SWEEP_RATE_HELP = "With --sweep: the rate the sweep was played at, Hz, if not the rate in its file."
AUDITORY_HELP = ("Switch off auditory masking and the reception threshold (textbook form, for "
                 "comparison with published formulas; not for compliance work).")


def render_ir(d: dict, source: str) -> str:
    """Readable text for an ``ir`` result dictionary."""
    from envpredict.sti import format_index

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
    lines += [
        "",
        f"STI = {format_index(d['sti'])}   qualification band {d['rating']}   ({d['subjective']})",
        "",
    ]
    dec = d["decay"]
    rows = []
    for k, fc in enumerate(d["bands_hz"]):
        rows.append([
            f"{fc:g}", fmt(d["mti"][k]), fmt(d["speech_db"][k], ".1f"),
            fmt(d["noise_db"][k] if d["noise_db"] else None, ".1f"),
            fmt(dec["edt"][k]), fmt(dec["t20"][k]), fmt(dec["t30"][k]),
            fmt(dec["c50"][k], ".1f"), fmt(dec["c80"][k], ".1f"), fmt(dec["d50"][k]),
            fmt(dec["decay_range_db"][k], ".0f"),
        ])
    lines.append(table(rows, ["band Hz", "MTI", "speech dB", "noise dB", "EDT s", "T20 s", "T30 s",
                              "C50 dB", "C80 dB", "D50", "range dB"]))
    lines.append("")
    lines.append("MTF used for the index (rows: octave bands; columns: modulation frequency, Hz)")
    head = ["band Hz"] + [f"{f:g}" for f in d["modulation_hz"][0]]
    lines.append(table([[f"{fc:g}"] + [f"{v:.2f}" for v in row] for fc, row in zip(d["bands_hz"], d["mtf"])], head))
    if dec["notes"]:
        lines.append("")
        lines.append("Decay figures not computed:")
        lines.extend(f"  - {n}" for n in dec["notes"])
    lines.append("")
    lines.append("Cautions:")
    lines.extend(f"  - {c}" for c in d["cautions"])
    return "\n".join(lines)


@app.command("ir")
def ir_command(
    ir_file: Path = typer.Argument(..., help="Impulse response (WAV, FLAC or OGG); with --sweep, a recording of the "
                                   "played sweep.", show_default=False),
    noise: Optional[str] = typer.Option(None, "--noise", help=NOISE_HELP),
    speech_level: float = typer.Option(std.DEFAULT_SPEECH_LEVEL_DBA, "--speech-level", help=LEVEL_HELP),
    talker: str = typer.Option(std.DEFAULT_TALKER, "--talker", help=TALKER_HELP),
    no_auditory: bool = typer.Option(False, "--no-auditory-corrections", help=AUDITORY_HELP),
    channel: Optional[int] = typer.Option(None, "--channel", help=CHANNEL_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Optional[Path] = typer.Option(None, "--out", help=OUT_HELP),
    report: Optional[Path] = typer.Option(None, "--report", help=REPORT_HELP),
    sweep: Optional[Path] = typer.Option(None, "--sweep", help=SWEEP_HELP),
    sweep_rate: Optional[int] = typer.Option(None, "--sweep-rate", help=SWEEP_RATE_HELP),
) -> None:
    """STI (IEC 60268-16 indirect method) and ISO 3382-1 decay figures from an impulse response."""
    from envpredict.indirect import sti_from_ir_file

    check_outputs(out=out, report=report, inputs=[ir_file, sweep])
    with Progress("analysing impulse response", None, quiet=as_json) as prog:
        result = sti_from_ir_file(ir_file, channel=channel, noise_db=noise, speech_level_dba=speech_level,
                                  talker=talker, auditory=not no_auditory, progress=prog, sweep=sweep,
                                  sweep_rate=sweep_rate)
    d = result.to_dict()
    d["inputs"] = {"impulse_response": str(ir_file), "channel": channel,
                   "noise": noise,
                   "speech_level_dba": speech_level, "talker": talker, "auditory_corrections": not no_auditory}
    if sweep is not None:
        d["inputs"].update({"sweep": str(sweep), "sweep_rate": sweep_rate})
    write_report_if(report, "ir", d, as_json=as_json, title=f"STI and decay figures of {ir_file.name}")
    emit(d, lambda: render_ir(d, str(ir_file)), as_json, out)
