"""The envelope-power index: the speech-based envelope power spectrum model (sEPSM).

Jørgensen & Dau (2011) predict intelligibility from the ratio of the envelope power of
the speech to that of the noise *after* processing, measured in a modulation filterbank:

1. a gammatone filterbank (22 filters, 63 Hz - 8 kHz, one-third-octave spacing);
2. the Hilbert envelope of each band, low-passed at 150 Hz;
3. a modulation filterbank: a 1 Hz low-pass and band-pass filters (Q = 1) at 2, 4, ...,
   64 Hz, each filter used only below a quarter of its audio band's centre frequency;
4. the envelope power in each modulation filter, normalised by the envelope's DC power
   and limited below by a floor, of the noisy speech (``P_env,S+N``) and of the noise
   alone (``P_env,N``);
5. ``SNR_env = (P_env,S+N - P_env,N) / P_env,N`` per band and filter, combined as the
   root of the sum of squares over filters and bands;
6. an ideal observer maps SNR_env to percent correct for a given speech material.

Unlike the envelope-correlation indices it needs the noise *as processed*: the noise
alone passed through the same processing (known by construction in a simulation, or
separated by phase inversion, Hagerman & Olofsson 2004). It sees the envelope
fluctuations that nonlinear noise reduction adds to the noise, which make listeners'
scores worse while the correlation indices improve.

Implementation: the gammatone filters are applied as their frequency responses
(:func:`scipy.signal.gammatone`, IIR design, evaluated on the FFT grid of the zero-padded
signal), the analytic band signal taken from the one-sided spectrum, and the modulation
filters applied as power weights to the envelope's power spectrum (the envelope power in
a filter is the weighted sum of the spectrum, Parseval). The numbers of the method are
in :mod:`envpredict.standards` (``SEPSM_*``), with their sources.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from . import checks
from . import standards as std
from .exceptions import InputError
from .results import jsonable

#: Longest signal analysed, s: the whole envelope spectrum is held per band (judgement:
#: about 0.5 GB at 48 kHz; whole sentences or lists of them are far shorter).
MAX_SECONDS: float = 120.0

#: Audio bands are used up to this share of the sample rate (the gammatone design needs
#: its centre below the Nyquist frequency, and its skirt should fit; judgement).
MAX_BAND_SHARE: float = 0.4

#: Zero padding before the FFT filtering, s: longer than the ringing of the lowest
#: gammatone filter (63 Hz, ERB about 31 Hz: its envelope falls 60 dB in about 70 ms),
#: so no band's response wraps around (judgement).
PAD_S: float = 0.25

MATERIAL_NOTE: str = (
    "percent correct from the ideal observer with the parameters of Jørgensen & Dau 2011 for their "
    "sentence material (k = sqrt(1.2), q = 0.5, sigma_s = 0.6, m = 8000; from memory): the mapping is "
    "specific to that material; for other material fit k and sigma_s to listening-test scores"
)


@dataclass(frozen=True)
class SepsmResult:
    """The sEPSM of a noisy (processed) speech signal and its noise alone.

    Attributes
    ----------
    snr_env_db : the combined SNR_env, dB (10 log10 of the linear value).
    snr_env : the combined SNR_env, linear.
    percent_correct : the ideal observer's prediction, percent (material-specific).
    bands_hz : centre frequencies of the audio bands used.
    modulation_hz : centre frequencies of the modulation filters (1 Hz: the low-pass).
    snr_env_bands : (bands, filters) linear SNR_env; NaN where a filter is not used in a band.
    power_mixture, power_noise : (bands, filters) normalised envelope powers (floored).
    cautions, notes : what the user must read / method details.
    """

    snr_env_db: float
    snr_env: float
    percent_correct: float
    bands_hz: tuple[float, ...]
    modulation_hz: tuple[float, ...]
    snr_env_bands: np.ndarray
    power_mixture: np.ndarray
    power_noise: np.ndarray
    cautions: tuple[str, ...] = field(default=())
    notes: tuple[str, ...] = field(default=())

    def to_dict(self) -> dict:
        with np.errstate(divide="ignore"):
            per_band_db = 10 * np.log10(np.sqrt(np.nansum(self.snr_env_bands ** 2, axis=1)))
        return jsonable({
            "index": "sepsm",
            "snr_env_db": round(self.snr_env_db, 3),
            "snr_env": round(self.snr_env, 5),
            "percent_correct": round(self.percent_correct, 2),
            "bands_hz": self.bands_hz,
            "modulation_hz": self.modulation_hz,
            "band_snr_env_db": np.round(per_band_db, 2),
            "snr_env_bands": np.round(self.snr_env_bands, 5),
            "power_mixture": np.round(self.power_mixture, 5),
            "power_noise": np.round(self.power_noise, 5),
            "method": "sEPSM (Jørgensen & Dau 2011, JASA 130(3):1475-1487)",
            "cautions": list(self.cautions),
            "notes": list(self.notes),
        })


def ideal_observer(snr_env: float | np.ndarray, *, k: float = std.SEPSM_K, q: float = std.SEPSM_Q,
                   sigma_s: float = std.SEPSM_SIGMA_S, m: float = std.SEPSM_M) -> float | np.ndarray:
    """Percent correct from SNR_env (linear) by the m-alternative ideal observer.

    d' = k SNR_env^q; with U_N = Phi^-1(1 - 1/m), the largest of m - 1 noise alternatives
    has mean mu_N = U_N + 0.577/U_N and standard deviation sigma_N = 1.28255/U_N, and
    P = Phi((d' - mu_N) / sqrt(sigma_S^2 + sigma_N^2)).

    References
    ----------
    D. M. Green and T. G. Birdsall, "The effect of vocabulary size on articulation score",
    in Signal Detection and Recognition by Human Observers, Wiley (1964).
    S. Jørgensen and T. Dau, JASA 130(3), 1475-1487 (2011).

    Raises
    ------
    InputError
        For an SNR_env that is not a finite number (or array) at or above 0, ``k``,
        ``q`` or ``sigma_s`` that are not finite and positive (``sigma_s`` may be 0), or
        an ``m`` that is not above 1.
    """
    from scipy.stats import norm

    snr = checks.array(snr_env, "SNR_env", ndim=(0, 1, 2), fix="give the envelope SNR as linear values >= 0")
    if np.any(snr < 0):
        raise InputError("SNR_env is negative", "give the envelope SNR as a linear value, 0 or above")
    k = checks.number(k, "the observer's k", lo=0.0, lo_open=True, hi=1e6)
    q = checks.number(q, "the observer's q", lo=0.0, lo_open=True, hi=10.0)
    sigma_s = checks.number(sigma_s, "the observer's sigma_s", lo=0.0, hi=1e6)
    m = checks.number(m, "the observer's m (number of alternatives)", lo=1.0, lo_open=True, hi=1e12)
    u_n = float(norm.ppf(1.0 - 1.0 / m))
    mu_n = u_n + 0.577 / u_n
    sigma_n = 1.28255 / u_n
    d = k * np.power(snr, q)
    p = 100.0 * norm.cdf((d - mu_n) / math.sqrt(sigma_s ** 2 + sigma_n ** 2))
    return float(p) if np.ndim(p) == 0 else p


def modulation_weights(freqs_hz: np.ndarray, modulation_hz=std.SEPSM_MODULATION_HZ,
                       q: float = std.SEPSM_MODULATION_Q) -> np.ndarray:
    """Power responses |W(f)|^2 of the modulation filters, shape (filters, freqs).

    The first filter is the 3rd-order low-pass at ``modulation_hz[0]``,
    1 / (1 + (f/fc)^6); the others are second-order band-passes of quality ``q``,
    1 / (1 + q^2 (f/fc - fc/f)^2) (1 at fc, -3 dB at fc (sqrt(1 + 1/(4q^2)) +- 1/(2q))).

    Raises
    ------
    InputError
        For frequencies that are not a finite 1-D array at or above 0, filter centres
        that are not positive numbers, or a ``q`` that is not finite and positive.
    """
    f = checks.array(freqs_hz, "modulation frequencies", fix="give the frequencies in Hz (0 or above)")
    if np.any(f < 0):
        raise InputError("modulation frequencies are negative", "give the frequencies in Hz (0 or above)")
    if isinstance(modulation_hz, (str, bytes)):
        raise InputError("modulation filter centres are text", "give them as numbers in Hz")
    centres = checks.array(modulation_hz, "modulation filter centres", fix="give the filter centres in Hz")
    if np.any(centres <= 0) or centres.size > 100:
        raise InputError("modulation filter centres must be 1 to 100 values above 0 Hz", "give them in Hz")
    modulation_hz = tuple(float(c) for c in centres)
    q = checks.number(q, "the modulation filters' q", lo=0.0, lo_open=True)
    out = np.empty((len(modulation_hz), f.size))
    out[0] = 1.0 / (1.0 + (f / modulation_hz[0]) ** 6)
    with np.errstate(divide="ignore"):
        for i, fc in enumerate(modulation_hz[1:], start=1):
            out[i] = np.where(f > 0, 1.0 / (1.0 + q ** 2 * (f / fc - fc / np.maximum(f, 1e-12)) ** 2), 0.0)
    return out


@lru_cache(maxsize=8)
def _filters(fs: int, nf: int, bands: tuple[float, ...]) -> np.ndarray:
    """Gammatone frequency responses on the rfft grid of length ``nf``, (bands, nf//2 + 1)."""
    from scipy.signal import freqz, gammatone

    f = np.arange(nf // 2 + 1) * fs / nf
    out = np.empty((len(bands), f.size), dtype=complex)
    for i, fc in enumerate(bands):
        b, a = gammatone(fc, "iir", fs=fs)
        out[i] = freqz(b, a, worN=f, fs=fs)[1]
    return out


def envelope_powers(x: np.ndarray, fs: int, bands_hz: tuple[float, ...] | None = None) -> tuple[np.ndarray, tuple]:
    """Normalised envelope power of ``x`` per gammatone band and modulation filter.

    P_env = (AC power of the band's Hilbert envelope in the modulation filter) / (DC power
    of the envelope): m^2/2 for a band whose envelope is 1 + m cos(2 pi fm t) with fm at a
    band-pass filter's centre. Not floored.

    Returns
    -------
    powers : (bands, filters); bands_hz : the bands used (below MAX_BAND_SHARE x fs).

    Raises
    ------
    InputError
        For a signal or rate the checks of :func:`sepsm` refuse (not 1-D, non-finite,
        silent, shorter than 1 s or longer than :data:`MAX_SECONDS`, a rate outside the
        accepted range), or band centres that are not positive numbers.
    """
    from scipy.fft import ifft, next_fast_len, rfft

    from .audio import check_rate

    fs = check_rate(fs, "signal")
    x = _check(x, fs, "signal")
    if bands_hz is not None:
        if isinstance(bands_hz, (str, bytes)):
            raise InputError("band centres are text", "give the gammatone centre frequencies in Hz")
        b = checks.array(bands_hz, "band centres", fix="give the gammatone centre frequencies in Hz")
        if np.any(b <= 0):
            raise InputError("band centres must be above 0 Hz", "give the gammatone centre frequencies in Hz")
        if not np.any(b <= MAX_BAND_SHARE * fs):
            raise InputError(f"no band centre is at or below {MAX_BAND_SHARE:g} x the rate of {fs} Hz",
                             "give lower centre frequencies")
        bands_hz = tuple(float(v) for v in b)
    bands = tuple(b for b in (bands_hz or std.SEPSM_BANDS_HZ) if b <= MAX_BAND_SHARE * fs)
    n = x.size
    nf = next_fast_len(n + int(PAD_S * fs), real=True)
    h = _filters(int(fs), nf, bands)
    spec = rfft(np.asarray(x, dtype=float), nf)
    # one-sided spectrum -> analytic signal; the envelope spectrum on the rfft grid of n
    f_env = np.arange(n // 2 + 1) * fs / n
    keep = f_env <= 4 * max(std.SEPSM_MODULATION_HZ[-1], std.SEPSM_ENVELOPE_LOWPASS_HZ)
    w = modulation_weights(f_env[keep]) / (1.0 + (f_env[keep] / std.SEPSM_ENVELOPE_LOWPASS_HZ) ** 2)
    w[:, 0] = 0.0  # the DC is the normaliser, not modulation power
    full = np.zeros(nf, dtype=complex)
    half = nf // 2 + 1
    powers = np.empty((len(bands), len(std.SEPSM_MODULATION_HZ)))
    for i in range(len(bands)):
        full[:half] = spec * h[i]
        full[1:half] *= 2.0
        if nf % 2 == 0:
            full[half - 1] *= 0.5  # the Nyquist bin counts once
        env = np.abs(ifft(full, workers=1)[:n])
        e = rfft(env, workers=1)
        ps = (e.real ** 2 + e.imag ** 2)[keep]
        dc = ps[0]
        powers[i] = 2.0 * (w @ ps) / dc if dc > 0 else 0.0
    return powers, bands


def _check(x, fs, name: str) -> np.ndarray:
    from .audio import as_mono_array, validate_signal

    a, _ = as_mono_array(x, fs, name)
    a = validate_signal(a, fs, name=name, allow_clipping=True)
    if a.size > MAX_SECONDS * fs:
        raise InputError(f"{name} is {a.size / fs:.0f} s long; the envelope-power index analyses at most "
                         f"{MAX_SECONDS:g} s", "cut it to the utterances of interest")
    if a.size < 1.0 * fs:
        raise InputError(f"{name} is {a.size / fs * 1000:.0f} ms long; the envelope-power index needs at least 1 s "
                         "(its lowest modulation filter is at 1 Hz)", "give whole utterances")
    return a


def sepsm(mixture: np.ndarray, noise: np.ndarray, fs: int, *, k: float = std.SEPSM_K, q: float = std.SEPSM_Q,
          sigma_s: float = std.SEPSM_SIGMA_S, m: float = std.SEPSM_M) -> SepsmResult:
    """The envelope-power index (sEPSM) of noisy speech and its noise alone.

    Parameters
    ----------
    mixture : the noisy (and possibly processed) speech, 1-D.
    noise : the noise alone, processed the same way, of the same length and rate.
    fs : sample rate, Hz.
    k, q, sigma_s, m : ideal-observer parameters (default: Jørgensen & Dau 2011's
        sentence material; material-specific).

    Returns
    -------
    SepsmResult

    Valid range
    -----------
    Stationary or slowly varying noise, reverberation and noise reduction applied to
    whole sentences; the whole signal is one analysis window (the multi-resolution
    version of 2013 handles fluctuating maskers better). No absolute hearing threshold
    is applied: all bands are taken as audible. The percent correct holds only for the
    speech material the observer was fitted to.

    References
    ----------
    S. Jørgensen and T. Dau, "Predicting speech intelligibility based on the signal-to-noise
    envelope power ratio after modulation-frequency selective processing", J. Acoust. Soc.
    Am. 130(3), 1475-1487 (2011).

    Raises
    ------
    InputError
        For signals the one validation rule refuses (not 1-D, non-finite, silent), shorter
        than 1 s or longer than :data:`MAX_SECONDS`, of different lengths, a rate outside
        the accepted range, or observer parameters :func:`ideal_observer` refuses.
    """
    from .audio import check_rate

    fs = check_rate(fs, "noisy speech")
    ideal_observer(1.0, k=k, q=q, sigma_s=sigma_s, m=m)  # the parameters, checked before the work
    x = _check(mixture, fs, "noisy speech")
    nz = _check(noise, fs, "noise alone")
    if x.size != nz.size:
        raise InputError(f"the noise alone ({nz.size / fs:.3f} s) and the noisy speech ({x.size / fs:.3f} s) differ "
                         "in length", "give the noise exactly as it was mixed and processed, sample for sample")
    p_mix, bands = envelope_powers(x, fs)
    p_n, _ = envelope_powers(nz, fs)
    floor = std.SEPSM_ENVELOPE_POWER_FLOOR
    p_mix, p_n = np.maximum(p_mix, floor), np.maximum(p_n, floor)
    mods = np.asarray(std.SEPSM_MODULATION_HZ)
    used = mods[None, :] < std.SEPSM_MODULATION_SHARE * np.asarray(bands, dtype=float)[:, None]
    snr = np.maximum((p_mix - p_n) / p_n, std.SEPSM_SNR_ENV_MIN)
    snr = np.where(used, snr, np.nan)
    total = float(np.sqrt(np.nansum(snr ** 2)))
    notes = [MATERIAL_NOTE]
    left = [b for b in std.SEPSM_BANDS_HZ if b not in bands]
    if left:
        notes.append(f"gammatone band(s) {', '.join(f'{b:g}' for b in left)} Hz left out: above "
                     f"{MAX_BAND_SHARE:g} x the sample rate of {fs} Hz")
    notes.append("no absolute hearing threshold is applied: every band is taken as audible")
    return SepsmResult(
        snr_env_db=10.0 * math.log10(total), snr_env=total,
        percent_correct=ideal_observer(total, k=k, q=q, sigma_s=sigma_s, m=m),
        bands_hz=tuple(float(b) for b in bands), modulation_hz=tuple(float(v) for v in mods),
        snr_env_bands=snr, power_mixture=p_mix, power_noise=p_n, notes=tuple(notes),
    )
