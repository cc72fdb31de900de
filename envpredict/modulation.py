"""Modulation transfer functions: the one home of projecting an energy envelope on the
modulation frequencies.

* :func:`project` -- the kernel: the Fourier sum of an envelope at given modulation
  frequencies, in pieces of bounded memory.
* :func:`mtf_from_ir` -- from an impulse response, Schroeder's method.
* :func:`modulation_depths` and :func:`mtf_from_test_signal` -- from the intensity
  envelopes of a recording of a test signal (the direct method: STIPA, full STI), with
  the envelope-noise-floor correction (:func:`envelope_noise_floor`,
  :func:`noise_corrected_depth`).
* :func:`mtf_from_pair_ncm`, :func:`mtf_from_pair_regression` -- from a clean/degraded
  pair (speech-based STI).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import NamedTuple

import numpy as np

from .exceptions import InputError
from . import checks
from . import standards as std

#: Block length for summing the squared response before the Fourier sum, s (see below).
BLOCK_S: float = 0.0005

#: Envelope samples per piece of the projection onto the modulation frequencies (bounds
#: the memory of the complex phasors for hours-long envelopes; changes no number beyond
#: rounding).
PROJECTION_CHUNK: int = 1 << 16

#: Modulation frequencies outside this range are not used for the noise-floor
#: estimate of the envelope spectrum, Hz (slow level drift below; envelope filter
#: roll-off above).
FLOOR_BAND_HZ: tuple[float, float] = (0.4, 16.0)

#: Bins within this many DFT bins of a modulation frequency of the signal are not
#: used for the noise-floor estimate.
FLOOR_EXCLUDE_BINS: int = 2

#: Number of unused envelope-spectrum bins nearest to a modulation frequency that give
#: its local noise floor.
LOCAL_FLOOR_BINS: int = 12

#: Shortest window (envelope samples) in which a depth is estimated; shorter: NaN.
MIN_WINDOW_SAMPLES: int = 8


def project(
    x: np.ndarray,
    freqs: np.ndarray,
    fs: float,
    *,
    stride: int = 1,
    offset: float = 0.0,
    chunk: int = PROJECTION_CHUNK,
) -> np.ndarray:
    """Fourier sum of envelopes at given frequencies, ``sum_i x[k, i] exp(-j 2 pi F t_i)``.

    Sample ``i`` lies at ``t_i = (i * stride + offset) / fs`` (``stride`` > 1: each value
    is a sum of ``stride`` samples at the rate ``fs``, placed at ``offset`` samples into
    its block). The sum runs in pieces of ``chunk`` samples, so memory stays bounded for
    hours-long envelopes.

    Parameters
    ----------
    x : (bands, n) or (n,) real envelopes.
    freqs : (F,) frequencies shared by all bands, or (bands, F) per band, Hz.
    fs : sample rate, Hz.

    Returns
    -------
    complex array (bands, F) (or (F,) for a 1-D ``x``).

    Examples
    --------
    A cosine of amplitude a over whole periods projects to a n / 2:

    >>> import numpy as np
    >>> t = np.arange(1000) / 100.0
    >>> z = project(1 + 0.5 * np.cos(2 * np.pi * 2.0 * t), np.array([0.0, 2.0]), 100.0)
    >>> np.round(np.abs(z), 6).tolist()
    [1000.0, 250.0]

    Raises
    ------
    InputError
        For envelopes or frequencies that are not 1-D or 2-D arrays of numbers, a rate that is
        not positive, or a stride or chunk that is not a positive whole number.
    """
    x = checks.array(x, "envelopes", ndim=(1, 2), finite=False)
    freqs = checks.array(freqs, "modulation frequencies", ndim=(1, 2))
    fs = checks.number(fs, "envelope rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    stride = checks.number(stride, "stride", lo=1, hi=checks.MAX_SAMPLES, integer=True)
    offset = checks.number(offset, "offset")
    chunk = checks.number(chunk, "chunk", lo=1, hi=checks.MAX_SAMPLES, integer=True)
    if freqs.ndim == 2 and x.ndim == 2 and freqs.shape[0] != x.shape[0]:
        raise InputError(f"{freqs.shape[0]} rows of frequencies for {x.shape[0]} bands", "give one row per band")
    x = np.asarray(x, dtype=np.float64)
    one = x.ndim == 1
    x = np.atleast_2d(x)
    f = np.asarray(freqs, dtype=np.float64)
    per_band = f.ndim == 2
    n = x.shape[1]
    out = np.zeros((x.shape[0], f.shape[-1]), dtype=complex)
    for c in range(0, n, max(1, int(chunk))):
        t = (np.arange(c, min(n, c + chunk)) * stride + offset) / float(fs)
        if per_band:
            for k in range(x.shape[0]):
                out[k] += np.exp(-2j * np.pi * f[k][:, None] * t) @ x[k, c: c + t.size]
        else:
            out += x[:, c: c + t.size] @ np.exp(-2j * np.pi * t[:, None] * f[None, :])
    return out[0] if one else out


def mtf_from_ir(
    band_irs: np.ndarray,
    fs: float,
    modulation_hz: tuple[float, ...] = std.MODULATION_FREQUENCIES_HZ,
    lengths: np.ndarray | None = None,
) -> np.ndarray:
    """Modulation transfer function of band-filtered impulse responses.

    Schroeder's formula: the magnitude of the Fourier transform of the squared
    impulse response at the modulation frequency F, normalised by its value at
    F = 0,

        m(F) = |sum_t h(t)^2 exp(-j 2 pi F t)| / sum_t h(t)^2.

    Source: M. R. Schroeder, "Modulation transfer functions: definition and
    measurement", Acustica 49 (1981); IEC 60268-16:2011, 6.2 (indirect method).

    Parameters
    ----------
    band_irs : array (bands, n) of band-filtered impulse responses.
    fs : sample rate, Hz.
    modulation_hz : modulation frequencies F, Hz.
    lengths : optional number of samples of each band to use (the rest is ignored),
        e.g. to stop at the point where the decay meets the noise floor.

    Returns
    -------
    array (bands, len(modulation_hz)) with values in [0, 1].

    Examples
    --------
    An exponential energy decay with reverberation time T has
    m(F) = [1 + (2 pi F T / 13.8)^2]^(-1/2):

    >>> import numpy as np
    >>> fs, T = 1000, 1.0
    >>> t = np.arange(5 * fs) / fs
    >>> h = np.exp(-6.9 * t / T)[None, :]
    >>> m = mtf_from_ir(h, fs, (1.0,))
    >>> bool(abs(m[0, 0] - (1 + (2 * np.pi * T / 13.8) ** 2) ** -0.5) < 1e-3)
    True

    Raises
    ------
    InputError
        For responses that are not a 1-D or 2-D array of finite numbers, a rate that is not
        positive, negative modulation frequencies, or ``lengths`` that are
        not one number per band.
    """
    band_irs = checks.array(band_irs, "band impulse responses", ndim=(1, 2))
    fs = checks.number(fs, "sample rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    if not np.all(checks.array(modulation_hz, "modulation frequencies", ndim=(1, 2)) >= 0):
        raise InputError("a modulation frequency is negative", "give modulation frequencies in Hz")
    if lengths is not None and checks.array(lengths, "lengths").size != np.atleast_2d(band_irs).shape[0]:
        raise InputError("lengths do not give one length per band", "give one number of samples per band")
    h2 = np.square(np.atleast_2d(np.asarray(band_irs, dtype=np.float64)))
    if lengths is not None:
        for k, n_k in enumerate(np.asarray(lengths, dtype=int)):
            h2[k, max(0, n_k):] = 0.0  # h2 is a fresh array: zero it in place
    # Sum the energy in blocks of BLOCK_S before the transform: the modulation frequencies
    # are below 16 Hz, so a block of 0.5 ms changes |m| by less than 1 - sinc(pi F dt)
    # < 1e-4 while cutting the work by the block length.
    q = max(1, int(float(fs) * BLOCK_S))
    n_blocks = -(-h2.shape[1] // q)
    pad = n_blocks * q - h2.shape[1]
    if q > 1:
        h2 = np.pad(h2, ((0, 0), (0, pad))).reshape(h2.shape[0], n_blocks, q).sum(axis=2)
    num = np.abs(project(h2, np.asarray(modulation_hz, dtype=np.float64), fs, stride=q, offset=(q - 1) / 2.0))
    den = h2.sum(axis=1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        m = np.where(den > 0, num / den, 0.0)
    return np.clip(m, 0.0, 1.0)


def whole_periods(n: int, fs_env: float, f: float) -> int:
    """Samples of the longest window of whole periods of ``f`` within ``n`` samples.

    Raises
    ------
    InputError
        For a length that is not a whole number of samples, a rate that is not positive or a
        frequency outside (0, fs_env/2].
    """
    n = checks.samples(n, "envelope length")
    fs_env = checks.number(fs_env, "envelope rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    f = checks.number(f, "modulation frequency", lo=0.0, lo_open=True, hi=fs_env / 2)
    periods = int(np.floor(n / fs_env * f + 1e-9))
    return int(round(periods / f * fs_env)) if periods > 0 else 0


class ModulationDepths(NamedTuple):
    """Modulation depths of intensity envelopes at known frequencies (see :func:`modulation_depths`)."""

    depth: np.ndarray  #: (bands, F) noise-corrected depths
    raw: np.ndarray  #: (bands, F) uncorrected depths 2|X(F)|/X(0)
    floor: np.ndarray  #: (bands,) RMS depth of the envelope noise (median-based, 0.4-16 Hz)
    local: np.ndarray  #: (bands, F) the same from the unused bins nearest to each frequency


def envelope_noise_floor(
    e: np.ndarray, fs_env: float, freqs: Sequence[float], exclude_hz: Sequence[float],
) -> tuple[float, np.ndarray]:
    """RMS modulation depth of the envelope noise of one band, at frequencies the signal does not use.

    The noise carrier of a test signal fluctuates by itself: its intensity envelope has a
    continuous modulation spectrum that adds a random phasor to the depth measured at
    every modulation frequency. Its mean power is estimated from the envelope spectrum
    ``2 |X(f)| / X(0)`` of the same window at the DFT bins within
    :data:`FLOOR_BAND_HZ` that lie more than :data:`FLOOR_EXCLUDE_BINS` bins from every
    modulation frequency of the signal (``exclude_hz``). For a complex Gaussian phasor the
    median of ``|d|^2`` is ln(2) times its mean power; the median keeps distortion
    products and stray lines out.

    Parameters
    ----------
    e : 1-D intensity envelope over a window of whole modulation periods.
    fs_env : envelope rate, Hz.
    freqs : the band's modulation frequencies, Hz (for the local floors).
    exclude_hz : all modulation frequencies of the signal.

    Returns
    -------
    floor : RMS noise depth over all unused bins (NaN if there are none).
    local : (F,) the same from the :data:`LOCAL_FLOOR_BINS` unused bins nearest to each
        frequency (for telling a line from a continuous modulation spectrum).

    Raises
    ------
    InputError
        For an envelope or frequencies that are not 1-D arrays of finite numbers, or a rate
        that is not positive.
    """
    e = checks.array(e, "envelope")
    freqs = checks.array(freqs, "modulation frequencies")
    exclude_hz = checks.array(exclude_hz, "modulation frequencies of the signal", min_size=0)
    fs_env = checks.number(fs_env, "envelope rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    e = np.asarray(e, dtype=np.float64)
    n = e.size
    local = np.full(len(freqs), np.nan)
    dc = float(np.sum(e))
    spec = 2.0 * np.abs(np.fft.rfft(e)) / dc
    fb = np.arange(spec.size) * fs_env / n
    keep = (fb >= FLOOR_BAND_HZ[0]) & (fb <= FLOOR_BAND_HZ[1])
    df = fs_env / n
    for f in exclude_hz:
        keep &= np.abs(fb - f) > FLOOR_EXCLUDE_BINS * df
    if not np.any(keep):
        return float("nan"), local
    p2, fk = spec[keep] ** 2, fb[keep]
    floor = float(np.sqrt(np.median(p2) / np.log(2.0)))
    for i, f in enumerate(freqs):
        near = np.argsort(np.abs(fk - f))[:LOCAL_FLOOR_BINS]
        local[i] = float(np.sqrt(np.median(p2[near]) / np.log(2.0)))
    return floor, local


def noise_corrected_depth(raw: np.ndarray, floor: np.ndarray) -> np.ndarray:
    """Depth with the envelope noise taken off: ``sqrt(max(raw^2 - floor^2, 0))``.

    The measured phasor is the signal's modulation plus an independent random phasor of
    mean power ``floor^2`` (:func:`envelope_noise_floor`), so the expected squared depth
    is ``m^2 + floor^2``. A floor that is not finite (no unused bins) corrects nothing.

    Parameters
    ----------
    raw : (bands, F) measured depths.
    floor : (bands,) RMS noise depth per band.

    Raises
    ------
    InputError
        For depths that are not a (bands, F) array or floors that are not one number per band.
    """
    raw = checks.array(raw, "depths", ndim=2, min_size=0, finite=False)
    floor = checks.array(floor, "noise floors", min_size=0, finite=False)
    if floor.size != raw.shape[0]:
        raise InputError(f"{floor.size} noise floors for {raw.shape[0]} bands", "give one floor per band")
    fl = np.where(np.isfinite(floor), floor, 0.0)
    return np.sqrt(np.clip(np.asarray(raw) ** 2 - fl[:, None] ** 2, 0.0, None))


def modulation_depths(
    env: np.ndarray,
    fs_env: float,
    freqs: np.ndarray,
    exclude_hz: Sequence[float],
) -> ModulationDepths:
    """Modulation depths of intensity envelopes at known frequencies (the direct method).

    Over a window of whole periods the depth at F is ``2 |sum I(t) exp(-j 2 pi F t)| /
    sum I(t)`` (:func:`project`), Houtgast & Steeneken's definition of the modulation
    index; the envelope noise of the carrier (:func:`envelope_noise_floor`) is taken off
    (:func:`noise_corrected_depth`).

    Parameters
    ----------
    env : (bands, n) intensity envelopes.
    fs_env : envelope sample rate, Hz.
    freqs : (bands, F) modulation frequencies per band; the window of band k is the
        longest whole number of periods of ``min(freqs[k])`` (every other frequency of
        the band must be a whole multiple of it).
    exclude_hz : all modulation frequencies of the signal (kept out of the noise floor).

    Returns
    -------
    ModulationDepths (depth, raw, floor, local); NaN for a band whose window is shorter
    than :data:`MIN_WINDOW_SAMPLES`.

    References
    ----------
    T. Houtgast, H. J. M. Steeneken, "A review of the MTF concept in room acoustics and
    its use for estimating speech intelligibility in auditoria", JASA 77(3), 1985;
    IEC 60268-16:2011, 6.1 and Annex B (direct method).

    Examples
    --------
    A noise-free envelope 1 + 0.5 cos(2 pi 2 t) has depth 0.5 at 2 Hz:

    >>> import numpy as np
    >>> t = np.arange(2000) / 100.0
    >>> d = modulation_depths((1 + 0.5 * np.cos(2 * np.pi * 2 * t))[None, :], 100.0, np.array([[2.0]]), [2.0])
    >>> round(float(d.depth[0, 0]), 6)
    0.5

    Raises
    ------
    InputError
        For envelopes that are not a (bands, n) array, frequencies that are not positive and
        given per band, or a rate that is not positive.
    """
    env = checks.array(env, "envelopes", ndim=2, finite=False)
    freqs = checks.array(freqs, "modulation frequencies", ndim=(1, 2))
    if np.atleast_2d(freqs).shape[0] != env.shape[0] or not np.all(freqs > 0):
        raise InputError("modulation frequencies are not positive, per band", "give a (bands, F) array in Hz")
    fs_env = checks.number(fs_env, "envelope rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    exclude_hz = checks.array(exclude_hz, "modulation frequencies of the signal", min_size=0)
    freqs = np.atleast_2d(np.asarray(freqs, dtype=np.float64))
    nb, nf = freqs.shape
    raw = np.full((nb, nf), np.nan)
    local = np.full((nb, nf), np.nan)
    floor = np.full(nb, np.nan)
    for k in range(nb):
        n = whole_periods(env.shape[1], fs_env, float(np.min(freqs[k])))
        if n < MIN_WINDOW_SAMPLES:
            continue
        e = env[k, :n]
        dc = float(np.sum(e))
        if dc <= 0:
            raw[k] = 0.0
            floor[k] = local[k] = np.inf
            continue
        raw[k] = 2.0 * np.abs(project(e[None, :], freqs[k][None, :], fs_env)[0]) / dc
        floor[k], local[k] = envelope_noise_floor(e, fs_env, freqs[k], exclude_hz)
    return ModulationDepths(noise_corrected_depth(raw, floor), raw, floor, local)


def mtf_from_test_signal(
    env: np.ndarray,
    fs_env: float,
    freqs: np.ndarray,
    nominal_depth: float,
    exclude_hz: Sequence[float] | None = None,
) -> np.ndarray:
    """MTF from the intensity envelopes of a test-signal recording: measured depth / nominal depth.

    Parameters
    ----------
    env, fs_env, freqs : as for :func:`modulation_depths`.
    nominal_depth : the test signal's own modulation depth (0.55 STIPA, 1 full STI).
    exclude_hz : all modulation frequencies of the signal (default: those in ``freqs``).

    Returns
    -------
    array (bands, F).

    Raises
    ------
    InputError
        As :func:`modulation_depths`, or for a nominal depth outside (0, 1].
    """
    env = checks.array(env, "envelopes", ndim=2, finite=False)
    freqs = checks.array(freqs, "modulation frequencies", ndim=(1, 2))
    if np.atleast_2d(freqs).shape[0] != env.shape[0] or not np.all(freqs > 0):
        raise InputError("modulation frequencies are not positive, per band", "give a (bands, F) array in Hz")
    fs_env = checks.number(fs_env, "envelope rate", lo=0.0, lo_open=True, hi=checks.MAX_RATE_HZ)
    nominal_depth = checks.number(nominal_depth, "nominal modulation depth", lo=0.0, lo_open=True, hi=1.0)
    if exclude_hz is not None:
        exclude_hz = checks.array(exclude_hz, "modulation frequencies of the signal", min_size=0)
    if exclude_hz is None:
        exclude_hz = sorted(set(np.asarray(freqs, dtype=np.float64).ravel()))
    return modulation_depths(env, fs_env, freqs, exclude_hz).depth / float(nominal_depth)


def _envelope_pair(clean_envelopes, degraded_envelopes) -> tuple[np.ndarray, np.ndarray]:
    """Checked envelopes of a pair as (bands, samples) arrays of the same shape."""
    x = checks.array(clean_envelopes, "clean envelopes", ndim=(1, 2))
    y = checks.array(degraded_envelopes, "degraded envelopes", ndim=(1, 2))
    if x.shape != y.shape:
        raise InputError(f"envelope shapes differ: {x.shape} and {y.shape}",
                         "pass the envelopes of a time-aligned pair")
    return np.atleast_2d(x), np.atleast_2d(y)


def mtf_from_pair_ncm(
    clean_envelopes: np.ndarray,
    degraded_envelopes: np.ndarray,
    *,
    return_correlation: bool = False,
) -> np.ndarray:
    """Speech-based modulation transfer by the normalised-covariance method (NCM).

    For each band k the normalised covariance of the clean and degraded intensity
    envelopes x_k(t), y_k(t),

        r_k = sum_t (x_k - mean x_k)(y_k - mean y_k)
              / sqrt(sum_t (x_k - mean x_k)^2 * sum_t (y_k - mean y_k)^2),

    gives the apparent SNR_k = 10 log10(r_k^2 / (1 - r_k^2)). Source: K. Goldsworthy,
    J. Greenberg, "Analysis of speech-based speech transmission index methods with
    implications for nonlinear operations", J. Acoust. Soc. Am. 116(6), 2004
    (normalised-covariance method). Since m / (1 - m) = r^2 / (1 - r^2) for m = r^2,
    the equivalent modulation transfer value is m_k = r_k^2, which
    :func:`envpredict.sti.transmission_index` turns into the same apparent SNR (limited
    to +-15 dB) and TI. A negative covariance is no transmission: r is limited to >= 0.

    Parameters
    ----------
    clean_envelopes, degraded_envelopes : arrays (bands, t) of intensity envelopes of
        the time-aligned pair (same shape).
    return_correlation : return r_k (unlimited, -1..1) instead of m_k.

    Returns
    -------
    array (bands,): m_k = max(r_k, 0)^2 in [0, 1] (or r_k).

    Examples
    --------
    A degraded envelope that is the clean one plus an independent fluctuation of the
    same variance has r^2 = 1/2, i.e. m = 0.5 and an apparent SNR of 0 dB:

    >>> import numpy as np
    >>> rng = np.random.default_rng(1)
    >>> x = rng.standard_normal((1, 200000))
    >>> m = mtf_from_pair_ncm(x, x + rng.standard_normal((1, 200000)))
    >>> bool(abs(m[0] - 0.5) < 0.01)
    True

    Raises
    ------
    InputError
        For envelopes that are not arrays of finite numbers of the same shape.
    """
    x, y = _envelope_pair(clean_envelopes, degraded_envelopes)
    return_correlation = checks.flag(return_correlation, "return_correlation")
    xc = x - x.mean(axis=1, keepdims=True)
    yc = y - y.mean(axis=1, keepdims=True)
    den = np.sqrt(np.sum(xc * xc, axis=1) * np.sum(yc * yc, axis=1))
    with np.errstate(invalid="ignore", divide="ignore"):
        r = np.where(den > 0, np.sum(xc * yc, axis=1) / den, 0.0)
    r = np.clip(r, -1.0, 1.0)
    if return_correlation:
        return r
    return np.clip(r, 0.0, None) ** 2


def mtf_from_pair_regression(clean_envelopes: np.ndarray, degraded_envelopes: np.ndarray) -> np.ndarray:
    """Speech-based modulation transfer by envelope regression.

    For each band k the least-squares slope of the degraded intensity envelope on the
    clean one, scaled by the ratio of their means,

        m_k = [cov(x_k, y_k) / var(x_k)] * mean(x_k) / mean(y_k),

    is the fraction of the clean envelope's relative modulation that survives. Unlike
    the normalised covariance it keeps the level offset that steady noise adds, so for
    additive noise independent of the speech m = 1 / (1 + N/S), the classical relation
    of Houtgast & Steeneken. Source: L. Ludvigsen, C. Elberling, G. Keidser, T. Poulsen,
    "Prediction of intelligibility of non-linearly processed speech", Acta Otolaryngol.
    Suppl. 469 (1990); analysed as the envelope-regression method by Goldsworthy &
    Greenberg, JASA 116(6) (2004). Values are limited to [0, 1].

    Examples
    --------
    A degraded envelope that is the clean one plus a constant of the same mean (steady
    noise at 0 dB SNR) has m = 1/2:

    >>> import numpy as np
    >>> x = 1.0 + np.sin(2 * np.pi * 10 * np.arange(6000) / 6000)[None, :]
    >>> float(np.round(mtf_from_pair_regression(x, x + 1.0)[0], 6))
    0.5

    Raises
    ------
    InputError
        For envelopes that are not arrays of finite numbers of the same shape.
    """
    x, y = _envelope_pair(clean_envelopes, degraded_envelopes)
    mx, my = x.mean(axis=1), y.mean(axis=1)
    xc = x - mx[:, None]
    var = np.sum(xc * xc, axis=1)
    cov = np.sum(xc * (y - my[:, None]), axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        m = np.where((var > 0) & (my > 0), cov / var * mx / my, 0.0)
    return np.clip(m, 0.0, 1.0)


#: Sub-windows of the clock-rate estimate: Hann windows this long (s; at least 3 periods
#: of the lowest frequency used), half overlapping. Only modulation frequencies of at
#: least :data:`CLOCK_MIN_HZ` are used: the Hann main lobe (+-2 / window) stays clear of
#: the envelope's mean, and the phase of a slow modulation carries little information.
CLOCK_WINDOW_S: float = 2.0
CLOCK_MIN_HZ: float = 2.0

#: Lags (in hops) of the phase-increment estimate, multiplied by this from 1 while the
#: recording allows: the first lag is unambiguous up to 1 / (2 F hop) (4 % at 12.5 Hz), each
#: longer lag refines the estimate of the shorter one.
CLOCK_LAG_FACTOR: int = 4


class ClockOffset(NamedTuple):
    """Clock-rate mismatch between a test signal and its recording (see :func:`clock_offset`)."""

    ppm: float  #: (observed / nominal modulation frequency - 1) x 1e6
    sigma_ppm: float  #: standard uncertainty of ``ppm`` (inf: not estimable)
    used: int  #: number of (band, frequency) components that carried the estimate


def clock_offset(env: np.ndarray, fs_env: float, freqs: np.ndarray) -> ClockOffset:
    """Clock-rate mismatch between a test signal and its recording, from the phase drift of its modulations.

    A player whose clock runs ``eps`` faster than the recorder's puts every modulation
    frequency F of the test signal at ``F (1 + eps)`` in the recording. Each band's
    envelope is cut into Hann-windowed sub-windows (:data:`CLOCK_WINDOW_S`, half
    overlapping; the mean of each taken off) and projected on the nominal frequencies;
    the phase of a component then turns by ``2 pi F eps`` per second. The turn per lag of
    ``L`` hops, ``arg sum_m Z[m + L] conj(Z[m])``, gives ``eps``; lags 1, 4, 16, ... each
    refine the previous estimate (unwrapped with it), so the estimate is unambiguous up to
    4 % and its precision grows with the recording's length. The envelope is taken
    relative to its mean in each sub-window, so bands of any level count alike; the
    components (frequencies of at least :data:`CLOCK_MIN_HZ`) are pooled with inverse
    variance weights, the variance of each from the circular variance of its single
    turns. Lags stop at half the number of sub-windows (a longer lag pairs too few of
    them). The standard uncertainty is the larger of the formal one and the weighted
    scatter of the components.

    Parameters
    ----------
    env : (bands, n) intensity envelopes.
    fs_env : envelope rate, Hz.
    freqs : (bands, F) nominal modulation frequencies of each band, Hz.

    Returns
    -------
    ClockOffset (ppm, sigma_ppm, used); ``ppm`` = 0, ``sigma_ppm`` = inf and ``used`` = 0
    when the envelope is too short or no frequency is high enough.

    Raises
    ------
    InputError
        ``env`` or ``freqs`` is not a 1-D or 2-D array of real numbers, their numbers of
        bands differ, or ``fs_env`` is not a rate from 1 Hz to
        :data:`envpredict.checks.MAX_RATE_HZ`.

    Examples
    --------
    A 4 Hz envelope modulation observed 0.2 % fast:

    >>> import numpy as np
    >>> t = np.arange(0, 30, 0.005)
    >>> e = 1 + 0.5 * np.cos(2 * np.pi * 4.0 * 1.002 * t)
    >>> round(clock_offset(e[None, :], 200.0, np.array([[4.0]])).ppm)
    2000
    """
    env = np.atleast_2d(checks.array(env, "envelopes", ndim=(1, 2), min_size=0, finite=False))
    freqs = np.atleast_2d(checks.array(freqs, "modulation frequencies", ndim=(1, 2), min_size=0, finite=False))
    fs_env = checks.number(fs_env, "envelope rate", lo=1.0, hi=checks.MAX_RATE_HZ)
    if freqs.shape[0] != env.shape[0]:
        raise InputError(f"{env.shape[0]} envelopes but modulation frequencies for {freqs.shape[0]} bands",
                         "give one row of modulation frequencies per envelope")
    none = ClockOffset(0.0, float("inf"), 0)
    f_used = freqs[freqs >= CLOCK_MIN_HZ]
    if f_used.size == 0:
        return none
    w = int(round(max(CLOCK_WINDOW_S, 3.0 / float(f_used.min())) * fs_env))
    hop = max(1, w // 2)
    n = env.shape[1]
    m = (n - w) // hop + 1 if n >= w else 0
    if m < 2:
        return none
    win = np.hanning(w)
    t_loc = np.arange(w) / fs_env
    rows, fz = [], []
    for k in range(env.shape[0]):
        fk = freqs[k][freqs[k] >= CLOCK_MIN_HZ]
        if fk.size == 0 or not np.all(np.isfinite(env[k])):
            continue
        seg = np.lib.stride_tricks.sliding_window_view(env[k], w)[::hop][:m]
        mean = seg.mean(axis=1, keepdims=True)
        if not np.all(mean > 0):
            continue
        seg = (seg / mean - 1.0) * win  # relative envelope: depth units, whatever the band's level
        # phase of each sub-window referred to its own start; the start times are added below
        z = seg @ np.exp(-2j * np.pi * t_loc[:, None] * fk[None, :])  # (m, F)
        t0 = np.arange(m) * hop / fs_env
        rows.append(z * np.exp(-2j * np.pi * t0[:, None] * fk[None, :]))
        fz.extend(fk.tolist())
    if not rows:
        return none
    z = np.concatenate(rows, axis=1).T  # (components, m)
    fz = np.asarray(fz)
    dt = hop / fs_env
    eps, spread, lag = 0.0, float("inf"), 1
    while lag <= m // 2:
        p = z[:, lag:] * np.conj(z[:, :-lag])
        r = np.sum(p, axis=1)
        # what is left after the current estimate: a small turn, unwrapped by np.angle
        turn = np.angle(r * np.exp(-2j * np.pi * fz * eps * lag * dt))
        est = eps + turn / (2 * np.pi * fz * lag * dt)
        # inverse variance: circular variance of the single turns, -2 ln |mean unit phasor|,
        # over their number, in units of the clock rate
        with np.errstate(invalid="ignore", divide="ignore"):
            rbar = np.abs(np.nanmean(p / np.abs(p), axis=1))
            var = -2.0 * np.log(np.clip(rbar, 1e-12, 1.0 - 1e-12)) / p.shape[1] / (2 * np.pi * fz * lag * dt) ** 2
        wt = np.where(np.isfinite(var), 1.0 / var, 0.0)
        if not np.sum(wt) > 0:
            return none
        eps = float(np.sum(wt * est) / np.sum(wt))
        # a scatter of the components beyond the formal variance is taken instead
        formal = 1.0 / float(np.sum(wt))
        scatter = float(np.sum(wt * (est - eps) ** 2) / np.sum(wt)) / max(1, est.size - 1)
        spread = float(np.sqrt(max(formal, scatter)))
        lag *= CLOCK_LAG_FACTOR
    return ClockOffset(eps * 1e6, spread * 1e6, int(fz.size))
