"""``envpredict demo``: the main job on the bundled demo material."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from ._app import app
from ._common import JSON_HELP, Progress, bands, dumps, fmt, h, listed, table


def render_demo(out: dict) -> str:
    """Readable text for a ``demo`` result dictionary."""
    from envpredict.labels import rating_text
    from envpredict.sti import format_index

    sc, d, pair = out["scenario"], out["ir"], out["announcement"]
    folder = Path(out["folder"])
    dec = d["decay"]
    lines = [
        f"Demo site: {sc['title']}",
        f"  {sc['description']}",
        f"  Speech {sc['speech_level_dba']:.0f} dB(A) at the listener; site noise per octave band "
        f"{', '.join(f'{v:.0f}' for v in sc['noise_db'])} dB SPL (125 Hz - 8 kHz).",
        "",
        f"STI = {format_index(d['sti'])}, qualification band {rating_text(d['rating'], d['subjective'])}",
        # ISO 3382-1 single number (500 Hz and 1 kHz); a dash if either band is missing
        (f"Reverberation (mid frequencies, 500 Hz-1 kHz): T30 = {fmt(out['t30_mid_s'])} s, "
         f"EDT = {fmt(out['edt_mid_s'])} s"),
        "",
    ]
    rows = [[fc, fmt(d["mti"][k]), fmt(dec["t30"][k]), fmt(dec["c50"][k], ".1f")]
            for k, fc in enumerate(bands(d["bands_hz"]))]
    lines.append(table(rows, [h("band"), h("mti"), h("t30"), h("c50")]))
    lines += [
        "",
        "Announcement recorded in the hall vs its clean original:",
        f"  STOI = {fmt(pair.get('stoi'), '.3f')}   ESTOI = {fmt(pair.get('estoi'), '.3f')}   "
        f"speech-based STI = {fmt(pair.get('ssti'), '.2f')}   delay = {fmt(pair.get('delay_ms'), '.1f')} ms",
    ]
    lines += listed("Cautions:", out["cautions"])
    noise = ",".join(f"{v:g}" for v in sc["noise_db"])
    lines += [
        "",
        f"The demo material is in {folder}. Try next:",
        f"  envpredict ir {folder / sc['ir']} --noise {noise} --speech-level {sc['speech_level_dba']:g} "
        "--report hall_report",
        f"  envpredict batch {folder / 'corpus.csv'} --out demo_results.csv",
        "  envpredict compare demo_results.csv --by condition --baseline unprocessed --pair-on sentence "
        "--index stoi,ssti,sepsm_snr_env_db",
        f"  envpredict sweep {folder / sc['clean']} {folder / sc['noise']} --snr=-15:6:3",
        f"  envpredict design {folder / 'design_hall.json'} --report hall_design   (design-stage prediction)",
        "  envpredict check        (the reference-case library)",
    ]
    return "\n".join(lines)


@app.command("demo")
def demo_command(
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    copy_to: Optional[Path] = typer.Option(
        None, "--copy-to", help="Instead of rating the demo site, copy its material (impulse responses, "
        "recordings, the survey of three zones, a folder of eight clean sentences) into this new folder, to try "
        "the other commands on."),
) -> None:
    """Rate the bundled demo site (an invented ferry-terminal waiting hall): STI and decay
    figures from its impulse response and site noise, and the indices of a recorded
    announcement against its clean original."""
    from envpredict.demo import copy_demo, rate_demo_site

    if copy_to is not None:
        files = copy_demo(copy_to)
        d = {"folder": str(copy_to), "files": files, "cautions": [], "notes": [], "inputs": {"copy_to": str(copy_to)}}
        typer.echo(dumps(d) if as_json else
                   f"Copied {len(files)} demo files to {copy_to}. Try:\n"
                   f"  envpredict ir {copy_to / 'waiting_hall_ir.wav'} --noise 58,55,52,49,45,40,33 "
                   "--speech-level 68\n"
                   f"  envpredict survey {copy_to / 'survey' / 'survey.csv'} --out rows.csv "
                   "--require 'mean>=0.50' --require 'min>=0.45' --report survey-report\n"
                   f"  envpredict sweep {copy_to / 'sentences'} {copy_to / 'hall_noise.wav'} --snr=-12:0:3 "
                   "--segments 3   (a folder of sentences in the hall's noise)")
        return

    with Progress("rating the demo hall", None, quiet=as_json) as prog:
        d = rate_demo_site(progress=prog).to_dict()
    d["inputs"] = {}
    typer.echo(dumps(d) if as_json else render_demo(d))
