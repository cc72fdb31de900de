"""Modulation transfer functions.

* :func:`mtf_from_ir` -- from an impulse response, Schroeder's method.
"""

from __future__ import annotations

import numpy as np

from . import standards as std


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
        n = h2.shape[1]
        mask = np.arange(n)[None, :] < np.asarray(lengths)[:, None]
        h2 = np.where(mask, h2, 0.0)
    f = np.asarray(modulation_hz, dtype=np.float64)
    acc = np.zeros((h2.shape[0], f.size), dtype=np.complex128)
    block = 1 << 15  # bounded memory for long responses
    for start in range(0, h2.shape[1], block):
        t = np.arange(start, min(start + block, h2.shape[1])) / float(fs)
        acc += h2[:, start : start + t.size] @ np.exp(-2j * np.pi * t[:, None] * f[None, :])
    num = np.abs(acc)
    den = h2.sum(axis=1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        m = np.where(den > 0, num / den, 0.0)
    return np.clip(m, 0.0, 1.0)
