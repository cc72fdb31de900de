"""Small helpers shared by the result dataclasses: conversion to JSON-ready values."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from . import checks
from .exceptions import InputError

#: Most decimals or significant digits asked for (a float64 holds 17).
MAX_DIGITS: int = 17


def jsonable(value: Any, digits: int | None = None) -> Any:
    """Convert numpy arrays/scalars, tuples and dataclasses to plain JSON values.

    Non-finite floats become ``None`` (JSON ``null``): a figure that could not be
    computed is absent, never a made-up number.

    Raises
    ------
    InputError
        If ``digits`` is not None or a whole number 0..:data:`MAX_DIGITS`.
    """
    if digits is not None and (isinstance(digits, (bool, np.bool_)) or not isinstance(digits, (int, np.integer))
                               or not 0 <= digits <= MAX_DIGITS):
        raise InputError(f"digits {digits!r:.40} is not a whole number 0..{MAX_DIGITS}", "give e.g. 4, or None")
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        if hasattr(value, "to_dict"):
            return value.to_dict()
        return {f.name: jsonable(getattr(value, f.name), digits) for f in dataclasses.fields(value)}
    if isinstance(value, dict):
        return {str(k): jsonable(v, digits) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [jsonable(v, digits) for v in value]
    if isinstance(value, np.ndarray):
        return jsonable(value.tolist(), digits)
    if isinstance(value, (np.bool_, bool)):
        return bool(value)
    if isinstance(value, (np.integer, int)):
        return int(value)
    if isinstance(value, (np.floating, float)):
        f = float(value)
        if not math.isfinite(f):
            return None
        return round(f, digits) if digits is not None else f
    return value


def round_significant(x, digits: int = 4) -> np.ndarray:
    """Round to ``digits`` significant figures (figure data in results: small JSON, no
    visible change at figure resolution). NaN and inf pass through.

    >>> round_significant([123456.0, 0.000123456, 0.0, float("nan")], 3).tolist()[:3]
    [123000.0, 0.000123, 0.0]

    Raises
    ------
    InputError
        For ``x`` that is not numbers, or ``digits`` that is not a whole number 1..:data:`MAX_DIGITS`.
    """
    digits = checks.number(digits, "significant digits", lo=1, hi=MAX_DIGITS, integer=True)
    a = checks.array(x, "values", ndim=tuple(range(33)), min_size=0, finite=False, fix="pass numbers")
    with np.errstate(divide="ignore", invalid="ignore"):
        mag = np.where(np.isfinite(a) & (a != 0), np.floor(np.log10(np.abs(a))), 0.0)
        scale = 10.0 ** (digits - 1 - mag)
        return np.where(np.isfinite(a), np.round(a * scale) / scale, a)
