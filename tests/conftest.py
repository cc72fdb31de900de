"""Pytest configuration and fixtures only.

Helpers that tests call live in plain modules (``signals_for_tests``, ``cli_for_tests``).
"""

from __future__ import annotations

import pytest
from hypothesis import settings

# The property tests draw the same examples on every run (here and in CI): a failure is
# reproducible, and CI cannot fail on an example no one has seen before. Widen the search
# for a run by hand with HYPOTHESIS_PROFILE=explore.
settings.register_profile("repeatable", derandomize=True, database=None)
settings.register_profile("explore", derandomize=False)
settings.load_profile(__import__("os").environ.get("HYPOTHESIS_PROFILE", "repeatable"))


@pytest.fixture
def write_wav(tmp_path):
    import soundfile as sf

    def _write(name, x, fs, subtype="PCM_24"):
        p = tmp_path / name
        sf.write(p, x, fs, subtype=subtype)
        return p

    return _write
