"""Audio input layer: loading, the refusals of malformed input (one test per way of
being wrong), sources read in blocks, the one validation rule for arrays and streams,
the delay finder and the calibration from a calibrator tone.

External references: the normalised cross-correlation written out here with numpy
(sum over the overlap, divided by the root of the two energies); the RMS of a sine
(A / sqrt 2); scipy.signal.resample_poly for the resampled source; IEC 60268-16:2011
(an undistorted test signal reads a near-perfect STI).
"""

import json
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from cli_for_tests import run_cli

from envpredict.audio import (
    ArraySource,
    FileSource,
    Resampled,
    SignalCheck,
    Source,
    Window,
    audio_files_in,
    calibration_from_tone,
    check_wav_path,
    estimate_delay,
    is_clipped,
    load_audio,
    resample,
    resolve_calibration,
    validate_signal,
    write_wav,
    zero_lag_correlation,
)
from envpredict.exceptions import InputError
from signals_for_tests import speech_like

FS = 24000
DEMO = Path(__file__).resolve().parents[1] / "demo_pairs"


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


# --- sources ------------------------------------------------------------------------


def test_sources_read_with_zero_padding_and_in_blocks(write_wav):
    x = np.random.default_rng(3).uniform(-0.5, 0.5, 1000)
    p = write_wav("s.wav", x, 16000, "FLOAT")
    with FileSource(p, name="clean") as f:
        for src in (ArraySource(x, 16000), f):
            assert src.n == 1000 and src.fs == 16000
            out = src.read(-5, 10)
            assert out.shape == (15,) and np.all(out[:5] == 0) and np.allclose(out[5:], x[:10], atol=1e-7)
            assert np.all(src.read(995, 1010)[5:] == 0) and np.all(src.read(2000, 2010) == 0)
            blocks = list(src.blocks(300))
            assert [b.size for b in blocks] == [300, 300, 300, 100]
            assert np.allclose(np.concatenate(blocks), x, atol=1e-7)
            # a window is a shifted view with zeros outside the parent
            w = Window(src, 990, 20)
            assert np.allclose(w.read(0, 20), np.concatenate([x[990:], np.zeros(10)]), atol=1e-7)
        assert f.name == f"clean '{p}'"


def test_resampled_source_equals_resample_poly_of_the_whole():
    # per block with margins, exactly what scipy.signal.resample_poly gives on the whole signal
    from scipy.signal import resample_poly

    x = np.random.default_rng(4).standard_normal(44100)
    whole = resample_poly(x, 160, 441)  # 44.1 kHz -> 16 kHz
    r = Resampled(ArraySource(x, 44100), 16000)
    assert r.n == whole.size
    got = np.concatenate(list(r.blocks(3001)))
    assert np.max(np.abs(got - whole)) < 1e-12


def test_file_source_refuses_a_short_read(tmp_path, write_wav):
    # the file shrinks after it was opened (still being written, or damaged): a one-line error
    p = write_wav("ok.wav", 0.1 * np.random.default_rng(5).standard_normal(48000), 48000, "PCM_16")
    with FileSource(p, name="recording") as src:
        with open(p, "r+b") as fh:
            fh.truncate(44 + 2 * 1000)
        with pytest.raises(InputError, match="recording '.*' could not be decoded"):
            list(src.blocks(4096))


# --- one validation rule, array and stream alike -------------------------------------


def _verdict_array(x):
    try:
        validate_signal(x, FS, name="x")
        return "ok"
    except InputError as e:
        return str(e)


def _verdict_blocks(x, block):
    check = SignalCheck("x")
    try:
        for i in range(0, x.size, block):
            check.update(x[i: i + block])
        check.finish()
        return "ok"
    except InputError as e:
        return str(e)


def _stipa_clipped(scale):
    from envpredict.signals import stipa_signal

    x = stipa_signal(15, FS, seed=2)
    return scale * np.clip(3.0 * x / np.abs(x).max(), -1.0, 1.0)


def _cases():
    rng = np.random.default_rng(6)
    noise = 0.1 * rng.standard_normal(2 * FS)
    flat = 0.1 * rng.standard_normal(FS)
    for k in range(6):  # six flat tops of 5 samples at the peak 0.5 (clipped, then scaled)
        flat[1000 + 3000 * k: 1005 + 3000 * k] = 0.5
    later_peak = flat.copy()
    later_peak[-10] = 0.6  # a single higher sample later: the flat tops are no longer at the peak
    return {
        # (signal, verdict by the rule's definition)
        "noise": (noise, "ok"),
        "noise then digital silence": (np.concatenate([noise, np.zeros(12 * FS)]), "ok"),
        "silence, noise, silence": (np.concatenate([np.zeros(7 * FS), noise, np.zeros(7 * FS)]), "ok"),
        "flat tops at the peak": (flat, "clipped"),
        "flat tops, then silence": (np.concatenate([flat, np.zeros(10 * FS)]), "clipped"),
        "flat tops below a later peak": (later_peak, "ok"),
        "STIPA driven into full scale": (_stipa_clipped(1.0), "clipped"),
        "STIPA clipped, then scaled down": (_stipa_clipped(0.5), "clipped"),
        "silent": (np.zeros(3 * FS), "silent"),
        "constant": (np.full(3 * FS, 0.25), "constant"),
        "NaN late": (np.concatenate([noise, [np.nan], noise]), "NaN"),
    }


@pytest.mark.parametrize("case", list(_cases()))
def test_array_and_stream_verdicts_agree_for_any_block_length(case):
    # One rule (SignalCheck): validate_signal feeds the array in one block, the streamed jobs
    # block by block; flat tops are judged against the GLOBAL peak, so a run of digital
    # silence (each silent block's own "peak" is 0) never counts as clipping, and a run
    # crossing a block boundary counts once.
    x, expected = _cases()[case]
    verdict = _verdict_array(x)
    assert verdict == "ok" if expected == "ok" else expected in verdict, verdict
    for block in (1, 3, 7, 1000, FS, 20 * FS):
        if block < 7 and x.size > 100000:
            continue  # sample-by-sample feeding of long signals: slow, covered by the short cases
        assert _verdict_blocks(x, block) == verdict, (case, block)


def test_flat_tops_split_by_block_boundaries_count_once():
    x = 0.05 * np.sin(np.arange(4000) / 7.0)
    for k in range(5):  # five flat tops of exactly CLIP_RUN = 4 samples at the peak
        x[500 + 700 * k: 504 + 700 * k] = 0.3
    assert is_clipped(x)
    for block in (2, 3, 502, 503):
        check = SignalCheck(allow_clipping=True)
        for i in range(0, x.size, block):
            check.update(x[i: i + block])
        assert check.flat_runs == 5 and check.clipped, block
    x[500 + 700 * 4 + 3] = 0.29  # one top of 3 samples: four are too few
    assert not is_clipped(x)


# --- the silence case in every streamed job: array, file and CLI agree -----------------


@pytest.fixture(scope="module")
def stipa_then_silence(tmp_path_factory):
    """20 s of the STIPA signal followed by 100 s of digital silence (five 20 s blocks: a
    per-block peak judged each silent block a flat top and refused the file as clipped)."""
    from envpredict.signals import stipa_signal

    p = tmp_path_factory.mktemp("silence") / "stipa_silence.wav"
    x = np.concatenate([stipa_signal(20, FS, seed=7), np.zeros(100 * FS)])
    sf.write(p, x, FS, subtype="PCM_24")
    y, _ = sf.read(p)  # the samples exactly as the file holds them
    return y, p


def test_silence_case_stipa(stipa_then_silence, capsys):
    from envpredict.direct import stipa_from_file, stipa_from_recording

    x, p = stipa_then_silence
    a = stipa_from_recording(x, FS)
    f = stipa_from_file(p)
    assert a.sti.sti > 0.95  # an undistorted signal (IEC 60268-16: a near-perfect STI)
    assert f.sti.sti == a.sti.sti
    code, out, err = run_cli(["stipa", p, "--json"], capsys)
    assert code == 0, err
    assert json.loads(out)["sti"] == round(a.sti.sti, 4)


def test_silence_case_inspect(tmp_path, capsys):
    # the demo announcement at 8 kHz (to keep the test short) followed by 100 s of digital silence
    from envpredict.timescales import BLOCK_S, inspect_file, inspect_signal

    assert 100 >= 5 * BLOCK_S  # five silent blocks: five "flat tops" under a per-block peak
    fs = 8000
    x, fs_demo = sf.read(DEMO / "announcement_clean.wav")
    p = tmp_path / "speech_silence.wav"
    sf.write(p, np.concatenate([resample(x, fs_demo, fs), np.zeros(100 * fs)]), fs, subtype="PCM_24")
    x, _ = sf.read(p)
    a = inspect_signal(x, fs).to_dict()
    f = inspect_file(p).to_dict()
    for key in ("band_level_db", "envelope_modulation", "modulation_peak_hz", "voiced_fraction"):
        assert json.dumps(f[key]) == json.dumps(a[key]), key
    code, out, err = run_cli(["inspect", p, "--json"], capsys)
    assert code == 0, err
    c = json.loads(out)
    assert c["band_level_db"] == a["band_level_db"] and c["envelope_modulation"] == a["envelope_modulation"]


def test_silence_case_fullsti(tmp_path, capsys):
    from envpredict.direct import full_sti_from_files, full_sti_from_recordings
    from envpredict.signals import full_sti_signals

    recs, paths = [], []
    for k, (spec, x) in enumerate(full_sti_signals(FS, seed=9)):
        if k == 0:
            x = np.concatenate([x, np.zeros(100 * FS)])  # one recording followed by 100 s of silence
        p = tmp_path / spec.filename
        sf.write(p, x, FS, subtype="PCM_24")
        recs.append((sf.read(p)[0], FS, spec.filename))
        paths.append(p)
    a = full_sti_from_recordings(recs)
    f = full_sti_from_files(paths)
    assert a.sti.sti > 0.95
    assert f.sti.sti == a.sti.sti
    code, out, err = run_cli(["fullsti", tmp_path, "--json"], capsys)
    assert code == 0, err
    assert json.loads(out)["sti"] == round(a.sti.sti, 4)


def test_silence_case_pair(tmp_path, capsys):
    # the pair job only counts clipping (a degradation), so it never refused this case; it is
    # pinned all the same, with 20 s of silence (its scan has no verdict that a block could change)
    from envpredict.pair import pair_from_files, pair_indices

    sig = {}
    for name in ("announcement_clean", "announcement_in_hall"):
        x, fs = sf.read(DEMO / f"{name}.wav")
        x = np.concatenate([x, np.zeros(20 * fs)])
        sf.write(tmp_path / f"{name}.wav", x, fs, subtype="PCM_16")  # 16-bit in, 16-bit out: same samples
        sig[name] = x
    a = pair_indices(sig["announcement_clean"], sig["announcement_in_hall"], fs)
    f = pair_from_files(tmp_path / "announcement_clean.wav", tmp_path / "announcement_in_hall.wav")
    for key in ("stoi", "estoi", "ssti", "delay_samples", "match_correlation"):
        assert getattr(f, key) == getattr(a, key), key
    code, out, err = run_cli(["pair", tmp_path / "announcement_clean.wav", tmp_path / "announcement_in_hall.wav",
                              "--json"], capsys)
    assert code == 0, err
    c = json.loads(out)
    assert (c["stoi"], c["estoi"], c["ssti"]) == (round(a.stoi, 4), round(a.estoi, 4), round(a.ssti, 4))


# --- the one delay finder -------------------------------------------------------------


def _brute_force_delay(ref, x, max_lag):
    """The normalised cross-correlation written out, each signal without its DC (mean):
    c(l) = sum_n r[n] s[n + l] with r = ref - mean(ref) and s the searched stretch of x
    (zeros outside x) minus its mean; the lag of the largest |c|, divided by
    sqrt(sum r^2 * sum m^2) with m the matched stretch x[l .. l+w) minus its own mean."""
    w = ref.size
    r = ref - ref.mean()
    pad = np.concatenate([np.zeros(max_lag), x, np.zeros(w + max_lag)])
    searched = pad[: w + 2 * max_lag].copy()
    searched -= searched.mean()
    best, lag = -1.0, 0
    for k in range(-max_lag, max_lag + 1):
        c = float(np.sum(r * searched[max_lag + k: max_lag + k + w]))
        if abs(c) > best:
            best, lag, value = abs(c), k, c
    seg = pad[max_lag + lag: max_lag + lag + w]
    seg = seg - seg.mean()
    return lag, value / np.sqrt(np.sum(r ** 2) * np.sum(seg ** 2))


@pytest.mark.parametrize("delay,sign", [(37, 1), (-23, 1), (61, -1)])
def test_estimate_delay_equals_the_written_out_cross_correlation(delay, sign):
    rng = np.random.default_rng(8)
    ref = rng.standard_normal(1500)
    h = 0.4 * np.exp(-np.arange(40) / 8.0) * rng.standard_normal(40)  # a short echo pattern
    h[0] = 1.0  # after the direct sound
    y = sign * np.convolve(ref, h)[: ref.size] + 0.3 * rng.standard_normal(ref.size)
    x = np.roll(np.concatenate([y, np.zeros(200)]), delay) if delay > 0 else np.concatenate([y[-delay:], np.zeros(200)])
    lag, corr = estimate_delay(ref, x, 8000, 0.01)  # +-80 samples
    lag_bf, corr_bf = _brute_force_delay(ref, x, 80)
    assert lag == lag_bf
    assert corr == pytest.approx(corr_bf, abs=1e-9)
    assert np.sign(corr) == sign


def test_estimate_delay_exact_copy_and_unrelated():
    rng = np.random.default_rng(2)
    ref = rng.standard_normal(16000)
    x = np.concatenate([np.zeros(4321), ref, np.zeros(100)])
    lag, corr = estimate_delay(ref, x, 16000, 1.0)
    assert lag == 4321 and corr == pytest.approx(1.0, abs=1e-12)
    _, corr2 = estimate_delay(ref, rng.standard_normal(16000), 16000, 1.0)
    assert abs(corr2) < 0.1  # unrelated: about 1/sqrt(16000) = 0.008 at the largest of 32000 lags
    assert zero_lag_correlation(ref, ref, 16000) == pytest.approx(1.0, abs=1e-12)


def test_estimate_delay_reads_a_bounded_excerpt_near_the_loud_part():
    # a quiet lead-in longer than the excerpt: the excerpt starts at `near` and the reads
    # stay within the excerpt plus the search range, however long the signals are
    class Counting(ArraySource):
        longest = 0

        def _read(self, a, b):
            Counting.longest = max(Counting.longest, b - a)
            return super()._read(a, b)

    fs = 8000
    rng = np.random.default_rng(9)
    ref = np.concatenate([1e-6 * rng.standard_normal(60 * fs), rng.standard_normal(10 * fs)])
    x = np.concatenate([np.zeros(250), ref])[: ref.size]
    x[: 60 * fs] = 1e-6 * rng.standard_normal(60 * fs)  # a lead-in unrelated to the reference's
    lag, corr = estimate_delay(Counting(ref, fs), Counting(x, fs), max_delay_s=0.5, near=60 * fs, excerpt_s=5.0)
    assert lag == 250 and corr > 0.99
    assert Counting.longest <= 5 * fs + 2 * fs // 2
    assert isinstance(Counting(ref, fs), Source)


def _direct_and_loud_tail(x: np.ndarray, fs: int, direct: int, seed: int) -> np.ndarray:
    """x through a channel of a direct sound (gain 1 at sample ``direct``) and a loud,
    low-frequency reverberant tail from 4 ms after it: the tail holds far more energy
    than the direct sound, so the plain waveform correlation peaks in the tail."""
    from scipy.signal import butter, sosfilt

    rng = np.random.default_rng(seed)
    n_tail = int(0.4 * fs)
    tail = sosfilt(butter(4, 400, fs=fs, output="sos"), rng.standard_normal(n_tail))
    tail *= np.exp(-np.arange(n_tail) / (0.08 * fs)) * 2.0 / np.abs(tail).max()
    h = np.zeros(direct + int(0.004 * fs) + n_tail)
    h[direct] = 1.0
    h[direct + int(0.004 * fs):] += tail
    return np.convolve(x, h)[: x.size + h.size]


def test_find_delay_gcc_phat_finds_the_direct_sound_where_the_waveform_peak_does_not():
    # ground truth: the construction (direct sound at 96 samples = 6 ms). GCC-PHAT (Knapp &
    # Carter 1976) whitens the cross-spectrum, so each path of the channel is a sharp peak
    # at its own delay; the plain correlation piles the tail's energy up later
    from envpredict.audio import find_delay

    fs = 16000
    x = speech_like(4.0, fs, seed=5)
    y = _direct_and_loud_tail(x, fs, 96, seed=6)
    wave = find_delay(x, y, fs, 0.5, method="waveform")
    gcc = find_delay(x, y, fs, 0.5, method="gcc-phat")
    assert abs(wave.lag - 96) > 16  # the failure this estimator is there for (> 1 ms off)
    assert gcc.lag == 96 and gcc.method == "gcc-phat" and gcc.delay_ms == pytest.approx(6.0)
    assert gcc.confidence > 1.5
    # the match check is the waveform's peak, whichever method chose the lag
    assert gcc.peak_correlation == pytest.approx(abs(wave.correlation), abs=1e-9)


def test_find_delay_confidence_is_near_one_for_two_equal_paths():
    from envpredict.audio import find_delay

    fs = 16000
    x = speech_like(4.0, fs, seed=7)
    single = np.concatenate([np.zeros(50), x])
    double = np.concatenate([np.zeros(50), x, np.zeros(100)]) + np.concatenate([np.zeros(150), x])
    assert find_delay(x, single, fs, 0.1).confidence > 5
    est = find_delay(x, double, fs, 0.1)
    assert est.lag in (50, 150) and est.confidence < 1.2


def test_pooled_delay_keeps_the_shared_path_and_drops_item_specific_ones():
    # each item: the shared direct path at 80 samples (gain 1) and an item-specific
    # reflection (gain 1.3, at another lag per item) that wins the item's own search
    from envpredict.audio import find_delay, pooled_delay

    fs = 16000
    curves, own = [], []
    for k, refl in enumerate((200, 260, 330)):
        x = speech_like(3.0, fs, seed=20 + k)
        y = np.concatenate([np.zeros(80), x, np.zeros(400)])
        y[refl: refl + x.size] += 1.3 * x
        est, curve = find_delay(x, y, fs, 0.05, curve=True)
        own.append(est.lag)
        curves.append(curve)
    assert own == [200, 260, 330]
    lag, conf = pooled_delay(curves)
    assert lag == 80 and conf > 1.2


def test_find_delay_refuses_an_unknown_method():
    from envpredict.audio import find_delay

    with pytest.raises(InputError, match="delay method"):
        find_delay(np.ones(100), np.ones(100), 8000, 0.01, method="peak")


# --- calibration ------------------------------------------------------------------


def test_calibrator_tone_gives_offset():
    # a sine of amplitude A has RMS A/sqrt(2): level -23.01 dBFS for A = 0.1
    t = np.arange(3 * FS) / FS
    tone = 0.1 * np.sin(2 * np.pi * 1000 * t)
    c = calibration_from_tone(tone, FS, 94.0)
    assert c == pytest.approx(94.0 - 20 * np.log10(0.1 / np.sqrt(2)), abs=0.05)


def test_calibrator_must_be_a_1khz_tone():
    rng = np.random.default_rng(1)
    with pytest.raises(InputError, match="not a 1 kHz calibrator"):
        calibration_from_tone(0.1 * rng.standard_normal(3 * FS), FS, 94.0)
    t = np.arange(3 * FS) / FS
    with pytest.raises(InputError, match="not a 1 kHz calibrator"):
        calibration_from_tone(0.1 * np.sin(2 * np.pi * 250 * t), FS, 94.0)
    with pytest.raises(InputError, match="implausible"):
        calibration_from_tone(0.1 * np.sin(2 * np.pi * 1000 * t), FS, 9.0)


def test_docstring_examples():
    import doctest

    import envpredict.audio

    failed, attempted = doctest.testmod(envpredict.audio, optionflags=doctest.ELLIPSIS)
    assert failed == 0 and attempted > 0


def test_a_small_spread_on_a_large_offset_is_not_called_constant():
    # the DC test compares the standard deviation with SILENCE_RMS; on a large offset the
    # one-pass variance sum(x^2)/n - mean^2 loses every digit to cancellation (float64 has
    # 16), so the spread must come from the deviations themselves (two-pass, as numpy.std)
    from envpredict.audio import SILENCE_RMS, SignalCheck

    rng = np.random.default_rng(4)
    x = 100.0 + 3 * SILENCE_RMS * rng.standard_normal(480000)
    assert np.std(x) > 2 * SILENCE_RMS  # the reference: numpy's two-pass standard deviation
    check = SignalCheck("offset signal", allow_clipping=True)
    for i in range(0, x.size, 100000):
        check.update(x[i: i + 100000])
    check.finish()  # not "holds only a constant (DC) value"
    flat = np.full(480000, 100.0)
    c = SignalCheck("flat", allow_clipping=True)
    c.update(flat)
    with pytest.raises(InputError, match="constant"):
        c.finish()


def test_resolve_calibration_from_an_offset_or_a_calibrator(write_wav):
    # a sine of amplitude A has RMS A / sqrt(2) (IEC 60942 calibrator at 94 dB SPL)
    t = np.arange(3 * FS) / FS
    cal = write_wav("cal.wav", 0.1 * np.sin(2 * np.pi * 1000 * t), FS)
    c, source = resolve_calibration(calibrator=cal, calibrator_level=94.0)
    assert source == "calibrator" and c == pytest.approx(94.0 - 20 * np.log10(0.1 / np.sqrt(2)), abs=0.05)
    assert resolve_calibration(calibration_db=100) == (100.0, "offset")
    assert resolve_calibration() == (None, None)


@pytest.mark.parametrize("kwargs, msg", [
    (dict(calibration_db=100.0, calibrator="x.wav"), "both --calibration-db and --calibrator were given"),
    (dict(calibrator="x.wav"), "--calibrator needs --calibrator-level"),
    (dict(calibrator_level=94.0), "--calibrator-level was given without --calibrator"),
    (dict(calibration_db=-5.0), "implausible"),
    (dict(calibrator="nothere.wav", calibrator_level=94.0), "does not exist"),
])
def test_resolve_calibration_refuses(kwargs, msg):
    with pytest.raises(InputError, match=msg):
        resolve_calibration(**kwargs)


def test_audio_files_in_a_folder(tmp_path):
    for name in ("b.wav", "a.FLAC", ".hidden.wav", "notes.txt", "c.ogg"):
        (tmp_path / name).write_bytes(b"x")
    # by suffix (any case), sorted by name, hidden files and other files left out
    assert [p.name for p in audio_files_in(tmp_path)] == ["a.FLAC", "b.wav", "c.ogg"]


def test_write_wav_is_atomic_24_bit(tmp_path):
    x = 0.5 * np.sin(2 * np.pi * 440 * np.arange(FS) / FS)
    p = write_wav(tmp_path / "t.wav", x, FS)
    info = sf.info(str(p))
    assert info.subtype == "PCM_24" and info.samplerate == FS and info.frames == FS
    y, _ = sf.read(str(p))
    np.testing.assert_allclose(y, x, atol=2.0 ** -23)  # 24-bit quantisation: half a step of 2^-22
    assert sorted(q.name for q in tmp_path.iterdir()) == ["t.wav"]  # no temporary file left
    for bad, msg in (("t.mp3", "does not end in .wav"), ("no/t.wav", "does not exist")):
        with pytest.raises(InputError, match=msg):
            write_wav(tmp_path / bad, x, FS)
    (tmp_path / "d.wav").mkdir()
    with pytest.raises(InputError, match="is a folder"):
        check_wav_path(tmp_path / "d.wav")


@pytest.mark.parametrize(
    "fs_in, fs_out",
    [(16000, 10000), (48000, 10000), (44100, 10000), (22050, 16000), (96000, 44100), (20000, 10000), (8000, 44100)],
)
def test_polyphase_equals_scipy_resample_poly(fs_in, fs_out):
    # reference: scipy.signal.resample_poly (default Kaiser filter, zero padding), which
    # audio.polyphase restates as blocked matrix products; lengths from 1 sample to
    # several blocks, including ones that end mid-period
    from scipy.signal import resample_poly

    from envpredict.audio import POLYPHASE_BLOCK, polyphase, resample_ratio

    up, down = resample_ratio(fs_in, fs_out)
    rng = np.random.default_rng(fs_in + fs_out)
    for n in (1, 2, 5, 17, 999, POLYPHASE_BLOCK * down // max(1, up) * 3 + 7):
        x = rng.standard_normal(n)
        want = resample_poly(x, up, down)
        got = polyphase(x, up, down)
        assert got.shape == want.shape
        np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)


# --- the clipping rule follows the sample format ----------------------------------------------


def _isolated_full_scale(peak):
    """Noise with five isolated samples at +-peak (no flat top anywhere)."""
    x = 0.1 * np.random.default_rng(8).standard_normal(FS)
    x[1000:6000:1000] = peak * np.array([1, -1, 1, -1, 1])
    return x


@pytest.mark.parametrize("subtype", [None, "FLOAT", "DOUBLE", "float"])
@pytest.mark.parametrize("peak", [1.0, 1.5, 4.0])
def test_floating_point_samples_above_full_scale_are_not_clipping(subtype, peak):
    # floating-point data has no full scale: only flat tops at the peak are clipping
    x = _isolated_full_scale(peak)
    assert not is_clipped(x, subtype)
    assert validate_signal(x, FS, subtype=subtype) is x
    flat = x.copy()
    for k in range(5):  # five flat tops of four samples at the peak: clipped, whatever the format
        flat[9000 + 1000 * k: 9004 + 1000 * k] = peak
    assert is_clipped(flat, subtype)
    with pytest.raises(InputError, match="clipped"):
        validate_signal(flat, FS, subtype=subtype)


@pytest.mark.parametrize("subtype", ["PCM_16", "PCM_24", "PCM_32", "PCM_U8"])
def test_integer_samples_at_full_scale_are_clipping(subtype):
    x = _isolated_full_scale(1.0)
    assert is_clipped(x, subtype)
    with pytest.raises(InputError, match="clipped"):
        validate_signal(x, FS, subtype=subtype)
    x[1000:6000:1000] *= 0.99  # below CLIP_FULL_SCALE: not clipped
    assert not is_clipped(x, subtype)


@pytest.mark.parametrize("subtype", ["PCM_16", "PCM_24", "FLOAT", "DOUBLE"])
def test_file_sources_carry_the_sample_format_into_the_check(tmp_path, subtype):
    p = tmp_path / "x.wav"
    x = 0.5 * _isolated_full_scale(1.0)
    x[1000:6000:1000] = [1.0, -1.0, 1.0, -1.0, 1.0]  # at full scale (PCM_16 stores 32767 / 32768)
    sf.write(p, x, FS, subtype=subtype)
    with FileSource(p) as src:
        assert src.subtype == subtype
        assert Window(src, 10, 100).subtype == subtype and Resampled(src, 16000).subtype == subtype
    assert ArraySource(x, FS).subtype is None
    if subtype.startswith("PCM"):
        with pytest.raises(InputError, match="clipped"):
            load_audio(p)
    else:
        y, _ = load_audio(p)
        assert np.abs(y).max() == 1.0
        sf.write(p, 4.0 * x, FS, subtype=subtype)  # peak 4.0 with no flat top: valid float data
        assert np.abs(load_audio(p)[0]).max() == 4.0


def test_clipping_figures_are_skipped_only_where_clipping_is_allowed():
    # a check that refuses clipping always gathers its figures (count_clipping cannot
    # switch the rule off); one that allows it may skip them, and says "not clipped"
    from envpredict.audio import SignalCheck

    x = 0.5 * np.clip(1.5 * np.sin(np.arange(4800) / 20), -1, 1)
    strict = SignalCheck("x", count_clipping=False)
    strict.update(x)
    with pytest.raises(InputError, match="clipped"):
        strict.finish()
    lax = SignalCheck("x", allow_clipping=True, count_clipping=False)
    lax.update(x)
    assert lax.finish().clipped is False
    counted = SignalCheck("x", allow_clipping=True)
    counted.update(x)
    assert counted.finish().clipped is True


def test_true_peak_of_a_sine_at_a_quarter_of_the_rate():
    """Analytic case (ITU-R BS.1770-4 Annex 2, the inter-sample peak it is made for):
    A sin(pi n / 2 + pi / 4) has every sample at +-A / sqrt 2 (sample peak -3.01 dB re
    A) while the waveform between the samples reaches A (true peak 0 dB re A); the
    4x-oversampled estimate finds it within the interpolation filter's ripple. The ends
    are faded in and out (raised cosine) so that the onset transient does not count."""
    from envpredict.audio import true_peak

    fs, a = 16000, 0.5
    n = np.arange(fs)
    fade = np.ones(fs)
    ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(1600) / 1600)
    fade[:1600], fade[-1600:] = ramp, ramp[::-1]
    x = a * np.sin(np.pi / 2 * n + np.pi / 4) * fade
    assert 20 * np.log10(np.max(np.abs(x)) / a) == pytest.approx(-3.0103, abs=1e-3)
    assert 20 * np.log10(true_peak(x) / a) == pytest.approx(0.0, abs=0.02)
    # a low tone: the samples already hold the peak within 0.01 dB
    y = a * np.sin(2 * np.pi * 100.0 * n / fs + 0.3) * fade
    assert true_peak(y) == pytest.approx(np.max(np.abs(y)), rel=2e-3)
    assert true_peak(np.zeros(10)) == 0.0
    with pytest.raises(InputError):
        true_peak(np.array([]))
