"""Running the CLI inside the test process (a helper module, not a test file).

Tests import ``run_cli`` from here; they never import other test files (conftest
included), so that what a test depends on is a plain module.
"""

from __future__ import annotations


def run_cli(args, capsys=None):
    """Run the CLI in-process; return (exit_code, stdout, stderr).

    ``stdout`` and ``stderr`` are read from ``capsys`` when it is given, empty otherwise.
    A non-integer ``SystemExit`` code (a message) counts as exit code 1.
    """
    from envpredict.cli import main

    try:
        main([str(a) for a in args])
        code = 0
    except SystemExit as e:
        code = e.code if isinstance(e.code, int) else (0 if e.code is None else 1)
    if capsys is not None:
        out, err = capsys.readouterr()
        return code, out, err
    return code, "", ""


def cli_exit_code(args) -> int:
    """Run the CLI in-process and return only its exit code (output goes to pytest's capture)."""
    return run_cli(args)[0]
