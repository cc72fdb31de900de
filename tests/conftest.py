"""Shared test helpers."""

from __future__ import annotations

import pytest
from hypothesis import settings
from signals_for_tests import noise_decay  # noqa: F401  (re-exported: tests import it from here)

# The property tests draw the same examples on every run (here and in CI): a failure is
# reproducible, and CI cannot fail on an example no one has seen before. Widen the search
# for a run by hand with HYPOTHESIS_PROFILE=explore.
settings.register_profile("repeatable", derandomize=True, database=None)
settings.register_profile("explore", derandomize=False)
settings.load_profile(__import__("os").environ.get("HYPOTHESIS_PROFILE", "repeatable"))


def run_cli(args, capsys=None):
    """Run the CLI in-process; return (exit_code, stdout, stderr)."""
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


@pytest.fixture
def write_wav(tmp_path):
    import soundfile as sf

    def _write(name, x, fs, subtype="PCM_24"):
        p = tmp_path / name
        sf.write(p, x, fs, subtype=subtype)
        return p

    return _write
