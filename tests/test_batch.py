"""Tests of envpredict.batch and the ``batch`` command: manifests, backends, resume, kill safety."""

from __future__ import annotations

import contextlib
import csv
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from envpredict import batch
from envpredict.batch import read_manifest, read_results, run_batch, score_row
from envpredict.exceptions import InputError
from envpredict.tables import format_cell

from cli_for_tests import cli_exit_code
from signals_for_tests import normalised_decay, two_rate_modulated_noise

IR_FS = 24000  # lowest common rate with room for the 8 kHz octave band (fast tests)
IR_SECONDS = 1.5
PAIR_FS = 16000
PAIR_SECONDS = 3.5  # the speech-based STI needs at least 3 s of common part
N_IR_ROWS = 30


def _write_csv(path: Path, header: list[str], rows: list[list]) -> Path:
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        w.writerows(rows)
    return path


@pytest.fixture(scope="module")
def ir_corpus(tmp_path_factory) -> dict:
    """A manifest of N_IR_ROWS impulse responses: 10 positions x 3 treatment conditions."""
    d = tmp_path_factory.mktemp("ir_corpus")
    (d / "irs").mkdir()
    rng = np.random.default_rng(7)
    rows, t60s = [], []
    conds = {"untreated": 1.2, "panels": 0.8, "panels+ceiling": 0.5}
    for i in range(N_IR_ROWS):
        cond = list(conds)[i % 3]
        t60 = conds[cond] * (1.0 + 0.02 * (i // 3))
        name = f"irs/pos{i // 3:02d}_{i % 3}.wav"
        sf.write(d / name, normalised_decay(rng, t60, IR_FS, IR_SECONDS), IR_FS, subtype="FLOAT")
        rows.append([name, cond, f"P{i // 3:02d}", "12,3"])  # a quoted cell with a comma is carried through
        t60s.append(t60)
    manifest = _write_csv(d / "manifest.csv", ["ir", "condition", "position", "note"], rows)
    ref = d / "reference.csv"
    run_batch(manifest, ref, workers=1)
    return {"dir": d, "manifest": manifest, "reference": ref, "t60": t60s}


@pytest.fixture(scope="module")
def mixed_corpus(tmp_path_factory) -> dict:
    """IR rows and clean/degraded pair rows (with delays) in one manifest."""
    d = tmp_path_factory.mktemp("mixed_corpus")
    rng = np.random.default_rng(11)
    rows = []
    for i in range(6):
        sf.write(d / f"ir{i}.wav", normalised_decay(rng, 0.4 + 0.15 * i, IR_FS, IR_SECONDS), IR_FS, subtype="FLOAT")
        rows.append([f"ir{i}.wav", "", "", f"room{i % 2}"])
    n = int(PAIR_SECONDS * PAIR_FS)
    for i in range(6):
        clean = two_rate_modulated_noise(rng, n, PAIR_FS)
        lag = 16 * i  # 0 ... 5 ms
        deg = np.concatenate([np.zeros(lag), clean[: n - lag]]) + 0.03 * rng.standard_normal(n)
        sf.write(d / f"c{i}.wav", clean, PAIR_FS, subtype="FLOAT")
        sf.write(d / f"d{i}.wav", deg, PAIR_FS, subtype="FLOAT")
        rows.append(["", f"c{i}.wav", f"d{i}.wav", f"codec{i % 2}"])
    # 'chain', not 'condition': the pairs have different delays, each its own estimate
    manifest = _write_csv(d / "manifest.csv", ["ir", "clean", "degraded", "chain"], rows)
    ref = d / "reference.csv"
    s = run_batch(manifest, ref, workers=1)
    assert s.failed == 0
    return {"dir": d, "manifest": manifest, "reference": ref, "rows": len(rows)}


def _numeric_equal(a: Path, b: Path, tol: float = 1e-9) -> None:
    ca, ra = read_results(a)
    cb, rb = read_results(b)
    assert ca == cb
    assert len(ra) == len(rb)
    for x, y in zip(ra, rb):
        for c in ca:
            if c in batch.NUMERIC_INDEX_COLUMNS and x[c]:
                assert abs(float(x[c]) - float(y[c])) <= tol, (c, x, y)
            else:
                assert x[c] == y[c], (c, x, y)


# ---------------------------------------------------------------------------
# Values
# ---------------------------------------------------------------------------


def test_ir_rows_match_the_api_and_the_designed_decay(ir_corpus):
    from envpredict.audio import load_audio
    from envpredict.indirect import sti_from_ir

    cols, rows = read_results(ir_corpus["reference"])
    assert cols == ("row", "ir", "condition", "position", "note", "sti", "rating", "t30_mid", "edt_mid",
                    "notes", "error")
    assert [int(r["row"]) for r in rows] == list(range(1, N_IR_ROWS + 1))  # manifest order at the end
    assert all(r["note"] == "12,3" and not r["error"] for r in rows)
    # ISO 3382-1: T30 and EDT of an exponential decay are its 60 dB decay time (analytic);
    # a noise-carrier response scatters around it (a few %, more for EDT's 10 dB range),
    # so each row gets a loose bound and the mean over the 30 rows a tight one
    t30 = np.array([float(r["t30_mid"]) for r in rows]) / ir_corpus["t60"]
    edt = np.array([float(r["edt_mid"]) for r in rows]) / ir_corpus["t60"]
    assert np.all(np.abs(t30 - 1) < 0.10) and abs(t30.mean() - 1) < 0.02
    assert np.all(np.abs(edt - 1) < 0.20) and abs(edt.mean() - 1) < 0.05
    # the row is exactly what the public API gives for that file
    x, fs = load_audio(ir_corpus["dir"] / rows[4]["ir"])
    res = sti_from_ir(x, fs)
    # the results file cuts indices to 6 decimals (issue 18): never above the value, less than 1e-6 below
    assert res.sti.sti - 1e-6 < float(rows[4]["sti"]) <= res.sti.sti
    assert rows[4]["rating"] == res.sti.rating
    # more reverberation never raises the STI (Houtgast & Steeneken: m(F) falls with T)
    by_pos: dict[str, dict[str, float]] = {}
    for r in rows:
        by_pos.setdefault(r["position"], {})[r["condition"]] = float(r["sti"])
    for v in by_pos.values():
        assert v["untreated"] < v["panels"] < v["panels+ceiling"]


def test_pair_rows_score_stoi_estoi_ssti(tmp_path):
    from pystoi import stoi

    from envpredict.pair import pair_from_files

    rng = np.random.default_rng(3)
    n = int(PAIR_SECONDS * PAIR_FS)
    rows = []
    sigs = {}
    for item in range(2):
        clean = two_rate_modulated_noise(rng, n, PAIR_FS)
        sf.write(tmp_path / f"c{item}.wav", clean, PAIR_FS, subtype="FLOAT")
        for snr in (0, 10):
            deg = clean + 0.05 * 10 ** (-snr / 20) * rng.standard_normal(n)
            name = f"d{item}_{snr}.wav"
            sf.write(tmp_path / name, deg, PAIR_FS, subtype="FLOAT")
            rows.append([f"c{item}.wav", name, f"snr{snr}", f"u{item}"])
            sigs[name] = (clean, deg)
    rows.append(["c0.wav", "missing.wav", "snr0", "u9"])
    m = _write_csv(tmp_path / "pairs.csv", ["clean", "degraded", "condition", "utterance"], rows)
    out = tmp_path / "r.csv"
    s = run_batch(m, out, workers=1)
    assert (s.total, s.scored, s.failed) == (5, 5, 1)
    cols, res = read_results(out)
    assert cols[-9:] == ("stoi", "estoi", "ssti", "ssti_regression", "delay_ms", "delay_from", "delay_confidence",
                         "notes", "error")
    for r in res[:4]:
        assert not r["error"]
        clean, deg = sigs[r["degraded"]]
        # reference library: pystoi (Taal 2011 / Jensen 2016), zero delay
        assert float(r["stoi"]) == pytest.approx(stoi(clean, deg, PAIR_FS), abs=1e-3)
        assert float(r["estoi"]) == pytest.approx(stoi(clean, deg, PAIR_FS, extended=True), abs=1e-3)
        assert float(r["delay_ms"]) == 0.0
        direct = pair_from_files(tmp_path / r["clean"], tmp_path / r["degraded"])
        assert direct.ssti - 1e-6 < float(r["ssti"]) <= direct.ssti  # cut to 6 decimals in the file
    assert float(res[1]["stoi"]) > float(res[0]["stoi"])  # 10 dB SNR beats 0 dB
    assert "does not exist" in res[4]["error"] and res[4]["stoi"] == ""


# ---------------------------------------------------------------------------
# Backends give identical results
# ---------------------------------------------------------------------------


def test_mixed_manifest_reference(mixed_corpus):
    cols, rows = read_results(mixed_corpus["reference"])
    assert cols == ("row", "ir", "clean", "degraded", "chain", "sti", "rating", "t30_mid", "edt_mid",
                    "stoi", "estoi", "ssti", "ssti_regression", "delay_ms", "delay_from", "delay_confidence",
                    "notes", "error")
    for r in rows[:6]:
        assert r["sti"] and r["t30_mid"] and not r["stoi"]
    for i, r in enumerate(rows[6:]):
        assert r["stoi"] and r["ssti"] and not r["sti"]
        assert float(r["delay_ms"]) == pytest.approx(i * 1.0, abs=1e-9)  # 16 samples at 16 kHz = 1 ms


def test_process_pool_equals_one_worker(mixed_corpus, tmp_path):
    out = tmp_path / "pool.csv"
    s = run_batch(mixed_corpus["manifest"], out, workers=2)
    assert (s.backend, s.workers, s.scored, s.failed) == ("process pool", 2, mixed_corpus["rows"], 0)
    _numeric_equal(out, mixed_corpus["reference"])


def test_dask_cluster_equals_one_worker(mixed_corpus, tmp_path):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        out = tmp_path / "dask.csv"
        s = run_batch(mixed_corpus["manifest"], out, scheduler=cluster.scheduler_address)
    assert (s.backend, s.workers, s.scored, s.failed) == ("dask", 2, mixed_corpus["rows"], 0)
    _numeric_equal(out, mixed_corpus["reference"])


def test_unreachable_scheduler_is_an_input_error(ir_corpus, tmp_path, monkeypatch):
    pytest.importorskip("distributed")
    monkeypatch.setattr(batch, "CONNECT_TIMEOUT_S", 1.0)
    with pytest.raises(InputError, match="cannot reach the dask scheduler"):
        run_batch(ir_corpus["manifest"], tmp_path / "x.csv", scheduler="tcp://127.0.0.1:9")
    assert not (tmp_path / "x.csv").exists()  # refused before any output


def test_missing_output_folder_is_refused(ir_corpus, tmp_path):
    with pytest.raises(InputError, match="output folder .* does not exist"):
        run_batch(ir_corpus["manifest"], tmp_path / "no" / "r.csv")
    with pytest.raises(InputError, match="is the manifest itself"):
        run_batch(ir_corpus["manifest"], ir_corpus["manifest"], resume=True)


# ---------------------------------------------------------------------------
# Never lose work
# ---------------------------------------------------------------------------


def _data_lines(path: Path) -> int:
    try:
        return max(0, path.read_bytes().count(b"\n") - 1)
    except FileNotFoundError:
        return 0


@pytest.mark.parametrize("workers", [1, 2])
def test_sigkill_then_resume_equals_uninterrupted_run(ir_corpus, tmp_path, workers):
    out = tmp_path / "killed.csv"
    cmd = [sys.executable, "-c", "from envpredict.cli import main; main()", "batch", str(ir_corpus["manifest"]),
           "--out", str(out), "--workers", str(workers)]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, start_new_session=True)
    try:
        deadline = time.monotonic() + 60
        while _data_lines(out) < 3 and proc.poll() is None and time.monotonic() < deadline:
            time.sleep(0.005)
    finally:
        # the whole process group we started (the batch and its pool workers)
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
    assert proc.returncode == -signal.SIGKILL, proc.stderr.read().decode()
    proc.stderr.close()
    kept = _data_lines(out)
    assert 3 <= kept < N_IR_ROWS, "the batch finished before it could be killed"
    # the killed file is a readable CSV of finished rows (completion order)
    _, rows = read_results(out)
    assert all(not r["error"] for r in rows) and len({r["row"] for r in rows}) == len(rows)
    code = cli_exit_code(["batch", str(ir_corpus["manifest"]), "--out", str(out), "--resume", "--workers", str(workers),
                 "--json"])
    assert code == 0
    # same rows in the same order (zero lost, zero duplicated), numbers equal to 1e-9 (the
    # workers run their numeric libraries single-threaded, which may change the last bits)
    _numeric_equal(out, ir_corpus["reference"])


def test_no_worker_outlives_a_killed_batch(ir_corpus, tmp_path):
    # SIGKILL of the batch process alone (not its group): its pool workers (and the fork
    # server they come from) must end by themselves instead of scoring on as orphans
    out = tmp_path / "orphans.csv"
    cmd = [sys.executable, "-c", "from envpredict.cli import main; main()", "batch", str(ir_corpus["manifest"]),
           "--out", str(out), "--workers", "2"]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    group = proc.pid
    try:
        deadline = time.monotonic() + 60
        while _data_lines(out) < 2 and proc.poll() is None and time.monotonic() < deadline:
            time.sleep(0.005)
        assert proc.poll() is None, "the batch finished before it could be killed"
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait()
        gone = False
        deadline = time.monotonic() + 10 * batch.PARENT_CHECK_S + 5
        while time.monotonic() < deadline:
            try:
                os.killpg(group, 0)  # any process of the batch's group left?
            except ProcessLookupError:
                gone = True
                break
            time.sleep(0.05)
        assert gone, "pool processes survived the killed batch"
    finally:
        with contextlib.suppress(ProcessLookupError):
            os.killpg(group, signal.SIGKILL)


def test_resume_drops_a_torn_last_line(ir_corpus, tmp_path):
    ref = ir_corpus["reference"].read_text().splitlines(keepends=True)
    out = tmp_path / "torn.csv"
    # a state a power cut could leave: header, rows in completion order, half a line
    kept = [ref[0]] + ref[9:3:-1] + [ref[20][: len(ref[20]) // 2]]
    out.write_text("".join(kept))
    s = run_batch(ir_corpus["manifest"], out, workers=1, resume=True)
    assert (s.skipped, s.scored) == (6, N_IR_ROWS - 6)
    assert out.read_text() == ir_corpus["reference"].read_text()


def test_resume_after_a_kill_during_the_header(ir_corpus, tmp_path):
    out = tmp_path / "header.csv"
    out.write_text("row,ir,cond")  # torn header, no newline
    s = run_batch(ir_corpus["manifest"], out, workers=1, resume=True)
    assert s.scored == N_IR_ROWS
    assert out.read_text() == ir_corpus["reference"].read_text()


def test_resume_of_a_finished_file_scores_nothing(ir_corpus, tmp_path):
    out = tmp_path / "done.csv"
    out.write_text(ir_corpus["reference"].read_text())
    s = run_batch(ir_corpus["manifest"], out, resume=True)
    assert (s.skipped, s.scored, s.failed) == (N_IR_ROWS, 0, 0)
    assert out.read_text() == ir_corpus["reference"].read_text()


def test_existing_results_are_never_overwritten_silently(ir_corpus, tmp_path):
    out = tmp_path / "r.csv"
    out.write_text(ir_corpus["reference"].read_text())
    with pytest.raises(InputError, match="already exists.*--resume"):
        run_batch(ir_corpus["manifest"], out)
    assert out.read_text() == ir_corpus["reference"].read_text()


def test_resume_refuses_a_changed_manifest(ir_corpus, tmp_path):
    lines = ir_corpus["manifest"].read_text().splitlines(keepends=True)
    lines[3] = lines[3].replace("panels", "curtains")
    m2 = ir_corpus["dir"] / "changed.csv"
    m2.write_text("".join(lines))
    out = tmp_path / "r.csv"
    out.write_text(ir_corpus["reference"].read_text())
    with pytest.raises(InputError, match="row 3 does not match row 3"):
        run_batch(m2, out, resume=True)
    other = _write_csv(tmp_path / "other.csv", ["ir", "room"], [[str(ir_corpus["dir"] / "irs/pos00_0.wav"), "x"]])
    with pytest.raises(InputError, match="other columns"):
        run_batch(other, out, resume=True)


def test_a_second_writer_is_refused(ir_corpus, tmp_path):
    m = read_manifest(ir_corpus["manifest"])
    w = batch.ResultWriter.open(tmp_path / "r.csv", m)
    try:
        with pytest.raises(InputError, match="another batch run"):
            batch.ResultWriter.open(tmp_path / "r.csv", m, resume=True)
    finally:
        w.close()


def test_bad_rows_are_recorded_and_the_batch_goes_on(tmp_path):
    rng = np.random.default_rng(1)
    sf.write(tmp_path / "good.wav", normalised_decay(rng, 0.6, IR_FS, IR_SECONDS), IR_FS, subtype="FLOAT")
    sf.write(tmp_path / "short.wav", normalised_decay(rng, 0.1, IR_FS, 0.3), IR_FS, subtype="FLOAT")
    sf.write(tmp_path / "silent.wav", np.zeros(IR_FS), IR_FS)
    (tmp_path / "junk.wav").write_bytes(b"this is not audio" * 10)
    rows = [["good.wav", "a"], ["missing.wav", "b"], ["short.wav", "c"], ["silent.wav", "d"], ["junk.wav", "e"],
            ["good.wav", "f"]]
    m = _write_csv(tmp_path / "m.csv", ["ir", "label"], rows)
    out = tmp_path / "r.csv"
    assert cli_exit_code(["batch", str(m), "--out", str(out), "--workers", "2", "--json"]) == 1  # rows failed
    _, res = read_results(out)
    errors = [r["error"] for r in res]
    assert errors[0] == "" and errors[5] == "" and res[0]["sti"] == res[5]["sti"] != ""
    assert "does not exist" in errors[1]
    assert "0.79 s" in errors[2] or "long" in errors[2]
    assert "silent" in errors[3]
    assert "not a readable audio file" in errors[4]
    assert all(r["sti"] == "" for r in res[1:5])
    # fix one input, then retry only the failed rows
    sf.write(tmp_path / "missing.wav", normalised_decay(rng, 0.6, IR_FS, IR_SECONDS), IR_FS, subtype="FLOAT")
    s = run_batch(m, out, resume=True, retry_failed=True, workers=1)
    assert (s.skipped, s.scored, s.failed) == (2, 4, 3)
    _, res2 = read_results(out)
    assert len(res2) == 6 and res2[1]["error"] == "" and res2[1]["sti"] != ""


def test_notes_say_why_a_figure_is_missing(tmp_path):
    rng = np.random.default_rng(4)
    # a 1.2 s file holding a 2.5 s decay: cut off, too little decay range for T30
    sf.write(tmp_path / "cut.wav", normalised_decay(rng, 2.5, IR_FS, 1.2), IR_FS, subtype="FLOAT")
    m = _write_csv(tmp_path / "m.csv", ["ir"], [["cut.wav"]])
    s = run_batch(m, tmp_path / "r.csv", workers=1)
    _, res = read_results(tmp_path / "r.csv")
    r = res[0]
    assert r["sti"] and not r["error"] and r["t30_mid"] == ""
    assert r["notes"].startswith("t30_mid not computed (T30 not computed at 500 Hz")
    assert "cut off" in r["notes"]
    assert s.cautions and "not a certification" in s.cautions[0]  # life-safety caution, once per batch


def test_score_row_never_raises_and_is_picklable():
    import pickle

    job = {"row": 4, "kind": "ir", "ir": "/nonexistent/x.wav", "channel": None, "noise": None,
           "speech_level": 60.0, "talker": "male"}
    fn = pickle.loads(pickle.dumps(score_row))
    r = fn(job)
    assert r["row"] == 4 and r["values"] == {} and "does not exist" in r["error"]
    r = score_row({"row": 5, "kind": "ir"})  # malformed job: a bug, reported, not raised
    assert r["row"] == 5 and r["error"].startswith("internal failure")


def test_progress_counts_the_rows_of_this_run(ir_corpus, tmp_path):
    out = tmp_path / "r.csv"
    ref = ir_corpus["reference"].read_text().splitlines(keepends=True)
    out.write_text("".join(ref[:11]))  # 10 rows done
    calls = []
    run_batch(ir_corpus["manifest"], out, workers=1, resume=True, progress=lambda d, t: calls.append((d, t)))
    assert calls[0] == (0, N_IR_ROWS - 10) and calls[-1] == (N_IR_ROWS - 10, N_IR_ROWS - 10)


def test_cli_batch_json_summary(ir_corpus, tmp_path, capsys):
    out = tmp_path / "r.csv"
    assert cli_exit_code(["batch", str(ir_corpus["manifest"]), "--out", str(out), "--workers", "1", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    for key in ("backend", "workers", "total", "skipped", "scored", "failed", "ok",
                "seconds", "rows_per_s", "failures", "cautions", "notes"):
        assert key in d
    assert (d["inputs"]["manifest"], d["inputs"]["out"]) == (str(ir_corpus["manifest"]), str(out))
    assert (d["total"], d["scored"], d["failed"], d["backend"]) == (N_IR_ROWS, N_IR_ROWS, 0, "in-process")


def test_ir_option_columns_feed_the_scoring(tmp_path):
    from envpredict.indirect import sti_from_ir

    rng = np.random.default_rng(5)
    sf.write(tmp_path / "a.wav", normalised_decay(rng, 0.7, IR_FS, IR_SECONDS), IR_FS, subtype="FLOAT")
    x, _ = sf.read(tmp_path / "a.wav", dtype="float64")  # the samples as stored (float32)
    noise = "50;47;44;41;38;35;32"
    rows = [["a.wav", "", "", ""], ["a.wav", noise, "70", "female"], ["a.wav", "", "", ""]]
    m = _write_csv(tmp_path / "m.csv", ["ir", "noise", "speech_level", "sti_talker"], rows)
    out = tmp_path / "r.csv"
    run_batch(m, out, workers=1, speech_level_dba=65, talker="male")
    _, res = read_results(out)
    # the results file cuts indices to 6 decimals (issue 18)
    assert float(res[0]["sti"]) == float(format_cell(sti_from_ir(x, IR_FS, speech_level_dba=65).sti.sti, "sti"))
    want = sti_from_ir(x, IR_FS, noise_db=[50, 47, 44, 41, 38, 35, 32], speech_level_dba=70, talker="female")
    assert float(res[1]["sti"]) == float(format_cell(want.sti.sti, "sti"))
    assert res[2]["sti"] == res[0]["sti"]


# ---------------------------------------------------------------------------
# Malformed manifests: one clear error naming file, row and column
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "text, pattern",
    [
        ("", r"is empty"),
        ("condition,talker\nA,1\n", r"neither an 'ir' or 'stipa' column nor 'clean' and 'degraded'"),
        ("ir;condition\na.wav;A\n", r"use commas"),
        ("clean,condition\na.wav,A\n", r"no 'degraded' column"),
        ("ir,cond,cond\na.wav,A,B\n", r"column 'cond' appears twice"),
        ("ir,,x\na.wav,A,B\n", r"column 2 of the header has no name"),
        ("ir,sti\na.wav,0.5\n", r"column 'sti' has the name of a result column"),
        ("ir,row\na.wav,1\n", r"column 'row' has the name of a result column"),
        ("ir,cond\n", r"header but no rows"),
        ("ir,cond\na.wav,A\nb.wav\n", r"row 2 \(line 3\) has 1 cells; the header has 2"),
        ("ir,cond\na.wav,A\n\nb.wav,A,B\n", r"row 2 \(line 4\) has 3 cells"),
        ("ir,cond\n,A\n", r"row 1 \(line 2\) names no input file — fill 'ir'"),
        ("ir,clean,degraded\na.wav,c.wav,\n", r"row 1 \(line 2\) fills both"),
        ("clean,degraded\nc.wav,\n", r"row 1 \(line 2\), column 'degraded' is empty"),
        ('ir,cond\na.wav,"two\nlines"\n', r"row 1 \(line 3\), column 'cond' contains a line break"),
        ("ir,speech_level\na.wav,60\nb.wav,loud\n", r"row 2 \(line 3\), column 'speech_level'.*not a number"),
        ("ir,sti_talker\na.wav,child\n", r"row 1 \(line 2\), column 'sti_talker'.*unknown talker"),
        ("ir,noise\na.wav,40;40\n", r"column 'noise'.*2 noise level"),
        ("ir,channel\na.wav,-1\n", r"column 'channel'.*negative"),
        ('ir,cond\na.wav,"A\n', r"not valid CSV|line break"),
    ],
)
def test_malformed_manifest(tmp_path, text, pattern):
    p = tmp_path / "bad.csv"
    p.write_text(text, encoding="utf-8")
    with pytest.raises(InputError, match=pattern) as e:
        read_manifest(p)
    assert "bad.csv" in str(e.value)


def test_manifest_file_problems(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        read_manifest(tmp_path / "nope.csv")
    with pytest.raises(InputError, match="is a folder"):
        read_manifest(tmp_path)
    p = tmp_path / "latin1.csv"
    p.write_bytes("ir,ort\na.wav,K\xf6ln\n".encode("latin-1"))
    with pytest.raises(InputError, match="not UTF-8"):
        read_manifest(p)


def test_manifest_paths_are_relative_to_the_manifest(tmp_path):
    (tmp_path / "sub").mkdir()
    p = _write_csv(tmp_path / "sub" / "m.csv", ["ir", "x"], [["a.wav", "1"], [str(tmp_path / "b.wav"), "2"]])
    m = read_manifest(p)
    assert m.jobs[0]["ir"] == str((tmp_path / "sub" / "a.wav").resolve())
    assert m.jobs[1]["ir"] == str(tmp_path / "b.wav")
    # a BOM written by spreadsheet programs is accepted
    p.write_bytes(b"\xef\xbb\xbf" + p.read_bytes())
    assert read_manifest(p).columns == ("ir", "x")


def test_bad_batch_options(ir_corpus, tmp_path, capsys):
    for args, pattern in ((["--workers", "0"], "below 1"), (["--retry-failed"], "only with --resume"),
                          (["--resume", "--overwrite"], "contradict")):
        assert cli_exit_code(["batch", str(ir_corpus["manifest"]), "--out", str(tmp_path / "r.csv")] + args) == 2
        err = capsys.readouterr().err
        assert err.startswith("error: ") and pattern in err and "Traceback" not in err
    assert not (tmp_path / "r.csv").exists()  # refused before any output



def test_compare_on_a_batch_result(ir_corpus, capsys):
    # end to end: score, then ask whether the treatments beat the untreated room
    code = cli_exit_code(["compare", str(ir_corpus["reference"]), "--by", "condition", "--baseline", "untreated",
                          "--json"])
    assert code == 0
    d = json.loads(capsys.readouterr().out)
    assert d["index"] == "sti" and d["pair_on"] == ["position", "note"]  # 'ir' differs per condition
    by = {c["name"]: c for c in d["conditions"]}
    assert by["untreated"]["verdict"] == "baseline"
    for name in ("panels", "panels+ceiling"):
        assert by[name]["n"] == 10 and by[name]["diff"] > 0 and by[name]["ci_low"] > 0
        assert by[name]["p_value"] == pytest.approx(2 / 2 ** 10)  # all 10 differences positive: exact p
        assert by[name]["verdict"] == "higher"


def test_plain_progress_lines_when_not_a_terminal(ir_corpus, tmp_path, capsys, monkeypatch):
    from envpredict.cli import cmd_batch

    monkeypatch.setattr(cmd_batch, "PROGRESS_EVERY_S", 0.0)
    out = tmp_path / "r.csv"
    out.write_text("".join(ir_corpus["reference"].read_text().splitlines(keepends=True)[:21]))  # 20 done
    assert cli_exit_code(["batch", str(ir_corpus["manifest"]), "--out", str(out), "--resume", "--workers", "1"]) == 0
    err = capsys.readouterr().err
    assert "scoring (20 of 30 rows already done): 10/10 done" in err
    assert "/s" in err


def test_interrupt_says_how_to_finish(ir_corpus, tmp_path, capsys, monkeypatch):
    out = tmp_path / "r.csv"
    out.write_text(ir_corpus["reference"].read_text().splitlines(keepends=True)[0])

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(batch, "run_batch", interrupted)
    assert cli_exit_code(["batch", str(ir_corpus["manifest"]), "--out", str(out), "--resume"]) == 130
    assert "finish with: envpredict batch" in capsys.readouterr().err


def test_two_runs_starting_together_cannot_both_take_the_results_file(ir_corpus, tmp_path, monkeypatch):
    # run A replaces the results file (a rename: a new file) before it appends; a run B that
    # opens the same file in that moment found the new file unlocked and scored every row
    # too. The run lock is on a path that does not change, so B is refused.
    import shutil

    out = tmp_path / "r.csv"
    shutil.copy(ir_corpus["reference"], out)
    m = read_manifest(ir_corpus["manifest"])
    seen = {}
    rewrite = batch.ResultWriter._rewrite

    def rewrite_then_second_run(self, sort):
        rewrite(self, sort)  # the file is now a new one, not yet opened for appending by A
        try:
            batch.ResultWriter.open(out, m, overwrite=True).close()
            seen["second"] = "opened"
        except InputError as e:
            seen["second"] = str(e)

    monkeypatch.setattr(batch.ResultWriter, "_rewrite", rewrite_then_second_run)
    first = batch.ResultWriter.open(out, m, overwrite=True)
    first.close()
    assert "being written by another batch run" in seen["second"]
    # after A closes, the file can be opened again
    monkeypatch.setattr(batch.ResultWriter, "_rewrite", rewrite)
    batch.ResultWriter.open(out, m, resume=True).close()


def test_a_scheduler_address_that_is_not_dask_is_refused_in_one_line(tmp_path, capsys):
    # a plain TCP service on this machine (loopback only) that answers with HTTP text: dask
    # read its bytes as a message of absurd length and the batch said "out of memory"
    pytest.importorskip("distributed")
    import socket
    import threading

    srv = socket.socket()
    srv.bind(("127.0.0.1", 0))
    srv.listen(4)
    srv.settimeout(30)
    port = srv.getsockname()[1]

    def serve():  # answers at most 10 connections, then stops
        for _ in range(10):
            try:
                conn, _ = srv.accept()
            except OSError:
                return
            with conn:
                conn.sendall(b"HTTP/1.1 200 OK\r\nContent-Length: 5\r\n\r\nhello" * 1000)

    threading.Thread(target=serve, daemon=True).start()
    (tmp_path / "m.csv").write_text("ir,position\nhall.wav,front\n")
    try:
        code = cli_exit_code(["batch", tmp_path / "m.csv", "--out", tmp_path / "o.csv",
                              "--scheduler", f"tcp://127.0.0.1:{port}"])
    finally:
        srv.close()
    err = capsys.readouterr().err
    assert code == 2, err
    assert "does not answer as a dask scheduler" in err and "out of memory" not in err
    assert not (tmp_path / "o.csv").exists()


# ---------------------------------------------------------------------------
# A dask cluster that dies mid-batch
# ---------------------------------------------------------------------------


def _free_port() -> int:
    import socket

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@contextlib.contextmanager
def _dask_cluster():
    """A real dask cluster in subprocesses (a scheduler and one worker without a nanny, on
    loopback), each in its own process group so that a test can kill it; yields
    ``(address, scheduler_process, worker_process)``."""
    distributed = pytest.importorskip("distributed")
    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    quiet = {"stdout": subprocess.DEVNULL, "stderr": subprocess.DEVNULL, "start_new_session": True}
    procs = [subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_scheduler", "--host", "127.0.0.1",
                               "--port", str(port), "--no-dashboard"], **quiet)]
    try:
        procs.append(subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_worker", address, "--nthreads", "1",
                                       "--no-nanny", "--no-dashboard"], **quiet))
        with distributed.Client(address, timeout="60s") as c:
            c.wait_for_workers(1, timeout=60)
        yield address, procs[0], procs[1]
    finally:
        for p in procs:
            with contextlib.suppress(ProcessLookupError):
                os.killpg(p.pid, signal.SIGKILL)
            p.wait()


@pytest.fixture(scope="module")
def long_ir_manifest(ir_corpus, tmp_path_factory):
    """The IR corpus three times over (90 rows, absolute paths) and its one-worker results."""
    d = tmp_path_factory.mktemp("long_ir")
    _, rows = read_results(ir_corpus["reference"])
    files = [str(ir_corpus["dir"] / f"irs/pos{i // 3:02d}_{i % 3}.wav") for i in range(N_IR_ROWS)]
    manifest = _write_csv(d / "manifest.csv", ["ir", "condition"],
                          [[f, f"c{k}"] for k in range(3) for f in files])
    ref = d / "reference.csv"
    run_batch(manifest, ref, workers=1)
    return {"manifest": manifest, "reference": ref, "rows": 3 * N_IR_ROWS}


def test_a_dask_scheduler_killed_mid_batch_gives_one_line_and_keeps_the_finished_rows(long_ir_manifest, tmp_path):
    # before: dask's client logged a 38-line traceback on stderr ahead of the error line
    out = tmp_path / "dask.csv"
    with _dask_cluster() as (address, scheduler, _worker):
        cmd = [sys.executable, "-c", "from envpredict.cli import main; main()", "batch",
               str(long_ir_manifest["manifest"]), "--out", str(out), "--scheduler", address]
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, start_new_session=True)
        try:
            deadline = time.monotonic() + 120
            while _data_lines(out) < 3 and proc.poll() is None and time.monotonic() < deadline:
                time.sleep(0.005)
            assert proc.poll() is None, "the batch ended before the scheduler could be killed"
            os.killpg(scheduler.pid, signal.SIGKILL)
            _, err = proc.communicate(timeout=120)
        finally:
            with contextlib.suppress(ProcessLookupError):
                os.killpg(proc.pid, signal.SIGKILL)
    err = err.decode()
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert proc.returncode == 1, err
    assert len(lines) == 1 and lines[0].startswith("error: ") and " — " in lines[0], err
    assert "Traceback" not in err and "stopped answering" in err and "--resume" in err, err
    kept = _data_lines(out)
    assert 3 <= kept < long_ir_manifest["rows"], "the batch finished before the scheduler was killed"
    _, rows = read_results(out)
    assert len(rows) == kept and all(not r["error"] for r in rows) and len({r["row"] for r in rows}) == kept
    assert f"after {kept} of {long_ir_manifest['rows']} rows" in err
    # the finished rows are kept: --resume (here on the local backend) scores only the rest
    s = run_batch(long_ir_manifest["manifest"], out, workers=1, resume=True)
    assert (s.skipped, s.scored, s.failed) == (kept, long_ir_manifest["rows"] - kept, 0)
    _numeric_equal(out, long_ir_manifest["reference"])


def test_a_dask_cluster_that_loses_its_only_worker_stops_instead_of_waiting_for_ever(long_ir_manifest, tmp_path,
                                                                                       monkeypatch):
    from envpredict.exceptions import ComputationError

    monkeypatch.setattr(batch, "NO_WORKER_TIMEOUT_S", 2.0)
    out = tmp_path / "dask.csv"
    with _dask_cluster() as (address, _scheduler, worker):
        def kill_worker_after_three(done, total):
            if done == 3:
                os.killpg(worker.pid, signal.SIGKILL)

        t0 = time.monotonic()
        with pytest.raises(ComputationError, match="has had no workers for 2 s") as e:
            run_batch(long_ir_manifest["manifest"], out, scheduler=address, progress=kill_worker_after_three)
        assert time.monotonic() - t0 < 60
    assert "\n" not in str(e.value) and "--resume" in str(e.value)
    kept = _data_lines(out)
    assert 3 <= kept < long_ir_manifest["rows"] and f"after {kept} of" in str(e.value)
    s = run_batch(long_ir_manifest["manifest"], out, workers=1, resume=True)
    assert (s.skipped, s.scored, s.failed) == (kept, long_ir_manifest["rows"] - kept, 0)
    _numeric_equal(out, long_ir_manifest["reference"])


# ---------------------------------------------------------------------------
# Alignment of pair rows
# ---------------------------------------------------------------------------

DEMO = Path(__file__).resolve().parents[1] / "demo_pairs"


def test_demo_corpus_every_row_gets_the_generators_direct_sound_delay():
    # tools/make_demo.py puts the hall's direct sound at 12 ms (d0 = 0.012 fs) and its
    # chains add no latency; the waveform peak put rows at 17.6-145 ms
    m = read_manifest(DEMO / "corpus.csv")
    jobs, notes = batch.plan_delays(m, m.jobs)
    assert len(jobs) == 24
    for j in jobs:
        assert j["delay_from"] == "condition"
        assert j["delay_ms"] == pytest.approx(12.0, abs=0.5)
    assert len(notes) == 3 and all("12.00 ms" in n for n in notes)


@pytest.fixture(scope="module")
def delayed_pairs(tmp_path_factory) -> dict:
    """Four pairs of condition A whose degraded files are 5 ms late (80 samples)."""
    d = tmp_path_factory.mktemp("delayed_pairs")
    rng = np.random.default_rng(21)
    n = int(PAIR_SECONDS * PAIR_FS)
    for i in range(4):
        clean = two_rate_modulated_noise(rng, n, PAIR_FS)
        deg = np.concatenate([np.zeros(80), clean[: n - 80]]) + 0.05 * rng.standard_normal(n)
        sf.write(d / f"c{i}.wav", clean, PAIR_FS, subtype="FLOAT")
        sf.write(d / f"d{i}.wav", deg, PAIR_FS, subtype="FLOAT")
    return {"dir": d}


def _delay_manifest(d: Path, delays: list[str]) -> Path:
    rows = [[f"c{i}.wav", f"d{i}.wav", "A", f"u{i}", v] for i, v in enumerate(delays)]
    return _write_csv(d / "m.csv", ["clean", "degraded", "condition", "item", "delay_ms"], rows)


def test_batch_alignment_choices_are_recorded_per_row(delayed_pairs, tmp_path):
    d = delayed_pairs["dir"]
    m = _delay_manifest(d, ["", "20", "", "5"])
    out = tmp_path / "r.csv"
    s = run_batch(m, out, workers=1)
    assert s.failed == 0 and any("one delay of 5.00 ms for its 2 pair(s)" in n for n in s.notes)
    cols, rows = read_results(out)
    assert cols.count("delay_ms") == 1 and cols.index("delay_ms") == 5  # the manifest's own column
    assert [r["delay_from"] for r in rows] == ["condition", "manifest", "condition", "manifest"]
    assert [float(r["delay_ms"]) for r in rows] == [5.0, 20.0, 5.0, 5.0]
    assert rows[1]["delay_ms"] == "20"  # the manifest's cell, as written
    # the row given 20 ms disagrees with its own estimate (5 ms) by more than 1 ms
    assert "own delay estimate (5.00 ms" in rows[1]["notes"]
    assert "own delay estimate" not in rows[0]["notes"]
    assert float(rows[0]["delay_confidence"]) > 1 and rows[1]["delay_confidence"] == ""
    # misaligned by 15 ms, the envelopes still match, but less
    assert float(rows[1]["stoi"]) < float(rows[0]["stoi"])
    # resume accepts its own file (the delay column filled where the manifest's cell is empty)
    s2 = run_batch(m, out, workers=1, resume=True)
    assert (s2.skipped, s2.scored) == (4, 0)


def test_batch_fixed_per_row_and_no_align(delayed_pairs, tmp_path):
    d = delayed_pairs["dir"]
    m = _delay_manifest(d, ["", "", "", ""])
    for alignment, origin, value in ((batch.Alignment(fixed_delay_ms=5.0), "fixed", 5.0),
                                     (batch.Alignment(per_row=True), "row", 5.0),
                                     (batch.Alignment(align=False), "off", 0.0)):
        out = tmp_path / f"{origin}.csv"
        assert run_batch(m, out, workers=1, alignment=alignment).failed == 0
        _, rows = read_results(out)
        assert {r["delay_from"] for r in rows} == {origin}
        assert all(float(r["delay_ms"]) == value for r in rows)


def test_batch_alignment_bad_input(delayed_pairs, tmp_path):
    d = delayed_pairs["dir"]
    with pytest.raises(InputError, match=r"row 2 .*column 'delay_ms'.*'abc' is not a number"):
        read_manifest(_delay_manifest(d, ["", "abc", "", ""]))
    m = read_manifest(_delay_manifest(d, ["", "", "", ""]))
    with pytest.raises(InputError, match="contradict"):
        batch.Alignment(per_row=True, fixed_delay_ms=3.0).check(m)
    with pytest.raises(InputError, match="no column 'chain'"):
        batch.Alignment(condition_column="chain").check(m)
    # a delay beyond the file is that row's error; the batch goes on
    out = tmp_path / "r.csv"
    s = run_batch(_delay_manifest(d, ["99999", "", "", ""]), out, workers=1)
    _, rows = read_results(out)
    assert s.failed == 1 and "longer than the files" in rows[0]["error"] and not rows[1]["error"]
    code = cli_exit_code(["batch", str(d / "m.csv"), "--out", str(tmp_path / "c.csv"), "--delay-per-row",
                          "--delay-ms", "4"])
    assert code == 2


def test_batch_inverted_column_adds_the_envelope_power_index(tmp_path):
    # a linear chain of speech + noise and speech - noise: the row's SNR_env is the pair
    # job's (pair_from_files with inverted_path) on the same files
    from scipy.signal import butter, sosfilt

    from envpredict.pair import pair_from_files

    rng = np.random.default_rng(31)
    n = int(PAIR_SECONDS * PAIR_FS)
    sos = butter(2, 2500, fs=PAIR_FS, output="sos")
    rows = []
    for i in range(2):
        clean = two_rate_modulated_noise(rng, n, PAIR_FS)
        noise = 0.03 * rng.standard_normal(n)
        sf.write(tmp_path / f"c{i}.wav", clean, PAIR_FS, subtype="DOUBLE")
        sf.write(tmp_path / f"p{i}.wav", sosfilt(sos, clean + noise), PAIR_FS, subtype="DOUBLE")
        sf.write(tmp_path / f"m{i}.wav", sosfilt(sos, clean - noise), PAIR_FS, subtype="DOUBLE")
        rows.append([f"c{i}.wav", f"p{i}.wav", f"m{i}.wav", "chain"])
    rows.append(["c0.wav", "p0.wav", "p0.wav", "chain"])  # not the counterpart: the row's error
    m = _write_csv(tmp_path / "m.csv", ["clean", "degraded", "inverted", "condition"], rows)
    out = tmp_path / "r.csv"
    s = run_batch(m, out, workers=1, alignment=batch.Alignment(per_row=True))
    cols, res = read_results(out)
    assert "sepsm_snr_env_db" in cols and s.failed == 1 and "derived noise is silent" in res[2]["error"]
    for i in range(2):
        direct = pair_from_files(tmp_path / f"c{i}.wav", tmp_path / f"p{i}.wav", inverted_path=tmp_path / f"m{i}.wav")
        assert float(res[i]["sepsm_snr_env_db"]) == pytest.approx(direct.sepsm.snr_env_db, abs=5e-4)  # 3 decimals


def test_batch_rows_with_a_bad_inverted_file_or_delay_error_one_by_one(tmp_path):
    # issue 15, bad input: an inverted file that is not the counterpart (half the mixture:
    # its derived noise holds speech), of another rate or length, missing, and a delay
    # beyond the file (either sign) are each that row's error; the good rows are scored.
    # A delay cell that is not a number refuses the manifest in one line (exit 2).
    rng = np.random.default_rng(41)
    n = int(PAIR_SECONDS * PAIR_FS)
    clean = two_rate_modulated_noise(rng, n, PAIR_FS)
    noise = 0.3 * rng.standard_normal(n)
    for name, sig, rate in (("c.wav", clean, PAIR_FS), ("d.wav", clean + noise, PAIR_FS),
                            ("inv.wav", clean - noise, PAIR_FS), ("half.wav", 0.5 * (clean + noise), PAIR_FS),
                            ("slow.wav", (clean - noise)[::2], PAIR_FS // 2),
                            ("short.wav", (clean - noise)[:-50], PAIR_FS)):
        sf.write(tmp_path / name, sig, rate, subtype="FLOAT")
    rows = [["c.wav", "d.wav", inv, delay] for inv, delay in
            (("inv.wav", ""), ("half.wav", ""), ("slow.wav", ""), ("short.wav", ""), ("gone.wav", ""),
             ("inv.wav", "99999"), ("inv.wav", "-99999"))]
    m = _write_csv(tmp_path / "m.csv", ["clean", "degraded", "inverted", "delay_ms"], rows)
    out = tmp_path / "r.csv"
    s = run_batch(m, out, workers=1, alignment=batch.Alignment(per_row=True))
    _, res = read_results(out)
    errors = [r["error"] for r in res]
    assert s.failed == 6 and not errors[0] and res[0]["sepsm_snr_env_db"]
    assert "not the phase-inverted counterpart" in errors[1]
    assert "does not match the degraded file" in errors[2] and "does not match the degraded file" in errors[3]
    assert "does not exist" in errors[4]
    assert "longer than the files" in errors[5] and "longer than the files" in errors[6]
    assert all("\n" not in e for e in errors)
    _write_csv(tmp_path / "bad.csv", ["clean", "degraded", "delay_ms"], [["c.wav", "d.wav", "12 ms"]])
    proc = subprocess.run([sys.executable, "-c", "from envpredict.cli import main; main()", "batch",
                           str(tmp_path / "bad.csv"), "--out",
                           str(tmp_path / "b.csv")], capture_output=True, text=True)
    assert proc.returncode == 2 and proc.stderr.strip().count("\n") == 0 and "'12 ms' is not a number" in proc.stderr
    assert not (tmp_path / "b.csv").exists()
