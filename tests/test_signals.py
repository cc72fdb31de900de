"""Tests of the direct-method test signals (envpredict.signals, ``envpredict testsignal``)."""

from __future__ import annotations

import json

import numpy as np
import pytest
import soundfile as sf
from scipy.signal import hilbert

from envpredict import standards as std
from envpredict.audio import is_clipped
from envpredict.bands import octave_bands
from envpredict.exceptions import InputError
from envpredict.signals import (
    full_sti_envelope,
    full_sti_plan,
    full_sti_signal,
    is_loopable,
    octave_band_noise,
    stipa_envelope,
    stipa_signal,
)

from cli_for_tests import run_cli

FS = 24000  # above the 22.6 kHz the 8 kHz octave needs, and cheap


@pytest.fixture(scope="module")
def stipa15():
    return stipa_signal(15, FS, seed=7)




def carrier_mask(freqs, fc, pad_hz=0.0):
    half = 2.0 ** (std.TEST_SIGNAL_CARRIER_OCTAVES / 2)
    return (freqs >= fc / half - pad_hz) & (freqs < fc * half + pad_hz)


# --- the published modulation form --------------------------------------------------


def test_stipa_frequencies_are_table_b1():
    # IEC 60268-16:2011 Table B.1: f2 = 5 f1 in every band, 0.63 ... 12.5 Hz
    for f1, f2 in std.STIPA_MODULATION_HZ:
        assert f2 == pytest.approx(5 * f1)
    assert sorted(f for p in std.STIPA_MODULATION_HZ for f in p) == sorted(
        [0.63, 0.8, 1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.25, 8.0, 10.0, 12.5])


def test_stipa_envelope_never_negative():
    # IEC 60268-16 Annex B form 1 + 0.55 (sin a - sin 5a): analytic minimum
    # 1 - 1.1 * max(-cos 3a sin 2a) > 0; with a plus sign it would reach 1 - 1.1 = -0.1
    for f1, f2 in std.STIPA_MODULATION_HZ:
        t = np.linspace(0.0, 1.0 / f1, 200001)
        env = stipa_envelope(t, f1, f2)
        assert env.min() >= 0.0
        assert env.min() < 0.01  # the depth is as large as it can be without going negative
        assert env.mean() == pytest.approx(1.0, abs=1e-4)
    t = np.linspace(0, 2, 20001)
    assert full_sti_envelope(t, 1.0).min() >= -1e-12


# --- generation ---------------------------------------------------------------------


def test_stipa_signal_is_reproducible_and_seeded():
    a = stipa_signal(15, FS, seed=3)
    b = stipa_signal(15, FS, seed=3)
    c = stipa_signal(15, FS, seed=4)
    assert np.array_equal(a, b)
    assert not np.allclose(a, c)


def test_stipa_signal_level_and_length(stipa15):
    x = stipa15
    assert x.size == 15 * FS
    # peak at -3 dBFS exactly (3 dB headroom), so no converter clips it
    assert 20 * np.log10(np.abs(x).max()) == pytest.approx(std.TEST_SIGNAL_PEAK_DBFS, abs=1e-9)
    assert not is_clipped(x)


def test_stipa_signal_is_band_limited_noise(stipa15):
    # all energy inside the seven carrier bands, widened by the 12.5 Hz modulation
    # sidebands (and a little for the 10 ms fades)
    spec = np.abs(np.fft.rfft(stipa15)) ** 2
    f = np.fft.rfftfreq(stipa15.size, 1 / FS)
    inside = np.zeros(f.size, bool)
    for fc in std.OCTAVE_BANDS_HZ:
        inside |= carrier_mask(f, fc, pad_hz=25.0)
    assert spec[~inside].sum() / spec.sum() < 1e-4


def test_stipa_band_levels_follow_speech_spectrum(stipa15):
    # IEC 60268-16 Table A.2 male spectrum, relative levels between bands
    spec = np.abs(np.fft.rfft(stipa15)) ** 2
    f = np.fft.rfftfreq(stipa15.size, 1 / FS)
    lev = np.array([10 * np.log10(spec[carrier_mask(f, fc, 15.0)].sum()) for fc in std.OCTAVE_BANDS_HZ])
    want = np.array(std.SPEECH_SPECTRUM_MALE_DB)
    np.testing.assert_allclose(lev - lev[3], want - want[3], atol=0.1)


def test_stipa_bands_carry_the_nominal_modulation(stipa15):
    # isolate each carrier by FFT, take its intensity envelope and project onto f1, f2:
    # depth 0.55 each (IEC 60268-16 Annex B), nothing at the other band's frequencies
    x = stipa15
    f = np.fft.rfftfreq(x.size, 1 / FS)
    X = np.fft.rfft(x)
    for fc, (f1, f2) in zip(std.OCTAVE_BANDS_HZ, std.STIPA_MODULATION_HZ):
        band = np.fft.irfft(np.where(carrier_mask(f, fc, 15.0), X, 0), x.size)
        inten = np.abs(hilbert(band)) ** 2
        n = int(round(np.floor(13.0 * f1) / f1 * FS))  # whole periods of f1 (and f2 = 5 f1)
        seg = inten[FS: FS + n]
        t = np.arange(n) / FS
        depth = [2 * abs(np.sum(seg * np.exp(-2j * np.pi * fm * t))) / seg.sum() for fm in (f1, f2)]
        # the carrier's own random fluctuation blurs a 13 s estimate by about 2/sqrt(B*13)
        tol = 3 * 2 / np.sqrt(fc * (2 ** 0.25 - 2 ** -0.25) * 13)
        np.testing.assert_allclose(depth, std.STIPA_MODULATION_DEPTH, atol=tol)


def test_half_octave_carriers_hardly_leak_into_neighbour_analysis_bands():
    # the documented reason for half-octave carriers (standards.TEST_SIGNAL_CARRIER_OCTAVES):
    # octave analysis filters pass < 0.5 % (8 kHz: < 2.5 %) of the other carriers
    n = 6 * FS
    b = octave_band_noise(n, FS, np.random.default_rng(0))
    g = 10 ** (np.array(std.STIPA_BAND_LEVELS_DB) / 20)
    M = np.stack([np.mean(octave_bands(g[j] * b[j], FS) ** 2, axis=1) for j in range(7)], axis=1)
    leak = 1 - np.diag(M) / M.sum(axis=1)
    assert np.all(leak[:6] < 0.005)
    assert leak[6] < 0.025
    # and full-octave carriers would not do: more than 5 % somewhere
    b8 = octave_band_noise(n, FS, np.random.default_rng(0), width_octaves=1.0)
    M8 = np.stack([np.mean(octave_bands(g[j] * b8[j], FS) ** 2, axis=1) for j in range(7)], axis=1)
    assert np.max(1 - np.diag(M8) / M8.sum(axis=1)) > 0.05


def test_full_sti_plan_order_and_durations():
    plan = full_sti_plan()
    assert [p.modulation_hz for p in plan] == list(std.MODULATION_FREQUENCIES_HZ)  # ascending, IEC Table 1
    assert [p.index for p in plan] == list(range(1, 15))
    assert len({p.filename for p in plan}) == 14
    for p in plan:
        periods = p.seconds * p.modulation_hz
        assert periods == pytest.approx(round(periods), abs=1e-6)  # whole periods: loops seamlessly
        core = p.seconds - 2.0  # 1 s settling margin at each end
        assert core >= std.FULL_STI_ANALYSIS_SECONDS - 1e-9
        assert core < std.FULL_STI_ANALYSIS_SECONDS + 1.0 / p.modulation_hz


def test_full_sti_signal_modulation_depth_is_one():
    x = full_sti_signal(2.0, 8.0, FS, seed=1)
    assert 20 * np.log10(np.abs(x).max()) == pytest.approx(std.TEST_SIGNAL_PEAK_DBFS, abs=1e-9)
    inten = octave_bands(x, FS)[3] ** 2  # 1 kHz band
    seg = inten[FS: 7 * FS]  # 6 s = 12 whole periods of 2 Hz
    t = np.arange(seg.size) / FS
    depth = 2 * abs(np.sum(seg * np.exp(-2j * np.pi * 2.0 * t))) / seg.sum()
    assert depth == pytest.approx(std.FULL_STI_MODULATION_DEPTH, abs=0.05)


def test_loopable_lengths():
    # 100 s is the common period of the Table B.1 frequencies (0.63 Hz: 63 periods)
    freqs = [f for p in std.STIPA_MODULATION_HZ for f in p]
    assert is_loopable(100 * 48000, 48000, freqs)
    assert is_loopable(200 * 44100, 44100, freqs)
    assert not is_loopable(30 * 48000, 48000, freqs)  # 1.25 Hz: 37.5 periods
    assert not is_loopable(50 * 48000, 48000, freqs)  # 0.63 Hz: 31.5 periods


def test_loopable_signal_has_no_seam():
    # a 100 s STIPA signal played in a loop: a recording across the seam reads as well
    # as anywhere else (circular noise, whole periods, no fades)
    from envpredict.direct import stipa_from_recording

    x = stipa_signal(100, FS, seed=2)
    assert x[0] != 0.0  # no fade
    across = np.concatenate([x[-10 * FS:], x[: 10 * FS]])
    assert stipa_from_recording(across, FS).sti.sti >= 0.97
    # a 30 s signal is not loopable: across its seam the 2 kHz band (1.25 Hz: 37.5
    # periods) jumps by half a period, and the analysis warns
    y = stipa_signal(30, FS, seed=2)
    assert y[0] == 0.0  # faded
    r = stipa_from_recording(np.concatenate([y[-10 * FS:], y[: 10 * FS]]), FS)
    assert r.sti.mtf_measured[4].max() < 0.3
    assert any("analysis windows disagree" in c for c in r.cautions)


@pytest.mark.parametrize("kwargs", [dict(seconds=10), dict(seconds=float("nan")), dict(fs=16000),
                                    dict(fs=44100.5)])
def test_generation_refuses_bad_options(kwargs):
    with pytest.raises(InputError):
        stipa_signal(**{"seconds": 15, "fs": FS, **kwargs})


# --- CLI ----------------------------------------------------------------------------


def test_cli_testsignal_stipa_writes_wav(tmp_path, capsys):
    out = tmp_path / "stipa.wav"
    code, stdout, _ = run_cli(["testsignal", "stipa", str(out), "--seconds", "15", "--rate", "24000",
                               "--json"], capsys)
    assert code == 0
    d = json.loads(stdout)
    assert d["fs"] == 24000 and d["seconds"] == 15
    info = sf.info(str(out))
    assert info.samplerate == 24000 and info.frames == 15 * 24000 and info.subtype == "PCM_24"
    y, _ = sf.read(str(out))
    np.testing.assert_allclose(y, stipa_signal(15, 24000, seed=0), atol=2 ** -22)


def test_cli_testsignal_stipa_bad_input(tmp_path, capsys):
    code, _, err = run_cli(["testsignal", "stipa", str(tmp_path / "x.mp3"), "--rate", "24000"], capsys)
    assert code == 2 and err.startswith("error:") and len(err.strip().splitlines()) == 1
    code, _, err = run_cli(["testsignal", "stipa", str(tmp_path / "x.wav"), "--seconds", "5"], capsys)
    assert code == 2 and "15" in err
    code, _, err = run_cli(["testsignal", "stipa", str(tmp_path / "x.wav"), "--rate", "16000"], capsys)
    assert code == 2 and "8 kHz" in err
    assert not any(tmp_path.iterdir())  # nothing half-written


def test_cli_testsignal_full_writes_set(tmp_path, capsys):
    folder = tmp_path / "full"
    code, stdout, _ = run_cli(["testsignal", "full", str(folder), "--rate", "24000", "--json"], capsys)
    assert code == 0
    d = json.loads(stdout)
    files = sorted(p.name for p in folder.iterdir())
    assert len(files) == 15 and "signals.json" in files
    listing = json.loads((folder / "signals.json").read_text())
    assert [s["modulation_hz"] for s in listing["signals"]] == list(std.MODULATION_FREQUENCIES_HZ)
    for s in listing["signals"]:
        info = sf.info(str(folder / s["file"]))
        assert info.frames == round(s["seconds"] * 24000)
    assert d["total_seconds"] == pytest.approx(sum(s["seconds"] for s in listing["signals"]), abs=1e-3)
    # refuses to overwrite
    code, _, err = run_cli(["testsignal", "full", str(folder), "--rate", "24000"], capsys)
    assert code == 2 and "not an empty folder" in err


# --- file-level writers: the CLI prints their result --------------------------------


def test_write_stipa_signal_is_what_the_cli_prints_and_writes(tmp_path, capsys):
    import io

    from envpredict.signals import write_stipa_signal

    cli_out = tmp_path / "cli.wav"
    code, stdout, _ = run_cli(["testsignal", "stipa", str(cli_out), "--seconds", "15", "--rate", "24000",
                               "--seed", "3", "--json"], capsys)
    assert code == 0
    d = json.loads(stdout)
    assert d.pop("inputs") == {"out_file": str(cli_out), "seconds": 15.0, "rate": 24000, "seed": 3}
    api_out = tmp_path / "api.wav"
    r = write_stipa_signal(api_out, 15, 24000, seed=3)
    assert d == {**json.loads(json.dumps(r.to_dict())), "file": str(cli_out)}
    assert d["cautions"] == [] and d["notes"] == []
    # the file is the generator's signal as libsndfile writes it (24-bit PCM WAV), byte for byte
    buf = io.BytesIO()
    sf.write(buf, stipa_signal(15, 24000, seed=3), 24000, format="WAV", subtype="PCM_24")
    assert api_out.read_bytes() == buf.getvalue() == cli_out.read_bytes()
    # RMS level in the result: 10 log10(mean square) of the samples written
    y, _ = sf.read(str(api_out))
    assert d["rms_dbfs"] == pytest.approx(10 * np.log10(np.mean(y ** 2)), abs=0.01)


@pytest.mark.parametrize("name, kwargs, msg", [
    ("x.mp3", {}, "does not end in .wav"),
    ("nofolder/x.wav", {}, "does not exist"),
    ("x.wav", dict(seconds=5), "outside 15..3600 s"),
    ("x.wav", dict(fs=16000), "8 kHz octave"),
])
def test_write_stipa_signal_refuses_from_the_api(tmp_path, name, kwargs, msg):
    from envpredict.signals import write_stipa_signal

    with pytest.raises(InputError, match=msg):
        write_stipa_signal(tmp_path / name, **{"seconds": 15, "fs": FS, **kwargs})
    assert not any(tmp_path.iterdir())


def test_write_full_sti_signals_is_what_the_cli_prints(tmp_path, capsys):
    from envpredict.signals import write_full_sti_signals

    code, stdout, _ = run_cli(["testsignal", "full", str(tmp_path / "cli"), "--rate", "24000", "--seed", "2",
                               "--json"], capsys)
    assert code == 0
    d = json.loads(stdout)
    assert d.pop("inputs") == {"out_folder": str(tmp_path / "cli"), "rate": 24000, "seed": 2}
    calls = []
    r = write_full_sti_signals(tmp_path / "api", 24000, seed=2, progress=lambda done, total: calls.append(done))
    assert d == {**json.loads(json.dumps(r.to_dict())), "folder": str(tmp_path / "cli")}
    assert calls == list(range(1, 15))
    for name in sorted(p.name for p in (tmp_path / "api").iterdir()):
        assert (tmp_path / "api" / name).read_bytes() == (tmp_path / "cli" / name).read_bytes()
    # signals.json is the listing without the folder and the cautions
    listing = json.loads((tmp_path / "api" / "signals.json").read_text())
    assert listing == {k: v for k, v in d.items() if k not in ("folder", "cautions", "notes")}
    with pytest.raises(InputError, match="not an empty folder"):
        write_full_sti_signals(tmp_path / "api", 24000)
    with pytest.raises(InputError, match="8 kHz octave"):
        write_full_sti_signals(tmp_path / "new", 16000)
    assert not (tmp_path / "new").exists()


# --- generation in blocks ---------------------------------------------------------------------


def _joined(sig, **kw):
    return np.concatenate(list(sig.blocks(**kw)))


@pytest.mark.parametrize("make", ["stipa", "full"])
def test_a_signal_made_in_blocks_is_the_whole_array_signal(make, tmp_path):
    # 20 s of STIPA (and one 12.7 s full-STI signal) in blocks of 1.3 s, the band noises in a
    # temporary file, against the same signal made as ONE block (the arithmetic of the former
    # whole-array generator, element by element): equal to float rounding (the sums of
    # squares are added block by block); the 24-bit files are byte-identical
    from envpredict.audio import write_wav
    from envpredict.signals import full_sti_test_signal, stipa_test_signal

    fs = 48000
    sig = stipa_test_signal(20, fs, seed=5) if make == "stipa" else full_sti_test_signal(1.6, 12.5, fs, seed=5)
    whole = _joined(sig, block=sig.n, in_memory=True)
    assert whole.size == sig.n and np.abs(whole).max() == pytest.approx(10 ** (std.TEST_SIGNAL_PEAK_DBFS / 20))
    blocks = _joined(sig, block=round(1.3 * fs), spill_dir=tmp_path)
    np.testing.assert_allclose(blocks, whole, rtol=0, atol=1e-15)
    assert sig.rms_dbfs == pytest.approx(10 * np.log10(np.mean(whole ** 2)), abs=1e-9)
    write_wav(tmp_path / "whole.wav", whole, fs)
    write_wav(tmp_path / "blocks.wav", sig.blocks(block=round(0.7 * fs), spill_dir=tmp_path), fs)
    assert (tmp_path / "blocks.wav").read_bytes() == (tmp_path / "whole.wav").read_bytes()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["blocks.wav", "whole.wav"]  # no temporary left


def test_a_signal_longer_than_the_noise_period_repeats_its_noise_under_running_modulation(monkeypatch):
    # beyond NOISE_PERIOD_S the band noises repeat (here a period of 16 s, so the test is
    # quick): the band levels still follow the speech spectrum (Table A.2) and the bands
    # still carry their Table B.1 modulation, read by the direct method as a near-perfect
    # STI on the undistorted signal (IEC 60268-16: an undistorted path reads STI 1)
    from envpredict import signals
    from envpredict.direct import stipa_from_recording

    monkeypatch.setattr(signals, "NOISE_PERIOD_S", 16.0)
    x = stipa_signal(40, FS, seed=3)
    period = 16 * FS
    assert x.size == 40 * FS
    spec = np.abs(np.fft.rfft(x)) ** 2
    f = np.fft.rfftfreq(x.size, 1 / FS)
    lev = np.array([10 * np.log10(spec[carrier_mask(f, fc, 15.0)].sum()) for fc in std.OCTAVE_BANDS_HZ])
    want = np.array(std.SPEECH_SPECTRUM_MALE_DB)
    np.testing.assert_allclose(lev - lev[3], want - want[3], atol=0.1)
    r = stipa_from_recording(x, FS)
    assert r.sti.sti >= 0.97
    # the noise does repeat: the 8 kHz carrier (whose 12.5 Hz envelope has whole periods in
    # 16 s) is the same one period later, up to the envelope's ratio
    X = np.fft.rfft(x)
    band = np.fft.irfft(np.where(carrier_mask(f, 8000.0), X, 0), x.size)
    a, b = band[2 * FS: 6 * FS], band[period + 2 * FS: period + 6 * FS]
    assert np.corrcoef(a, b)[0, 1] > 0.9


def test_the_memory_of_writing_a_signal_does_not_grow_with_its_length(tmp_path, monkeypatch):
    # Python's allocation tracer (tracemalloc, which sees numpy's buffers): writing 90 s
    # takes no more memory than writing 30 s (here with a noise period of 10 s). The former
    # whole-array generator held seven bands of the whole length several times over (about
    # 13.6 MB per second at 48 kHz, 6.8 MB per second at 24 kHz: 600 MB for 90 s); even
    # holding just the finished signal would add 8 bytes per sample (0.7 MB per second here).
    import tracemalloc

    from envpredict import signals

    monkeypatch.setattr(signals, "NOISE_PERIOD_S", 10.0)
    peaks = {}
    for seconds in (30, 90):
        tracemalloc.start()
        try:
            r = signals.write_stipa_signal(tmp_path / f"s{seconds}.wav", seconds, FS, seed=1)
            peaks[seconds] = tracemalloc.get_traced_memory()[1]
        finally:
            tracemalloc.stop()
        assert r.seconds == seconds and sf.info(str(tmp_path / f"s{seconds}.wav")).frames == seconds * FS
    assert peaks[90] < peaks[30] + 8 * 10 * FS, peaks  # less than 10 s of float64 more for 60 s more
    assert peaks[90] < 90 * 8 * FS, peaks  # less than the finished signal alone


def test_a_failure_while_writing_in_blocks_leaves_no_file(tmp_path, monkeypatch):
    from envpredict import signals

    calls = {"n": 0}
    real = signals.stipa_envelope

    def failing(t, f1, f2, *a, **k):
        calls["n"] += 1
        if calls["n"] > 7 * 12:  # fails in the second pass over the blocks
            raise RuntimeError("simulated failure")
        return real(t, f1, f2, *a, **k)

    monkeypatch.setattr(signals, "stipa_envelope", failing)
    with pytest.raises(RuntimeError, match="simulated"):
        signals.write_stipa_signal(tmp_path / "s.wav", 20, FS)
    assert list(tmp_path.iterdir()) == []  # no output, no .part, no noise file


def test_band_noise_at_a_rate_too_low_for_the_8_khz_band_is_refused():
    # at 8 kHz the 8 kHz octave band lies wholly above the Nyquist frequency (4 kHz): a unit-RMS
    # noise of an empty band is 0/0. It is refused, not returned as NaN.
    with pytest.raises(InputError, match="8 kHz|8000"):
        octave_band_noise(1000, 8000, np.random.default_rng(0), 1.0)


def test_band_noise_too_short_for_its_band_width_is_refused():
    # 1000 samples at 24 kHz resolve 24 Hz; a 125 Hz band 0.11 octave wide (about 9.5 Hz)
    # holds no FFT bin, so its unit-RMS noise would be 0/0: refused, not NaN
    with pytest.raises(InputError, match="no frequency of the 125 Hz band"):
        octave_band_noise(1000, 24000, np.random.default_rng(0), 0.109375)
