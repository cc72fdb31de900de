"""Modulation transfer functions.

* :func:`mtf_from_ir` -- from an impulse response, Schroeder's method.
"""

from __future__ import annotations

import numpy as np

from . import standards as std

#: Block length for summing the squared response before the Fourier sum, s (see below).
BLOCK_S: float = 0.0005


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
    """
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
    t = (np.arange(n_blocks) * q + (q - 1) / 2.0) / float(fs)
    f = np.asarray(modulation_hz, dtype=np.float64)
    num = np.abs(h2 @ np.exp(-2j * np.pi * t[:, None] * f[None, :]))
    den = h2.sum(axis=1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        m = np.where(den > 0, num / den, 0.0)
    return np.clip(m, 0.0, 1.0)


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
    """
    x = np.atleast_2d(np.asarray(clean_envelopes, dtype=np.float64))
    y = np.atleast_2d(np.asarray(degraded_envelopes, dtype=np.float64))
    if x.shape != y.shape:
        raise ValueError(f"envelope shapes differ: {x.shape} and {y.shape}")
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
    """
    x = np.atleast_2d(np.asarray(clean_envelopes, dtype=np.float64))
    y = np.atleast_2d(np.asarray(degraded_envelopes, dtype=np.float64))
    if x.shape != y.shape:
        raise ValueError(f"envelope shapes differ: {x.shape} and {y.shape}")
    mx, my = x.mean(axis=1), y.mean(axis=1)
    xc = x - mx[:, None]
    var = np.sum(xc * xc, axis=1)
    cov = np.sum(xc * (y - my[:, None]), axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        m = np.where((var > 0) & (my > 0), cov / var * mx / my, 0.0)
    return np.clip(m, 0.0, 1.0)
