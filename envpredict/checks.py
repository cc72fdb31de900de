"""Boundary checks of plain arguments: paths, numbers, choices, sample rates, arrays.

Every public function checks its arguments with these before it computes, so a wrong
argument becomes one :class:`~envpredict.exceptions.InputError` (``what`` and ``fix``)
instead of a ``TypeError``, ``ValueError``, ``ZeroDivisionError`` or a huge allocation
deep inside numpy. The signal rule of the package (clipping, silence, length) stays in
:mod:`envpredict.audio`; these are the type and range checks below it.
"""

from __future__ import annotations

import math
import numbers
import os
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .exceptions import InputError

if TYPE_CHECKING:  # numpy is imported inside the checks that need it: --help stays fast
    import numpy as np

#: Sample rates accepted at all, Hz. Below 8 kHz no index in this tool has bandwidth
#: to work with; above 384 kHz the input is almost certainly mislabelled (common
#: practice, no source).
MIN_RATE_HZ: int = 8000
MAX_RATE_HZ: int = 384000

#: Longest file name and path accepted, bytes: NAME_MAX and PATH_MAX of Linux
#: (<limits.h>); longer names fail in the operating system anyway.
MAX_NAME_BYTES: int = 255
MAX_PATH_BYTES: int = 4096

#: Most samples an argument may ask to be allocated or read in one piece (2**31,
#: 16 GiB as float64; 12 h at 48 kHz): a length or count beyond it is a mistake, not a
#: measurement (judgement).
MAX_SAMPLES: int = 2**31


def _show(value: Any) -> str:
    """``repr(value)`` cut to 40 characters (a whole number of more than 4300 digits has
    no ``repr`` in Python 3.11 and later)."""
    if isinstance(value, int) and abs(value) >= 10**30:  # bools are small
        return f"a whole number of about {int(value.bit_length() * math.log10(2)) + 1} digits"
    try:
        text = repr(value)
    except ValueError:
        return f"a {type(value).__name__} too long to show"
    return text if len(text) <= 40 else text[:39] + "…"


def path(value: Any, what: str, fix: str = "") -> Path:
    """``value`` as a :class:`~pathlib.Path`; refuses non-paths, empty and NUL-holding
    names and names longer than the operating system allows.

    Raises
    ------
    InputError
        A value that is not a usable path.
    """
    fix = fix or f"give the path of the {what}"
    if isinstance(value, bytes) or not isinstance(value, (str, os.PathLike)):
        raise InputError(f"{what} is not a file path ({type(value).__name__})", fix)
    text = os.fspath(value)
    if not isinstance(text, str) or not text:
        raise InputError(f"{what} is an empty path", fix)
    if "\x00" in text:
        raise InputError(f"{what} holds a NUL character", fix)
    try:
        raw = os.fsencode(text)
    except UnicodeError:  # a lone surrogate that no file name can hold
        raise InputError(f"{what} holds characters no file name can hold", fix) from None
    if len(raw) > MAX_PATH_BYTES or any(len(part) > MAX_NAME_BYTES for part in raw.split(b"/")):
        raise InputError(f"{what} is a name longer than the file system allows", "give a shorter path")
    return Path(text)


def number(value: Any, what: str, *, lo: float = -math.inf, hi: float = math.inf, lo_open: bool = False,
           hi_open: bool = False, integer: bool = False, fix: str = "") -> float:
    """``value`` as a finite float (``int`` with ``integer``) within ``lo``..``hi``
    (open ends with ``lo_open``/``hi_open``); refuses text, bools, NaN and infinity.

    Raises
    ------
    InputError
        A value that is not a number within the range.
    """
    import numpy as np

    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise InputError(f"{what} is not a number ({_show(value)})", fix or "give a number")
    try:
        v = float(value)
        huge = False
    except OverflowError:  # a whole number beyond the float range: refused as out of range below
        v, huge = (math.inf if value > 0 else -math.inf), True
    if integer and not huge and (not math.isfinite(v) or v != math.floor(v)):
        raise InputError(f"{what} is {_show(value)}, not a whole number", fix or "give a whole number")
    below = v <= lo if lo_open else v < lo
    above = v >= hi if hi_open else v > hi
    if not math.isfinite(v) or below or above:
        rng = f"{'(' if lo_open else '['}{lo:g}, {hi:g}{')' if hi_open else ']'}"
        raise InputError(f"{what} is {_show(value)}, outside {rng}", fix or f"give a value within {rng}")
    return int(v) if integer else v


def optional_number(value: Any, what: str, **kw) -> float | None:
    """:func:`number`, or None for None.

    Raises
    ------
    InputError
        As :func:`number`.
    """
    return None if value is None else number(value, what, **kw)


def flag(value: Any, what: str) -> bool:
    """A yes/no argument (``True``/``False``, numpy bools included).

    Raises
    ------
    InputError
        A value other than True or False.
    """
    import numpy as np

    if not isinstance(value, (bool, np.bool_)):
        raise InputError(f"{what} is {_show(value)}, not True or False", "give True or False")
    return bool(value)


def text(value: Any, what: str, fix: str = "") -> str:
    """A text argument.

    Raises
    ------
    InputError
        A value that is not text.
    """
    if not isinstance(value, str):
        raise InputError(f"{what} is not text ({type(value).__name__})", fix or "give it as text")
    return value


def choice(value: Any, what: str, options: Sequence[str]) -> str:
    """One of ``options`` (exact text).

    Raises
    ------
    InputError
        A value that is not one of ``options``.
    """
    if not isinstance(value, str) or value not in options:
        listed = ", ".join(options)
        raise InputError(f"{what} {_show(value)} is not one of {listed}", f"give one of {listed}")
    return value


def sample_rate(fs: Any, name: str = "input") -> int:
    """The one rate rule: a whole number of Hz within :data:`MIN_RATE_HZ`..:data:`MAX_RATE_HZ`.

    Raises
    ------
    InputError
        A rate that is not a whole number of Hz within the accepted range.
    """
    import numpy as np

    if isinstance(fs, (bool, np.bool_)) or not isinstance(fs, numbers.Real):
        try:  # numeric text and 0-d arrays are read as numbers, as before
            fs = float(fs)
        except (TypeError, ValueError, OverflowError):
            raise InputError(f"sample rate of {name} is not a number ({_show(fs)})", "give the rate in Hz") from None
    try:
        fsf = float(fs)
    except OverflowError:  # a whole number beyond the float range
        fsf = math.inf
    if not np.isfinite(fsf) or fsf != round(fsf) or fsf <= 0:
        raise InputError(f"sample rate of {name} is {_show(fs)}", "give a whole, positive rate in Hz")
    if not MIN_RATE_HZ <= fsf <= MAX_RATE_HZ:
        raise InputError(
            f"sample rate of {name} is {int(fsf)} Hz, outside {MIN_RATE_HZ}..{MAX_RATE_HZ} Hz",
            "resample the recording to a common rate such as 48000 Hz",
        )
    return int(fsf)


def array(x: Any, what: str, *, ndim: int | tuple[int, ...] = 1, min_size: int = 1, finite: bool = True,
          fix: str = "") -> np.ndarray:
    """``x`` as a float64 array of ``ndim`` dimensions (one of them, for a tuple) with at
    least ``min_size`` values (along the last axis), finite unless ``finite=False``.

    Raises
    ------
    InputError
        A value that is not such an array.
    """
    import numpy as np

    fix = fix or f"pass a {ndim if isinstance(ndim, int) else ' or '.join(map(str, ndim))}-D array of numbers"
    try:
        a = np.asarray(x)
    except (TypeError, ValueError):
        raise InputError(f"{what} is not an array of numbers", fix) from None
    if a.dtype.kind not in "fiu":
        raise InputError(f"{what} is not an array of real numbers (dtype {a.dtype})", fix)
    dims = (ndim,) if isinstance(ndim, int) else ndim
    if a.ndim not in dims:
        raise InputError(f"{what} has {a.ndim} dimensions, not {' or '.join(map(str, dims))}", fix)
    if a.size > MAX_SAMPLES:
        raise InputError(f"{what} holds {a.size} values, more than {MAX_SAMPLES}", "pass a shorter array")
    if (a.shape[-1] if a.ndim else 1) < min_size or a.size == 0 and min_size > 0:
        raise InputError(f"{what} holds too few values ({a.shape}; at least {min_size} needed)", fix)
    a = a.astype(np.float64, copy=False)
    if finite and not np.all(np.isfinite(a)):
        raise InputError(f"{what} holds NaN or infinite values", "remove them or pass finite numbers")
    return a


def samples(n: Any, what: str, *, lo: int = 0) -> int:
    """A count of samples (or frames) within ``lo``..:data:`MAX_SAMPLES`.

    Raises
    ------
    InputError
        A count that is not a whole number within the range.
    """
    return number(n, what, lo=lo, hi=MAX_SAMPLES, integer=True)
