"""Audio input layer: loading and the refusals of malformed input (one test per way of being wrong)."""

import numpy as np
import pytest
import soundfile as sf

from envpredict.audio import estimate_delay, is_clipped, load_audio, resample, validate_signal
from envpredict.exceptions import InputError


def test_load_float64_mono(write_wav):
    x = 0.1 * np.sin(np.arange(4800) / 10)
    p = write_wav("a.wav", x, 48000, "FLOAT")
    y, fs = load_audio(p)
    assert fs == 48000 and y.dtype == np.float64 and np.allclose(x, y, atol=1e-7)


@pytest.mark.parametrize("fmt,subtype", [("FLAC", "PCM_24"), ("OGG", "VORBIS")])
def test_flac_and_ogg(tmp_path, fmt, subtype):
    x = 0.1 * np.random.default_rng(0).standard_normal(48000)
    p = tmp_path / f"a.{fmt.lower()}"
    sf.write(p, x, 48000, format=fmt, subtype=subtype)
    y, fs = load_audio(p)
    assert fs == 48000 and y.size == pytest.approx(48000, abs=1000)


def test_channel_choice(write_wav):
    x = np.stack([0.1 * np.ones(100) * np.arange(100) / 100, -0.2 * np.arange(100) / 100], axis=1)
    p = write_wav("st.wav", x, 48000, "FLOAT")
    with pytest.raises(InputError, match="2 channels.*--channel"):
        load_audio(p)
    y, _ = load_audio(p, channel=1, check=False)
    assert np.allclose(y, x[:, 1], atol=1e-7)
    with pytest.raises(InputError, match="channel 5 does not exist"):
        load_audio(p, channel=5)


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        load_audio(tmp_path / "nope.wav")


def test_directory(tmp_path):
    with pytest.raises(InputError, match="folder"):
        load_audio(tmp_path)


def test_empty_file(tmp_path):
    p = tmp_path / "empty.wav"
    p.write_bytes(b"")
    with pytest.raises(InputError, match="empty"):
        load_audio(p)


def test_not_audio(tmp_path):
    p = tmp_path / "notes.wav"
    p.write_text("this is a text file, not audio\n" * 20)
    with pytest.raises(InputError, match="not a readable audio file"):
        load_audio(p)


def test_truncated_header(tmp_path, write_wav):
    p = write_wav("ok.wav", 0.1 * np.ones(1000) * np.linspace(0, 1, 1000), 48000)
    q = tmp_path / "cut.wav"
    q.write_bytes(p.read_bytes()[:30])
    with pytest.raises(InputError):
        load_audio(q)


def test_zero_frames(write_wav):
    p = write_wav("zero.wav", np.zeros(0), 48000)
    with pytest.raises(InputError, match="no samples|empty"):
        load_audio(p)


def test_silence():
    with pytest.raises(InputError, match="silent"):
        validate_signal(np.zeros(48000), 48000)


def test_dc_only():
    with pytest.raises(InputError, match="constant"):
        validate_signal(np.full(48000, 0.3), 48000)


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_nan_inf(bad):
    x = np.random.default_rng(0).standard_normal(1000) * 0.1
    x[10] = bad
    with pytest.raises(InputError, match="NaN or infinite"):
        validate_signal(x, 48000)


def test_clipped_full_scale():
    x = np.clip(1.5 * np.sin(2 * np.pi * 200 * np.arange(4800) / 48000), -1, 1)
    assert is_clipped(x)
    with pytest.raises(InputError, match="clipped"):
        validate_signal(x, 48000)


def test_clipped_then_scaled():
    x = 0.5 * np.clip(1.5 * np.sin(2 * np.pi * 200 * np.arange(4800) / 48000), -1, 1)
    assert is_clipped(x)


def test_not_clipped_noise_and_single_peak():
    rng = np.random.default_rng(1)
    assert not is_clipped(0.1 * rng.standard_normal(48000))
    x = np.zeros(4800)
    x[100] = 1.0  # a normalised impulse response peaks at exactly full scale once
    x[101:] = 0.01 * rng.standard_normal(4699)
    assert not is_clipped(x)


@pytest.mark.parametrize("fs", [0, -48000, 1000, 44100.5, 10 ** 7, float("nan")])
def test_bad_rates(fs):
    with pytest.raises(InputError, match="sample rate"):
        validate_signal(np.random.default_rng(0).standard_normal(100), fs)


def test_two_dimensional_refused():
    with pytest.raises(InputError, match="one channel"):
        validate_signal(np.ones((100, 2)), 48000)


def test_resample_keeps_tone():
    fs_in, fs_out = 48000, 44100
    t = np.arange(fs_in) / fs_in
    y = resample(np.sin(2 * np.pi * 1000 * t), fs_in, fs_out)
    assert y.size == fs_out
    spec = np.abs(np.fft.rfft(y * np.hanning(y.size)))
    assert np.argmax(spec) * fs_out / y.size == pytest.approx(1000, abs=2)


def test_estimate_delay():
    rng = np.random.default_rng(2)
    ref = rng.standard_normal(16000)
    x = np.concatenate([np.zeros(4321), ref])[:16000]
    lag, corr = estimate_delay(ref, x, 16000, 1.0)
    assert lag == 4321 and corr > 0.99
    lag2, corr2 = estimate_delay(ref, rng.standard_normal(16000), 16000, 1.0)
    assert abs(corr2) < 0.1
