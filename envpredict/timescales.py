"""The three temporal levels of a signal: envelope, periodicity and fine structure.

Following Rosen (1992), the temporal information of speech lies at three rates:

* **envelope** -- slow changes of intensity, below about 50 Hz (syllables, phonemes,
  pauses; the modulations the STI measures);
* **periodicity** -- about 50-500 Hz: whether the signal is periodic (voiced) or
  aperiodic (noise), and at what fundamental frequency (F0);
* **fine structure** -- above about 500 Hz: the carrier waveform within each band.

:func:`inspect_signal` shows where a recording carries each of them, per octave band:
the depth of the slow envelope modulation and of the periodicity modulation of each
band's amplitude envelope, the carrier rate of the band, the voiced/unvoiced
segmentation with an F0 track (YIN, de Cheveigne & Kawahara 2002) and the modulation
spectrum of each band's intensity envelope with its dominant rate.

Long recordings are analysed in blocks (:data:`BLOCK_S` with :data:`BLOCK_MARGIN_S`
margins, thrown away): per-band sums, Welch accumulators of the envelope spectra, YIN
per block on the 16 kHz copy; :func:`inspect_file` reads the blocks from disk, so a
60-minute 48 kHz recording needs about 310 MB (benchmarks/bench_long_inspect.py).
The in-memory :func:`inspect_signal` runs the same code on slices of its array.

Sources
-------
S. Rosen, "Temporal information in speech: acoustic, auditory and linguistic aspects",
Phil. Trans. R. Soc. Lond. B 336 (1992) 367-373.
A. de Cheveigne, H. Kawahara, "YIN, a fundamental frequency estimator for speech and
music", J. Acoust. Soc. Am. 111(4) (2002) 1917-1930.
T. Houtgast, H. J. M. Steeneken, "A review of the MTF concept in room acoustics and its
use for estimating speech intelligibility in auditoria", JASA 77(3) (1985) 1069-1077
(envelope spectra as modulation indices in one-third-octave modulation bands).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from . import checks
from . import standards as std
from .audio import ArraySource, FileSource, SignalCheck, Window, check_rate, resample, resample_ratio, validate_signal
from .bands import bandpass_sos, envelope_rate, intensity_envelopes, lowpass_sos, octave_filterbank
from .exceptions import InputError
from .pitch import YIN_RATE_HZ, F0Track, _yin_finish, _yin_frames, _yin_setup, yin_f0  # noqa: F401
from .results import jsonable, round_significant


#: Shortest recording inspected: two periods of the slowest 0.5 Hz modulation band
#: would be 4 s; we accept 1 s and report the spectrum bands that cannot be resolved
#: as missing (judgement).
MIN_SECONDS: float = 1.0
#: Longest recording inspected at once, s (4 h): the analysis streams the file in blocks,
#: but the F0 track (10 ms frames) and the overview arrays grow with the duration, and
#: the figures of longer inputs say little; choose an excerpt instead (judgement).
MAX_SECONDS: float = 4 * 3600.0

#: Welch segment for the envelope spectra, s (resolution 1/8 s = 0.125 Hz); shorter
#: recordings use one segment of their own length (judgement).
MOD_SEGMENT_S: float = 8.0
#: Envelope rate, Hz (the envelopes are low-passed at 50 Hz first).
ENVELOPE_RATE_HZ: float = 200.0
#: Butterworth prototype order of the envelope low-pass and the periodicity band-pass
#: that split each band's amplitude into the envelope and periodicity ranges (choice of
#: this tool; the same order as the intensity envelopes of the STI family).
ENVELOPE_FILTER_ORDER: int = 4
#: Search range of the dominant modulation rate, Hz: the one-third-octave modulation
#: bands 0.5 .. 31.5 Hz (band edges 0.45 .. 35.4 Hz).
MOD_PEAK_RANGE_HZ: tuple[float, float] = (
    std.MODULATION_BANDS_HZ[0] * 2 ** (-1 / 6), std.MODULATION_BANDS_HZ[-1] * 2 ** (1 / 6),
)

#: The modulation depths leave out this much at each end of the recording, s: the band
#: filters and the Hilbert transform ring there (judgement: 4/bandwidth of the 125 Hz
#: band is 45 ms).
EDGE_S: float = 0.05

#: Block length and the margin filtered on each side of a block (and thrown away), s:
#: the band analysis runs block by block so memory does not grow with the duration.
#: The margin is far longer than the ringing of the filters (judgement).
BLOCK_S: float = 20.0
BLOCK_MARGIN_S: float = 1.0

#: Points of the figure overviews: min/max waveform columns, broadband envelope values
#: (largest per group) and F0 frames (groups of frames beyond this; see
#: :meth:`InspectResult.report_extras`). Drawing only, no effect on any figure of the result.
WAVE_POINTS: int = 2000
ENVELOPE_POINTS: int = 4000
F0_PLOT_FRAMES: int = 20000

#: Length of the excerpt kept for the three-level figure, s.
EXCERPT_S: float = 0.060


# ---------------------------------------------------------------------------
# Band envelopes and modulation spectra
# ---------------------------------------------------------------------------

def _bank(fs: int):
    """The octave filterbank of this analysis: bands reaching the Nyquist frequency left out."""
    return octave_filterbank(int(fs), beyond_nyquist="omit")


def usable_bands(fs: int) -> tuple[float, ...]:
    """The STI octave bands whose upper edge lies below the Nyquist frequency.

    Raises
    ------
    InputError
        For a rate outside the supported range.
    """
    bank = _bank(fs)
    return tuple(fc for fc, ok in zip(bank.bands_hz, bank.present) if ok)


def _band_filter(x: np.ndarray, fs: int, fc: float) -> np.ndarray:
    """Zero-phase octave band ``fc`` of ``x`` (no padding)."""
    return _bank(fs).apply(x, std.OCTAVE_BANDS_HZ.index(fc), zero_phase=True)


def modulation_band_edges() -> np.ndarray:
    """Edges of the one-third-octave modulation bands (exact base-2 centres), Hz."""
    c = 0.5 * 2.0 ** (np.arange(len(std.MODULATION_BANDS_HZ)) / 3.0)
    return np.stack([c * 2 ** (-1 / 6), c * 2 ** (1 / 6)], axis=1)


def envelope_spectrum(
    env: np.ndarray, fs_env: float, segment_s: float = MOD_SEGMENT_S
) -> tuple[np.ndarray, np.ndarray]:
    """One-sided power spectral density of an envelope normalised by its mean.

    With this normalisation the power of a sinusoidal modulation of index m,
    ``I0 (1 + m cos 2 pi F t)``, integrates to m^2/2 (Welch, Hann window).
    Returns ``(freqs_hz, psd)``.

    Raises
    ------
    InputError
        For an envelope that is not a non-empty 1-D array of finite numbers, a rate that is not
        positive, or a segment length outside (0, :data:`MAX_SECONDS`] s.
    """
    env = checks.array(env, "envelope")
    fs_env = checks.number(fs_env, "envelope rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    segment_s = checks.number(segment_s, "segment length", lo=0.0, lo_open=True, hi=MAX_SECONDS)
    if int(segment_s * fs_env) < 1:
        raise InputError(f"segment of {segment_s:g} s holds no envelope sample", "give a longer segment")
    from scipy.signal import welch

    e = np.asarray(env, dtype=np.float64)
    mean = float(e.mean())
    if mean <= 0:
        return np.zeros(1), np.zeros(1)
    nper = int(min(e.size, round(segment_s * fs_env)))
    f, p = welch(e / mean, fs=fs_env, window="hann", nperseg=nper, noverlap=nper // 2,
                 detrend="constant", scaling="density")
    return f, p


def modulation_indices(freqs: np.ndarray, psd: np.ndarray) -> np.ndarray:
    """Modulation index per one-third-octave modulation band: sqrt(2 * band power).

    NaN for bands that hold no spectral line (recording too short to resolve them).

    Raises
    ------
    InputError
        For frequencies and densities that are not 1-D arrays of finite numbers of one length.
    """
    freqs = checks.array(freqs, "frequencies")
    psd = checks.array(psd, "power spectral density")
    if freqs.shape != psd.shape:
        raise InputError(f"{freqs.size} frequencies for {psd.size} densities", "pass the output of envelope_spectrum")
    df = float(freqs[1] - freqs[0]) if freqs.size > 1 else np.inf
    out = np.full(len(std.MODULATION_BANDS_HZ), np.nan)
    for i, (lo, hi) in enumerate(modulation_band_edges()):
        sel = (freqs >= lo) & (freqs < hi)
        if np.any(sel):
            out[i] = np.sqrt(2.0 * float(psd[sel].sum()) * df)
    return out


def spectral_peak(freqs: np.ndarray, psd: np.ndarray, lo: float, hi: float) -> float:
    """Frequency of the largest power per unit log-frequency, f * psd(f), in [lo, hi] Hz,
    refined by parabolic interpolation over the neighbouring lines.

    Weighting by f shows the spectrum as it appears on a logarithmic frequency axis
    (equal power in equal proportional bands), where speech envelopes peak at the
    syllable rate; the linear density of speech envelopes keeps rising towards 0 Hz.

    Raises
    ------
    InputError
        As :func:`modulation_indices`, or for limits that are not numbers.
    """
    freqs = checks.array(freqs, "frequencies")
    psd = checks.array(psd, "power spectral density")
    if freqs.shape != psd.shape:
        raise InputError(f"{freqs.size} frequencies for {psd.size} densities", "pass the output of envelope_spectrum")
    lo, hi = checks.number(lo, "lower frequency"), checks.number(hi, "upper frequency")
    sel = np.flatnonzero((freqs >= lo) & (freqs <= hi))
    if sel.size == 0:
        return float("nan")
    y = freqs[sel] * psd[sel]
    if not np.any(y > 0):
        return float("nan")
    i = int(np.argmax(y))
    f = float(freqs[sel[i]])
    if 0 < i < sel.size - 1 and np.all(y[i - 1 : i + 2] > 0):
        l0, l1, l2 = np.log(y[i - 1 : i + 2])
        den = l0 - 2 * l1 + l2
        if den < 0:
            f += float(np.clip(0.5 * (l0 - l2) / den, -0.5, 0.5)) * float(freqs[1] - freqs[0])
    return f


def _f0_overview(track: F0Track, limit: int | None = None) -> dict:
    """The F0 track for drawing: as is up to ``limit`` frames, else in groups of g frames,
    each drawn as two points at its first and last frame (so the voiced spans keep their
    length): voiced if half of its frames are, with their median F0 and mean aperiodicity."""
    limit = F0_PLOT_FRAMES if limit is None else limit
    n = track.f0_hz.size
    if n <= limit:
        return {"f0_times_s": track.times_s, "f0_hz": track.f0_hz, "voiced": track.voiced,
                "aperiodicity": track.aperiodicity}
    g = -(-2 * n // limit)
    m = n // g
    v = track.voiced[: m * g].reshape(m, g)
    f = track.f0_hz[: m * g].reshape(m, g)
    voiced = v.mean(axis=1) >= 0.5
    with np.errstate(all="ignore"):
        import warnings

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            f0 = np.where(voiced, np.nanmedian(np.where(v, f, np.nan), axis=1), np.nan)
    apm = track.aperiodicity[: m * g].reshape(m, g).mean(axis=1)
    t = track.times_s[: m * g].reshape(m, g)
    two = lambda a: np.repeat(a, 2)  # noqa: E731
    return {"f0_times_s": np.stack([t[:, 0], t[:, -1]], axis=1).ravel(), "f0_hz": two(f0),
            "voiced": two(voiced), "aperiodicity": two(apm)}


@dataclass(frozen=True)
class InspectResult:
    """Three-timescale view of one recording (see :func:`inspect_signal`).

    Per-band arrays follow ``bands_hz``; ``modulation_spectra`` has one row per band
    and one column per one-third-octave modulation band ``modulation_bands_hz``.
    """

    fs: int
    duration_s: float
    bands_hz: tuple[float, ...]
    band_level_db: np.ndarray
    envelope_modulation: np.ndarray
    periodicity_modulation: np.ndarray
    carrier_hz: np.ndarray
    modulation_spectra: np.ndarray
    band_peak_hz: np.ndarray
    modulation_peak_hz: float
    modulation_resolution_hz: float
    f0: F0Track
    cautions: tuple[str, ...]
    f0_search_hz: tuple[float, float] = (std.F0_MIN_HZ, std.F0_MAX_HZ)
    plot: dict = field(default_factory=dict, repr=False, compare=False)

    @property
    def voiced_fraction(self) -> float:
        """Share of the analysis frames (of the duration) that is voiced."""
        return float(np.mean(self.f0.voiced)) if self.f0.voiced.size else 0.0

    @property
    def f0_median_hz(self) -> float:
        v = self.f0.f0_hz[self.f0.voiced]
        return float(np.median(v)) if v.size else float("nan")

    def report_extras(self) -> dict:
        """Arrays for the figures of :func:`envpredict.report.write_report` (not in the JSON)."""
        d = dict(self.plot)
        d.update(_f0_overview(self.f0))
        return d

    def to_dict(self) -> dict:
        v = self.f0.f0_hz[self.f0.voiced]
        return jsonable({
            "method": "three timescales (Rosen 1992); F0 by YIN (de Cheveigne & Kawahara 2002)",
            "fs": self.fs,
            "duration_s": round(self.duration_s, 4),
            "timescales_hz": {
                "envelope": [0.0, std.TIMESCALE_ENVELOPE_MAX_HZ],
                "periodicity": [std.TIMESCALE_ENVELOPE_MAX_HZ, std.TIMESCALE_PERIODICITY_MAX_HZ],
                "fine_structure": [std.TIMESCALE_PERIODICITY_MAX_HZ, self.fs / 2.0],
            },
            "voiced_fraction": round(self.voiced_fraction, 4),
            "f0_median_hz": round(self.f0_median_hz, 2),
            "f0_p10_hz": round(float(np.percentile(v, 10)), 2) if v.size else None,
            "f0_p90_hz": round(float(np.percentile(v, 90)), 2) if v.size else None,
            "f0_search_hz": list(self.f0_search_hz),
            "frame_hop_s": self.f0.hop_s,
            "modulation_peak_hz": round(self.modulation_peak_hz, 3),
            "modulation_resolution_hz": round(self.modulation_resolution_hz, 4),
            "bands_hz": list(self.bands_hz),
            "band_level_db": np.round(self.band_level_db, 1),
            "envelope_modulation": np.round(self.envelope_modulation, 3),
            "periodicity_modulation": np.round(self.periodicity_modulation, 3),
            "carrier_hz": np.round(self.carrier_hz, 1),
            "band_peak_hz": np.round(self.band_peak_hz, 3),
            "modulation_bands_hz": list(std.MODULATION_BANDS_HZ),
            "modulation_spectra": np.round(self.modulation_spectra, 4),
            "cautions": list(self.cautions),
            "notes": [],
            "figure_data": {k: (v if np.asarray(v).dtype == bool else round_significant(v, 5))
                            for k, v in self.report_extras().items()},
        })


class _WelchMean:
    """Welch's averaged periodogram of an envelope fed block by block.

    Same segments (``nper`` long, half overlap, Hann window, mean removed per segment),
    scaling and averaging as ``scipy.signal.welch(..., scaling='density')`` on the
    whole envelope, but only one segment of history is kept. Dividing by the squared
    mean of the whole envelope at the end gives the spectrum of the envelope normalised
    by its mean (Welch is quadratic in the signal), as :func:`envelope_spectrum`.
    """

    def __init__(self, nper: int, fs_env: float) -> None:
        from scipy.signal import get_window

        self.nper = int(nper)
        self.step = self.nper - self.nper // 2
        self.fs_env = float(fs_env)
        self.win = get_window("hann", self.nper)
        self.buf = np.zeros(0)
        self.pos = 0  # index of buf[0] in the whole envelope
        self.next = 0  # start of the next segment
        self.acc = np.zeros(self.nper // 2 + 1)
        self.nseg = 0
        self.total = 0.0
        self.count = 0

    def push(self, e: np.ndarray) -> None:
        self.total += float(np.sum(e))
        self.count += e.size
        self.buf = np.concatenate([self.buf, e])
        k = max(0, (self.pos + self.buf.size - self.nper - self.next) // self.step + 1)
        if k:
            idx = (self.next - self.pos) + np.arange(k)[:, None] * self.step + np.arange(self.nper)[None, :]
            seg = self.buf[idx]
            seg = seg - seg.mean(axis=1, keepdims=True)
            self.acc += np.sum(np.abs(np.fft.rfft(seg * self.win, axis=1)) ** 2, axis=0)
            self.nseg += k
            self.next += k * self.step
        drop = min(self.next - self.pos, self.buf.size)
        if drop > 0:
            self.buf = self.buf[drop:]
            self.pos += drop

    @property
    def mean(self) -> float:
        return self.total / self.count if self.count else 0.0

    def finish(self) -> tuple[np.ndarray, np.ndarray]:
        mean = self.mean
        if mean <= 0 or self.nseg == 0:
            return np.zeros(1), np.zeros(1)
        p = self.acc / self.nseg / (self.fs_env * float(np.sum(self.win ** 2)))
        if self.nper % 2:
            p[1:] *= 2.0
        else:
            p[1:-1] *= 2.0
        return np.fft.rfftfreq(self.nper, 1.0 / self.fs_env), p / (mean * mean)


def _taper_margins(x: np.ndarray, left: int, right: int) -> np.ndarray:
    """``x`` with raised-cosine fades over its first ``left`` and last ``right`` samples.

    The Hilbert transform (by FFT) is not local: a block cut out of a longer signal
    leaves a jump at the block ends whose error decays only as 1/t into the block. Fading
    the margins (which are thrown away) to zero removes the jump, so the block core
    matches the whole-signal analytic signal far more closely (judgement; measured:
    block-length effects on the modulation depths below 1e-6 instead of 3e-4).
    """
    if left <= 0 and right <= 0:
        return x
    y = x.copy()
    if left > 0:
        y[:left] *= 0.5 - 0.5 * np.cos(np.pi * np.arange(left) / left)
    if right > 0:
        y[y.size - right :] *= 0.5 + 0.5 * np.cos(np.pi * (np.arange(right) + 1) / right)
    return y


class _BandStats:
    """Running figures of one octave band over the blocks (see :func:`inspect_signal`)."""

    def __init__(self, fs: int, fc: float, nper: int, fs_env: float) -> None:
        self.fc = fc
        self.power = 0.0
        self.sums = np.zeros(6)  # count, sum a, sum slow, sum slow^2, sum per, sum per^2
        self.c_num = 0.0
        self.c_den = 0.0
        self.welch = _WelchMean(nper, fs_env)

    def process(self, seg: np.ndarray, s0: int, b0: int, b1: int, n: int, fs: int, q: int, edge: int,
                lp: np.ndarray, bp: np.ndarray) -> None:
        """Add the block ``[b0, b1)``; ``seg`` holds the samples ``[s0, s1)`` around it."""
        from scipy.signal import hilbert, sosfiltfilt

        s1 = s0 + seg.size
        xb = _band_filter(seg, fs, self.fc)
        core = slice(b0 - s0, b1 - s0)
        self.power += float(np.sum(np.square(xb[core])))
        z = hilbert(_taper_margins(xb, b0 - s0, s1 - b1))
        a = np.abs(z)
        slow = sosfiltfilt(lp, a)
        per = sosfiltfilt(bp, a)
        lo, hi = max(b0, edge), min(b1, n - edge)
        if hi > lo:
            sl = slice(lo - s0, hi - s0)
            self.sums += (hi - lo, a[sl].sum(), slow[sl].sum(), np.square(slow[sl]).sum(), per[sl].sum(),
                          np.square(per[sl]).sum())
        zc = z[b0 - s0 : min(b1 + 1, s1) - s0]
        inst = np.angle(zc[1:] * np.conj(zc[:-1]))
        w = np.square(a[b0 - s0 + 1 : b0 - s0 + 1 + inst.size])
        self.c_num += float(np.sum(inst * w))
        self.c_den += float(np.sum(w))
        env, _ = intensity_envelopes(xb[None, :], fs, cutoff_hz=std.TIMESCALE_ENVELOPE_MAX_HZ,
                                     target_hz=ENVELOPE_RATE_HZ)
        self.welch.push(env[0][(b0 - s0) // q : -(-(b1 - s0) // q)])

    def depths(self, fs: int) -> tuple[float, float, float]:
        cnt, sa, ss, ss2, ps, ps2 = self.sums
        mean_a = sa / cnt if cnt else 0.0
        env_m = per_m = carrier = float("nan")
        if mean_a > 0:
            env_m = float(np.sqrt(2.0 * max(ss2 / cnt - (ss / cnt) ** 2, 0.0)) / mean_a)
            per_m = float(np.sqrt(2.0 * max(ps2 / cnt - (ps / cnt) ** 2, 0.0)) / mean_a)
        if self.c_den > 0:
            carrier = float(self.c_num / self.c_den * fs / (2 * np.pi))
        return env_m, per_m, carrier


def _grid(fs: int, block_s: float) -> tuple[int, int, int, int, int]:
    """Envelope decimation ``q``, YIN resampling ``up/down``, block and margin, samples.

    Blocks and margins are multiples of both ``q`` and ``down``, so the decimated
    envelopes and the resampled signal of consecutive blocks join on the same sample
    grid as the whole-signal computation.
    """
    from math import lcm

    q = envelope_rate(fs, ENVELOPE_RATE_HZ)[0]
    if fs > YIN_RATE_HZ:
        up, down = resample_ratio(fs, YIN_RATE_HZ)  # the factors of audio.resample
    else:
        up = down = 1
    g = lcm(q, down)
    block = max(g, int(block_s * fs) // g * g)
    margin = max(g, -(-int(BLOCK_MARGIN_S * fs) // g) * g)
    return q, up, down, block, margin


def _inspect_stream(
    read: Callable[[int, int], np.ndarray],
    n: int,
    fs: int,
    *,
    f0_min_hz: float,
    f0_max_hz: float,
    block_s: float,
    progress: Callable[[int, int], None] | None,
    check=None,
) -> InspectResult:
    """The analysis of :func:`inspect_signal` on samples ``read(s0, s1)`` of a signal of
    ``n`` samples, block by block: memory is bounded by the block length; only figures
    per band, Welch accumulators, the 10 ms F0 track, a 200 Hz broadband envelope and a
    min/max overview of the waveform grow with the duration."""
    from scipy.signal import hilbert, sosfiltfilt

    dur = n / fs
    bands = usable_bands(fs)
    if not bands:
        raise InputError(f"sample rate {fs} Hz is too low for the 125 Hz octave band", "use 8 kHz or more")
    yp = _yin_setup(fs, f0_min_hz, f0_max_hz, std.YIN_THRESHOLD, std.YIN_VOICING_THRESHOLD,
                    std.YIN_WINDOW_S, std.YIN_HOP_S)
    q, up, down, block, margin = _grid(fs, block_s)
    n16 = -(-n * up // down)  # length of the whole signal resampled for YIN
    n_frames = max(1, -(-n16 // yp.hop))
    f0_raw = np.full(n_frames, np.nan)
    ap = np.ones(n_frames)
    energy = np.zeros(n_frames)

    # the envelope and periodicity ranges of the amplitude (copies: scipy needs writable SOS)
    lp = np.array(lowpass_sos(fs, std.TIMESCALE_ENVELOPE_MAX_HZ, ENVELOPE_FILTER_ORDER))
    per_hi = min(std.TIMESCALE_PERIODICITY_MAX_HZ, 0.45 * fs)
    bp = np.array(bandpass_sos(fs, std.TIMESCALE_ENVELOPE_MAX_HZ, per_hi, ENVELOPE_FILTER_ORDER))
    fs_env = envelope_rate(fs, ENVELOPE_RATE_HZ)[1]
    n_env = -(-n // q)
    nper = int(min(n_env, round(MOD_SEGMENT_S * fs_env)))
    stats = [_BandStats(fs, fc, nper, fs_env) for fc in bands]
    edge = int(EDGE_S * fs)

    qw = max(1, n // WAVE_POINTS)  # waveform overview: min/max per column of qw samples
    n_cols = n // qw
    w_lo = np.full(n_cols, np.inf)
    w_hi = np.full(n_cols, -np.inf)
    env_parts = []
    total_power = 0.0

    starts = list(range(0, n, block))
    n_steps = len(starts) + 1
    if progress:
        progress(0, n_steps)
    for k, b0 in enumerate(starts):
        b1 = min(n, b0 + block)
        s0, s1 = max(0, b0 - margin), min(n, b1 + margin)
        seg = read(s0, s1)
        core = seg[b0 - s0 : b1 - s0]
        if check is not None:
            check.update(core)
        total_power += float(core @ core)
        # waveform overview
        top = min(b1, n_cols * qw)
        if top > b0:
            c0, c1 = b0 // qw, (top - 1) // qw + 1
            cut = np.maximum(np.arange(c0, c1) * qw, b0) - b0
            w_lo[c0:c1] = np.minimum(w_lo[c0:c1], np.minimum.reduceat(core[: top - b0], cut))
            w_hi[c0:c1] = np.maximum(w_hi[c0:c1], np.maximum.reduceat(core[: top - b0], cut))
        # broadband envelope below 50 Hz, for the figure
        # (a copy: a strided view would keep the whole block alive)
        env_parts.append(np.sqrt(2.0 * np.maximum(sosfiltfilt(lp, np.square(seg)), 0.0))[b0 - s0 : b1 - s0 : q].copy())
        # YIN on the block (resampled with its margins), frames starting inside the block
        seg16 = resample(seg, fs, YIN_RATE_HZ) if up != down else seg
        S0, B0 = s0 * up // down, b0 * up // down
        B1 = n16 if b1 == n else b1 * up // down
        i_a, i_b = -(-B0 // yp.hop), min(n_frames, -(-B1 // yp.hop))
        if i_b > i_a:
            xp = np.concatenate([seg16, np.zeros(yp.span)])
            f0_raw[i_a:i_b], ap[i_a:i_b], energy[i_a:i_b] = _yin_frames(
                xp, np.arange(i_a, i_b) * yp.hop - S0, yp)
        del seg16
        for st in stats:
            st.process(seg, s0, b0, b1, n, fs, q, edge, lp, bp)
        del seg, core
        if progress:
            progress(k + 1, n_steps)
    if check is not None:
        check.finish()
    track = _yin_finish(f0_raw, ap, energy, yp)

    nb = len(bands)
    level = np.full(nb, np.nan)
    env_mod = np.full(nb, np.nan)
    per_mod = np.full(nb, np.nan)
    carrier = np.full(nb, np.nan)
    spectra = np.full((nb, len(std.MODULATION_BANDS_HZ)), np.nan)
    band_peak = np.full(nb, np.nan)
    combined = None
    mean_sum = 0.0
    freqs = np.zeros(1)
    fine_spectra = []
    total_power /= n
    for k, st in enumerate(stats):
        power = st.power / n
        level[k] = 10 * np.log10(power / total_power) if power > 0 else -np.inf
        env_mod[k], per_mod[k], carrier[k] = st.depths(fs)
        freqs, psd = st.welch.finish()
        spectra[k] = modulation_indices(freqs, psd)
        band_peak[k] = spectral_peak(freqs, psd, *MOD_PEAK_RANGE_HZ)
        m = st.welch.mean
        combined = psd * m * m if combined is None else combined + psd * m * m
        mean_sum += m
        fine_spectra.append(psd)
    combined = combined / (mean_sum * mean_sum) if mean_sum > 0 else combined
    peak = spectral_peak(freqs, combined, *MOD_PEAK_RANGE_HZ)
    df = float(freqs[1] - freqs[0]) if freqs.size > 1 else float("nan")

    # excerpt for the three-level figure: the loudest voiced frame (where all three levels
    # show), or the middle; read again with margins (a second, short read)
    env_bb = np.concatenate(env_parts)
    del env_parts
    if np.any(track.voiced) and env_bb.size:
        idx = np.clip(np.round(track.times_s * fs / q).astype(int), 0, env_bb.size - 1)
        centre = float(track.times_s[int(np.argmax(np.where(track.voiced, env_bb[idx], -np.inf)))])
    else:
        centre = dur / 2
    i0 = int(np.clip((centre - EXCERPT_S / 2) * fs, 0, max(0, n - int(EXCERPT_S * fs))))
    i1 = min(n, i0 + int(EXCERPT_S * fs))
    show_band = 1000.0 if 1000.0 in bands else bands[-1]
    s0, s1 = max(0, i0 - margin), min(n, i1 + margin)
    xb = _band_filter(read(s0, s1), fs, show_band)
    a = np.abs(hilbert(_taper_margins(xb, i0 - s0, s1 - i1)))
    e = slice(i0 - s0, i1 - s0)
    excerpt = {
        "excerpt_band_hz": show_band, "excerpt_t_s": np.arange(i0, i1) / fs, "excerpt_band": xb[e],
        "excerpt_amplitude": a[e], "excerpt_slow": sosfiltfilt(lp, a)[e], "excerpt_periodicity": sosfiltfilt(bp, a)[e],
    }

    cautions = [
        (f"F0 is searched from {f0_min_hz:g} to {f0_max_hz:g} Hz (the periodicity range; adult voices are "
         "commonly 100-300 Hz). Voices outside the range are reported as unvoiced or at a multiple of "
         "their period.")
    ]
    if not np.any(track.voiced):
        cautions.append("No voiced frames were found: the recording has no periodicity in the "
                        f"{f0_min_hz:g}-{f0_max_hz:g} Hz range; F0 is not given.")
    missing = [f"{c:g} Hz" for c, v in zip(std.MODULATION_BANDS_HZ, np.isnan(spectra).any(axis=0)) if v]
    if missing:
        cautions.append(f"The recording ({dur:.1f} s) is too short to resolve the modulation bands "
                        f"{', '.join(missing)}: they are left empty. Give a recording of 8 s or more.")
    left_out = [f"{c:g} Hz" for c in std.OCTAVE_BANDS_HZ if c not in bands]
    if left_out:
        cautions.append(f"Sample rate {fs} Hz: the octave band(s) {', '.join(left_out)} lie above the "
                        "Nyquist frequency and are left out.")
    if not np.isfinite(peak):
        cautions.append("No envelope modulation peak could be found.")

    g = max(1, -(-env_bb.size // ENVELOPE_POINTS))  # overview: the largest value per g samples
    if g > 1:
        m_env = -(-env_bb.size // g)
        env_bb = np.maximum.reduceat(env_bb, np.arange(m_env) * g)
        env_t = (np.arange(m_env) * g + (g - 1) / 2.0) * q / fs
    else:
        env_t = np.arange(env_bb.size) * q / fs
    plot = {
        "wave_t_s": (np.arange(n_cols) + 0.5) * qw / fs, "wave_min": w_lo, "wave_max": w_hi,
        "envelope_t_s": env_t, "envelope": env_bb,
        "modulation_freqs_hz": freqs, "modulation_psd": np.array(fine_spectra),
        "modulation_psd_combined": combined,
        **excerpt,
    }
    if progress:
        progress(n_steps, n_steps)
    return InspectResult(
        fs=fs, duration_s=dur, bands_hz=bands, band_level_db=level, envelope_modulation=env_mod,
        periodicity_modulation=per_mod, carrier_hz=carrier, modulation_spectra=spectra,
        band_peak_hz=band_peak, modulation_peak_hz=peak, modulation_resolution_hz=df, f0=track,
        cautions=tuple(cautions), f0_search_hz=(float(f0_min_hz), float(f0_max_hz)), plot=plot,
    )


def inspect_signal(
    x: np.ndarray,
    fs: int,
    *,
    f0_min_hz: float = std.F0_MIN_HZ,
    f0_max_hz: float = std.F0_MAX_HZ,
    block_seconds: float = BLOCK_S,
    progress: Callable[[int, int], None] | None = None,
) -> InspectResult:
    """Split a recording into envelope, periodicity and fine structure per octave band.

    For each octave band (125 Hz ... 8 kHz; bands above the Nyquist frequency are left
    out) the band signal's amplitude envelope ``a(t)`` (Hilbert magnitude) is split at
    50 and 500 Hz (zero-phase 4th-order Butterworth filters):

    * ``envelope_modulation`` = sqrt(2) std(a below 50 Hz) / mean(a),
    * ``periodicity_modulation`` = sqrt(2) std(a in 50-500 Hz) / mean(a),

    both equal to the modulation index m for a sinusoidal modulation ``1 + m cos``;
    (over the recording less 50 ms at each end, where the filters ring);
    ``carrier_hz`` is the power-weighted mean instantaneous frequency of the band (its
    fine-structure rate; above 500 Hz for the 1 kHz band and up). The modulation
    spectrum of each band is that of its intensity envelope (squared band signal,
    low-passed at 50 Hz, as for the STI) normalised by its mean, given as modulation
    indices in one-third-octave modulation bands 0.5-31.5 Hz (Houtgast & Steeneken
    1985). ``modulation_peak_hz`` is the rate with the largest power per unit
    log-frequency in the intensity-weighted sum of the band spectra (the syllable
    rate for running speech), within one Welch line (``modulation_resolution_hz``).
    Voicing and F0 come from :func:`yin_f0`.

    Sources: Rosen 1992 (the three levels); de Cheveigne & Kawahara 2002 (YIN);
    Houtgast & Steeneken 1985 (envelope spectra).

    Parameters
    ----------
    x : 1-D signal, 1 s to :data:`MAX_SECONDS` (4 h) long. It is analysed in blocks of
        ``block_seconds`` with 1 s margins; for files use :func:`inspect_file`, which
        never holds the whole signal.
    fs : sample rate, Hz (8 kHz or more; the 8 kHz band needs more than 22.6 kHz).
    f0_min_hz, f0_max_hz : F0 search range, default 50-500 Hz (common practice, no
        source: periodicity spans about 50-500 Hz, adult voices commonly 100-300 Hz).
    block_seconds : block length, s (memory bound only).
    progress : called as ``progress(done, total)`` after every block.

    Examples
    --------
    >>> import numpy as np
    >>> fs = 16000
    >>> t = np.arange(2 * fs) / fs
    >>> x = sum(np.sin(2 * np.pi * 150 * k * t) / k for k in range(1, 11))
    >>> r = inspect_signal(0.1 * x, fs)
    >>> abs(r.f0_median_hz - 150) < 3
    True

    Raises
    ------
    InputError
        For a signal refused by the input rule (not numeric, not one channel, empty, NaN/inf,
        silent, clipped, a rate outside the supported range), shorter than 1 s or longer than
        :data:`MAX_SECONDS`, or
        an F0 range or block length out of range.
    """
    x = validate_signal(x, fs, name="recording", min_seconds=MIN_SECONDS)
    fs = int(fs)
    dur = x.size / fs
    if dur > MAX_SECONDS:
        raise InputError(
            f"recording is {dur:.0f} s long; inspect looks at up to {MAX_SECONDS:.0f} s at a time",
            "choose an excerpt (envpredict inspect --start S --duration S)",
        )
    return _inspect_stream(ArraySource(x, fs).read, x.size, fs, f0_min_hz=f0_min_hz, f0_max_hz=f0_max_hz,
                           block_s=block_seconds, progress=progress)


def inspect_file(
    path,
    channel: int | None = None,
    *,
    start_s: float = 0.0,
    duration_s: float | None = None,
    f0_min_hz: float = std.F0_MIN_HZ,
    f0_max_hz: float = std.F0_MAX_HZ,
    block_seconds: float = BLOCK_S,
    progress: Callable[[int, int], None] | None = None,
) -> InspectResult:
    """:func:`inspect_signal` of (an excerpt of) an audio file, read block by block.

    The file is never held whole: blocks of ``block_seconds`` are read with margins of
    :data:`BLOCK_MARGIN_S` on each side (the band filters and YIN need them), and only
    small figures per block are kept, so the peak memory does not grow with the
    duration except for the 10 ms F0 track and a 200 Hz envelope (about 50 MB for
    4 hours). The input checks of :func:`envpredict.audio.validate_signal` (NaN,
    silence, DC, clipping) are accumulated over the blocks by the same rule
    (:class:`envpredict.audio.SignalCheck`), so the verdict is that of the array. The result equals
    ``inspect_signal(x, fs)`` of the same samples (the same code runs on both).

    Parameters
    ----------
    path : WAV, FLAC or OGG file (any rate >= 8 kHz).
    channel : channel of a multi-channel file (required for them).
    start_s, duration_s : the excerpt, s; default the whole file from ``start_s``.
        It must be 1 s to :data:`MAX_SECONDS` (4 h) long.
    f0_min_hz, f0_max_hz : F0 search range (see :func:`inspect_signal`).
    block_seconds : block length, s (memory bound; the result does not depend on it
        beyond the filters' ringing past the 1 s margins, below 1e-4 of any figure).
    progress : called as ``progress(done, total)`` after every block.

    Raises
    ------
    InputError
        For a file that cannot be read, an excerpt outside the recording or shorter than
        1 s, or an option out of range.
    """
    start_s = checks.number(start_s, "--start", lo=0.0)
    duration_s = checks.optional_number(duration_s, "--duration", lo=0.0)
    name = "recording"
    with FileSource(path, channel, name=name) as src:
        return _inspect_file(src, path, start_s, duration_s, f0_min_hz, f0_max_hz, block_seconds, progress)


def _inspect_file(src: FileSource, path, start_s, duration_s, f0_min_hz, f0_max_hz, block_seconds,
                  progress) -> InspectResult:
    name = src.kind
    fs, frames = check_rate(src.fs, src.name), src.n
    total = frames / fs
    if not 0 <= start_s < total:
        raise InputError(f"--start {start_s:g} s is outside the recording (0 to {total:.2f} s)",
                         "give a start inside the file")
    if duration_s is not None and not MIN_SECONDS <= duration_s <= MAX_SECONDS:
        raise InputError(f"--duration {duration_s:g} s is outside {MIN_SECONDS:g}-{MAX_SECONDS:g} s",
                         "give a duration in that range")
    length = (total - start_s) if duration_s is None else min(float(duration_s), total - start_s)
    i0 = int(round(start_s * fs))
    n = min(int(round(length * fs)), frames - i0)
    if n < MIN_SECONDS * fs:
        raise InputError(f"{name} '{path}' is {n / fs:.3f} s long from the start point; at least "
                         f"{MIN_SECONDS:.2f} s is needed", "give a longer excerpt")
    if n > MAX_SECONDS * fs:
        raise InputError(
            f"{name} '{path}' is {n / fs:.0f} s long from the start point; inspect looks at up to "
            f"{MAX_SECONDS:.0f} s ({MAX_SECONDS / 3600:g} h) at a time",
            "choose an excerpt with --start and --duration (e.g. --duration 3600)",
        )
    return _inspect_stream(Window(src, i0, n).read, n, fs, f0_min_hz=f0_min_hz, f0_max_hz=f0_max_hz,
                           block_s=block_seconds, progress=progress,
                           check=SignalCheck(src.name, subtype=src.subtype))
