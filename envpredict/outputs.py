"""Atomic writes: an output file or folder either appears whole or not at all."""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from pathlib import Path
from typing import Iterator

from .exceptions import InputError


def _check_parent(path: Path) -> None:
    parent = path.parent if str(path.parent) else Path(".")
    if not parent.exists():
        raise InputError(f"output folder '{parent}' does not exist", "create it first or choose another path")
    if path.exists() and path.is_dir():
        raise InputError(f"output '{path}' is a folder", "give a file name")


def check_output_file(path: str | os.PathLike) -> None:
    """Refuse an output file whose folder is missing or which is a folder (what the atomic
    writers below refuse), so that a command can say so before its slow work."""
    _check_parent(Path(path))


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> Path:
    """Write ``data`` to ``path`` through a temporary file and an atomic rename."""
    p = Path(path)
    _check_parent(p)
    fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".part", dir=str(p.parent or "."))
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, p)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    return p


def atomic_write_text(path: str | os.PathLike, text: str) -> Path:
    return atomic_write_bytes(path, text.encode("utf-8"))


@contextlib.contextmanager
def atomic_directory(path: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary folder; on success it replaces ``path`` (created if absent).

    On any exception the temporary folder is removed and ``path`` is left as it was.
    """
    p = Path(path)
    if p.exists() and not p.is_dir():
        raise InputError(f"report path '{p}' exists and is not a folder", "give a folder name")
    parent = p.parent if str(p.parent) else Path(".")
    if not parent.exists():
        raise InputError(f"folder '{parent}' does not exist", "create it first or choose another path")
    tmp = Path(tempfile.mkdtemp(prefix=f".{p.name}.", suffix=".part", dir=str(parent)))
    try:
        yield tmp
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    if p.exists():
        old = Path(tempfile.mkdtemp(prefix=f".{p.name}.", suffix=".old", dir=str(parent)))
        os.rmdir(old)
        os.replace(p, old)
        os.replace(tmp, p)
        shutil.rmtree(old, ignore_errors=True)
    else:
        os.replace(tmp, p)
