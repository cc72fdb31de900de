"""``envpredict inspect``: envelope, periodicity and fine structure of a recording."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from envpredict import standards as std

from ._app import app
from ._common import (
    CHANNEL_HELP, JSON_HELP, OUT_HELP, REPORT_HELP, Progress, bands, check_report, emit, fmt, h, listed, table,
    write_report_if,
)

START_HELP = "Start of the excerpt to inspect, seconds from the beginning of the file."
DURATION_HELP = ("Length of the excerpt, seconds (1 to 14400, i.e. 4 hours; the file is read in blocks, so long "
                 "recordings need little memory). Default: to the end of the file.")
F0_MIN_HELP = ("Lowest F0 searched, Hz. Periodicity spans about 50-500 Hz and adult voices are commonly "
               "100-300 Hz (common practice, no source), hence the 50-500 Hz default range.")
F0_MAX_HELP = "Highest F0 searched, Hz (see --f0-min)."


def _explain(key: str) -> str:
    from envpredict.labels import term

    return term(key).explain


def render_inspect(d: dict, source: str) -> str:
    """Readable text for an ``inspect`` result dictionary."""
    lines = [
        f"Recording: {source}  ({d['fs']} Hz, {d['duration_s']:.2f} s)",
        "",
        f"Voiced: {100 * d['voiced_fraction']:.0f} % of the time   median F0: {fmt(d['f0_median_hz'], '.1f')} Hz"
        f"   (10-90 %: {fmt(d['f0_p10_hz'], '.0f')}-{fmt(d['f0_p90_hz'], '.0f')} Hz; "
        f"searched {d['f0_search_hz'][0]:g}-{d['f0_search_hz'][1]:g} Hz)",
        f"Dominant envelope modulation: {fmt(d['modulation_peak_hz'], '.2f')} Hz "
        f"(resolution {fmt(d['modulation_resolution_hz'], '.3f')} Hz)",
        "",
        "Per octave band: level re the whole recording, modulation of the amplitude envelope below 50 Hz "
        "(envelope) and at 50-500 Hz (periodicity), carrier rate (fine structure above 500 Hz)",
    ]
    rows = []
    for k, fc in enumerate(bands(d["bands_hz"])):
        rows.append([fc, fmt(d["band_level_db"][k], ".1f"), fmt(d["envelope_modulation"][k]),
                     fmt(d["periodicity_modulation"][k]), fmt(d["carrier_hz"][k], ".0f"),
                     fmt(d["band_peak_hz"][k])])
    lines.append(table(rows, [h("band"), h("level_re_total"), h("envelope_modulation"), h("periodicity_modulation"),
                              h("carrier_hz"), h("band_peak_hz")]))
    lines.append("")
    lines.append("Envelope modulation spectra: modulation index per one-third-octave modulation band (columns: "
                 "its centre, Hz)")
    mb = d["modulation_bands_hz"]
    keep = [j for j, f in enumerate(mb) if j % 2 == 0]
    head = [h("band")] + [f"{mb[j]:g}" for j in keep]
    lines.append(table([[fc] + [fmt(d["modulation_spectra"][k][j]) for j in keep]
                        for k, fc in enumerate(bands(d["bands_hz"]))], head))
    lines.append("  " + h("modulation_index") + ": " + _explain("modulation_index"))
    lines.append("(every second modulation band shown; --json has all)")
    lines += listed("Cautions:", d["cautions"])
    return "\n".join(lines)


@app.command("inspect")
def inspect_command(
    audio_file: Path = typer.Argument(..., help="Recording to inspect (WAV, FLAC or OGG).", show_default=False),
    channel: Optional[int] = typer.Option(None, "--channel", help=CHANNEL_HELP),
    start: float = typer.Option(0.0, "--start", help=START_HELP),
    duration: Optional[float] = typer.Option(None, "--duration", help=DURATION_HELP),
    f0_min: float = typer.Option(std.F0_MIN_HZ, "--f0-min", help=F0_MIN_HELP),
    f0_max: float = typer.Option(std.F0_MAX_HZ, "--f0-max", help=F0_MAX_HELP),
    report: Optional[Path] = typer.Option(None, "--report", help=REPORT_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Optional[Path] = typer.Option(None, "--out", help=OUT_HELP),
) -> None:
    """Three timescales of a recording per octave band: slow envelope (< 50 Hz), periodicity
    (50-500 Hz: voicing and F0) and fine structure (> 500 Hz); voiced/unvoiced segmentation
    with an F0 track (YIN, searched 50-500 Hz by default: adult voices are commonly
    100-300 Hz), and the modulation spectrum of each band's envelope with its dominant rate
    (the syllable rate for running speech)."""
    from envpredict.timescales import inspect_file

    check_report(report)
    with Progress("inspecting recording (blocks)", None, quiet=as_json) as prog:
        result = inspect_file(audio_file, channel, start_s=start, duration_s=duration, f0_min_hz=f0_min,
                              f0_max_hz=f0_max, progress=prog)
    d = result.to_dict()
    d["inputs"] = {"recording": str(audio_file), "channel": channel, "start_s": start, "duration_s": duration,
                   "f0_min_hz": f0_min, "f0_max_hz": f0_max}
    write_report_if(report, "inspect", d, title=f"Three timescales of {audio_file.name}", as_json=as_json)
    emit(d, lambda: render_inspect(d, str(audio_file)), as_json, out)
