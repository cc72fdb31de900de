"""``envpredict design``: the STI of a room and its loudspeakers predicted from a scene file."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from envpredict import standards as std

from ._app import app
from ._common import (
    AGE_HELP, AUDIOGRAM_HELP, JSON_HELP, OUT_HELP, REPORT_HELP, SEX_HELP, Progress, check_outputs, emit, fmt, h,
    listener, listener_lines, table, write_report_if,
)

SCENE_HELP = ("Scene file (JSON, or TOML with the suffix .toml): room (volume_m3 and/or dimensions_m; rt_s or "
              "surfaces), noise_db, sources (position_m, level_1m_db or level_1m_dba, q, aim_m, delay_ms), "
              "listeners and/or grid. See the README's design quick start.")
TALKER_HELP = "Band weights, and the speech spectrum of sources given in dB(A): male or female (IEC 60268-16)."
AUDITORY_HELP = ("Switch off auditory masking and the reception threshold (textbook form, for comparison with "
                 "published formulas; not for compliance work).")
ENGINE_HELP = ("statistical (default), or image: rate the listeners by the indirect method on image-source impulse "
               "responses of the rectangular room (pyroomacoustics, pip install '.[rooms]'; needs room.dimensions_m), "
               "with the statistical STI beside each. The grid stays statistical.")
REQUIRE_HELP = (f"The STI the system must reach (set by the local code). Default {std.VOICE_ALARM_TARGET_STI:.2f}, "
                "the value commonly required of voice-alarm systems (with a caution).")


def render_design(d: dict, source: str) -> str:
    """Readable text for a ``design`` result dictionary."""
    from envpredict.sti import format_index

    req = d["requirement"]
    room = d["room"]
    lines = [
        f"Design prediction: {d['title'] or source}",
        f"Room: {room['volume_m3']:g} m3, RT {', '.join(f'{v:g}' for v in room['rt_s'])} s "
        f"(125 Hz - 8 kHz, {room['rt_from']}); {len(d['sources'])} loudspeaker(s); talker {d['talker']}; "
        f"auditory corrections {'on' if d['auditory_corrections'] else 'off'}",
        f"Requirement: STI {req:g}{'' if d['requirement_given'] else ' (default)'}   engine: {d['engine']}",
    ] + listener_lines(d) + [
        "",
    ]
    if d["listeners"]:
        rows = []
        for li in d["listeners"]:
            late = li["late_arrival"]
            rows.append([li["name"], ", ".join(f"{v:g}" for v in li["position_m"]), format_index(li["sti"], req),
                         li["rating"], "yes" if li["meets_requirement"] else "NO", fmt(li["speech_level_dba"], ".1f"),
                         li["dominant_source"],
                         _late(late)])
        head = [h("listener"), h("position_m"), h("sti"), h("rating"), f"meets ({req:g})", h("speech_level_dba"),
                h("dominant_source"), h("late_arrival")]
        if d.get("engine") == "image":
            head[2] = "STI (image engine)"
            head.insert(3, h("statistical_sti"))
            for row, li in zip(rows, d["listeners"]):
                row.insert(3, fmt(li.get("statistical_sti")))
        lines.append(table(rows, head))
        lines.append("")
    g = d.get("grid")
    if g:
        lines += [
            f"Grid: {len(g['x_m'])} x {len(g['y_m'])} points at z = {g['z_m']:g} m (step {g['step_m']:g} m)",
            f"  at or above {req:g}: {100 * g['share_meeting_requirement']:.1f} % of the points",
            f"  minimum STI {format_index(g['min_sti'], req)} at x = {g['min_at_m'][0]:g}, y = {g['min_at_m'][1]:g} m;"
            f" maximum {g['max_sti']:.2f}; mean {g['mean_sti']:.2f}",
            "",
        ]
    lines.append("Cautions:")
    lines.extend(f"  - {c}" for c in d["cautions"])
    return "\n".join(lines)


def _late(late: dict | None) -> str:
    if late is None:
        return "—"
    return f"{late['source']} {late['delay_ms']:.0f} ms {late['level_db']:+.1f} dB" + (" ECHO" if late["echo"] else "")


@app.command("design")
def design_command(
    scene: Path = typer.Argument(..., help=SCENE_HELP, show_default=False),
    talker: str = typer.Option(std.DEFAULT_TALKER, "--talker", help=TALKER_HELP),
    no_auditory: bool = typer.Option(False, "--no-auditory-corrections", help=AUDITORY_HELP),
    require: Optional[float] = typer.Option(None, "--require", help=REQUIRE_HELP, show_default=False),
    engine: str = typer.Option("statistical", "--engine", help=ENGINE_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Optional[Path] = typer.Option(None, "--out", help=OUT_HELP),
    report: Optional[Path] = typer.Option(None, "--report", help=REPORT_HELP),
    audiogram: Optional[str] = typer.Option(None, "--audiogram", help=AUDIOGRAM_HELP),
    age: Optional[float] = typer.Option(None, "--age", help=AGE_HELP, show_default=False),
    sex: Optional[str] = typer.Option(None, "--sex", help=SEX_HELP, metavar="[f|m]"),
) -> None:
    """Predict the STI of a room and its loudspeakers before anything is built (statistical model:
    direct sound + diffuse reverberation per loudspeaker), at listener positions and over a grid."""
    from envpredict.design import predict_design_file

    listener_ = listener(audiogram, age, sex)
    check_outputs(out=out, report=report, inputs=[scene])
    with Progress("predicting the grid", None, quiet=as_json) as prog:
        result = predict_design_file(scene, talker=talker, auditory=not no_auditory, requirement=require,
                                     progress=prog, engine=engine, audiogram=listener_)
    d = result.to_dict()
    d["inputs"] = {"scene": str(scene), "talker": talker, "auditory_corrections": not no_auditory,
                   "require": require, "engine": engine}
    if listener_ is not None:
        d["inputs"].update({"audiogram": audiogram, "age": age, "sex": sex})
    write_report_if(report, "design", d, as_json=as_json, title=f"Design prediction: {d['title'] or scene.name}")
    emit(d, lambda: render_design(d, str(scene)), as_json, out)
