"""Exceptions raised by envpredict.

Every expected failure is one of two kinds:

* :class:`InputError` -- the input (a file, an array, an option) is malformed or
  outside the valid range of the method. The CLI exits with code 2.
* :class:`ComputationError` -- the input was acceptable but the method could not
  produce a trustworthy number (for example a decay range too small for T30).
  The CLI exits with code 1.

Both carry ``what`` (what is wrong) and ``fix`` (what to do about it); the CLI
prints them as one line ``error: WHAT — FIX``.
"""

from __future__ import annotations


class EnvpredictError(Exception):
    """Base of all documented envpredict errors."""

    exit_code = 1

    def __init__(self, what: str, fix: str = "") -> None:
        self.what = what.rstrip(".")
        self.fix = fix.rstrip(".")
        super().__init__(self.one_line())

    def one_line(self) -> str:
        """The message as one line, ``WHAT — FIX``."""
        return f"{self.what} — {self.fix}" if self.fix else self.what


class InputError(EnvpredictError, ValueError):
    """Malformed input or an option out of range (CLI exit code 2)."""

    exit_code = 2


class ComputationError(EnvpredictError, RuntimeError):
    """The method cannot give a trustworthy result for this input (CLI exit code 1)."""

    exit_code = 1
