"""Impulse response by swept sine: ``envpredict testsignal sweep`` writes the sweep,
``envpredict deconvolve`` recovers the impulse response from its recording."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer

from envpredict import standards as std

from ._app import app
from ._common import CHANNEL_HELP, JSON_HELP, bands, emit, fmt, h, listed, table
from .cmd_direct import testsignal_app

SWEEP_RATE_HELP = ("The rate the sweep was played at, Hz, where it is not the rate in the sweep file (a player "
                   "that ran the file at another rate). Default: the sweep file's own rate; the recording is "
                   "analysed at its own rate either way.")


@testsignal_app.command("sweep")
def testsignal_sweep(
    out_file: Path = typer.Argument(..., help="WAV file to write (24-bit PCM); its parameters go to the .json "
                                    "file of the same name beside it.", show_default=False),
    f1: Optional[float] = typer.Option(None, "--f1", help="Start frequency, Hz (default 40; 62 Hz or lower: the "
                                                            "125 Hz band)."),
    f2: Optional[float] = typer.Option(None, "--f2", help="End frequency, Hz (default 20000; 12.7 kHz or higher: the "
                                                            "8 kHz band; below 0.95 x the Nyquist frequency)."),
    seconds: Optional[float] = typer.Option(None, "--seconds", help="Length of one sweep, s (default 15). Longer "
                                            "sweeps keep a longer impulse response (its length is printed)."),
    fade_in: Optional[float] = typer.Option(None, "--fade-in", help="Fade-in, s (default 0.1)."),
    fade_out: Optional[float] = typer.Option(None, "--fade-out", help="Fade-out, s (default 0.02)."),
    repeats: Optional[int] = typer.Option(None, "--repeats", help="Number of sweeps, averaged by the "
                                          "deconvolution (default 2)."),
    tail: Optional[float] = typer.Option(None, "--tail", help="Silence after each sweep, s (default 3; longer than "
                                         "the room's reverberation time)."),
    rate: int = typer.Option(std.TEST_SIGNAL_RATE_HZ, "--rate", help="Sample rate, Hz (above 22627 Hz)."),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
) -> None:
    """Write an exponential sine sweep (Farina 2000) for measuring an impulse response, with its
    parameters beside it; peak -3 dBFS."""
    from envpredict.sinesweep import sweep_spec, write_sweep_signal

    given = {"f1_hz": f1, "f2_hz": f2, "seconds": seconds, "fade_in_s": fade_in, "fade_out_s": fade_out,
             "repeats": repeats, "tail_s": tail}
    spec = sweep_spec(rate, **{k: v for k, v in given.items() if v is not None})  # the API's defaults otherwise
    d = write_sweep_signal(out_file, spec).to_dict()
    d["inputs"] = {"out_file": str(out_file), "f1": f1, "f2": f2, "seconds": seconds, "fade_in": fade_in,
                   "fade_out": fade_out, "repeats": repeats, "tail": tail, "rate": rate}
    emit(d, lambda: (
        f"wrote {out_file} and {d['parameter_file']}: {d['repeats']} exponential sweep(s) of {d['seconds']:g} s, "
        f"{d['f1_hz']:g}-{d['f2_hz']:g} Hz, each followed by {d['tail_s']:g} s of silence ({d['total_seconds']:g} s "
        f"at {d['fs']} Hz), peak {d['peak_dbfs']:g} dBFS.\n"
        f"The deconvolution keeps {d['ir_seconds']:.2f} s of impulse response. Play the file through the system, "
        "record at each position from before the playback until after it, and run "
        f"'envpredict deconvolve RECORDING.wav --sweep {out_file} --out IR.wav' or "
        f"'envpredict ir RECORDING.wav --sweep {out_file}'."), as_json, None)


def render_deconvolution(d: dict, source: str) -> str:
    """Readable text for a ``deconvolve`` result dictionary."""
    lines = [
        f"Sweep recording: {source}  ({d['fs']} Hz)",
        f"Sweep found at {d['offset_s']:.3f} s (correlation {d['correlation']:.2f}); "
        f"{d['repeats_used']} of {d['repeats_played']} repeat(s) averaged",
        f"Impulse response: {d['ir_seconds']:.2f} s" + (f", written to {d['ir_file']}" if d["ir_file"] else ""),
        "",
    ]
    rows = [[fc, fmt(p, ".1f"), fmt(q, ".1f")]
            for fc, p, q in zip(bands(d["bands_hz"]), d["peak_to_noise_db"], d["distortion_db"])]
    lines.append(table(rows, [h("band"), h("peak_to_noise_db"), h("distortion_db")]))
    lines.append(f"(distortion: harmonics {d['harmonic_orders'][0]}-{d['harmonic_orders'][1]} re the linear "
                 "response, cut away; — where the response shows no noise floor)")
    lines += listed("Cautions:", d["cautions"]) + listed("Notes:", d["notes"])
    return "\n".join(lines)


@app.command("deconvolve")
def deconvolve_command(
    recording: Path = typer.Argument(..., help="Recording of the played sweep (WAV, FLAC or OGG), at the "
                                     "recorder's own rate.", show_default=False),
    sweep: Path = typer.Option(..., "--sweep", help="The sweep file that was played (with its .json beside it).",
                               show_default=False),
    out: Path = typer.Option(..., "--out", help="WAV file for the impulse response (32-bit float).",
                             show_default=False),
    sweep_rate: Optional[int] = typer.Option(None, "--sweep-rate", help=SWEEP_RATE_HELP),
    channel: Optional[int] = typer.Option(None, "--channel", help=CHANNEL_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
) -> None:
    """Recover the impulse response from a recording of an exponential sweep: inverse filter,
    harmonic distortion cut away, repeats averaged; prints the peak-to-noise ratio per octave band."""
    from envpredict.deconvolve import deconvolve_sweep_file

    d = deconvolve_sweep_file(recording, sweep, out=out, channel=channel, sweep_rate=sweep_rate).to_dict()
    d["inputs"] = {"recording": str(recording), "sweep": str(sweep), "sweep_rate": sweep_rate, "channel": channel,
                   "out": str(out)}
    emit(d, lambda: render_deconvolution(d, str(recording)), as_json, None)
