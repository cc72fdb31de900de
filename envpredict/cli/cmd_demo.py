"""``envpredict demo``: the main job on the bundled demo material."""

from __future__ import annotations

import typer

from ._app import app
from ._common import JSON_HELP, Progress, dumps, fmt, table


def load_scenario() -> tuple[dict, "object"]:
    import json

    from envpredict._data import demo_dir

    folder = demo_dir()
    with open(folder / "scenario.json", encoding="utf-8") as fh:
        return json.load(fh), folder


def _fmt_mid(v: float) -> str:
    return fmt(v if v == v else None)  # NaN (a band missing) prints as a dash


@app.command("demo")
def demo_command(as_json: bool = typer.Option(False, "--json", help=JSON_HELP)) -> None:
    """Rate the bundled demo site (an invented ferry-terminal waiting hall): STI and decay
    figures from its impulse response and site noise, and the indices of a recorded
    announcement against its clean original."""
    from envpredict.decay import mid_frequency
    from envpredict.indirect import sti_from_ir_file

    sc, folder = load_scenario()
    with Progress("rating the demo hall", None, quiet=as_json) as prog:
        res = sti_from_ir_file(folder / sc["ir"], noise_db=sc["noise_db"], speech_level_dba=sc["speech_level_dba"],
                               talker=sc["talker"], progress=prog)
    d = res.to_dict()
    out = {"scenario": sc["title"], "ir": d}

    from envpredict.pair import pair_from_files

    pair = pair_from_files(folder / sc["clean"], folder / sc["degraded"]).to_dict()
    out["announcement"] = pair

    if as_json:
        typer.echo(dumps(out))
        return

    dec = d["decay"]

    def mid(key: str) -> float:
        # ISO 3382-1 single number (500 Hz and 1 kHz); missing if either band is missing
        return mid_frequency(getattr(res.decay, key), res.decay.bands_hz)

    lines = [
        f"Demo site: {sc['title']}",
        f"  {sc['description']}",
        f"  Speech {sc['speech_level_dba']:.0f} dB(A) at the listener; site noise per octave band "
        f"{', '.join(f'{v:.0f}' for v in sc['noise_db'])} dB SPL (125 Hz - 8 kHz).",
        "",
        f"STI = {d['sti']:.2f}, qualification band {d['rating']} ({d['subjective']})",
        (f"Reverberation (mid frequencies, 500 Hz-1 kHz): T30 = {_fmt_mid(mid('t30'))} s, "
         f"EDT = {_fmt_mid(mid('edt'))} s"),
        "",
    ]
    rows = [[f"{fc:g}", fmt(d["mti"][k]), fmt(dec["t30"][k]), fmt(dec["c50"][k], ".1f")]
            for k, fc in enumerate(d["bands_hz"])]
    lines.append(table(rows, ["band Hz", "MTI", "T30 s", "C50 dB"]))
    lines += [
        "",
        "Announcement recorded in the hall vs its clean original:",
        f"  STOI = {fmt(pair.get('stoi'), '.3f')}   ESTOI = {fmt(pair.get('estoi'), '.3f')}   "
        f"speech-based STI = {fmt(pair.get('ssti'), '.2f')}   delay = {fmt(pair.get('delay_ms'), '.1f')} ms",
    ]
    lines += ["", "Cautions:"] + [f"  - {c}" for c in d["cautions"]]
    noise = ",".join(f"{v:g}" for v in sc["noise_db"])
    lines += [
        "",
        f"The demo material is in {folder}. Try next:",
        f"  envpredict ir {folder / sc['ir']} --noise {noise} --speech-level {sc['speech_level_dba']:g} "
        "--report hall_report",
        f"  envpredict batch {folder / 'corpus.csv'} --out demo_results.csv",
        "  envpredict compare demo_results.csv --by condition --baseline unprocessed --pair-on sentence",
        f"  envpredict sweep {folder / sc['clean']} {folder / sc['noise']} --snr=-15:6:3",
        "  envpredict check        (the reference-case library)",
    ]
    typer.echo("\n".join(lines))
