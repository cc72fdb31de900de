"""Direct STI method: ``envpredict testsignal stipa|full`` to generate the test signals,
``envpredict stipa`` and ``envpredict fullsti`` to analyse their recordings."""

from __future__ import annotations

from pathlib import Path
from typing import List, Optional

import typer

from envpredict import standards as std

from ._app import app
from ._common import JSON_HELP, OUT_HELP, REPORT_HELP, Progress, check_report, emit, fmt, table, write_report_if

testsignal_app = typer.Typer(
    help="Generate the test signals of the direct STI method (IEC 60268-16): STIPA or the full-STI set.",
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


def _write_wav(path: Path, x, fs: int) -> None:
    import io

    import soundfile as sf

    from envpredict.outputs import atomic_write_bytes

    buf = io.BytesIO()
    sf.write(buf, x, fs, format="WAV", subtype="PCM_24")
    atomic_write_bytes(path, buf.getvalue())


def _check_wav_path(out: Path) -> None:
    from envpredict.exceptions import InputError

    if out.suffix.lower() != ".wav":
        raise InputError(f"output '{out}' does not end in .wav", "give a file name ending in .wav")
    if out.exists() and out.is_dir():
        raise InputError(f"output '{out}' is a folder", "give a file name ending in .wav")
    parent = out.parent if str(out.parent) else Path(".")
    if not parent.exists():
        raise InputError(f"output folder '{parent}' does not exist", "create it first or choose another path")


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
    from envpredict.audio import rms_dbfs
    from envpredict.signals import check_generation, is_loopable, stipa_signal

    _check_wav_path(out_file)
    fs = check_generation(rate, seconds)
    x = stipa_signal(seconds, fs, seed=seed)
    _write_wav(out_file, x, fs)
    d = {
        "file": str(out_file), "signal": "STIPA", "fs": fs, "seconds": round(x.size / fs, 6), "seed": seed,
        "peak_dbfs": std.TEST_SIGNAL_PEAK_DBFS, "rms_dbfs": round(rms_dbfs(x), 2),
        "bands_hz": list(std.OCTAVE_BANDS_HZ),
        "modulation_hz": [list(p) for p in std.STIPA_MODULATION_HZ],
        "modulation_depth": std.STIPA_MODULATION_DEPTH,
        "band_levels_db": list(std.STIPA_BAND_LEVELS_DB),
        "loopable": is_loopable(x.size, fs, [f for p in std.STIPA_MODULATION_HZ for f in p]),
    }
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
    import json

    from envpredict.exceptions import InputError
    from envpredict.outputs import atomic_directory
    from envpredict.signals import check_generation, full_sti_plan, full_sti_signals

    if out_folder.exists() and (not out_folder.is_dir() or any(out_folder.iterdir())):
        raise InputError(f"'{out_folder}' already exists and is not an empty folder",
                         "give the name of a new folder (nothing is overwritten)")
    fs = check_generation(rate)
    plan = full_sti_plan()
    with Progress("writing full-STI signals", len(plan), quiet=as_json) as prog:
        with atomic_directory(out_folder) as tmp:
            for spec, x in full_sti_signals(fs, seed=seed):
                _write_wav(tmp / spec.filename, x, fs)
                prog.advance()
            listing = {
                "signal": "full STI", "fs": fs, "seed": seed, "modulation_depth": 1.0,
                "order": "ascending modulation frequency; every file has all seven octave bands "
                         "modulated in phase at its frequency; record each file once, in any order",
                "total_seconds": round(sum(s.seconds for s in plan), 3),
                "signals": [s.to_dict() for s in plan],
            }
            (tmp / "signals.json").write_text(json.dumps(listing, indent=2) + "\n")
    listing["folder"] = str(out_folder)

    def human() -> str:
        rows = [[str(s.index), f"{s.modulation_hz:g}", f"{s.seconds:.2f}", s.filename] for s in plan]
        return (f"wrote {len(plan)} full-STI test signals to {out_folder} ({fs} Hz, seed {seed}, "
                f"{listing['total_seconds']:.0f} s in all):\n"
                + table(rows, ["#", "F Hz", "seconds", "file"])
                + "\nRecord each signal completely; analyse with 'envpredict fullsti FOLDER_OF_RECORDINGS'.")

    emit(listing, human, as_json, None)


def _calibration(calibration_db, calibrator, calibrator_level, channel):
    from envpredict.audio import calibration_from_tone, check_calibration_db, load_audio
    from envpredict.exceptions import InputError

    if calibration_db is not None and calibrator is not None:
        raise InputError("both --calibration-db and --calibrator were given", "give one of them")
    if calibrator is not None:
        if calibrator_level is None:
            raise InputError("--calibrator needs --calibrator-level", "give the calibrator's level in dB SPL, e.g. 94")
        x, fs = load_audio(calibrator, channel, name="calibrator recording")
        return calibration_from_tone(x, fs, calibrator_level), "calibrator"
    if calibrator_level is not None:
        raise InputError("--calibrator-level was given without --calibrator", "give the calibrator recording too")
    cal = check_calibration_db(calibration_db)
    return cal, ("offset" if cal is not None else None)


def render_direct(d: dict) -> str:
    """Readable text for a direct-method result dictionary."""
    import numpy as np

    lines = [f"Method: {d['method']}"]
    for r in d["recordings"]:
        mod = f", {r['modulation_hz']:g} Hz signal" if "modulation_hz" in r else ""
        lines.append(f"  {r['name']}: {r['fs']} Hz, {r['duration_s']:.1f} s; test signal "
                     f"{r['signal_start_s']:.2f}-{r['signal_end_s']:.2f} s, analysed "
                     f"{r['analysed_start_s']:.2f}-{r['analysed_end_s']:.2f} s{mod}")
    cal = (f"calibrated ({d['inputs']['calibration_source']}, {d['calibration_db']:.1f} dB), level "
           f"{d['level_dba']:.1f} dB(A)" if d["calibrated"] else "NOT calibrated (no auditory corrections)")
    lines += [
        f"Talker weights: {d['talker']}   {cal}",
        "",
        f"STI = {d['sti']:.2f} ± {fmt(d['uncertainty'])}   qualification band {d['rating']}   ({d['subjective']})",
        f"(± is the standard uncertainty from {len(d['window_sti'])} analysis windows)",
        "",
    ]
    head = ["band Hz", "MTI", f"level {d['band_levels_unit']}", "noise depth"]
    nmod = len(d["mtf"][0])
    if nmod == 2:
        head += ["F1 Hz", "MTF1", "F2 Hz", "MTF2"]
    rows = []
    for k, fc in enumerate(d["bands_hz"]):
        nd = d["envelope_noise_depth"][k]
        if isinstance(nd, list):  # full STI: one per recording; show the median
            nd = float(np.median([v for v in nd if v is not None])) if any(v is not None for v in nd) else None
        row = [f"{fc:g}", fmt(d["mti"][k]), fmt(d["band_levels_db"][k], ".1f"), fmt(nd, ".3f")]
        if nmod == 2:
            for f, m in zip(d["modulation_hz"][k], d["mtf"][k]):
                row += [f"{f:g}", fmt(m)]
        rows.append(row)
    lines.append(table(rows, head))
    if nmod != 2:
        lines.append("")
        lines.append("MTF used for the index (rows: octave bands; columns: modulation frequency, Hz)")
        mh = ["band Hz"] + [f"{f:g}" for f in d["modulation_hz"][0]]
        lines.append(table([[f"{fc:g}"] + [f"{v:.2f}" for v in row] for fc, row in zip(d["bands_hz"], d["mtf"])], mh))
    lines.append("")
    lines.append("Cautions:")
    lines.extend(f"  - {c}" for c in d["cautions"])
    return "\n".join(lines)


def _common_checks(talker, noise):
    from envpredict.sti import check_talker, parse_noise_levels

    check_talker(talker)
    return parse_noise_levels(noise)


@app.command("stipa")
def stipa_command(
    recording: Path = typer.Argument(..., help="Recording of the STIPA test signal (WAV, FLAC or OGG).",
                                     show_default=False),
    calibration_db: Optional[float] = typer.Option(None, "--calibration-db", help=CAL_HELP),
    calibrator: Optional[Path] = typer.Option(None, "--calibrator", help=CALIBRATOR_HELP),
    calibrator_level: Optional[float] = typer.Option(None, "--calibrator-level", help=CAL_LEVEL_HELP),
    calibrator_channel: Optional[int] = typer.Option(None, "--calibrator-channel", help=CAL_CHANNEL_HELP),
    talker: str = typer.Option(std.DEFAULT_TALKER, "--talker", help=TALKER_HELP),
    noise: Optional[str] = typer.Option(None, "--noise", help=NOISE_HELP),
    channel: Optional[int] = typer.Option(None, "--channel", help=CHANNEL_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Optional[Path] = typer.Option(None, "--out", help=OUT_HELP),
    report: Optional[Path] = typer.Option(None, "--report", help=REPORT_HELP),
) -> None:
    """STI from a recording of the STIPA test signal (IEC 60268-16 direct method, Annex B).
    The file is read in blocks, so recordings of an hour or more (up to 2 h) are analysed in
    bounded memory."""
    from envpredict.direct import stipa_from_file

    noise_levels = _common_checks(talker, noise)
    check_report(report)
    cal, source = _calibration(calibration_db, calibrator, calibrator_level,
                               calibrator_channel if calibrator_channel is not None else channel)
    # steps: the blocks of both passes over the file, then the modulation depths
    with Progress("analysing STIPA recording", None, quiet=as_json) as prog:
        result = stipa_from_file(recording, channel, calibration_db=cal, noise_db=noise_levels, talker=talker,
                                 name=recording.name, progress=prog)
    d = result.to_dict()
    d["inputs"] = {"recording": str(recording), "channel": channel, "calibration_source": source,
                   "noise": noise, "talker": talker}
    write_report_if(report, "stipa", d, as_json=as_json, title=f"STIPA: {recording.name}")
    emit(d, lambda: render_direct(d), as_json, out)


def _recording_paths(paths: List[Path]) -> List[Path]:
    from envpredict.audio import AUDIO_SUFFIXES
    from envpredict.exceptions import InputError

    files: list[Path] = []
    for p in paths:
        if p.is_dir():
            found = sorted(q for q in p.iterdir() if q.suffix.lower() in AUDIO_SUFFIXES and not q.name.startswith("."))
            if not found:
                raise InputError(f"folder '{p}' holds no audio files", "give the folder with the 14 recordings")
            files.extend(found)
        else:
            files.append(p)
    return files


@app.command("fullsti")
def fullsti_command(
    recordings: List[Path] = typer.Argument(..., help="The 14 recordings of the full-STI signals, or a folder "
                                            "holding them (any order).", show_default=False),
    calibration_db: Optional[float] = typer.Option(None, "--calibration-db", help=CAL_HELP),
    calibrator: Optional[Path] = typer.Option(None, "--calibrator", help=CALIBRATOR_HELP),
    calibrator_level: Optional[float] = typer.Option(None, "--calibrator-level", help=CAL_LEVEL_HELP),
    calibrator_channel: Optional[int] = typer.Option(None, "--calibrator-channel", help=CAL_CHANNEL_HELP),
    talker: str = typer.Option(std.DEFAULT_TALKER, "--talker", help=TALKER_HELP),
    noise: Optional[str] = typer.Option(None, "--noise", help=NOISE_HELP),
    channel: Optional[int] = typer.Option(None, "--channel", help=CHANNEL_HELP),
    as_json: bool = typer.Option(False, "--json", help=JSON_HELP),
    out: Optional[Path] = typer.Option(None, "--out", help=OUT_HELP),
    report: Optional[Path] = typer.Option(None, "--report", help=REPORT_HELP),
) -> None:
    """Full STI from recordings of the 14 full-STI test signals (IEC 60268-16 direct method)."""
    from envpredict.direct import full_sti_from_files

    noise_levels = _common_checks(talker, noise)
    check_report(report)
    cal, source = _calibration(calibration_db, calibrator, calibrator_level,
                               calibrator_channel if calibrator_channel is not None else channel)
    files = _recording_paths(recordings)
    if len(files) != 14:
        from envpredict.exceptions import InputError

        raise InputError(f"{len(files)} recording(s) found; the full STI needs 14 (one per modulation frequency)",
                         "give the recordings of all 14 full-STI signals, or a folder holding only them")
    with Progress("analysing full-STI recordings", len(files) + 1, quiet=as_json) as prog:
        result = full_sti_from_files(files, channel, calibration_db=cal, noise_db=noise_levels, talker=talker,
                                     progress=prog)
    d = result.to_dict()
    d["inputs"] = {"recordings": [str(f) for f in files], "channel": channel, "calibration_source": source,
                   "noise": noise, "talker": talker}
    write_report_if(report, "stipa", d, as_json=as_json, title="Full STI from 14 recordings")
    emit(d, lambda: render_direct(d), as_json, out)
