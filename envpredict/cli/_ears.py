"""Text of a two-ear result (``--ears`` of ir, stipa and pair)."""

from __future__ import annotations

from ._common import bands, fmt, format_sti, h, listed, listener_lines, table

EARS_HELP = ("Two ears: the file is a two-channel recording, channel 0 the left ear and channel 1 the right. "
             "Gives the index of each ear and the better-ear combination per octave band (the larger MTI of "
             "the two ears in each band; van Wijngaarden & Drullman 2008). Not with --channel.")


def _ear_rows(d: dict, label: str) -> list[str]:
    b = d["binaural"]
    rows = []
    for k, fc in enumerate(bands(b["bands_hz"])):
        rows.append([fc, fmt(b["mti_left"][k], ".3f"), fmt(b["mti_right"][k], ".3f"),
                     fmt(b["mti_difference"][k], "+.3f"), b["better_ear"][k]])
    return [f"Per octave band ({label})",
            table(rows, [h("band"), h("left_ear"), h("right_ear"), h("ear_difference"), h("better_ear")])]


def _listener(d: dict) -> list[str]:
    """The listener's audiogram (one listener, both ears): from the better-ear result, else an ear's."""
    lines = listener_lines(d)
    for ear in d["ears"].values():
        if lines or not ear:
            break
        lines = listener_lines(ear)
    return lines


def _tail(d: dict) -> list[str]:
    return listed("Notes:", d["notes"]) + listed("Cautions:", d["cautions"])


def render_ears_sti(d: dict, source: str) -> str:
    """Readable text for a two-ear STI result (``ir --ears``, ``stipa --ears``)."""
    b = d["binaural"]
    lines = [f"Two ears: {source}   method: {d['method']}",
             f"Talker: {d['talker']}",
             *_listener(d),
             "",
             f"STI, better ear per band = {format_sti(d)}   qualification band {d['rating']}   ({d['subjective']})",
             f"STI of the left ear  = {fmt(b['sti_left'], '.2f')}",
             f"STI of the right ear = {fmt(b['sti_right'], '.2f')}",
             ""]
    if d.get("requirement") is not None:
        lines[-1:-1] = [f"Required: STI {d['requirement']:g} or more — "
                        f"{'met' if d['meets_requirement'] else 'NOT met'} (better ear)"]
    lines += _ear_rows(d, "MTI")
    dec = {ear: (r or {}).get("decay") for ear, r in d["ears"].items()}
    if any(dec.values()):
        lines.append("Mid-frequency (mean of 500 Hz and 1 kHz, ISO 3382-1), each ear: " + "; ".join(
            f"{ear} T30 {fmt(v['t30_mid'] if v else None)} s, EDT {fmt(v['edt_mid'] if v else None)} s"
            for ear, v in dec.items()))
    return "\n".join(lines + _tail(d))


def render_ears_pair(d: dict, clean: str, degraded: str) -> str:
    """Readable text for a two-ear pair result (``pair --ears``)."""
    b = d["binaural"]
    rows = [[name, fmt(b[f"{k}_left"], ".3f"), fmt(b[f"{k}_right"], ".3f"), fmt(d[k], ".3f")]
            for k, name in (("stoi", "STOI"), ("estoi", "ESTOI"), ("ssti", "speech-based STI"))]
    lines = [f"Clean:    {clean}",
             f"Degraded: {degraded} (two ears)",
             *_listener(d),
             "",
             table(rows, ["index", h("left_ear"), h("right_ear"), h("better_ear")]),
             "",
             *_ear_rows(d, "speech-based STI, TI")]
    return "\n".join(lines + _tail(d))
