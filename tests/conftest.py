"""Shared test helpers."""

from __future__ import annotations

import numpy as np
import pytest


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


def noise_decay(T, fs=48000, seconds=None, seed=0, amplitude=0.2, floor_db=None):
    """Gaussian noise times exp(-6.91 t/T): the energy decays 60 dB in T seconds."""
    rng = np.random.default_rng(seed)
    n = int((seconds if seconds else 1.5 * T + 0.6) * fs)
    t = np.arange(n) / fs
    x = amplitude * rng.standard_normal(n) * np.exp(-3 * np.log(10) * t / T)
    if floor_db is not None:
        x += amplitude * 10 ** (floor_db / 20) * rng.standard_normal(n)
    return x


@pytest.fixture
def write_wav(tmp_path):
    import soundfile as sf

    def _write(name, x, fs, subtype="PCM_24"):
        p = tmp_path / name
        sf.write(p, x, fs, subtype=subtype)
        return p

    return _write
