"""Octave-band filterbank and intensity envelopes.

Filters are returned as second-order sections (SOS). The octave bands follow the
base-2 system of IEC 61260-1 (edges fc/sqrt(2) .. fc*sqrt(2)) with Butterworth
band-pass prototypes, run zero-phase where the method needs the time alignment
of the bands to match the broadband signal (impulse responses).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from . import standards as std
from .exceptions import InputError


def min_rate_for_octaves(centres: tuple[float, ...] = std.OCTAVE_BANDS_HZ) -> float:
    """Lowest sample rate whose Nyquist frequency lies above the top band edge, Hz."""
    return 2.0 * max(centres) * std.OCTAVE_EDGE_FACTOR


def check_rate_for_octaves(fs: int, name: str = "input") -> None:
    """Refuse a rate too low for the 8 kHz octave band."""
    need = min_rate_for_octaves()
    if fs <= need:
        raise InputError(
            f"{name} has sample rate {fs} Hz; the 8 kHz octave band needs more than {need:.0f} Hz",
            "use a recording made at 44100 or 48000 Hz (upsampling cannot add the missing band)",
        )


@lru_cache(maxsize=32)
def octave_sos(fs: int, order: int = std.OCTAVE_FILTER_ORDER) -> tuple[np.ndarray, ...]:
    """Band-pass SOS for the seven STI octave bands at sample rate ``fs``.

    Parameters
    ----------
    fs : sample rate, Hz; must exceed :func:`min_rate_for_octaves`.
    order : Butterworth prototype order (the band-pass has twice this order).

    Returns
    -------
    tuple of seven SOS arrays, 125 Hz ... 8 kHz.
    """
    from scipy.signal import butter

    check_rate_for_octaves(int(fs))
    out = []
    for fc in std.OCTAVE_BANDS_HZ:
        lo, hi = fc / std.OCTAVE_EDGE_FACTOR, fc * std.OCTAVE_EDGE_FACTOR
        sos = butter(order, [lo, hi], btype="bandpass", fs=fs, output="sos")
        out.append(sos)
    return tuple(out)


def octave_bands(x: np.ndarray, fs: int, *, zero_phase: bool = True) -> np.ndarray:
    """Split a signal into the seven octave bands.

    Parameters
    ----------
    x : 1-D signal.
    fs : sample rate, Hz.
    zero_phase : forward-backward filtering (``sosfiltfilt``) so no band is delayed.

    Returns
    -------
    ndarray, shape (7, len(x)).
    """
    from scipy.signal import sosfilt, sosfiltfilt

    x = np.asarray(x, dtype=np.float64)
    out = np.empty((len(std.OCTAVE_BANDS_HZ), x.size))
    for k, sos in enumerate(octave_sos(int(fs))):
        if zero_phase:
            out[k] = sosfiltfilt(sos, x, padtype=None)
        else:
            out[k] = sosfilt(sos, x)
    return out


def envelope_rate(fs: int, target_hz: float = 200.0) -> tuple[int, float]:
    """Integer decimation factor to bring ``fs`` near ``target_hz`` and the resulting rate."""
    q = max(1, int(fs // target_hz))
    return q, fs / q


def intensity_envelopes(
    band_signals: np.ndarray,
    fs: int,
    *,
    cutoff_hz: float = 50.0,
    target_hz: float = 200.0,
) -> tuple[np.ndarray, float]:
    """Intensity envelopes of band signals: squared, low-passed, decimated.

    The low-pass (4th-order Butterworth at ``cutoff_hz``, zero phase) keeps the
    0.5-16 Hz modulations that carry intelligibility with negligible loss (the
    attenuation at 12.5 Hz is below 0.01 dB for the 50 Hz default).

    Returns ``(envelopes, envelope_rate)`` with envelopes of shape (bands, m).
    """
    from scipy.signal import butter, sosfiltfilt

    q, fs_env = envelope_rate(int(fs), target_hz)
    sq = np.square(np.atleast_2d(band_signals))
    sos = butter(4, cutoff_hz, btype="lowpass", fs=fs, output="sos")
    env = sosfiltfilt(sos, sq, axis=-1)[:, ::q]
    return np.maximum(env, 0.0), fs_env


class EnvelopeStream:
    """Octave-band intensity envelopes of a long signal, block by block.

    Forward (causal) band filtering with the filter state carried from block to block,
    squaring, a 4th-order low-pass at ``cutoff_hz`` (also stateful) and decimation to
    about ``target_hz``. The result equals processing the whole signal in one piece
    with the same causal filters, so the block length does not change any number.
    Memory is bounded by the block length.

    ``band_passes=2`` runs each band filter twice in cascade (causally): the magnitude
    response is then |H|^2, the same as :func:`octave_bands` with ``zero_phase=True``
    (twice the attenuation in dB outside the band), at twice the group delay.
    """

    def __init__(self, fs: int, *, cutoff_hz: float = 50.0, target_hz: float = 200.0,
                 band_passes: int = 1) -> None:
        from scipy.signal import butter

        self.fs = int(fs)
        self.sos = tuple(np.vstack([s] * int(band_passes)) for s in octave_sos(self.fs))
        self.lp = butter(4, cutoff_hz, btype="lowpass", fs=self.fs, output="sos")
        self.zi_band = [np.zeros((s.shape[0], 2)) for s in self.sos]
        self.zi_lp = [np.zeros((self.lp.shape[0], 2)) for _ in self.sos]
        self.q, self.rate = envelope_rate(self.fs, target_hz)
        self.offset = 0

    def process(self, x: np.ndarray) -> np.ndarray:
        """Envelope samples (bands, m) for the next block of the signal."""
        from scipy.signal import sosfilt

        x = np.asarray(x, dtype=np.float64)
        first = (-self.offset) % self.q
        out = []
        for k, sos in enumerate(self.sos):
            y, self.zi_band[k] = sosfilt(sos, x, zi=self.zi_band[k])
            e, self.zi_lp[k] = sosfilt(self.lp, y * y, zi=self.zi_lp[k])
            out.append(e[first::self.q])
        self.offset += x.size
        return np.maximum(np.array(out), 0.0)
