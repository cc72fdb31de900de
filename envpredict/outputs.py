"""Outputs that never destroy a user's files.

Every file the tool writes goes through :func:`atomic_write_bytes` (or
:func:`atomic_write_text`), every folder through :func:`atomic_directory`:

* an output appears whole or not at all: it is written to a hidden temporary
  ``.NAME.PID.XXXXXXXX.part`` next to it, flushed to disk, then renamed over the final
  name; a failure removes the temporary and leaves the final name as it was;
* an output that is a symbolic link is written through the link: the link's target
  is replaced (atomically, in the target's folder) and the link stays;
* a named pipe, device or socket is refused as an output (it is not a file to replace);
* a new file gets the mode ``0666 & ~umask`` (a folder ``0777 & ~umask``), as the shell
  would give it; a replaced file or folder keeps its mode;
* temporaries left by a killed run (``.NAME.*.part`` and ``.NAME.*.old`` for the same
  output name, older than this process and not owned by a running process) are removed
  by the next write into the same place;
* an operating-system error while writing becomes one line: :class:`ComputationError`
  (exit 1) for a full disk or an I/O error, :class:`InputError` (exit 2) for a path that
  cannot be written (read-only, no permission, a file where a folder should be).

:func:`check_output_file` and :func:`check_output_folder` refuse, before any slow work,
an output that is (or resolves to) one of the inputs, a folder where a file is wanted,
a missing or unwritable folder, or a pipe or device.
"""

from __future__ import annotations

import contextlib
import errno
import os
import re
import shutil
import stat
import tempfile
import time
from collections.abc import Callable, Iterable, Iterator
from pathlib import Path
from typing import BinaryIO

from . import checks
from .exceptions import ComputationError, InputError

#: Time this module was first imported: a temporary older than this cannot be one this
#: process is writing (every temporary is made through this module).
_STARTED = time.time()

#: What follows ``.NAME.`` in the name of a temporary: an optional process id, the
#: random part of :mod:`tempfile` (8 characters) and the kind.
_TEMP_TAIL = re.compile(r"^(?:(?P<pid>\d+)\.)?[a-z0-9_]{8}\.(?:part|old)$")

_PathLike = str | os.PathLike


# ---------------------------------------------------------------------------
# Modes
# ---------------------------------------------------------------------------


def current_umask() -> int:
    """The process umask (read without changing it where the system allows)."""
    with contextlib.suppress(OSError, ValueError):
        with open("/proc/self/status", encoding="ascii", errors="replace") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _mode(target: Path, folder: bool) -> int:
    """Mode for a file (or folder) written at ``target``: that of the file (folder) it
    replaces, or 0666 (0777) & ~umask."""
    with contextlib.suppress(OSError):
        st = os.stat(target)
        if (stat.S_ISDIR if folder else stat.S_ISREG)(st.st_mode):
            return stat.S_IMODE(st.st_mode) & 0o777
    return (0o777 if folder else 0o666) & ~current_umask()


# ---------------------------------------------------------------------------
# Paths
# ---------------------------------------------------------------------------


def _kind(mode: int) -> str | None:
    """What a non-regular, non-folder file is, in words (None for a file or folder)."""
    if stat.S_ISFIFO(mode):
        return "a named pipe (FIFO)"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    if stat.S_ISREG(mode) or stat.S_ISDIR(mode):
        return None
    return "not a regular file"


def resolve_output(path: _PathLike) -> Path:
    """The path a write to ``path`` lands on: the target of a symbolic link (followed to
    the end, also a link to a file that does not exist yet), else ``path`` itself.

    Raises
    ------
    InputError
        If ``path`` is not a usable path (:func:`envpredict.checks.path`).
    """
    p = checks.path(path, "output")
    if p.is_symlink():
        return Path(os.path.realpath(p))
    return p


def _parent(p: Path) -> Path:
    return p.parent if str(p.parent) else Path(".")


def _check_folder_usable(parent: Path, what: str) -> None:
    try:
        st = os.stat(parent)
    except FileNotFoundError:
        raise InputError(f"{what} '{parent}' does not exist", "create it first or choose another path") from None
    except NotADirectoryError:
        raise InputError(f"{what} '{parent}' is inside a file, not a folder",
                         "choose a path inside a folder") from None
    except OSError as e:
        raise InputError(f"{what} '{parent}' cannot be used ({e.strerror or e})", "choose another path") from None
    if not stat.S_ISDIR(st.st_mode):
        raise InputError(f"{what} '{parent}' is a file, not a folder", "choose a path inside a folder")
    if not os.access(parent, os.W_OK | os.X_OK):
        why = "is on a read-only file system" if _read_only_fs(parent) else "is not writable"
        raise InputError(f"{what} '{parent}' {why}", "choose a folder you can write to")


def _read_only_fs(folder: Path) -> bool:
    with contextlib.suppress(OSError, AttributeError):
        return bool(os.statvfs(folder).f_flag & os.ST_RDONLY)
    return False


def same_path(a: _PathLike, b: _PathLike) -> bool:
    """Whether two paths name the same file: the same resolved path, or the same inode
    (a hard link, another spelling through a link or a bind mount).

    Raises
    ------
    InputError
        If ``a`` or ``b`` is not a usable path (:func:`envpredict.checks.path`).
    """
    a, b = checks.path(a, "path"), checks.path(b, "path")
    try:
        if os.path.samefile(a, b):
            return True
    except (OSError, ValueError):
        pass
    try:
        return os.path.realpath(a) == os.path.realpath(b)
    except (OSError, ValueError):
        return False


def _inside(path: _PathLike, folder: _PathLike) -> bool:
    """Whether ``path`` is ``folder`` or lies inside it (resolved)."""
    try:
        rp, rf = os.path.realpath(path), os.path.realpath(folder)
        return os.path.commonpath([rp, rf]) == rf
    except (OSError, ValueError):
        return False


def _input_list(inputs: Iterable[_PathLike | None] | None) -> list[str]:
    if inputs is not None and (isinstance(inputs, (str, bytes, os.PathLike))
                               or not isinstance(inputs, Iterable)):
        raise InputError("the inputs are not a list of paths", "pass a list (or None)")
    out = []
    for i in () if inputs is None else inputs:
        if i is None:
            continue
        with contextlib.suppress(TypeError):
            out.append(os.fspath(i))
    return out


def check_output_file(path: _PathLike, *, inputs: Iterable[_PathLike | None] | None = None,
                      option: str = "output") -> Path:
    """Refuse, before any slow work, an output file that could not be written or would
    destroy an input.

    Parameters
    ----------
    path : the output file (a symbolic link is followed: its target is what is written).
    inputs : the input files of the run; an output that is one of them (the same path
        after resolving links, or the same inode) is refused.
    option : how the output is named in the message (e.g. ``"--out"``).

    Returns
    -------
    The path that will be written (the target of a link, else ``path``).

    Raises
    ------
    InputError
        The output is an input, a folder, a named pipe, device or socket; its folder is
        missing, a file, read-only or not writable; ``path`` is not a usable path or
        ``inputs`` not a list of paths.
    """
    p = checks.path(path, option)
    target = resolve_output(p)
    try:
        st = os.stat(target)
    except FileNotFoundError:
        st = None  # a new file cannot be any (existing) input
    except NotADirectoryError:
        raise InputError(f"{option} '{p}' is inside a file, not a folder", "choose a path inside a folder") from None
    except OSError as e:
        raise InputError(f"{option} '{p}' cannot be used ({e.strerror or e})", "choose another path") from None
    if st is not None:
        for inp in _input_list(inputs):
            try:
                si = os.stat(inp)
            except (OSError, ValueError):
                continue
            if (si.st_dev, si.st_ino) == (st.st_dev, st.st_ino):
                raise InputError(f"{option} '{p}' is the input file '{inp}'",
                                 "choose another output name (writing it would replace the input)")
    if st is not None:
        if stat.S_ISDIR(st.st_mode):
            raise InputError(f"{option} '{p}' is a folder", "give a file name")
        kind = _kind(st.st_mode)
        if kind is not None:
            raise InputError(f"{option} '{p}' is {kind}, not a regular file",
                             "give the name of a regular file (the result is printed on standard output "
                             "with --json)")
    _check_folder_usable(_parent(target), "output folder")
    if st is not None and not os.access(target, os.W_OK):
        raise InputError(f"{option} '{p}' is read-only", "make it writable or choose another name")
    return target


def check_output_folder(path: _PathLike, *, inputs: Iterable[_PathLike | None] | None = None,
                        option: str = "output folder") -> Path:
    """Refuse, before any slow work, an output folder that could not be written or holds
    (or is) an input. Whether an existing folder may be replaced is the caller's rule
    (see :func:`envpredict.report.check_report_folder`).

    Returns
    -------
    The folder that will be written (the target of a link, else ``path``).

    Raises
    ------
    InputError
        The folder holds (or is) an input or is not a folder; its parent is missing, a
        file, read-only or not writable; ``path`` is not a usable path.
    """
    p = checks.path(path, option)
    target = resolve_output(p)
    check_inputs_outside(p, inputs, option=option)
    try:
        st = os.stat(target)
    except FileNotFoundError:
        st = None
    except NotADirectoryError:
        raise InputError(f"{option} '{p}' is inside a file, not a folder", "choose a path inside a folder") from None
    except OSError as e:
        raise InputError(f"{option} '{p}' cannot be used ({e.strerror or e})", "choose another path") from None
    if st is not None and not stat.S_ISDIR(st.st_mode):
        raise InputError(f"{option} '{p}' exists and is not a folder", "give a folder name")
    _check_folder_usable(_parent(target), "output folder")
    return target


def check_inputs_outside(folder: _PathLike, inputs: Iterable[_PathLike | None] | None, *,
                         option: str = "output folder") -> None:
    """Refuse an output folder that is one of the ``inputs`` or holds one (resolved paths).

    Raises
    ------
    InputError
        If ``folder`` is not a usable path (:func:`envpredict.checks.path`).
    """
    folder = checks.path(folder, option)
    inputs = _input_list(inputs)
    if not os.path.lexists(folder):
        return
    for inp in _input_list(inputs):
        if _inside(inp, folder):
            raise InputError(f"{option} '{folder}' holds the input '{inp}'",
                             "choose another folder (the folder is replaced as a whole)")


def check_distinct(out: _PathLike | None, folder: _PathLike | None, *, out_option: str = "--out",
                   folder_option: str = "--report") -> None:
    """Refuse an output file that is, or lies inside, an output folder of the same run
    (``--out X --report X``: the second write would fail or be replaced by the first).

    Raises
    ------
    InputError
        For such a pair, or a path that is not usable (:func:`envpredict.checks.path`).
    """
    if out is None or folder is None:
        return
    o, f = resolve_output(checks.path(out, out_option)), resolve_output(checks.path(folder, folder_option))
    if same_path(o, f):
        raise InputError(f"{out_option} '{out}' and {folder_option} '{folder}' name the same path",
                         f"give {out_option} a file outside the {folder_option} folder")
    if _inside(o, f):
        raise InputError(f"{out_option} '{out}' lies inside the {folder_option} folder '{folder}' (which is replaced "
                         "as a whole)", f"give {out_option} a file outside the {folder_option} folder")


# ---------------------------------------------------------------------------
# Temporaries of killed runs
# ---------------------------------------------------------------------------


def _pid_alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OverflowError, ValueError):
        return True
    except OSError:
        return True
    return True


def stale_temporaries(target: _PathLike) -> list[Path]:
    """Temporaries of earlier runs for the output ``target``: ``.NAME.*.part`` files or
    folders and ``.NAME.*.old`` folders next to it, made before this process started
    and not by a process still running.

    Raises
    ------
    InputError
        If ``target`` is not a usable path (:func:`envpredict.checks.path`).
    """
    t = checks.path(target, "output")
    parent, head = _parent(t), f".{t.name}."
    found = []
    try:
        entries = list(os.scandir(parent))
    except OSError:
        return []
    for e in entries:
        if not e.name.startswith(head):
            continue
        m = _TEMP_TAIL.match(e.name[len(head):])
        if m is None:
            continue
        try:
            st = e.stat(follow_symlinks=False)
        except OSError:
            continue
        if st.st_mtime >= _STARTED:
            continue
        pid = m.group("pid")
        if pid is not None and _pid_alive(int(pid)):
            continue
        found.append(Path(e.path))
    return found


def remove_stale_temporaries(target: _PathLike) -> None:
    """Remove what :func:`stale_temporaries` finds (errors are ignored).

    Raises
    ------
    InputError
        If ``target`` is not a usable path (:func:`envpredict.checks.path`).
    """
    for s in stale_temporaries(target):
        if s.is_dir() and not s.is_symlink():
            shutil.rmtree(s, ignore_errors=True)
        else:
            with contextlib.suppress(OSError):
                s.unlink()


# ---------------------------------------------------------------------------
# Errors
# ---------------------------------------------------------------------------

_FULL = {errno.ENOSPC, getattr(errno, "EDQUOT", errno.ENOSPC), errno.EFBIG}


def output_error(e: OSError, path: _PathLike) -> InputError | ComputationError:
    """The one-line error for an operating-system error met while writing ``path``.

    Raises
    ------
    InputError
        If ``e`` is not an :class:`OSError`.
    """
    if not isinstance(e, OSError):
        raise InputError(f"{e!r:.40} is not an operating-system error", "pass the OSError that was caught")
    code = e.errno
    why = e.strerror or str(e)
    if code in _FULL:
        return ComputationError(f"the disk is full: '{path}' could not be written ({why})",
                                "free some space or write to another disk, then run again")
    if code == errno.EROFS:
        return InputError(f"'{path}' cannot be written: the file system is read-only",
                          "choose a folder you can write to")
    if code in (errno.EACCES, errno.EPERM):
        return InputError(f"no permission to write '{path}'", "choose a folder you can write to")
    if code == errno.ENOTDIR:
        return InputError(f"a part of the path '{path}' is a file, not a folder", "choose a path inside a folder")
    if code == errno.EISDIR:
        return InputError(f"'{path}' is a folder", "give a file name")
    if code == errno.ENOENT:
        return InputError(f"the folder of '{path}' does not exist", "create it first or choose another path")
    if code == errno.ENAMETOOLONG:
        return InputError(f"the name '{path}' is too long", "choose a shorter name")
    return ComputationError(f"'{path}' could not be written ({why})", "check the disk and the path, then run again")


def _fsync_folder(folder: Path) -> None:
    with contextlib.suppress(OSError, AttributeError):
        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


# ---------------------------------------------------------------------------
# Writers
# ---------------------------------------------------------------------------


@contextlib.contextmanager
def atomic_file(path: _PathLike) -> Iterator[BinaryIO]:
    """Yield a binary file open for writing; on success it replaces ``path``.

    The rules of :func:`atomic_write_bytes`, for output written piece by piece (e.g. a
    long signal in blocks): the data goes to a hidden ``.NAME.PID.XXXXXXXX.part`` file
    beside ``path``, flushed to disk and renamed over ``path`` when the ``with`` block
    ends without an exception; on any exception (or a kill) the final name is left as
    it was and the temporary is removed (by the next run, after a kill).

    Raises
    ------
    InputError
        ``path`` is not a usable output path (see :func:`check_output_file`), or the file
        cannot be written there (read-only or full disk, a missing folder).
    """
    p = checks.path(path, "output")
    target = check_output_file(p)
    parent = _parent(target)
    remove_stale_temporaries(target)
    mode = _mode(target, folder=False)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.{os.getpid()}.", suffix=".part", dir=str(parent))
    except OSError as e:
        raise output_error(e, p) from None
    try:
        with os.fdopen(fd, "w+b") as fh:
            if hasattr(os, "fchmod"):
                os.fchmod(fh.fileno(), mode)
            else:  # Windows before Python 3.13
                os.chmod(tmp, mode)
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, target)
    except BaseException as e:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        if isinstance(e, OSError):
            raise output_error(e, p) from None
        raise
    _fsync_folder(parent)


def atomic_write_bytes(path: _PathLike, data: bytes) -> Path:
    """Write ``data`` to ``path`` through a temporary file and an atomic rename
    (:func:`atomic_file`).

    A symbolic link is written through (its target is replaced); a new file gets the
    mode ``0666 & ~umask``, a replaced file keeps its mode. Raises :class:`InputError`
    for a path that cannot be written and :class:`ComputationError` for a full disk;
    in both cases nothing is left under the final name or beside it.

    Returns
    -------
    ``path`` as given.
    """
    if not isinstance(data, (bytes, bytearray, memoryview)):
        raise InputError(f"data to write are not bytes ({type(data).__name__})", "pass bytes")
    with atomic_file(path) as fh:
        fh.write(data)
    return Path(os.fspath(path))


def atomic_write_text(path: _PathLike, text: str) -> Path:
    """:func:`atomic_write_bytes` of ``text`` encoded as UTF-8 (a file name's undecodable
    bytes, kept as surrogates, are written back as they were).

    Raises
    ------
    InputError
        For ``text`` that is not text, or as :func:`atomic_write_bytes`.
    ComputationError
        As :func:`atomic_write_bytes`.
    """
    checks.text(text, "text to write")
    return atomic_write_bytes(path, text.encode("utf-8", "surrogateescape"))


@contextlib.contextmanager
def atomic_directory(path: _PathLike, *, replaceable: Callable[[Path], None] | None = None) -> Iterator[Path]:
    """Yield a temporary folder; on success it replaces ``path`` (created if absent).

    On any exception the temporary folder is removed and ``path`` is left as it was.

    Parameters
    ----------
    path : the folder to write (a symbolic link to a folder is written through).
    replaceable : called with the old folder (already moved aside, so that nothing can
        be added to it meanwhile) when ``path`` exists; it raises to keep the old folder,
        which is then put back. Without it, only an empty folder is replaced.

    Raises
    ------
    InputError
        For a path that is not usable or cannot be written; what ``replaceable`` raises.
    ComputationError
        For a full disk.
    """
    p = checks.path(path, "output")
    if replaceable is not None and not callable(replaceable):
        raise InputError("replaceable is not a function", "pass a function of the old folder, or None")
    target = check_output_folder(p, option="folder")
    parent = _parent(target)
    remove_stale_temporaries(target)
    mode = _mode(target, folder=True)
    try:
        tmp = Path(tempfile.mkdtemp(prefix=f".{target.name}.{os.getpid()}.", suffix=".part", dir=str(parent)))
        os.chmod(tmp, mode)
    except OSError as e:
        raise output_error(e, p) from None
    try:
        yield tmp
    except BaseException as e:
        shutil.rmtree(tmp, ignore_errors=True)
        if isinstance(e, OSError):
            raise output_error(e, p) from None
        raise
    try:
        if os.path.lexists(target):
            old = Path(tempfile.mkdtemp(prefix=f".{target.name}.{os.getpid()}.", suffix=".old", dir=str(parent)))
            os.rmdir(old)
            os.replace(target, old)
            try:
                if replaceable is not None:
                    replaceable(old)
                elif any(old.iterdir()):
                    raise InputError(f"folder '{p}' is not empty", "give the name of a new folder")
            except BaseException:
                os.replace(old, target)
                raise
            os.replace(tmp, target)
            shutil.rmtree(old, ignore_errors=True)
        else:
            os.replace(tmp, target)
    except BaseException as e:
        shutil.rmtree(tmp, ignore_errors=True)
        if isinstance(e, OSError):
            raise output_error(e, p) from None
        raise
    _fsync_folder(parent)


__all__ = [
    "atomic_directory", "atomic_file", "atomic_write_bytes", "atomic_write_text", "check_distinct",
    "check_inputs_outside", "check_output_file",
    "check_output_folder", "current_umask", "output_error", "remove_stale_temporaries", "resolve_output",
    "same_path", "stale_temporaries",
]
