"""The error contract across commands: one line `error: WHAT — FIX` on stderr, exit code 2 for
bad input or usage (1 for a computation that cannot be trusted), no traceback, and no output
file left behind. One row per way of being wrong."""

import json

import numpy as np
import pytest
import soundfile as sf

from cli_for_tests import run_cli
from signals_for_tests import harmonic_syllables, noise_decay

FS_IR = 48000
FS_SP = 16000


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("bad")
    w = lambda name, x, fs, st="PCM_24": (sf.write(d / name, x, fs, subtype=st), d / name)[1]  # noqa: E731
    f = {}
    f["ir"] = w("ir.wav", noise_decay(0.8, seconds=2.0, seed=1, floor_db=-70), FS_IR)
    f["clean"] = w("clean.wav", harmonic_syllables(), FS_SP)
    f["other"] = w("other.wav", 0.1 * np.random.default_rng(5).standard_normal(3 * FS_SP), FS_SP)
    f["empty"] = d / "empty.wav"
    f["empty"].write_bytes(b"")
    f["text"] = d / "notes.wav"
    f["text"].write_text("not audio at all\n" * 50)
    f["truncated"] = d / "truncated.wav"
    f["truncated"].write_bytes(f["ir"].read_bytes()[:40])
    f["silence"] = w("silence.wav", np.zeros(3 * FS_SP), FS_SP)
    f["dc"] = w("dc.wav", np.full(2 * FS_IR, 0.25), FS_IR)
    nan = harmonic_syllables()
    nan[100] = np.nan
    f["nan"] = w("nan.wav", nan, FS_SP, "FLOAT")
    f["clipped"] = w("clipped.wav", np.clip(6 * harmonic_syllables(fs=48000), -1, 1), 48000)
    f["short_ir"] = w("short_ir.wav", noise_decay(0.1, seconds=0.3), FS_IR)
    f["click"] = w("click.wav", np.r_[0.5, np.zeros(200)], FS_IR, "FLOAT")  # a 4 ms file
    f["short_pair"] = w("short.wav", harmonic_syllables(seconds=0.2), FS_SP)
    f["low_rate"] = w("low_rate.wav", harmonic_syllables(fs=8000), 8000)
    f["stereo"] = w("stereo.wav", np.stack([noise_decay(0.8, seconds=2.0, seed=s) for s in (1, 2)], axis=1), FS_IR)
    f["manifest_bad"] = d / "manifest.csv"
    f["manifest_bad"].write_text("speaker,condition\nA,1\n")
    f["scores_bad"] = d / "scores.csv"
    f["scores_bad"].write_text("stoi,correct,trials\n0.5,three,10\n0.6,5,10\n0.7,8,10\n")
    f["map_bad"] = d / "map.json"
    f["map_bad"].write_text("{not json")
    f["results"] = d / "results.csv"
    f["results"].write_text("condition,item,stoi\nA,1,0.5\nB,1,0.6\n")
    f["dir"] = d
    return f


# (name, argv builder, expected exit code, text the one-line message must contain)
CASES = [
    ("missing file", lambda f, o: ["ir", f["dir"] / "nope.wav", "--out", o], 2, "does not exist"),
    ("empty file", lambda f, o: ["pair", f["empty"], f["clean"], "--out", o], 2, "empty"),
    ("directory", lambda f, o: ["stipa", f["dir"], "--out", o], 2, "folder"),
    ("not audio", lambda f, o: ["inspect", f["text"], "--out", o], 2, "not a readable audio file"),
    ("truncated header", lambda f, o: ["ir", f["truncated"], "--out", o], 2, "audio"),
    ("silent reference", lambda f, o: ["pair", f["silence"], f["clean"], "--out", o], 2, "silent"),
    ("DC only", lambda f, o: ["ir", f["dc"], "--out", o], 2, "constant"),
    ("NaN samples", lambda f, o: ["pair", f["clean"], f["nan"], "--out", o], 2, "NaN"),
    ("clipped", lambda f, o: ["stipa", f["clipped"], "--out", o], 2, "clipped"),
    ("IR too short", lambda f, o: ["ir", f["short_ir"], "--out", o], 2, "0.63 Hz"),
    ("IR of a few ms", lambda f, o: ["ir", f["click"], "--out", o], 2, "0.004 s long; at least 0.79 s"),
    ("pair too short", lambda f, o: ["pair", f["short_pair"], f["short_pair"], "--out", o], 2, "short"),
    ("too long for the excerpt limit", lambda f, o: ["inspect", f["clean"], "--duration", "100000", "--out", o], 2,
     "duration"),
    ("rate too low for octaves", lambda f, o: ["ir", f["clean"], "--out", o], 2, "8 kHz octave band"),
    ("rate too low for pair", lambda f, o: ["pair", f["low_rate"], f["low_rate"], "--out", o], 2, "Hz"),
    ("stereo where mono is needed", lambda f, o: ["ir", f["stereo"], "--out", o], 2, "--channel"),
    ("mismatched pair", lambda f, o: ["pair", f["clean"], f["other"], "--out", o], 2, "match"),
    ("malformed manifest", lambda f, o: ["batch", f["manifest_bad"], "--out", o], 2, "manifest"),
    ("malformed scores", lambda f, o: ["fitmap", f["scores_bad"], "--index", "stoi", "--out", o], 2, "three"),
    ("malformed map", lambda f, o: ["predict", f["results"], "--map", f["map_bad"], "--out", o], 2, "map"),
    ("noise option out of range", lambda f, o: ["ir", f["ir"], "--noise", "40,40,40,40,40,40,900", "--out", o], 2,
     "noise level"),
    ("speech level out of range", lambda f, o: ["ir", f["ir"], "--speech-level", "500", "--out", o], 2,
     "implausible"),
    ("unknown talker", lambda f, o: ["ir", f["ir"], "--talker", "robot", "--out", o], 2, "unknown talker"),
    ("bad SNR range", lambda f, o: ["sweep", f["clean"], f["other"], "--snr", "10:x:2", "--out", o], 2, "snr"),
    ("unknown option", lambda f, o: ["pair", f["clean"], f["clean"], "--frobnicate", "--out", o], 2,
     "No such option"),
    ("unknown compare column", lambda f, o: ["compare", f["results"], "--by", "nosuch", "--baseline", "A",
                                             "--out", o], 2, "nosuch"),
]


@pytest.mark.parametrize("name,argv,code,text", CASES, ids=[c[0] for c in CASES])
def test_bad_input_contract(files, tmp_path, capsys, name, argv, code, text):
    out = tmp_path / "result.out"
    got, stdout, stderr = run_cli(argv(files, out), capsys)
    lines = [ln for ln in stderr.strip().splitlines() if ln.strip()]
    assert got == code, (name, stderr)
    assert len(lines) == 1 and lines[0].startswith("error: "), (name, stderr)
    assert " — " in lines[0], "message has the form WHAT — FIX"
    assert text.lower() in lines[0].lower(), (name, lines[0])
    assert "Traceback" not in stdout + stderr
    assert not out.exists(), "no partial output file"
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")], "no temporary leftovers"


def test_debug_flag_shows_traceback(files, capsys):
    from envpredict.exceptions import InputError

    with pytest.raises(InputError):
        from envpredict.cli import main

        main(["--debug", "ir", str(files["dir"] / "nope.wav")])


def test_json_output_is_valid_everywhere(files, capsys):
    # every command that succeeds with --json prints exactly one JSON object
    code, out, _ = run_cli(["ir", files["ir"], "--json"], capsys)
    assert code == 0 and isinstance(json.loads(out), dict)
    code, out, _ = run_cli(["pair", files["clean"], files["clean"], "--json"], capsys)
    assert code == 0 and json.loads(out)["stoi"] == pytest.approx(1.0, abs=1e-6)


def test_ctrl_c_exits_130_with_one_line(tmp_path):
    """SIGINT in the middle of a computation: exit 130 and one line 'error: interrupted — ...'
    on stderr (typer turns Ctrl-C into an exit code that click returns, not raises)."""
    import signal
    import subprocess
    import sys
    import time

    from envpredict._data import demo_dir

    d = demo_dir()
    cmd = [sys.executable, "-c", "from envpredict.cli import main; main()", "sweep",
           str(d / "announcement_clean.wav"), str(d / "hall_noise.wav"), "--snr=-30:30:1"]
    p = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=tmp_path)
    time.sleep(3.0)  # well into the sweep (imports take about 1 s)
    p.send_signal(signal.SIGINT)
    out, err = p.communicate(timeout=60)
    lines = [ln for ln in err.splitlines() if ln.startswith("error:")]
    assert p.returncode == 130, err
    assert lines and lines[-1].startswith("error: interrupted — "), err
    assert "Traceback" not in err and out == ""


def _hostile_inputs(folder):
    """Files of the cases below: a mapping with absurd parameters, nesting 100 000 deep, a
    5000-digit number; pilot scores with an index value of 1e300; a results table."""
    import json

    json.dump({"format": "envpredict-score-mapping", "version": 1, "index": "stoi", "shape": "logistic",
               "params": {"a": 1e308, "b": 1e308}, "guess": 0, "lapse": 0}, open(folder / "huge.json", "w"))
    (folder / "deep.json").write_text("[" * 100000 + "]" * 100000)
    (folder / "digits.json").write_text('{"a": ' + "9" * 5000 + "}")
    (folder / "scores.csv").write_text("stoi,correct,trials\n1e300,5,10\n0.5,3,10\n0.6,8,10\n")
    (folder / "r.csv").write_text("condition,stoi\nx,0.5\n")
    (folder / "m.csv").write_text("ir,position\nhall.wav,front\n")


@pytest.mark.parametrize("args, message", [
    (["testsignal", "stipa", "x.wav", "--seconds", "15", "--seed", "-1"], "seed -1 is not a whole number from 0"),
    (["predict", "r.csv", "--map", "huge.json"], "'a' = 1e+308 is not a finite number"),
    (["predict", "r.csv", "--map", "deep.json"], "is not a mapping file"),
    (["predict", "r.csv", "--map", "digits.json"], "is not a mapping file"),
    (["fitmap", "scores.csv", "--index", "stoi"], "index value of row 1 is not a finite number"),
    (["batch", "m.csv", "--out", "o.csv", "--scheduler", "ucx://127.0.0.1:1"], "is not a tcp:// or tls:// address"),
])
def test_hostile_values_are_refused_in_one_line(args, message, tmp_path, capsys, monkeypatch):
    # each was an "internal failure" (a traceback-class error) or, for the huge mapping, a
    # silent 100 % prediction
    _hostile_inputs(tmp_path)
    monkeypatch.chdir(tmp_path)
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    code, out, err = run_cli(args, capsys)
    assert code == 2, err
    assert err.startswith("error: ") and message in err and err.count("\n") == 1, err
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir()} == before


def test_a_file_name_that_is_not_utf8_is_read(tmp_path, capsys):
    # Linux file names are bytes; b"hall\xe9.wav" (Latin-1) is not UTF-8. Python keeps the
    # byte as a surrogate; the file must open, and the text, JSON and report must be written
    import os

    name = os.fsdecode(b"hall\xe9.wav")
    with open(os.fsencode(tmp_path / name), "wb") as f:
        sf.write(f, noise_decay(0.6, seed=3), 48000, format="WAV", subtype="FLOAT")
    code, out, err = run_cli(["ir", tmp_path / name], capsys)
    assert code == 0, err
    code, out, err = run_cli(["ir", tmp_path / name, "--json", "--report", tmp_path / "rep"], capsys)
    assert code == 0, err
    assert json.loads(out)["inputs"]["impulse_response"] == str(tmp_path / name)
    assert (tmp_path / "rep" / "report.html").read_bytes().count(b"hall\\udce9.wav") >= 1


def test_a_pair_after_30_s_of_digital_silence_and_a_pair_with_dc_are_aligned(tmp_path):
    # valid data that was refused or misaligned: the same demo pair (i) preceded by 30 s of
    # digital silence in both files, (ii) with a DC offset of 0.05 on the degraded file,
    # must give the delay and the STOI of the plain pair (the delay search uses the
    # loudest stretch, without DC)
    import envpredict
    from envpredict._data import demo_dir

    c, fs = sf.read(demo_dir() / "announcement_clean.wav")
    d, _ = sf.read(demo_dir() / "announcement_in_hall.wav")
    plain = envpredict.pair_indices(c, d, fs)
    silence = np.zeros(30 * fs)
    sf.write(tmp_path / "c.wav", np.concatenate([silence, c]), fs, subtype="FLOAT")
    sf.write(tmp_path / "d.wav", np.concatenate([silence, d]), fs, subtype="FLOAT")
    assert envpredict.pair_from_files(tmp_path / "c.wav", tmp_path / "c.wav").delay_ms == 0.0
    late = envpredict.pair_from_files(tmp_path / "c.wav", tmp_path / "d.wav")
    assert late.delay_samples == plain.delay_samples and abs(late.stoi - plain.stoi) < 0.005
    offset = envpredict.pair_indices(c, d + 0.05, fs)
    assert offset.delay_samples == plain.delay_samples
    assert abs(offset.match_correlation - plain.match_correlation) < 1e-3


# --- floating-point WAVs peaking above 1.0 are valid data, not clipping ------------------------
# A FLOAT or DOUBLE file has no full scale; only flat tops at the peak mean clipping. Integer
# (PCM) files keep the full-scale rule. External check: every index here is scale-invariant
# (STI, STOI and the decay figures depend on ratios of intensities), so a file and the same
# samples scaled by a power of two (exact in floating point) give the same numbers; band
# levels move by exactly 20 log10 of the gain.

def _flat(d, pre=""):
    if isinstance(d, dict):
        return {k: v for key, val in d.items() for k, v in _flat(val, f"{pre}/{key}").items()}
    if isinstance(d, list):
        return {k: v for i, val in enumerate(d) for k, v in _flat(val, f"{pre}[{i}]").items()}
    return {pre: d}


def _unit(x):
    """Peak exactly 1.0 and every sample representable in float32 (so that scaling by a
    power of two and storing as FLOAT or DOUBLE is exact)."""
    return (x / np.abs(x).max()).astype(np.float32).astype(np.float64)


@pytest.fixture(scope="module")
def loud(tmp_path_factory):
    from scipy.signal import butter, fftconvolve, sosfilt

    from envpredict.signals import stipa_signal

    d = tmp_path_factory.mktemp("loud")
    ir = _unit(noise_decay(0.8, seconds=2.0, seed=1, floor_db=-70))
    clean = stipa_signal(20, FS_IR, seed=4)
    rec = _unit(fftconvolve(clean, ir[:FS_IR])[: clean.size])
    f = {"dir": d, "ir": ir, "rec": rec, "clean": d / "clean.wav"}
    sf.write(f["clean"], clean, FS_IR, subtype="FLOAT")
    # a smooth (low-passed) response, driven into a limiter: flat tops at its peak
    smooth = _unit(sosfilt(butter(4, 2000, fs=FS_IR, output="sos"), ir))
    f["ir_flat"] = np.clip(3.0 * smooth, -1.5, 1.5)
    f["rec_flat"] = np.clip(3.0 * rec, -1.5, 1.5)
    return f


def _loud_file(f, kind, peak, subtype):
    p = f["dir"] / f"{kind}_{peak:g}_{subtype}.wav"
    if not p.exists():
        sf.write(p, f[kind] * peak, FS_IR, subtype=subtype)
    return p


LOUD_COMMANDS = {
    "ir": lambda f, p, s: ["ir", _loud_file(f, "ir", p, s)],
    "stipa": lambda f, p, s: ["stipa", _loud_file(f, "rec", p, s)],
    "pair": lambda f, p, s: ["pair", f["clean"], _loud_file(f, "rec", p, s)],
    "inspect": lambda f, p, s: ["inspect", _loud_file(f, "rec", p, s)],
}


@pytest.mark.parametrize("command", list(LOUD_COMMANDS))
@pytest.mark.parametrize("peak,below", [(1.5, 0.75), (4.0, 0.5)])
@pytest.mark.parametrize("subtype", ["FLOAT", "DOUBLE"])
def test_a_float_wav_peaking_above_one_is_accepted_with_the_numbers_of_the_same_data_below_one(
        loud, capsys, command, peak, below, subtype):
    # before: 'ir' and 'stipa' refused these files as "clipped — record again with less gain"
    code, out, err = run_cli(LOUD_COMMANDS[command](loud, peak, subtype) + ["--json"], capsys)
    assert code == 0, err
    code_ref, out_ref, err_ref = run_cli(LOUD_COMMANDS[command](loud, below, "FLOAT") + ["--json"], capsys)
    assert code_ref == 0, err_ref
    got, ref = _flat(json.loads(out)), _flat(json.loads(out_ref))
    assert got.keys() == ref.keys()
    skip = ("/inputs/", "name", "figure_data", "band_levels_db")
    compared = [k for k in got if not any(s in k for s in skip)]
    assert len(compared) > 10
    assert {k: got[k] for k in compared} == {k: ref[k] for k in compared}
    for k in got:
        if "band_levels_db" in k:  # levels follow the gain: 20 log10(peak / below), each printed to 0.1 dB
            assert got[k] - ref[k] == pytest.approx(20 * np.log10(peak / below), abs=0.1 + 1e-9), k


def _refused_as_clipped(argv, tmp_path, capsys):
    out = tmp_path / "r.json"
    code, stdout, stderr = run_cli(argv + ["--out", out], capsys)
    lines = [ln for ln in stderr.strip().splitlines() if ln.strip()]
    assert code == 2 and len(lines) == 1 and "clipped" in lines[0] and " — " in lines[0], stderr
    assert "Traceback" not in stdout + stderr and not out.exists()


@pytest.mark.parametrize("subtype", ["FLOAT", "DOUBLE"])
@pytest.mark.parametrize("command,kind", [("ir", "ir_flat"), ("stipa", "rec_flat")])
def test_a_float_wav_with_flat_tops_at_its_peak_is_still_refused(loud, tmp_path, capsys, subtype, command, kind):
    p = tmp_path / f"{kind}.wav"
    sf.write(p, loud[kind], FS_IR, subtype=subtype)  # peak 1.5, flat tops there
    _refused_as_clipped([command, p], tmp_path, capsys)


@pytest.mark.parametrize("command,kind", [("ir", "ir_flat"), ("stipa", "rec_flat")])
def test_a_pcm16_wav_at_full_scale_with_flat_tops_is_still_refused(loud, tmp_path, capsys, command, kind):
    p = tmp_path / f"{kind}.wav"
    sf.write(p, loud[kind] / 1.5, FS_IR, subtype="PCM_16")  # flat tops at full scale
    _refused_as_clipped([command, p], tmp_path, capsys)


@pytest.mark.parametrize("command,kind", [("ir", "ir"), ("stipa", "rec")])
def test_full_scale_samples_are_clipping_in_a_pcm_file_only(loud, tmp_path, capsys, command, kind):
    # five isolated samples at full scale (no flat top): the full-scale rule of integer formats
    # refuses the PCM_16 file; the same samples as FLOAT are floating-point data and accepted.
    # This needs the file's format to reach the check (an array-only rule would pass both).
    x = 0.5 * loud[kind]
    for k in range(5):
        x[FS_IR // 10 + 997 * k] = 1.0 if k % 2 else -1.0
    pcm, flt = tmp_path / "pcm.wav", tmp_path / "float.wav"
    sf.write(pcm, x, FS_IR, subtype="PCM_16")
    sf.write(flt, x, FS_IR, subtype="FLOAT")
    _refused_as_clipped([command, pcm], tmp_path, capsys)
    code, _, err = run_cli([command, flt], capsys)
    assert code == 0, err


def test_an_impulse_response_file_is_checked_once_by_the_rule_of_its_format(loud, tmp_path, monkeypatch):
    # sti_from_ir_file read the file (checked by the full-scale rule of any format) and checked
    # the array a second time; now one check, fed the file's sample format
    from envpredict import audio
    from envpredict.indirect import sti_from_ir_file

    seen = []
    real = audio.SignalCheck.finish

    def finish(self):
        seen.append(self.subtype)
        return real(self)

    monkeypatch.setattr(audio.SignalCheck, "finish", finish)
    for subtype in ("FLOAT", "PCM_24"):
        p = tmp_path / f"ir_{subtype}.wav"
        sf.write(p, 0.5 * loud["ir"], FS_IR, subtype=subtype)
        seen.clear()
        sti_from_ir_file(p)
        assert seen == [subtype]
