"""The impulse response from a recorded exponential sweep (envpredict.deconvolve).

References outside the package:
* known impulse responses: a pyroomacoustics image-method room and a synthetic exponential
  decay (noise x exp(-6.9 t / T)), both band-limited here by an FFT mask to 50 Hz - 12.5 kHz,
  inside the sweep's flat range (no sweep measures outside its band);
* the recording is simulated independently of the package: ``scipy.signal.fftconvolve``
  with the known response, a start offset, white noise, and the nonlinearity
  y = x + 0.1 x^2 applied at twice the rate (``scipy.signal.resample_poly``), as an analogue
  chain with an anti-alias filter would; a rate mismatch is simulated with
  ``scipy.signal.resample`` (the Fourier method, not the package's polyphase resampler);
* Farina's analytic inverse filter (AES preprint 5093, 2000, sec. 3): the time-reversed
  sweep with an amplitude envelope exp(-t ln(f2/f1) / T), i.e. 6 dB per octave;
* the level of the second harmonic of a x^2 for x = A sin: a A / 2 re the fundamental.
The STI and T30 of the known and of the recovered response both come from envpredict's own
``ir`` path: the known response is the external reference there.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import soundfile as sf

import envpredict
from cli_for_tests import run_cli
from envpredict.bands import octave_bands
from envpredict.deconvolve import deconvolve_sweep, deconvolve_sweep_file, inverse_filter
from envpredict.exceptions import InputError
from envpredict.sinesweep import exponential_sweep, sweep_signal, sweep_spec, write_sweep_signal

FS = 32000
PASS_LO, PASS_HI = 50.0, 12500.0  # the known responses' band, Hz


def band_limited(h: np.ndarray, fs: int) -> np.ndarray:
    """``h`` with its spectrum outside 50 Hz - 12.5 kHz removed (raised-cosine edges 40-50 Hz,
    12.5-13 kHz), by an FFT mask with zero padding (the result is 50 ms longer)."""
    n = 2 * h.size + fs
    f = np.fft.rfftfreq(n, 1.0 / fs)
    w = np.clip((f - 40.0) / 10.0, 0, 1)
    w = (0.5 - 0.5 * np.cos(np.pi * w)) * (0.5 + 0.5 * np.cos(np.pi * np.clip((f - PASS_HI) / 500.0, 0, 1)))
    return np.fft.irfft(np.fft.rfft(h, n) * w, n)[: h.size + int(0.05 * fs)]


def synthetic_decay(fs: int, t60: float = 0.45, seconds: float = 0.8, seed: int = 3) -> np.ndarray:
    rng = np.random.default_rng(seed)
    t = np.arange(int(seconds * fs)) / fs
    h = np.r_[np.zeros(int(0.012 * fs)), rng.standard_normal(t.size) * np.exp(-6.9 * t / t60)]
    h[int(0.012 * fs)] = 8.0  # a direct sound
    h = band_limited(h, fs)
    return 0.5 * h / np.max(np.abs(h))


def room_ir(fs: int) -> np.ndarray:
    pra = pytest.importorskip("pyroomacoustics")
    dim = [6.0, 4.5, 3.0]
    e_abs, order = pra.inverse_sabine(0.35, dim)
    room = pra.ShoeBox(dim, fs=fs, materials=pra.Material(e_abs), max_order=min(order, 40), air_absorption=False)
    room.add_source([1.5, 1.2, 1.6])
    room.add_microphone([4.3, 3.1, 1.2])
    room.compute_rir()
    h = band_limited(np.asarray(room.rir[0][0], dtype=np.float64), fs)
    h = np.r_[h, np.zeros(max(0, int(0.85 * fs) - h.size))]  # the indirect method needs 0.79 s
    return 0.5 * h / np.max(np.abs(h))


def record(played: np.ndarray, h: np.ndarray, *, offset_s: float = 0.5, noise: float = 1e-3, nl: float = 0.0,
           fs: int = FS, seed: int = 0, gain: float = 0.45) -> np.ndarray:
    """The recording of ``played`` through ``h``: nonlinearity (at twice the rate), convolution,
    an offset (whole samples), 1 s after the end, scaled to a peak of ``gain``, and white noise
    (default 1e-3 rms: -53 dB re the peak)."""
    from scipy.signal import fftconvolve, resample_poly

    y = played
    if nl:
        up = resample_poly(played, 2, 1)
        y = played + resample_poly(nl * up ** 2, 1, 2)[: played.size]
    wet = fftconvolve(y, h)
    g = gain / np.max(np.abs(wet))
    rec = np.r_[np.zeros(int(round(offset_s * fs))), g * wet, np.zeros(fs)]
    rec += noise * np.random.default_rng(seed).standard_normal(rec.size)
    return rec, g


def in_recording_units(res) -> np.ndarray:
    """The recovered response at the chain's own gain (undoing its normalisation by the reported peak)."""
    return res.ir / np.max(np.abs(res.ir)) * 10 ** (res.peak_db / 20)


def band_errors_db(recovered: np.ndarray, known: np.ndarray, fs: int) -> np.ndarray:
    """Per octave band, energy of (recovered - known) re the known response, dB, after
    aligning the recovered response on the known one (whole samples, by cross-correlation)."""
    from scipy.signal import correlate

    c = correlate(recovered, known, mode="full", method="fft")
    lag = int(np.argmax(np.abs(c))) - (known.size - 1)
    n = known.size
    r = recovered[lag: lag + n] if lag >= 0 else np.r_[np.zeros(-lag), recovered[: n + lag]]
    r = np.r_[r, np.zeros(n - r.size)]
    pad = np.zeros(fs // 4)
    kb, rb = octave_bands(np.r_[known, pad], fs), octave_bands(np.r_[r, pad], fs)
    return 10 * np.log10(np.sum((rb - kb) ** 2, axis=1) / np.sum(kb ** 2, axis=1))


@pytest.fixture(scope="module")
def spec():
    return sweep_spec(FS, 40, 15000, 8.0, repeats=2, tail_s=1.0)


@pytest.fixture(scope="module")
def played(spec):
    return sweep_signal(spec)


@pytest.fixture(scope="module", params=["synthetic", "room"])
def known(request):
    return synthetic_decay(FS) if request.param == "synthetic" else room_ir(FS)


# ---------------------------------------------------------------------------
# the inverse filter (Farina 2000)
# ---------------------------------------------------------------------------

def farina_inverse(spec) -> np.ndarray:
    """Farina's inverse filter: the time-reversed sweep, amplitude exp(-t ln(f2/f1) / T)."""
    x = exponential_sweep(spec)
    t = np.arange(x.size) / spec.fs
    return x[::-1] * np.exp(-t * math.log(spec.f2_hz / spec.f1_hz) / spec.seconds)


def test_inverse_filter_makes_a_flat_band_limited_impulse(spec):
    x = exponential_sweep(spec)
    n = 2 * x.size
    f = np.fft.rfftfreq(n, 1 / FS)
    lo, hi = spec.flat_range_hz
    band = (f >= lo) & (f <= hi)
    # Farina's analytic filter on the generated sweep: flat within +-0.5 dB from half an octave
    # above the start (below it, the Fresnel ripple of the sweep's first cycles; Mueller &
    # Massarani 2001, sec. 4.1) to the end of the flat range
    far = np.fft.rfft(x, n) * np.fft.rfft(farina_inverse(spec), n)
    settled = band & (f >= spec.f1_hz * 2 ** 0.5)
    db = 20 * np.log10(np.abs(far[settled]))
    assert np.max(np.abs(db - np.median(db))) < 0.5
    # the package's filter: the same 6 dB/octave compensation (its magnitude follows Farina's) ...
    g = inverse_filter(x, FS, spec, n)
    ratio = 20 * np.log10(np.abs(g[settled]) / np.abs(np.fft.rfft(farina_inverse(spec), n)[settled]))
    assert np.max(np.abs(ratio - np.median(ratio))) < 0.5
    # ... and with the sweep a band-limited impulse at time 0: flat, zero phase in the band
    prod = np.fft.rfft(x, n) * g
    assert np.max(np.abs(20 * np.log10(np.abs(prod[band])))) < 0.5
    imp = np.fft.irfft(prod, n)
    assert int(np.argmax(np.abs(imp))) == 0
    assert np.all(np.abs(prod[(f < spec.f1_hz) | (f > spec.f2_hz)]) < 1e-9)


def test_inverse_filter_rises_3_db_per_octave(spec):
    """|G| ~ sqrt(f): the sweep's spectrum falls 3 dB/octave (equal time per octave), so its
    inverse rises 3 dB/octave (10 log10 2 = 3.01 dB)."""
    x = exponential_sweep(spec)
    n = 2 * x.size
    f = np.fft.rfftfreq(n, 1 / FS)
    g = np.abs(inverse_filter(x, FS, spec, n))
    level = lambda fc: 20 * np.log10(np.sqrt(np.mean(g[(f > fc / 2 ** (1 / 6)) & (f < fc * 2 ** (1 / 6))] ** 2)))  # noqa: E731
    steps = [level(2 * fc) - level(fc) for fc in (125, 250, 500, 1000, 2000, 4000)]
    assert np.allclose(steps, 10 * np.log10(2), atol=0.1), steps


# ---------------------------------------------------------------------------
# recovering known responses
# ---------------------------------------------------------------------------

def test_recovers_the_known_response(spec, played, known):
    rec, g = record(played, known, offset_s=0.73, nl=0.1, seed=1)
    res = deconvolve_sweep(rec, FS, played, FS, spec)
    err = band_errors_db(in_recording_units(res) / g, known, FS)
    assert np.all(err < -40), np.round(err, 1)
    ref, got = envpredict.sti_from_ir(known, FS), envpredict.sti_from_ir(res.ir, FS)
    assert abs(ref.sti.sti - got.sti.sti) <= 0.01
    t_ref, t_got = np.array(ref.decay.t30, dtype=float), np.array(got.decay.t30, dtype=float)
    assert np.all(np.isfinite(t_ref)) and np.all(np.isfinite(t_got))
    assert np.all(np.abs(t_got / t_ref - 1) <= 0.02), np.round(t_got / t_ref - 1, 4)
    assert res.repeats_used == 2 and np.all(np.nan_to_num(res.peak_to_noise_db, nan=99) > 45)


def test_distortion_products_are_cut_away_and_reported(spec, played):
    """y = x + 0.1 x^2: the second harmonic of a x^2 at x = A sin(...) has amplitude a A^2 / 2,
    a A / 2 re the fundamental (-29.0 dB at A = -3 dBFS); it is reported at that level in
    each band, and the linear part stays within -40 dB of the known response."""
    h = synthetic_decay(FS, seed=5)
    rec, g = record(played, h, nl=0.1, seed=2, noise=2e-5)  # little noise: the window holds the products alone
    res = deconvolve_sweep(rec, FS, played, FS, spec)
    expected = 20 * np.log10(0.1 * 10 ** (spec.peak_dbfs / 20) / 2)
    assert np.all(np.abs(res.distortion_db - expected) < 1.5), (np.round(res.distortion_db, 1), expected)
    err = band_errors_db(in_recording_units(res) / g, h, FS)
    assert np.all(err < -40) and np.all(err < res.distortion_db - 10), np.round(err, 1)
    clean = deconvolve_sweep(record(played, h, nl=0.0, seed=2, noise=2e-5)[0], FS, played, FS, spec)
    assert np.all(clean.distortion_db < expected - 30), clean.distortion_db  # without it: only noise there


@pytest.mark.parametrize("offset_s", [0.0, 2.0])
def test_error_does_not_depend_on_the_start_offset(spec, played, offset_s):
    h = synthetic_decay(FS, seed=7)
    rec, g = record(played, h, offset_s=offset_s, seed=3)
    res = deconvolve_sweep(rec, FS, played, FS, spec)
    assert np.all(band_errors_db(in_recording_units(res) / g, h, FS) < -40)
    e = h ** 2
    arrival = int(np.argmax(e >= e.max() / 100)) / FS  # onset: first sample within 20 dB of the peak (ISO 3382-1 A.3.2)
    assert abs(res.offset_s - (offset_s + arrival)) < 1e-3


def analogue_at_48k(samples: np.ndarray) -> np.ndarray:
    """Samples played at 44.1 kHz as a 48 kHz recorder sees them: the Fourier method
    (scipy.signal.resample), on a length of whole 147-sample periods so that the ratio is
    exactly 160/147 (a rounded length would stretch the sweep by a fraction of a sample)."""
    from scipy.signal import resample

    padded = np.r_[samples, np.zeros(-samples.size % 147)]
    return resample(padded, padded.size // 147 * 160)


def _files(tmp_path, spec, rec, fs_rec):
    sweep = tmp_path / "sweep.wav"
    write_sweep_signal(sweep, spec)
    recording = tmp_path / "rec.wav"
    sf.write(recording, rec, fs_rec, subtype="FLOAT")
    return sweep, recording


def test_rate_mismatch_from_the_files_own_rates(tmp_path):
    """Sweep file at 44.1 kHz, recorder at 48 kHz: the sweep reaches the recorder as the
    analogue signal resampled (here by the Fourier method, scipy.signal.resample)."""
    # a tail of 44230 samples: the second repeat starts 0.497 samples off the 48 kHz grid
    spec44 = sweep_spec(44100, 40, 16000, 8.0, repeats=2, tail_s=1 + 130 / 44100)
    analogue48 = analogue_at_48k(sweep_signal(spec44))
    h = synthetic_decay(48000, seed=11)
    rec, g = record(analogue48, h, offset_s=1.1, fs=48000, seed=4)
    sweep, recording = _files(tmp_path, spec44, rec, 48000)
    res = deconvolve_sweep_file(recording, sweep)
    assert res.fs == 48000
    assert np.all(band_errors_db(in_recording_units(res) / g, h, 48000) < -40)


def test_rate_mismatch_declared_with_sweep_rate(tmp_path):
    """A 48 kHz sweep file played at 44.1 kHz (declared with sweep_rate), recorded at 48 kHz."""
    spec48 = sweep_spec(48000, 40, 20000, 8.0, repeats=1, tail_s=1.0)
    analogue48 = analogue_at_48k(sweep_signal(spec48))  # played at 44.1 kHz: 8.7 s, 36.75 - 18375 Hz
    h = synthetic_decay(48000, seed=12)
    rec, g = record(analogue48, h, fs=48000, seed=5)
    sweep, recording = _files(tmp_path, spec48, rec, 48000)
    res = deconvolve_sweep_file(recording, sweep, sweep_rate=44100)
    assert np.all(band_errors_db(in_recording_units(res) / g, h, 48000) < -40)
    assert res.sweep.fs == 44100 and abs(res.sweep.f2_hz - 18375) < 1e-6


# ---------------------------------------------------------------------------
# command line
# ---------------------------------------------------------------------------

@pytest.fixture(scope="module")
def measured(tmp_path_factory, spec, played):
    d = tmp_path_factory.mktemp("sweep_cli")
    rec, _ = record(played, synthetic_decay(FS, seed=9), offset_s=0.4, seed=6)
    sweep, recording = _files(d, spec, rec, FS)
    return d, sweep, recording


def test_deconvolve_cli_writes_the_api_response_and_its_report(measured, capsys):
    d, sweep, recording = measured
    out = d / "ir.wav"
    code, text, err = run_cli(["deconvolve", recording, "--sweep", sweep, "--out", out, "--json"], capsys)
    assert code == 0, err
    got = json.loads(text)
    inputs = got.pop("inputs")
    assert inputs["recording"] == str(recording) and inputs["sweep"] == str(sweep)
    api = deconvolve_sweep_file(recording, sweep)
    assert got == {**api.to_dict(), "ir_file": str(out)}
    ir, fs = sf.read(out)
    assert fs == FS and np.allclose(ir, api.ir, atol=1e-7)
    assert set(got) >= {"peak_to_noise_db", "distortion_db", "offset_s", "repeats_used", "cautions", "notes"}
    code, text, err = run_cli(["deconvolve", recording, "--sweep", sweep, "--out", d / "ir2.wav"], capsys)
    assert code == 0 and "peak-to-noise, dB" in text and "2 of 2 repeat(s)" in text


def test_ir_with_sweep_deconvolves_first(measured, capsys):
    d, sweep, recording = measured
    code, text, err = run_cli(["ir", recording, "--sweep", sweep, "--noise", "40,38,35,33,30,28,25", "--json"],
                              capsys)
    assert code == 0, err
    got = json.loads(text)
    got.pop("inputs")
    dec = deconvolve_sweep_file(recording, sweep)
    direct = envpredict.sti_from_ir(dec.ir, dec.fs, noise_db=[40, 38, 35, 33, 30, 28, 25])
    assert got["sti"] == direct.to_dict()["sti"] and got["decay"] == direct.to_dict()["decay"]
    assert got["deconvolution"] == dec.to_dict()
    code, text, err = run_cli(["ir", recording, "--sweep", sweep], capsys)
    assert code == 0 and "Recovered from a sweep recording" in text


# ---------------------------------------------------------------------------
# bad input: one line, exit 2, nothing written
# ---------------------------------------------------------------------------

@pytest.fixture(scope="module")
def bad(tmp_path_factory, spec, played):
    d = tmp_path_factory.mktemp("sweep_bad")
    f = {"dir": d}
    f["sweep"] = d / "sweep.wav"
    write_sweep_signal(f["sweep"], spec)
    rec, _ = record(played, synthetic_decay(FS), seed=8)
    sf.write(d / "rec.wav", rec, FS, subtype="FLOAT")
    f["rec"] = d / "rec.wav"
    f["clipped_rec"] = d / "clipped_rec.wav"
    sf.write(f["clipped_rec"], np.clip(4 * rec, -1, 1), FS)
    f["clipped_sweep"] = d / "clipped_sweep.wav"
    sf.write(f["clipped_sweep"], np.clip(3 * played, -1, 1), FS)
    (d / "clipped_sweep.json").write_text((d / "sweep.json").read_text())
    short = sweep_spec(FS, 40, 15000, 8.0, repeats=1, tail_s=1.0)
    f["short_sweep"] = d / "short.wav"
    sf.write(f["short_sweep"], sweep_signal(short)[: int(4.0 * FS) + FS], FS)
    (d / "short.json").write_text(json.dumps({**short.to_dict(), "seconds": 4.0}))
    f["low_rate"] = d / "low_rate.wav"
    sf.write(f["low_rate"], rec[::2], FS // 2, subtype="FLOAT")
    f["noise"] = d / "noise.wav"
    sf.write(f["noise"], 0.1 * np.random.default_rng(9).standard_normal(rec.size), FS, subtype="FLOAT")
    f["lonely"] = d / "lonely.wav"
    sf.write(f["lonely"], played, FS)
    return f


BAD = [
    ("clipped sweep", lambda f: ["--sweep", f["clipped_sweep"]], "rec",
     "error: sweep '{clipped_sweep}' is clipped (flat tops at the peak level) — generate it again with "
     "'envpredict testsignal sweep' (peak -3 dBFS)"),
    ("clipped recording", lambda f: ["--sweep", f["sweep"]], "clipped_rec",
     "error: recording '{clipped_rec}' is clipped (flat tops at the peak level) — record again with less gain: "
     "the deconvolution assumes an undistorted recorder"),
    ("sweep too short for the lowest band", lambda f: ["--sweep", f["short_sweep"]], "rec",
     "error: sweep '{short_sweep}' of 4 s from 40 to 15000 Hz is too short for the lowest band: it spends 0.47 s "
     "per octave, and the impulse response kept before the second harmonic's response must be at least 0.79 s "
     "(0.63 Hz modulation) — make it 8 s or longer (--seconds)"),
    ("recording rate below 8 kHz band", lambda f: ["--sweep", f["sweep"]], "low_rate",
     "error: recording '{low_rate}' has sample rate 16000 Hz; the 8 kHz octave band needs more than 22627 Hz — "
     "use a recording made at 44100 or 48000 Hz (upsampling cannot add the missing band)"),
    ("recording without the sweep", lambda f: ["--sweep", f["sweep"]], "noise",
     "error: recording '{noise}' does not contain sweep '{sweep}' (its cross-correlation with the sweep peaks at "
     "0.01; at least 0.05 is expected within 10 s of its start) — record the sweep played through the system, "
     "starting the recorder before the playback, and give the sweep file that was played"),
    ("sweep without its parameters", lambda f: ["--sweep", f["lonely"]], "rec",
     "error: sweep '{lonely}' has no parameter file 'lonely.json' beside it — keep the 'lonely.json' written by "
     "'envpredict testsignal sweep' beside 'lonely.wav'"),
]


@pytest.mark.parametrize("case", BAD, ids=[c[0] for c in BAD])
@pytest.mark.parametrize("command", ["deconvolve", "ir"])
def test_bad_input_is_refused_in_one_line(bad, case, command, capsys):
    _, opts, recording, message = case
    d = bad["dir"]
    before = set(d.iterdir())
    out = d / "out_ir.wav"
    args = [command, bad[recording]] + opts(bad) + ["--out", d / ("out_ir.wav" if command == "deconvolve"
                                                                    else "out.json")]
    code, text, err = run_cli(args, capsys)
    assert code == 2
    assert err.strip() == message.format(**{k: v for k, v in bad.items()}), err
    assert "\n" not in err.strip() and text == ""
    assert set(d.iterdir()) == before and not out.exists()


def test_api_refuses_a_recording_without_the_sweep(spec, played):
    noise = 0.1 * np.random.default_rng(2).standard_normal(played.size + 2 * FS)
    with pytest.raises(InputError, match="does not contain"):
        deconvolve_sweep(noise, FS, played, FS, spec)
