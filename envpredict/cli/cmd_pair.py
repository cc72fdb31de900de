"""``envpredict pair``: STOI, ESTOI and speech-based STI of a clean/degraded pair."""

from __future__ import annotations

from pathlib import Path

import typer

from envpredict import standards as std

from ._app import app
from ._common import (
    AGE_HELP, AUDIOGRAM_HELP, JSON_HELP, OUT_HELP, REPORT_HELP, SEX_HELP, Progress, bands, check_outputs, emit, fmt, h,
    listed, listener, listener_lines, table, write_report_if,
)
from ._ears import render_ears_pair

PAIR_CAL_HELP = ("Calibration of the degraded file: the dB SPL that a full-scale RMS signal (0 dBFS RMS) in it "
                 "corresponds to. Needed with --audiogram or --age (audibility needs absolute levels).")

CHANNEL_HELP = ("Channel to use from any multi-channel file (0 = first); mono files use their only "
                "channel. Required when a file has several channels.")
NO_ALIGN_HELP = "Do not search for a delay: compare the files sample by sample (they are still trimmed)."
MAX_DELAY_HELP = "Largest delay between clean and degraded to search for, seconds."
NOISE_HELP = ("The noise alone as it is in the degraded file (same rate and length, processed the same way): "
              "adds the envelope-power index (sEPSM).")
INVERTED_HELP = ("The processing's output for the speech with the noise's polarity inverted (the degraded file "
                 "being its output for speech + noise): separates processed speech and noise by phase inversion "
                 "(output SNR per octave band) and adds the envelope-power index.")
EARS_PAIR_HELP = ("Two ears: the degraded file has two channels, channel 0 the left ear and channel 1 the right; "
                  "the clean file is mono (one reference for both ears) or two-channel (one per ear). Gives each "
                  "ear's indices and the better ear's: the larger STOI and ESTOI of the two ears, the "
                  "speech-based STI by the better ear per octave band. Not with the channel options.")
CHUNK_HELP = "Seconds of audio per processing chunk (memory only; the results do not change)."


def render_pair(d: dict, clean: str, degraded: str) -> str:
    """Readable text for a ``pair`` result dictionary."""
    al = d["alignment"]
    delay = f"{d['delay_ms']:.1f} ms" if al["enabled"] else "alignment off"
    if al.get("method") and al.get("confidence") is not None:
        delay += f" ({al['method']}, peak ratio {al['confidence']:.2f})"
    lines = [
        f"Clean:    {clean}  ({d['fs_clean']} Hz)",
        f"Degraded: {degraded}  ({d['fs_degraded']} Hz)",
        (f"Delay: {delay}   match correlation {al['match_correlation']:.2f}   "
         f"common part {d['duration_s']:.2f} s   "
         f"frames with speech {d['frames']['kept']}/{d['frames']['total']}"),
    ] + listener_lines(d) + [
        "",
        f"STOI  = {d['stoi']:.3f}",
        f"ESTOI = {d['estoi']:.3f}",
        f"speech-based STI = {fmt(d['ssti'], '.3f')} (normalised covariance), "
        f"{fmt(d.get('ssti_regression'), '.3f')} (envelope regression)",
    ]
    if d.get("sepsm"):
        sp = d["sepsm"]
        lines.append(f"envelope-power SNR_env = {sp['snr_env_db']:.2f} dB (sEPSM), "
                     f"{sp['percent_correct']:.1f} % correct for its sentence material (material-specific)")
    if d.get("separation"):
        sep = d["separation"]
        snrs = "  ".join(f"{fc}: {fmt(v, '.1f')}" for fc, v in zip(bands(sep["bands_hz"]), sep["output_snr_db"]))
        lines.append(f"output SNR (phase inversion) = {sep['broadband_snr_db']:.1f} dB; per octave band, dB: {snrs}")
    lines += [
        "",
        "One-third-octave bands, nominal frequency (mean per-band correlation; low values: envelope lost)",
    ]
    third = d["bands"]["third_octave"]
    from envpredict.labels import band_label

    rows = [[band_label(fc, unit=False), fmt(s, ".3f"), fmt(e, ".3f")]
            for fc, s, e in zip(third["bands_hz"], third["stoi"], third["estoi"])]
    lines.append(table(rows, [h("band"), h("stoi_band"), h("estoi_band")]))
    octv = d["bands"]["octave"]
    if octv is not None:
        lines.append("")
        lines.append("Octave bands, speech-based STI: normalised covariance (r) and envelope regression (m)")
        reg_snr = octv.get("regression_snr_db") or [None] * len(octv["bands_hz"])
        reg_ti = octv.get("regression_ti") or [None] * len(octv["bands_hz"])
        rows = [[fc + (" *" if p else ""), fmt(r, ".3f"), fmt(s, ".1f"), fmt(t, ".3f"), fmt(rs, ".1f"),
                 fmt(rt, ".3f")]
                for fc, r, s, t, p, rs, rt in zip(bands(octv["bands_hz"]), octv["correlation"], octv["apparent_snr_db"],
                                                  octv["ti"], octv["partial"], reg_snr, reg_ti)]
        lines.append(table(rows, [h("band"), h("correlation"), h("apparent_snr_db"), h("ti"), h("regression_snr_db"),
                                  h("regression_ti")]))
        if any(octv["partial"]):
            lines.append("  * band only partly below the Nyquist frequency")
    if d["worst_moments"]:
        lines.append("")
        lines.append("Moments with the lowest local ESTOI")
        rows = [[f"{w['start_s']:.0f}-{w['end_s']:.0f}", fmt(w["estoi"], ".3f"), fmt(w["stoi"], ".3f")]
                for w in d["worst_moments"]]
        lines.append(table(rows, [h("time_s"), h("estoi"), h("stoi")], notes=False))
    lines += listed("Notes:", d["notes"]) + listed("Cautions:", d.get("cautions"))
    return "\n".join(lines)


@app.command("pair")
def pair_command(
    clean: Path = typer.Argument(..., help="Clean reference (WAV, FLAC or OGG).", show_default=False),
    degraded: Path = typer.Argument(..., help="The same utterance after processing or transmission.",
                                    show_default=False),
    channel: int | None = typer.Option(None, "--channel", help=CHANNEL_HELP),
    clean_channel: int | None = typer.Option(None, "--clean-channel", help="Channel of the clean file only "
                                             "(overrides --channel), e.g. when both signals are in one file."),
    degraded_channel: int | None = typer.Option(None, "--degraded-channel", help="Channel of the degraded file "
                                                "only (overrides --channel)."),
    no_align: bool = typer.Option(False, "--no-align", help=NO_ALIGN_HELP),
    max_delay: float = typer.Option(std.PAIR_MAX_DELAY_S, "--max-delay", help=MAX_DELAY_HELP),
    noise: Path | None = typer.Option(None, "--noise", help=NOISE_HELP),
    inverted: Path | None = typer.Option(None, "--inverted", help=INVERTED_HELP),
    chunk: float = typer.Option(std.PAIR_CHUNK_S, "--chunk", help=CHUNK_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Path | None = typer.Option(None, "--out", help=OUT_HELP),
    report: Path | None = typer.Option(None, "--report", help=REPORT_HELP),
    ears: bool = typer.Option(False, "--ears", help=EARS_PAIR_HELP),
    audiogram: str | None = typer.Option(None, "--audiogram", help=AUDIOGRAM_HELP.replace(
        "Raises each octave band's reception threshold by the loss", "Adds a noise shaped like the listener's "
        "raised threshold to the degraded signal") + " Needs --calibration-db."),
    age: float | None = typer.Option(None, "--age", help=AGE_HELP, show_default=False),
    sex: str | None = typer.Option(None, "--sex", help=SEX_HELP, metavar="[f|m]"),
    calibration_db: float | None = typer.Option(None, "--calibration-db", help=PAIR_CAL_HELP),
) -> None:
    """STOI, ESTOI and speech-based STI of a clean/degraded pair, with delay alignment and per-band diagnostics."""
    from envpredict.pair import pair_from_files

    # before the (slower) audio work
    listener_ = listener(audiogram, age, sex)
    check_outputs(out=out, report=report, inputs=[clean, degraded] + [p for p in (noise, inverted) if p])
    if ears:
        from envpredict.binaural import pair_ears_file as analyse
    else:
        analyse = pair_from_files
    with Progress("analysing pair", None, quiet=as_json) as prog:
        result = analyse(clean, degraded, channel=channel, clean_channel=clean_channel,
                         degraded_channel=degraded_channel, align=not no_align, max_delay_s=max_delay,
                         chunk_s=chunk, progress=prog, noise_path=noise, inverted_path=inverted,
                         audiogram=listener_, calibration_db=calibration_db)
    d = result.to_dict()
    d["inputs"] = {"clean": str(clean), "degraded": str(degraded), "channel": channel,
                   "clean_channel": clean_channel, "degraded_channel": degraded_channel, "align": not no_align,
                   "max_delay_s": max_delay, "noise": None if noise is None else str(noise),
                   "inverted": None if inverted is None else str(inverted)}
    if listener_ is not None or calibration_db is not None:
        d["inputs"].update({"audiogram": audiogram, "age": age, "sex": sex, "calibration_db": calibration_db})
    if ears:
        d["inputs"]["ears"] = True
    write_report_if(report, "pair", d, as_json=as_json,
                    title=f"{degraded.name}{' (two ears)' if ears else ''} against {clean.name}")
    emit(d, lambda: render_ears_pair(d, str(clean), str(degraded)) if ears else render_pair(d, str(clean),
                                                                                             str(degraded)),
         as_json, out)
