"""The inspect command: its JSON is the result of :func:`envpredict.timescales.inspect_file`
plus its inputs, and the excerpt checks are the API's own."""

import json

import numpy as np
import pytest

from cli_for_tests import run_cli
from envpredict import standards as std
from envpredict.exceptions import InputError
from envpredict.timescales import inspect_file

FS = 16000


@pytest.fixture
def speechlike(write_wav):
    # 3 s of noise, amplitude-modulated at 4 Hz (a syllable-like rate)
    rng = np.random.default_rng(3)
    t = np.arange(3 * FS) / FS
    x = 0.1 * rng.standard_normal(t.size) * (1 + 0.8 * np.sin(2 * np.pi * 4 * t))
    return write_wav("speechlike.wav", x, FS)


def test_inspect_json_is_the_api_result(speechlike, capsys):
    code, out, _ = run_cli(["inspect", speechlike, "--start", "0.5", "--duration", "2", "--json"], capsys)
    assert code == 0
    d = json.loads(out)
    assert d.pop("inputs") == {"recording": str(speechlike), "channel": None, "start_s": 0.5, "duration_s": 2.0,
                               "f0_min_hz": std.F0_MIN_HZ, "f0_max_hz": std.F0_MAX_HZ}
    api = inspect_file(speechlike, start_s=0.5, duration_s=2.0)
    assert d == json.loads(json.dumps(api.to_dict()))


@pytest.mark.parametrize("duration", [0.5, 100000.0])
def test_duration_range_refused_by_the_api(speechlike, duration, capsys):
    msg = f"--duration {duration:g} s is outside 1-14400 s"
    with pytest.raises(InputError, match=msg):
        inspect_file(speechlike, duration_s=duration)
    code, out, err = run_cli(["inspect", speechlike, "--duration", duration], capsys)
    assert code == 2 and out == ""
    assert err.strip().splitlines() == [f"error: {msg} — give a duration in that range"]


def test_start_outside_refused_by_the_api(speechlike, capsys):
    with pytest.raises(InputError, match=r"--start 9 s is outside the recording \(0 to 3.00 s\)"):
        inspect_file(speechlike, start_s=9.0, duration_s=0.5)  # the start is judged first
    code, _, err = run_cli(["inspect", speechlike, "--start", "9"], capsys)
    assert code == 2 and len(err.strip().splitlines()) == 1 and "--start 9 s is outside" in err
