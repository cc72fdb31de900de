"""Outputs that never destroy a user's files (issue 12): every case names the input, the
expected one-line error or behaviour and the exit code, and checks that no input changed
(bytes, mtime, inode) and that nothing was left behind.

The reference for the file-system behaviour is POSIX as the shell shows it: ``cmd > link``
writes through a symbolic link to its target, a new file gets ``0666 & ~umask`` and a
folder ``0777 & ~umask``, writing a named pipe blocks until a reader opens it, and a full
disk gives ENOSPC.
"""

from __future__ import annotations

import contextlib
import errno
import json
import os
import stat
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from cli_for_tests import run_cli
from signals_for_tests import noise_decay

from envpredict.exceptions import ComputationError, InputError

FS = 48000


# ---------------------------------------------------------------------------
# Inputs and helpers
# ---------------------------------------------------------------------------


@pytest.fixture
def work(tmp_path):
    """A folder with one input of each kind: an impulse response, pilot scores, a results
    table and a mapping fitted from the scores."""
    d = tmp_path / "work"
    d.mkdir()
    sf.write(d / "a.wav", noise_decay(0.8, seconds=2.0, seed=1, floor_db=-70), FS, subtype="PCM_24")
    x = np.linspace(0.4, 0.95, 6)
    k = np.array([3, 8, 15, 24, 31, 36])
    (d / "scores.csv").write_text("stoi,correct,trials\n" + "".join(f"{xi:.3f},{ki},40\n" for xi, ki in zip(x, k)))
    rows = [f"{c},{i},{0.5 + 0.01 * i + (0.1 if c == 'B' else 0.0):.3f}" for c in "AB" for i in range(8)]
    (d / "results.csv").write_text("condition,item,stoi\n" + "\n".join(rows) + "\n")
    code, _, _ = run_cli(["fitmap", d / "scores.csv", "--index", "stoi", "--out", d / "map.json"])
    assert code == 0
    return d


def snapshot(folder: Path) -> dict:
    """Every entry of ``folder`` (recursively, hidden ones too): kind, bytes, mtime, inode, mode."""
    snap = {}
    for p in sorted(folder.rglob("*")):
        st = os.lstat(p)
        data = p.read_bytes() if stat.S_ISREG(st.st_mode) else os.readlink(p) if p.is_symlink() else None
        snap[str(p.relative_to(folder))] = (stat.S_IFMT(st.st_mode), data, st.st_mtime_ns, st.st_ino,
                                            stat.S_IMODE(st.st_mode))
    return snap


def one_line_error(code: int, err: str, want_code: int, text: str) -> None:
    lines = [ln for ln in err.strip().splitlines() if ln.strip()]
    assert code == want_code, err
    assert len(lines) == 1 and lines[0].startswith("error: ") and " — " in lines[0], err
    assert text.lower() in lines[0].lower(), lines[0]
    assert "Traceback" not in err


#: The slow work of each command, replaced by a failure in the refusal tests: a check
#: made after the computation would show as exit 1 ("internal failure"), not the refusal.
COMPUTATIONS = {
    "ir": "envpredict.indirect.sti_from_ir_file",
    "fitmap": "envpredict.mapping.fit_mapping_file",
    "compare": "envpredict.stats.compare_conditions_file",
    "predict": "envpredict.mapping.predict_file",
    "inspect": "envpredict.timescales.inspect_file",
}


@pytest.fixture
def no_computation(monkeypatch):
    def refuse_to_compute(*a, **k):
        raise AssertionError("the computation ran before the outputs were checked")

    for target in COMPUTATIONS.values():
        monkeypatch.setattr(target, refuse_to_compute)


# ---------------------------------------------------------------------------
# 1. An output that is (or resolves to) an input
# ---------------------------------------------------------------------------


def _link(d: Path, name: str, to: str) -> Path:
    (d / name).symlink_to(d / to)
    return d / name


def _hardlink(d: Path, name: str, to: str) -> Path:
    os.link(d / to, d / name)
    return d / name


SAME_AS_INPUT = [
    # (case, argv builder, the input the output would replace)
    ("ir --out the IR itself", lambda d: ["ir", d / "a.wav", "--out", d / "a.wav"]),
    ("ir --out another spelling", lambda d: ["ir", d / "a.wav", "--out", d / "." / ".." / "work" / "a.wav"]),
    ("ir --out a symlink to the IR", lambda d: ["ir", d / "a.wav", "--out", _link(d, "l.json", "a.wav")]),
    ("ir --out a hard link of the IR", lambda d: ["ir", d / "a.wav", "--out", _hardlink(d, "h.json", "a.wav")]),
    ("inspect --out the audio", lambda d: ["inspect", d / "a.wav", "--out", d / "a.wav"]),
    ("fitmap --out the scores", lambda d: ["fitmap", d / "scores.csv", "--index", "stoi", "--out",
                                           d / "scores.csv"]),
    ("compare --out the results", lambda d: ["compare", d / "results.csv", "--by", "condition", "--baseline", "A",
                                             "--out", d / "results.csv"]),
    ("predict --out the mapping", lambda d: ["predict", d / "results.csv", "--map", d / "map.json", "--out",
                                             d / "map.json"]),
]


@pytest.mark.parametrize("case,argv", SAME_AS_INPUT, ids=[c[0] for c in SAME_AS_INPUT])
def test_output_that_is_an_input_is_refused_before_the_computation(work, capsys, no_computation, case, argv):
    args = argv(work)
    before = snapshot(work)
    code, out, err = run_cli(args, capsys)
    one_line_error(code, err, 2, "is the input file")
    assert out == ""
    assert snapshot(work) == before, "an input or another file changed"


def test_predict_may_update_its_results_in_place(work, capsys):
    # kept on purpose (its --help says so): the table is read whole, then replaced atomically
    res = work / "results.csv"
    text = res.read_text()
    code, _, err = run_cli(["predict", res, "--map", work / "map.json", "--out", res], capsys)
    assert code == 0, err
    got = res.read_text().splitlines()
    assert got[0].startswith(text.splitlines()[0] + ",predicted_percent")
    assert len(got) == len(text.splitlines())


def test_report_folder_holding_an_input_is_refused(work, capsys, no_computation):
    before = snapshot(work)
    # the input's own folder (it holds files that are not a report)
    code, _, err = run_cli(["ir", work / "a.wav", "--report", work], capsys)
    one_line_error(code, err, 2, "not part of a report")
    assert snapshot(work) == before


def test_report_folder_holding_an_input_named_in_its_manifest_is_refused(work, tmp_path):
    from envpredict.report import check_report_folder, write_report

    rep = tmp_path / "rep"
    write_report("compare", {"conditions": []}, rep)
    # a later run reading the report's own result.json must not replace the folder holding it
    with pytest.raises(InputError, match="holds the input"):
        check_report_folder(rep, inputs=[rep / "result.json"])
    with pytest.raises(InputError, match="holds the input"):
        check_report_folder(rep, inputs=[rep])
    check_report_folder(rep, inputs=[work / "a.wav"])


def test_batch_results_file_that_is_a_manifest_input_is_refused(work, capsys):
    man = work / "manifest.csv"
    man.write_text("ir,condition\na.wav,x\n")
    before = snapshot(work)
    code, _, err = run_cli(["batch", man, "--out", work / "a.wav", "--workers", "1"], capsys)
    one_line_error(code, err, 2, "is the input file")
    assert snapshot(work) == before


# ---------------------------------------------------------------------------
# 2. Symbolic links, pipes and devices
# ---------------------------------------------------------------------------


def test_out_through_a_symlink_replaces_the_target_and_keeps_the_link(work, tmp_path, capsys):
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    target = elsewhere / "result.json"
    target.write_text("old\n")
    os.chmod(target, 0o640)
    link = work / "link.json"
    link.symlink_to(target)
    code, out, err = run_cli(["ir", work / "a.wav", "--json", "--out", link], capsys)
    assert code == 0, err
    assert link.is_symlink() and os.readlink(link) == str(target)
    assert json.loads(target.read_text()) == json.loads(out)
    assert stat.S_IMODE(target.stat().st_mode) == 0o640, "a replaced file keeps its mode"
    # the temporary was made in the target's folder and is gone
    assert sorted(p.name for p in elsewhere.iterdir()) == ["result.json"]
    assert not [p for p in work.iterdir() if p.name.startswith(".")]


def test_out_through_a_dangling_symlink_creates_the_target(work, tmp_path, capsys):
    target = tmp_path / "new.json"
    link = work / "link.json"
    link.symlink_to(target)
    code, out, err = run_cli(["ir", work / "a.wav", "--json", "--out", link], capsys)
    assert code == 0, err
    assert link.is_symlink() and json.loads(target.read_text()) == json.loads(out)


def test_out_onto_a_fifo_is_refused(work, capsys, no_computation):
    fifo = work / "pipe"
    os.mkfifo(fifo)
    before = snapshot(work)
    code, _, err = run_cli(["ir", work / "a.wav", "--out", fifo], capsys)
    one_line_error(code, err, 2, "named pipe")
    assert stat.S_ISFIFO(os.lstat(fifo).st_mode)
    assert snapshot(work) == before


def test_out_onto_a_device_is_refused(work, capsys, no_computation):
    code, _, err = run_cli(["ir", work / "a.wav", "--out", "/dev/null"], capsys)
    one_line_error(code, err, 2, "a device")
    assert stat.S_ISCHR(os.stat("/dev/null").st_mode)


def test_batch_results_file_onto_a_fifo_is_refused(work, capsys):
    # the writer opens the results file to lock it: on a FIFO that open would block for ever
    man = work / "manifest.csv"
    man.write_text("ir,condition\na.wav,x\n")
    fifo = work / "results_pipe"
    os.mkfifo(fifo)
    code, _, err = run_cli(["batch", man, "--out", fifo, "--workers", "1"], capsys)
    one_line_error(code, err, 2, "named pipe")


# ---------------------------------------------------------------------------
# 3. Report folders: only files envpredict wrote are replaced
# ---------------------------------------------------------------------------


def test_report_folder_of_an_earlier_version_with_a_photo_is_refused(work, tmp_path, capsys, no_computation):
    # the case of the issue: a folder holding report.html and a site photo and a measurement
    rep = tmp_path / "site"
    rep.mkdir()
    (rep / "report.html").write_text("<html>old</html>")
    (rep / "site_photo.png").write_bytes(b"\x89PNG photo")
    (rep / "measurement.json").write_text('{"spl": 72}')
    before = snapshot(rep)
    code, _, err = run_cli(["ir", work / "a.wav", "--report", rep], capsys)
    one_line_error(code, err, 2, "not part of a report")
    assert "site_photo.png" in err or "measurement.json" in err
    assert snapshot(rep) == before


def test_report_folder_of_an_earlier_version_with_report_files_only_is_replaced(work, tmp_path, capsys):
    rep = tmp_path / "old_report"
    rep.mkdir()
    (rep / "report.html").write_text("<html>old</html>")
    (rep / "result.json").write_text("{}")
    (rep / "mtf.png").write_bytes(b"old figure")
    code, _, err = run_cli(["ir", work / "a.wav", "--report", rep], capsys)
    assert code == 0, err
    assert "old" not in (rep / "report.html").read_text()[:100]
    listed = (rep / ".envpredict-report").read_text().splitlines()[1:]
    assert sorted(listed) == sorted(p.name for p in rep.iterdir() if p.name != ".envpredict-report")


def test_report_folder_with_a_manifest_refuses_a_file_added_later(work, tmp_path, capsys):
    rep = tmp_path / "rep"
    code, _, err = run_cli(["ir", work / "a.wav", "--report", rep], capsys)
    assert code == 0, err
    manifest = (rep / ".envpredict-report").read_text().splitlines()
    assert {"report.html", "result.json", "mtf.png"} <= set(manifest[1:])
    # a user drops a photo with a report-like name into the report folder
    (rep / "photo.png").write_bytes(b"\x89PNG photo")
    before = snapshot(rep)
    code, _, err = run_cli(["ir", work / "a.wav", "--report", rep], capsys)
    one_line_error(code, err, 2, "'photo.png'")
    assert snapshot(rep) == before
    # without it the folder is replaced as a whole (its own files only)
    (rep / "photo.png").unlink()
    code, _, err = run_cli(["ir", work / "a.wav", "--report", rep], capsys)
    assert code == 0, err
    assert sorted(tmp_path.iterdir()) == [rep, work]


def test_report_folder_gaining_a_file_while_the_report_is_made_is_kept(tmp_path):
    from envpredict.outputs import atomic_directory
    from envpredict.report import _replaceable, write_report

    rep = tmp_path / "rep"
    write_report("compare", {"conditions": []}, rep)
    with pytest.raises(InputError, match="gained files"):
        with atomic_directory(rep, replaceable=_replaceable) as tmp:
            (rep / "late.txt").write_text("written meanwhile")  # after the early check
            (tmp / "report.html").write_text("new")
    assert (rep / "late.txt").read_text() == "written meanwhile"
    assert (rep / "report.html").read_text() != "new"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["rep"], "no temporary left"


def test_write_report_keeps_a_file_added_to_the_folder_meanwhile(tmp_path, monkeypatch):
    import envpredict.report as report

    rep = tmp_path / "rep"
    report.write_report("compare", {"conditions": []}, rep)
    fill = report._write_folder

    def slow_fill(tmp, *a):  # a colleague saves a photo into the folder while the report is drawn
        (rep / "photo.jpg").write_bytes(b"photo")
        fill(tmp, *a)

    monkeypatch.setattr(report, "_write_folder", slow_fill)
    with pytest.raises(InputError, match="gained files"):
        report.write_report("compare", {"conditions": []}, rep)
    assert (rep / "photo.jpg").read_bytes() == b"photo"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["rep"], "no temporary left"


def test_report_through_a_symlinked_folder_keeps_the_link(work, tmp_path, capsys):
    real = tmp_path / "real_rep"
    link = tmp_path / "rep_link"
    link.symlink_to(real, target_is_directory=True)
    code, _, err = run_cli(["ir", work / "a.wav", "--report", link], capsys)
    assert code == 0, err
    assert link.is_symlink() and (real / "report.html").is_file()
    code, _, err = run_cli(["ir", work / "a.wav", "--report", link], capsys)  # replaced again, through the link
    assert code == 0, err
    assert link.is_symlink() and (real / "report.html").is_file()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["real_rep", "rep_link", "work"]


def test_atomic_directory_replaces_only_an_empty_folder_by_default(tmp_path):
    from envpredict.outputs import atomic_directory

    d = tmp_path / "signals"
    d.mkdir()
    (d / "mine.wav").write_bytes(b"keep")
    with pytest.raises(InputError, match="not empty"):
        with atomic_directory(d) as tmp:
            (tmp / "x.wav").write_bytes(b"new")
    assert sorted(p.name for p in d.iterdir()) == ["mine.wav"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["signals"]


# ---------------------------------------------------------------------------
# 4. --out and --report naming the same place
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("inside", [False, True], ids=["same path", "out inside the report folder"])
def test_out_and_report_in_the_same_place_are_refused_before_the_computation(work, tmp_path, capsys,
                                                                            no_computation, inside):
    x = tmp_path / "X"
    out = x / "result.json" if inside else x
    before = snapshot(tmp_path)
    for cmd in (["ir", work / "a.wav"], ["inspect", work / "a.wav"]):  # explicit check; inferred from the command
        code, _, err = run_cli([*cmd, "--out", out, "--report", x], capsys)
        one_line_error(code, err, 2, "inside the --report folder" if inside else "name the same path")
    assert snapshot(tmp_path) == before and not x.exists()


# ---------------------------------------------------------------------------
# 5. Modes follow the umask
# ---------------------------------------------------------------------------


@contextlib.contextmanager
def umask(mask: int):
    old = os.umask(mask)
    try:
        yield
    finally:
        os.umask(old)


@pytest.mark.parametrize("mask", [0o022, 0o002, 0o077])
def test_new_outputs_follow_the_umask(work, tmp_path, capsys, mask):
    out, rep = tmp_path / "r.json", tmp_path / "rep"
    with umask(mask):
        code, _, err = run_cli(["ir", work / "a.wav", "--out", out, "--report", rep], capsys)
        assert code == 0, err
        from envpredict.outputs import atomic_write_bytes

        atomic_write_bytes(tmp_path / "signal.wav", (work / "a.wav").read_bytes())
    file_mode, dir_mode = 0o666 & ~mask, 0o777 & ~mask
    assert stat.S_IMODE(out.stat().st_mode) == file_mode
    assert stat.S_IMODE((tmp_path / "signal.wav").stat().st_mode) == file_mode
    assert stat.S_IMODE(rep.stat().st_mode) == dir_mode
    for p in rep.iterdir():
        assert stat.S_IMODE(p.stat().st_mode) == file_mode, p.name


def test_batch_results_file_follows_the_umask(work, capsys):
    man = work / "manifest.csv"
    man.write_text("ir,condition\na.wav,x\n")
    with umask(0o002):
        code, _, err = run_cli(["batch", man, "--out", work / "res.csv", "--workers", "1"], capsys)
    assert code == 0, err
    assert stat.S_IMODE((work / "res.csv").stat().st_mode) == 0o664


def test_a_replaced_file_keeps_its_mode(work, capsys):
    out = work / "r.json"
    out.write_text("{}")
    os.chmod(out, 0o604)
    with umask(0o077):
        code, _, err = run_cli(["ir", work / "a.wav", "--out", out], capsys)
    assert code == 0, err
    assert stat.S_IMODE(out.stat().st_mode) == 0o604


# ---------------------------------------------------------------------------
# 6. Temporaries of a killed run are removed by the next run into the same place
# ---------------------------------------------------------------------------


def _dead_pid() -> int:
    p = subprocess.Popen([sys.executable, "-c", "pass"])
    p.wait()
    return p.pid


def test_stale_temporaries_are_removed_and_others_kept(work, tmp_path, capsys):
    dead = _dead_pid()
    hour_ago = time.time() - 3600
    stale = [
        tmp_path / f".r.json.{dead}.abcd1234.part",  # a killed run of this version
        tmp_path / ".r.json.k2j4h6g8.part",  # a killed run of an earlier version (no process id)
        tmp_path / f".rep.{dead}.q1w2e3r4.part",  # a report folder being written
        tmp_path / f".rep.{dead}.z9x8c7v6.old",  # an old report folder being removed
    ]
    kept = [
        tmp_path / f".r.json.{os.getppid()}.abcd1234.part",  # a running process's temporary
        tmp_path / f".r.json.{dead}.fresh123.part",  # newer than this process
        tmp_path / f".other.json.{dead}.abcd1234.part",  # another output's temporary
        tmp_path / f".r.json.extra.{dead}.abcd1234.part",  # not the tool's pattern
        tmp_path / "r.json.abcd1234.part",  # not hidden: not the tool's
    ]
    for p in stale + kept:
        if p.name.startswith(".rep."):
            p.mkdir()
            (p / "report.html").write_text("half")
        else:
            p.write_text("half")
    for p in stale + kept[:1] + kept[2:]:
        os.utime(p, (hour_ago, hour_ago))
    code, _, err = run_cli(["ir", work / "a.wav", "--out", tmp_path / "r.json", "--report", tmp_path / "rep"],
                           capsys)
    assert code == 0, err
    for p in stale:
        assert not p.exists(), p.name
    for p in kept:
        assert p.exists(), p.name


# ---------------------------------------------------------------------------
# 7. Unwritable places, checked first; errors while writing as one line
# ---------------------------------------------------------------------------


def test_out_whose_parent_is_a_file_is_refused_before_the_computation(work, capsys, no_computation):
    before = snapshot(work)
    code, _, err = run_cli(["ir", work / "a.wav", "--out", work / "scores.csv" / "r.json"], capsys)
    one_line_error(code, err, 2, "not a folder")
    code, _, err = run_cli(["ir", work / "a.wav", "--report", work / "scores.csv" / "rep"], capsys)
    one_line_error(code, err, 2, "not a folder")
    code, _, err = run_cli(["ir", work / "a.wav", "--out", work / "nope" / "r.json"], capsys)
    one_line_error(code, err, 2, "does not exist")
    assert snapshot(work) == before


@contextlib.contextmanager
def tmpfs(where: Path, options: str):
    """A small tmpfs mounted at ``where`` (the test is skipped where mounting is not allowed)."""
    where.mkdir()
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", options, "tmpfs", str(where)], capture_output=True)
    if r.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here ({r.stderr.decode(errors='replace').strip()})")
    try:
        yield where
    finally:
        subprocess.run(["umount", "-l", str(where)], capture_output=True)


def test_read_only_folder_is_refused_before_the_computation(work, tmp_path, capsys, no_computation):
    with tmpfs(tmp_path / "ro", "ro,size=64k") as ro:
        for opt, target in (("--out", ro / "r.json"), ("--report", ro / "rep")):
            code, _, err = run_cli(["ir", work / "a.wav", opt, target], capsys)
            one_line_error(code, err, 2, "read-only")
        assert list(ro.iterdir()) == []


def test_full_disk_while_writing_is_one_line_and_leaves_nothing(work, tmp_path, capsys):
    with tmpfs(tmp_path / "full", "size=64k") as full:
        (full / "filler").write_bytes(b"\0" * 40_000)  # the JSON result is larger than what is left
        before = snapshot(full)
        code, _, err = run_cli(["ir", work / "a.wav", "--out", full / "r.json"], capsys)
        one_line_error(code, err, 1, "disk is full")
        assert snapshot(full) == before, "no partial file, no temporary"
        code, _, err = run_cli(["ir", work / "a.wav", "--report", full / "rep"], capsys)
        one_line_error(code, err, 1, "disk is full")
        assert snapshot(full) == before


def test_full_disk_simulated_in_process(work, tmp_path, capsys, monkeypatch):
    # the same contract without a mount: fsync reports ENOSPC as a full disk does
    out = tmp_path / "r.json"
    out.write_text("previous result\n")

    def full_fsync(fd):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(os, "fsync", full_fsync)
    code, _, err = run_cli(["ir", work / "a.wav", "--out", out], capsys)
    one_line_error(code, err, 1, "disk is full")
    assert out.read_text() == "previous result\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.json", "work"]


@pytest.mark.parametrize("code,cls,text", [
    (errno.ENOSPC, ComputationError, "disk is full"),
    (errno.EDQUOT, ComputationError, "disk is full"),
    (errno.EIO, ComputationError, "could not be written"),
    (errno.EROFS, InputError, "read-only"),
    (errno.EACCES, InputError, "no permission"),
    (errno.ENOTDIR, InputError, "not a folder"),
    (errno.ENOENT, InputError, "does not exist"),
])
def test_os_errors_while_writing_map_to_documented_errors(code, cls, text):
    from envpredict.outputs import output_error

    e = output_error(OSError(code, os.strerror(code)), "x.json")
    assert type(e) is cls and text in str(e)
    assert e.exit_code == (1 if cls is ComputationError else 2)


# ---------------------------------------------------------------------------
# 8. Standard output closed or full
# ---------------------------------------------------------------------------


def _cli_subprocess(args, **kw):
    code = "import sys; from envpredict.cli import main; main(sys.argv[1:])"
    return subprocess.run([sys.executable, "-c", code, *map(str, args)], stderr=subprocess.PIPE, timeout=300,
                          **kw)


@pytest.mark.parametrize("as_json", [True, False], ids=["--json", "table"])
def test_stdout_full_exits_non_zero_with_one_line(work, tmp_path, as_json):
    with open("/dev/full", "w") as full:
        r = _cli_subprocess(["ir", work / "a.wav", *(["--json"] if as_json else [])], stdout=full)
    one_line_error(r.returncode, r.stderr.decode(), 1, "could not be written to standard output")


def test_stdout_closed_exits_non_zero_before_any_work(work, tmp_path):
    out = tmp_path / "r.json"
    r = _cli_subprocess(["ir", work / "a.wav", "--json", "--out", out], stdout=None,
                        preexec_fn=lambda: os.close(1))
    one_line_error(r.returncode, r.stderr.decode(), 2, "standard output is closed")
    assert not out.exists()
