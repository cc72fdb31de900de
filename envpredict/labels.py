"""How quantities are shown to a person: band labels, names, units and explanations.

The JSON keys are the machine names (the result vocabulary of :mod:`envpredict.results`);
this module holds what a person reads in the terminal, the reports and the figures, so
that the three say the same thing the same way.

Band labels are the nominal frequencies of the bands (ISO 266:1997 preferred
frequencies, the R10 series for one-third octaves and every third one of it for
octaves; IEC 61260-1:2014 Annex E names bands by them): the band centred on 238.1 Hz
is "250 Hz", on 1511.9 Hz "1.6 kHz", whatever exact centre the method computes with.

The vocabulary (:data:`TERMS`) gives each quantity a :class:`Term`: display name, unit,
decimals, a one-line explanation, whether a terminal table needs a column note for it,
and its precision in a results CSV. Adding a quantity (a new command's column) is one
line there; a header is ``header(key)`` ("T30, s"), a label may add a qualification in
brackets ("STI (image engine)"), and :func:`known_label` says whether a shown label is in
the vocabulary (the test of every command's output uses it).
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from dataclasses import dataclass

from . import checks
from .exceptions import InputError

#: ISO 266 preferred (nominal) one-third-octave mid-band frequencies, Hz, 10 Hz to 20 kHz.
NOMINAL_THIRD_OCTAVE_HZ: tuple[float, ...] = (
    10, 12.5, 16, 20, 25, 31.5, 40, 50, 63, 80, 100, 125, 160, 200, 250, 315, 400, 500, 630, 800,
    1000, 1250, 1600, 2000, 2500, 3150, 4000, 5000, 6300, 8000, 10000, 12500, 16000, 20000,
)


def nominal_frequency(fc: float) -> float:
    """The nominal (ISO 266) frequency nearest to ``fc`` on a logarithmic scale.

    Raises
    ------
    InputError
        ``fc`` is not a positive, finite frequency.

    Examples
    --------
    >>> nominal_frequency(238.1), nominal_frequency(1511.9), nominal_frequency(150.0)
    (250, 1600, 160)
    """
    f = checks.number(fc, "band centre", lo=0.0, lo_open=True, fix="give a positive frequency in Hz")
    return min(NOMINAL_THIRD_OCTAVE_HZ, key=lambda n: abs(math.log(f / n)))


def band_label(fc: float, *, unit: bool = True) -> str:
    """The label of the band centred on ``fc``: its nominal frequency, in Hz below 1 kHz
    and in kHz from there ("125 Hz", "1.6 kHz", "3.15 kHz"; without the unit: "125",
    "1.6k").

    Raises
    ------
    InputError
        ``fc`` is not a positive, finite frequency.

    Examples
    --------
    >>> band_label(238.1), band_label(3809.8), band_label(8000), band_label(150, unit=False)
    ('250 Hz', '4 kHz', '8 kHz', '160')
    """
    n = nominal_frequency(fc)
    if n >= 1000:
        k = f"{n / 1000:g}"
        return f"{k} kHz" if unit else f"{k}k"
    return f"{n:g} Hz" if unit else f"{n:g}"


@dataclass(frozen=True)
class Term:
    """How one quantity is shown to a person: its name, unit, decimals and a one-line
    explanation (see :data:`TERMS`)."""

    name: str
    unit: str = ""
    decimals: int | None = None
    explain: str = ""
    #: True where the term is not self-evident: a terminal table showing it gets a column note
    note: bool = False
    #: decimals of the column in a results CSV (None: written as computed)
    csv_decimals: int | None = None
    #: the CSV value is cut (rounded toward minus infinity), not rounded: a value below a
    #: requirement of up to ``csv_decimals`` decimals stays below it (as sti.format_index)
    csv_cut: bool = False

    @property
    def header(self) -> str:
        """The table header: "name, unit" ("T30, s"), or the name alone."""
        return f"{self.name}, {self.unit}" if self.unit else self.name


_T = Term
_IEC = "IEC 60268-16"
_ISO = "ISO 3382-1"

#: The presentation vocabulary: machine key -> :class:`Term`. The keys are the JSON keys
#: where a quantity has one; the terminal tables, report tables, figure labels and the
#: people-facing CSV headers take names, units and decimals from here. One entry a line.
TERMS: dict[str, Term] = {
    # --- the STI family
    "sti": _T("STI", "", 2, f"Speech Transmission Index, 0 (nothing transmitted) to 1 (perfect), {_IEC}; shown "
                        "with more decimals where rounding would contradict a verdict", csv_decimals=6, csv_cut=True),
    "mti": _T("MTI", "", 2, "modulation transfer index of an octave band: the mean transmission index over its "
                        "modulation frequencies, 0 to 1", note=True),
    "ti": _T("TI", "", 3, "transmission index: the modulation transfer m turned into an apparent SNR and scaled "
                      "to 0 (at -15 dB) to 1 (at +15 dB)", note=True),
    "mtf": _T("m", "", 2, "modulation transfer: the fraction of the speech envelope's modulation depth that "
                      "reaches the listener, 0 (lost) to 1 (kept), per band and modulation frequency", note=True),
    "f1": _T("f1", "Hz", 2, "the lower of the band's two modulation frequencies (STIPA)", note=True),
    "f2": _T("f2", "Hz", 2, "the higher of the band's two modulation frequencies (STIPA)", note=True),
    "m_f1": _T("m at f1", "", 2, "modulation transfer m at f1, 0 (lost) to 1 (kept)", note=True),
    "m_f2": _T("m at f2", "", 2, "modulation transfer m at f2, 0 (lost) to 1 (kept)", note=True),
    "mtf_measured": _T("measured m", "", 3, "modulation transfer as measured, before the noise and auditory "
                                          "corrections"),
    "rating": _T("qualification band", "", None, f"{_IEC} Annex F band of the STI, A+ (best) to U (below 0.36); "
                                              "shown with the subjective rating, e.g. 'G (fair)'"),
    "subjective": _T("subjective rating", "", None, "five-step scale of the STI: bad, poor, fair, good, excellent"),
    "band": _T("band", "Hz", None, "frequency band, named by its nominal mid-band frequency (ISO 266, IEC 61260-1; "
                                 "'1.6k' = 1.6 kHz)"),
    "octave_band": _T("octave band", "", None, "octave band, named by its nominal mid-band frequency (ISO 266)"),
    "third_octave_band": _T("one-third-octave band", "Hz", None, "one-third-octave band, named by its nominal "
                                                               "mid-band frequency (ISO 266)"),
    "modulation_hz": _T("modulation frequency", "Hz", 2, "rate at which the intensity envelope rises and falls; "
                                                       "the STI uses 0.63 to 12.5 Hz", note=True),
    "speech_db": _T("speech level", "dB SPL", 1, "octave-band level of the speech at the listener"),
    "noise_db": _T("noise level", "dB SPL", 1, "octave-band level of the background noise at the listener"),
    "masking_db": _T("masking level", "dB SPL", 1, f"level of the upward spread of masking from the band below "
                                                 f"({_IEC})", note=True),
    "threshold_db": _T("reception threshold", "dB SPL", 1, f"absolute speech reception threshold of the band "
                                                         f"({_IEC})", note=True),
    "band_levels_db": _T("level (signal + noise)", "dB SPL", 1, "octave-band level of the whole recording: the test "
                                                               "signal plus the noise at the position", note=True),
    "band_levels_dbfs": _T("level (signal + noise)", "dBFS", 1, "octave-band level of the whole "
                          "recording (test signal plus noise), uncalibrated: dB re digital full scale", note=True),
    "envelope_noise_depth": _T("noise depth", "", 3, "the modulation depth the recording's own noise shows at "
                                                    "modulation frequencies the test signal does not use (a floor "
                                                    "under every measured m; near 0 is good)", note=True),
    "uncertainty": _T("standard uncertainty", "", 2, "one standard uncertainty of the STI (about 68 % coverage): "
                                                    "envelope noise or window spread, with the expected offset",
                     note=True),
    "window_sti": _T("STI of the window", "", 3, "STI of one analysis window (a consecutive stretch of the "
                                                "recording)"),
    "window_start": _T("window start", "s", 1, "time of the analysis window's start in the recording"),
    "window": _T("window", "", None, "analysis window number, in time order"),
    "requirement": _T("required STI", "", None, "the STI the system must reach, set by the local code; judged on "
                                               "the unrounded value"),
    "talker": _T("talker", "", None, f"speech spectrum and band weights ({_IEC}): male or female"),
    # --- decay figures (ISO 3382-1)
    "edt": _T("EDT", "s", 2, f"early decay time: the 0 to -10 dB decay extrapolated to 60 dB ({_ISO})"),
    "t20": _T("T20", "s", 2, f"reverberation time from the -5 to -25 dB decay ({_ISO})"),
    "t30": _T("T30", "s", 2, f"reverberation time from the -5 to -35 dB decay ({_ISO})"),
    "c50": _T("C50", "dB", 1, f"clarity: energy in the first 50 ms over the rest ({_ISO})"),
    "c80": _T("C80", "dB", 1, f"clarity: energy in the first 80 ms over the rest ({_ISO})"),
    "d50": _T("D50", "", 2, f"definition: share of the energy in the first 50 ms, 0 to 1 ({_ISO})"),
    "decay_range_db": _T("decay range", "dB", 0, "how far the band's decay falls before its noise floor; T30 needs "
                                                "45 dB, T20 35 dB, EDT 20 dB", note=True),
    "crossing_s": _T("noise-floor crossing", "s", 2, "time where the decay meets the noise floor (the curve is "
                                                    "truncated there)", note=True),
    "t30_mid": _T("T30 (mid-frequency)", "s", 2, f"T30, mean of the 500 Hz and 1 kHz bands ({_ISO})",
                 csv_decimals=4),
    "edt_mid": _T("EDT (mid-frequency)", "s", 2, f"EDT, mean of the 500 Hz and 1 kHz bands ({_ISO})",
                 csv_decimals=4),
    "level_db": _T("level", "dB", 0, "level of the decay curve re its start (0 dB)"),
    "time_s": _T("time", "s", 2, "time in the signal"),
    "time_ms": _T("time", "ms", 0, "time in the excerpt"),
    "time_after_onset": _T("time after onset", "s", 2, "time after the direct sound of the impulse response"),
    "peak_to_noise_db": _T("peak-to-noise", "dB", 1, "level of the impulse response's peak over its noise floor"),
    "distortion_db": _T("distortion", "dB", 1, "level of the harmonic distortion re the linear response"),
    # --- pairs: envelope correlation and envelope power
    "sepsm": _T("sEPSM", "", None, "speech-based envelope power spectrum model (Jorgensen & Dau 2011): the "
                               "envelope-power SNR of speech over noise, SNR_env, and its ideal-observer score"),
    "stoi": _T("STOI", "", 3, "short-time objective intelligibility, 0 to 1 (Taal et al. 2011)",
               csv_decimals=6, csv_cut=True),
    "estoi": _T("ESTOI", "", 3, "extended STOI, 0 to 1 (Jensen & Taal 2016)", csv_decimals=6, csv_cut=True),
    "ssti": _T("speech-based STI", "", 3, "STI computed from the clean and degraded speech themselves "
                                         "(normalised covariance)", csv_decimals=6, csv_cut=True),
    "ssti_regression": _T("speech-based STI (regression)", "", 3, "speech-based STI from the envelope regression",
                         csv_decimals=6, csv_cut=True),
    "stoi_band": _T("STOI part", "", 3, "the band's mean envelope correlation (STOI is the mean over the bands)"),
    "estoi_band": _T("ESTOI part", "", 3, "the band's share of the spectral correlation times the number of bands "
                                         "(15): ESTOI is the mean of these", note=True),
    "band_value": _T("per-band value", "", 3, "the band's part of the index: STOI part or ESTOI part"),
    "correlation": _T("envelope correlation", "", 3, "correlation of the clean and degraded band envelopes, "
                                                    "-1 to 1"),
    "apparent_mtf": _T("apparent m", "", 3, "modulation transfer implied by the envelope correlation"),
    "apparent_snr_db": _T("apparent SNR", "dB", 1, "SNR that would give the apparent m", note=True),
    "regression_snr_db": _T("apparent SNR (regression)", "dB", 1, "apparent SNR from the envelope regression",
                           note=True),
    "regression_ti": _T("TI (regression)", "", 3, "transmission index from the envelope regression"),
    "delay_ms": _T("delay", "ms", 1, "delay of the degraded file re the clean one (found by the alignment)",
                  csv_decimals=3),
    "sepsm_snr_env_db": _T("SNR_env", "dB", 2, "envelope-power SNR of the sEPSM (Jorgensen & Dau 2011)",
                          csv_decimals=3),
    "delay_confidence": _T("delay confidence", "", 2, "how clearly the delay stands out (peak ratio of the "
                                                      "alignment)", csv_decimals=3),
    "match_correlation": _T("waveform match", "", 3, "correlation of the aligned waveforms at the delay found"),
    "duration_s": _T("duration", "s", 2, "length of the (common part of the) audio"),
    "fs": _T("sample rate", "Hz", 0, "samples per second of the analysis"),
    # --- SNR sweeps, mappings and listening tests
    "snr_db": _T("SNR", "dB", 1, "signal-to-noise ratio of speech over noise (see the SNR reference)"),
    "index_sd": _T("SD", "", 3, "standard deviation over the noise segments"),
    "sentence_sd": _T("SD over sentences", "", 3, "standard deviation of the index over the sentences"),
    "sentence_sd_db": _T("SD over sentences", "dB", 2, "standard deviation of the SNR over the sentences"),
    "percent_correct": _T("% correct", "", 1, "share of the test items repeated correctly"),
    "predicted_percent": _T("predicted score", "% correct", 1, "score predicted by the mapping from the index"),
    "observed_percent": _T("observed score", "% correct", 1, "score of the pilot row, correct / trials"),
    "fitted_percent": _T("fitted score", "% correct", 1, "score of the fitted mapping at the row's index value"),
    "target_percent": _T("target", "% correct", None, "score for which the SNR is sought"),
    "srt_db": _T("SRT", "dB", 1, "speech reception threshold: the SNR at 50 % correct"),
    "slope_percent_per_db": _T("slope", "%/dB", 1, "steepness of the score against SNR at the target"),
    "benefit_db": _T("benefit", "dB", 1, "SNR without the processing minus SNR with it (positive: it helps)"),
    "unprocessed_db": _T("SNR unprocessed", "dB", 1, "SNR reaching the target without the processing"),
    "processed_db": _T("SNR processed", "dB", 1, "SNR reaching the target with the processing"),
    "activity_factor": _T("activity factor", "%", 1, "share of the time the speech is active (ITU-T P.56 method B)"),
    "x50": _T("x50", "", 4, "index value at which the mapping gives 50 % of the way from guess to 1 - lapse"),
    "slope_at_x50": _T("slope at x50", "per index unit", 4, "steepness of the mapping at x50"),
    "no_curve_because": _T("no curve because", "", None, "why a listener's scores gave no fitted curve"),
    "mapping_a": _T("a (intercept)", "", 4, "intercept of the mapping's linear predictor"),
    "mapping_b": _T("b (slope)", "", 4, "slope of the mapping's linear predictor"),
    "parameter": _T("parameter", "", None, "a parameter of the fitted mapping"),
    "estimate": _T("estimate", "", 4, "maximum-likelihood estimate"),
    "interval": _T("interval", "", 4, "confidence interval (low .. high)"),
    "ci_low": _T("CI low", "", 3, "lower end of the confidence interval"),
    "ci_high": _T("CI high", "", 3, "upper end of the confidence interval"),
    "ci": _T("CI", "", 3, "confidence interval of the difference [low, high]"),
    "sentences_ci": _T("interval over sentences", "dB", 1, "95 % interval of the SNR from the spread over "
                                                          "sentences"),
    "combined_ci": _T("sentences and segments", "dB", 1, "95 % interval from sentences and noise segments "
                                                        "combined"),
    "total_ci": _T("all three", "dB", 1, "95 % interval from sentences, noise segments and the mapping"),
    "mapping_ci": _T("mapping interval", "dB", 1, "interval from the mapping's own uncertainty"),
    "segments_ci": _T("noise-segment interval", "dB", 1, "interval from the spread over noise segments"),
    "correct": _T("correct", "", None, "items repeated correctly"),
    "trials": _T("trials", "", None, "items presented"),
    "pearson_residual": _T("Pearson residual", "", 2, "(observed - fitted) / binomial SD; beyond +-2 the row is "
                                                     "far from the curve", note=True),
    "speech_active_level_db": _T("speech level", "dBFS", 1, "active speech level (ITU-T P.56)"),
    "noise_level_db": _T("noise level", "dBFS", 1, "RMS level of the noise"),
    "peak_db": _T("peak", "dBFS", 1, "highest sample of the file"),
    # --- listeners (issue 17): hearing loss and two ears
    "hearing_level_db": _T("hearing loss", "dB HL", 0, "the listener's hearing level in the band: dB above the "
                                                       "reference threshold of young normal hearing (ISO 389-7)",
                           note=True),
    "threshold_spl_db": _T("pure-tone threshold", "dB SPL", 1, "the listener's free-field pure-tone threshold at the "
                                                               "band centre: the ISO 389-7 reference plus the loss"),
    "reception_threshold_used_db": _T("reception threshold used", "dB", 1, "the band's absolute reception "
                                      "threshold of IEC 60268-16 raised by the hearing loss", note=True),
    "inaudible": _T("made inaudible by the loss", "", None, "whether the loss puts the band's speech below its "
                                                           "raised reception threshold"),
    "left_ear": _T("left ear", "", 3, "the value of the left-ear channel (channel 0)"),
    "right_ear": _T("right ear", "", 3, "the value of the right-ear channel (channel 1)"),
    "better_ear": _T("better ear", "", 3, "per octave band the ear with the larger band value, combined by the IEC "
                                          "weights (van Wijngaarden & Drullman 2008, from memory); for STOI and "
                                          "ESTOI the larger of the two ears' indices", note=True),
    "ear_difference": _T("left minus right", "", 3, "the left ear's band value minus the right ear's", note=True),
    # --- processed speech and noise, envelope power (issue 15)
    "output_snr_db": _T("output SNR", "dB", 1, "SNR per band after the processing: the processed speech over the "
                                              "processed noise, separated by phase inversion (Hagerman & "
                                              "Olofsson 2004)", note=True),
    "gammatone_band_hz": _T("gammatone band centre", "Hz", None, "centre frequency of one of the sEPSM's "
                                                                 "gammatone filters"),
    "modulation_filter_hz": _T("modulation filter centre", "Hz", None, "centre frequency of one of the sEPSM's "
                                                                        "modulation filters (1 Hz low-pass, then "
                                                                        "octaves from 2 to 64 Hz)"),
    "band_snr_env_db": _T("SNR_env of the band", "dB", 2, "envelope-power SNR of one gammatone band over its "
                                                          "modulation filters (Jorgensen & Dau 2011)"),
    "true_peak_dbtp": _T("true peak", "dBTP", 1, "highest value of the waveform between the samples too (4x "
                                               "oversampling, ITU-R BS.1770-4 Annex 2), re full scale", note=True),
    # --- comparisons
    "condition": _T("condition", "", None, "the processing or listening condition compared"),
    "n": _T("n", "", None, "number of matched items"),
    "mean": _T("mean", "", 3, "mean of the index over the items"),
    "diff": _T("difference", "", 3, "mean paired difference of the index (condition minus baseline; b minus a)"),
    "p_value": _T("p", "", 4, "two-sided Wilcoxon signed-rank p, not adjusted for several comparisons", note=True),
    "p_holm": _T("p (Holm)", "", 4, "p adjusted for the several comparisons (Holm 1979); the verdict uses it",
                note=True),
    "verdict": _T("verdict", "", None, "comparisons: higher, lower or no clear difference (from the interval and "
                                       "p (Holm)); surveys: PASS or FAIL against the requirements"),
    "d_z": _T("d_z", "", 2, "paired effect size: mean difference / SD of the differences, with its interval",
             note=True),
    "pair_a": _T("a", "", None, "first condition of the pair"),
    "pair_b": _T("b", "", None, "second condition of the pair"),
    # --- surveys and design
    "zone": _T("zone", "", None, "a group of positions judged together"),
    "position": _T("position", "", None, "a listener position of the survey"),
    "positions": _T("positions", "", None, "positions in the zone (each counts once)"),
    "repeats": _T("repeats", "", None, "measurements at the position"),
    "sti_mean": _T("STI mean", "", 2, "mean STI over the repeats at the position"),
    "sd": _T("sd", "", 3, "sample standard deviation", csv_decimals=6),
    "spread": _T("spread", "", 3, "highest minus lowest repeat", csv_decimals=6),
    "min": _T("min", "", 2, "lowest value"),
    "max": _T("max", "", 2, "highest value"),
    "decided_by": _T("decided by", "", None, "the requirement that settled the zone's verdict"),
    "requirements": _T("requirements", "", None, "each requirement with its value and whether it holds"),
    "positions_below": _T("positions below", "", None, "positions whose mean is below a required value"),
    "failed_rows": _T("rows not scored", "", None, "survey rows that could not be scored"),
    "repeat_sti": _T("repeats' STI", "", 2, "STI of each repeat"),
    "listener": _T("listener", "", None, "a listener position or a listener of the pilot"),
    "position_m": _T("position", "m", 1, "x, y, z in the room"),
    "x_m": _T("x", "m", 1, "plan coordinate"),
    "y_m": _T("y", "m", 1, "plan coordinate"),
    "meets": _T("meets", "", None, "whether the position reaches the required STI"),
    "speech_level_dba": _T("speech level", "dB(A)", 1, "A-weighted speech level at the listener"),
    "dominant_source": _T("dominant source", "", None, "the loudspeaker whose direct sound is strongest there"),
    "late_arrival": _T("strongest late arrival", "", None, "loudspeaker, delay and level of the strongest sound "
                                                          "arriving after the first", note=True),
    "echo": _T("echo", "", None, "whether a late arrival exceeds the echo criterion"),
    "statistical_sti": _T("STI (statistical)", "", 2, "STI of the statistical room model"),
    "name": _T("name", "", None, "the loudspeaker's name"),
    "aim_m": _T("aim", "m", 1, "the point the loudspeaker is aimed at"),
    "level_1m_dba": _T("level at 1 m", "dB(A)", 1, "speech level of the loudspeaker at 1 m on axis"),
    "q": _T("Q at 1 kHz", "", 1, "directivity factor on axis at 1 kHz"),
    "critical_distance_m": _T("critical distance at 1 kHz", "m", 1, "distance where direct and reverberant sound "
                                                                    "are equal"),
    "directivity": _T("directivity", "", None, "the loudspeaker's directivity pattern"),
    "source_delay_ms": _T("signal delay", "ms", 1, "electronic delay of the loudspeaker's feed"),
    "rt_s": _T("RT", "s", 2, "reverberation time of the room model"),
    "absorption_area_m2": _T("absorption area", "m2", 0, "equivalent absorption area"),
    "noise_db_design": _T("noise", "dB SPL", 1, "octave-band background noise"),
    # --- inspect
    "level_re_total": _T("level re total", "dB", 1, "band level re the level of the whole recording (all bands); "
                                                   "0 dB = all the power in this band", note=True),
    "envelope_modulation": _T("envelope modulation (< 50 Hz)", "", 2, "sqrt(2) x SD / mean of the band's amplitude "
                             "envelope below 50 Hz: 1 for a full sinusoidal modulation, above 1 for a peaky "
                             "envelope with pauses", note=True),
    "periodicity_modulation": _T("periodicity modulation (50-500 Hz)", "", 2, "as the envelope modulation, for the "
                                "fluctuation at 50-500 Hz (the voice's F0)", note=True),
    "modulation_index": _T("modulation index", "", 2, "sqrt(2 x power) of the normalised intensity envelope in a "
                          "modulation band: 1 for a full sinusoidal modulation; speech with pauses exceeds 1",
                          note=True),
    "carrier_hz": _T("carrier", "Hz", 0, "power-weighted mean instantaneous frequency of the band (its fine "
                                       "structure)", note=True),
    "band_peak_hz": _T("modulation peak", "Hz", 2, "modulation frequency with the most power in the band"),
    "modulation_peak_hz": _T("dominant modulation rate", "Hz", 2, "rate with the most envelope power per unit "
                                                                "log-frequency (the syllable rate of speech)"),
    "relative_power": _T("relative power", "", 2, "modulation power per unit log-frequency re its maximum"),
    "amplitude": _T("amplitude", "full scale", 2, "sample value, 1 = digital full scale"),
    "f0_hz": _T("F0", "Hz", 1, "fundamental frequency of the voice (YIN)"),
    "voiced_fraction": _T("voiced fraction", "%", 0, "share of the time with a voiced (periodic) signal"),
    "resolution_hz": _T("spectral resolution", "Hz", 3, "spacing of the modulation spectrum's lines"),
    "index": _T("index", "", None, "the intelligibility index compared"),
    "baseline": _T("baseline", "", None, "the condition every other is compared with"),
    "conditions": _T("conditions", "", None, "number of conditions compared"),
    "interval_method": _T("intervals", "", None, "how the intervals were computed: binomial, or quasi-binomial "
                                                 "(widened by the dispersion Pearson chi-square / df)"),
    "grid_share": _T("share of the grid", "%", 1, "share of the grid points at or above the required STI"),
    "listeners_meeting": _T("listeners meeting the requirement", "", None, "listener positions at or above the "
                                                                          "required STI"),
    # --- generic table words
    "quantity": _T("quantity", "", None, "what the row shows"),
    "value": _T("value", "", None, "its value"),
    "note": _T("note", "", None, "a remark on the row"),
    "file": _T("file", "", None, "file name"),
    "number": _T("#", "", None, "number in playing order"),
    "seconds": _T("duration", "s", 2, "length of the file"),
    "from_s": _T("from", "s", 1, "start of the stretch"),
    "to_s": _T("to", "s", 1, "end of the stretch"),
    "rows": _T("rows", "", None, "pilot rows of the listener"),
    "engine": _T("engine", "", None, "room model used: statistical or image sources"),
}

#: Terms too plain for a glossary (generic table words): in the vocabulary, not explained.
PLAIN: frozenset[str] = frozenset({"quantity", "value", "note", "file", "number", "from_s", "to_s", "window", "n",
                                   "name", "time_s", "time_ms", "rows", "parameter"})

#: Words a person may read alone in a header or label position that are not quantities
#: (empty headers of a remarks column).
_BLANK = frozenset({""})

_NUMBER = re.compile(r"^[+-]?\d+(\.\d+)?\s?(k|Hz|kHz)?$")
_PAREN = re.compile(r"\s*\([^()]*\)")


def _known_texts() -> dict[str, str]:
    """Every text a label may read (a term's header or its name alone) -> the term's key."""
    out: dict[str, str] = {}
    for k, t in TERMS.items():
        out.setdefault(t.header, k)
        out.setdefault(t.name, k)
    return out


def term(key: str) -> Term:
    """The :class:`Term` of a quantity.

    Raises
    ------
    InputError
        ``key`` is not one of :data:`TERMS`.

    Examples
    --------
    >>> term("t30").header, term("p_holm").name
    ('T30, s', 'p (Holm)')
    """
    if not isinstance(key, str) or key not in TERMS:
        shown = repr(key[:40]) if isinstance(key, str) else f"of type {type(key).__name__}"
        raise InputError(f"no label for the quantity {shown}", "give one of the keys of envpredict.labels.TERMS")
    return TERMS[key]


def header(key: str) -> str:
    """A table header or axis label for a quantity: its name with the unit ("decay range, dB").

    Raises
    ------
    InputError
        ``key`` is not one of :data:`TERMS`.
    """
    return term(key).header


def name(key: str) -> str:
    """The display name of a quantity, or ``key`` itself for a name the vocabulary does
    not hold (a user's own column): "stoi" -> "STOI".

    Raises
    ------
    InputError
        ``key`` is not text.

    Examples
    --------
    >>> name("stoi"), name("my_score")
    ('STOI', 'my_score')
    """
    key = checks.text(key, "quantity")
    return TERMS[key].name if key in TERMS else key


def show(key: str, value: float | None, *, decimals: int | None = None) -> str:
    """``value`` with the decimals of its quantity ("—" where it is missing or not finite).

    Raises
    ------
    InputError
        ``key`` is not one of :data:`TERMS`, or ``decimals`` is not 0..9.

    Examples
    --------
    >>> show("t30", 1.234), show("stoi", 0.5), show("c50", None)
    ('1.23', '0.500', '—')
    """
    t = term(key)
    d = t.decimals if decimals is None else checks.number(decimals, "decimals", lo=0, hi=9, integer=True)
    if value is None or isinstance(value, bool):
        return "—"
    try:
        v = float(value)
    except (TypeError, ValueError, OverflowError):
        return "—"
    if not math.isfinite(v):
        return "—"
    if key in ("p_value", "p_holm") and d is not None and 0 <= v < 10 ** -int(d):
        return f"< {10 ** -int(d):.{int(d)}f}"  # "< 0.0001", not "0.0000"
    return f"{v:.{int(d)}f}" if d is not None else f"{v:g}"


def significant_decimals(value: float | None, digits: int = 4) -> int:
    """Decimals that show ``digits`` significant digits of ``value`` (0 to 6), to be used for
    an estimate and both ends of its interval alike ("3.683 .. 5.360", not "3.683 .. 5.36").

    Raises
    ------
    InputError
        ``digits`` is not 1..9.

    Examples
    --------
    >>> significant_decimals(0.6435), significant_decimals(-11.49), significant_decimals(None)
    (4, 2, 4)
    """
    digits = int(checks.number(digits, "digits", lo=1, hi=9, integer=True))
    try:
        v = abs(float(value))  # type: ignore[arg-type]
    except (TypeError, ValueError, OverflowError):
        return digits
    if not math.isfinite(v) or v == 0:
        return digits
    return int(min(6, max(0, digits - 1 - math.floor(math.log10(v)))))


def uncertainty_decimals(uncertainty: float | None, decimals: int) -> int:
    """Decimals for an uncertainty shown beside a value with ``decimals`` decimals: as many,
    or more until its first significant digit shows (0.004 beside an STI of 0.41 is
    "0.004", not "0.00", which would read as no uncertainty at all; at most 6).

    Raises
    ------
    InputError
        ``decimals`` is not 0..6.

    Examples
    --------
    >>> uncertainty_decimals(0.004, 2), uncertainty_decimals(0.012, 2), uncertainty_decimals(None, 3)
    (3, 2, 3)
    """
    d = int(checks.number(decimals, "decimals", lo=0, hi=6, integer=True))
    try:
        u = abs(float(uncertainty))  # type: ignore[arg-type]
    except (TypeError, ValueError, OverflowError):
        return d
    while d < 6 and math.isfinite(u) and u > 0 and round(u, d) == 0:
        d += 1
    return d


def known_label(text: str) -> bool:
    """Whether a header or axis label a person reads is in the vocabulary: a term's
    header or name (a qualification in brackets may follow: "STI (image engine)",
    "m (0 = lost, 1 = kept)"), or a frequency or number standing for a column (a band
    "1.6k", a modulation frequency "0.63 Hz").

    Raises
    ------
    InputError
        ``text`` is not text.

    Examples
    --------
    >>> known_label("T30, s"), known_label("STI (dot: mean of repeats)"), known_label("range dB")
    (True, True, False)
    """
    t = " ".join(_label_text(text).split())
    return bool(t in _BLANK or _NUMBER.match(t)) or _lookup(t) is not None


def _label_text(text: str) -> str:
    if not isinstance(text, str):
        raise InputError(f"a label of type {type(text).__name__}", "pass the label as text")
    return text


def _lookup(t: str) -> str | None:
    """The key of the term shown as ``t`` (whitespace-normalised), with or without a
    qualification in brackets; None where the vocabulary has none."""
    known = _known_texts()
    if t in known:
        return known[t]
    bare = " ".join(_PAREN.sub("", t).split())
    return known.get(bare, known.get(bare.rstrip(",")))


def key_of(text: str) -> str | None:
    """The key of the term a header or label shows (None for a number or an unknown label).

    Raises
    ------
    InputError
        ``text`` is not text.

    Examples
    --------
    >>> key_of("noise depth"), key_of("T30, s"), key_of("1.6k")
    ('envelope_noise_depth', 't30', None)
    """
    return _lookup(" ".join(_label_text(text).split()))


def glossary(labels: Sequence[str]) -> list[tuple[str, str]]:
    """(name, explanation) of each term among ``labels``, once each, in order of first
    appearance (for a report's glossary of the terms on its page).

    Raises
    ------
    InputError
        ``labels`` is not a list of texts.

    Examples
    --------
    >>> glossary(["band", "T30, s", "T30, s", "1.6k"])[1]
    ('T30, s', 'reverberation time from the -5 to -35 dB decay (ISO 3382-1)')
    """
    if isinstance(labels, (str, bytes)) or not isinstance(labels, (list, tuple)):
        raise InputError("the labels are not a list", "pass a list of header and label texts")
    out, seen = [], set()
    for lab in labels:
        k = key_of(lab)
        if k is None or k in seen or k in PLAIN:
            continue
        seen.add(k)
        t = TERMS[k]
        # as the page shows it: the name alone where its cells carry the unit ("band": "1.6 kHz")
        bare = " ".join(_PAREN.sub("", " ".join(lab.split())).split())
        out.append((t.name if bare == t.name else t.header, t.explain))
    return out


def column_notes(headers: Sequence[str]) -> list[str]:
    """One line per column of a terminal table whose term is not self-evident
    ("  noise depth: the modulation depth ...").

    Raises
    ------
    InputError
        ``headers`` is not a list of texts.
    """
    if isinstance(headers, (str, bytes)) or not isinstance(headers, (list, tuple)):
        raise InputError("the headers are not a list", "pass the table's header texts")
    lines, seen = [], set()
    for h in headers:
        k = key_of(h) if isinstance(h, str) else None
        if k is None or k in seen or not TERMS[k].note:
            continue
        seen.add(k)
        lines.append(f"  {h}: {TERMS[k].explain}")
    return lines


def rating_text(rating: str | None, subjective: str | None = None) -> str:
    """The qualification band as shown everywhere: the letter with the subjective rating
    in brackets, "G (fair)" (the JSON keeps them apart, ``rating`` and ``subjective``).

    Raises
    ------
    InputError
        Never for text or None; for other types.

    Examples
    --------
    >>> rating_text("G", "fair"), rating_text("A+"), rating_text(None)
    ('G (fair)', 'A+', '—')
    """
    for v, what in ((rating, "rating"), (subjective, "subjective rating")):
        if v is not None and not isinstance(v, str):
            raise InputError(f"the {what} is of type {type(v).__name__}", "pass text or None")
    if not rating:
        return "—"
    return f"{rating} ({subjective})" if subjective else rating
