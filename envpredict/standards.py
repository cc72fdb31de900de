"""Every table envpredict takes from a standard or a paper, each number with its source.

Nothing in this module computes. Other modules import these names; no other module
may hold a number from a standard.

Sources are cited by short name:

* **IEC 60268-16:2011** -- IEC 60268-16 Ed.4, *Sound system equipment -- Part 16:
  Objective rating of speech intelligibility by speech transmission index*.
  Values marked "(from memory)" were written from knowledge of that edition and
  checked for internal consistency (see ``tests/test_standards.py``), not copied
  from the printed document; verify them against your copy before relying on
  them in a contract.
* **IEC 61260-1:2014** -- octave-band and fractional-octave-band filters.
* **IEC 61672-1:2013** -- A-weighting.
* **ISO 3382-1:2009** -- measurement of room acoustic parameters.
* **Taal 2011** -- C. H. Taal, R. C. Hendriks, R. Heusdens, J. Jensen, "An algorithm
  for intelligibility prediction of time-frequency weighted noisy speech", IEEE
  Trans. ASLP 19(7), 2011.
* **Jensen 2016** -- J. Jensen, C. H. Taal, "An algorithm for predicting the
  intelligibility of speech masked by modulated noise maskers", IEEE/ACM Trans. ASLP
  24(11), 2016.
"""

from __future__ import annotations

# ---------------------------------------------------------------------------
# Octave bands and modulation frequencies
# ---------------------------------------------------------------------------

#: Octave-band centre frequencies used by the STI, Hz. Source: IEC 60268-16:2011, 5.1
#: (seven octave bands 125 Hz to 8 kHz).
OCTAVE_BANDS_HZ: tuple[float, ...] = (125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0)

#: Octave band edges are fc * 2**(-1/2) and fc * 2**(1/2) (base-2 octave).
#: Source: IEC 61260-1:2014, 5.4 (base-2 system; nominal centres as above).
OCTAVE_EDGE_FACTOR: float = 2.0 ** 0.5

#: Butterworth order of each octave band-pass prototype. A 3rd-order prototype gives a
#: 6th-order band-pass, and run forward and backward (zero phase) the magnitude is
#: squared. This meets the IEC 61260-1 class 1 attenuation mask at the octave
#: edges -- common practice for STI analysers, no single source.
OCTAVE_FILTER_ORDER: int = 3

#: The 14 modulation frequencies of the full STI, Hz, in one-third-octave steps.
#: Source: IEC 60268-16:2011, 5.1 / Table 1 (0.63 ... 12.5 Hz).
MODULATION_FREQUENCIES_HZ: tuple[float, ...] = (
    0.63, 0.8, 1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0, 10.0, 12.5,
)

#: STIPA: the two modulation frequencies of each octave band (125 Hz ... 8 kHz), Hz.
#: Source: IEC 60268-16:2011, Annex B, Table B.1.
STIPA_MODULATION_HZ: tuple[tuple[float, float], ...] = (
    (1.60, 8.00),   # 125 Hz
    (1.00, 5.00),   # 250 Hz
    (0.63, 3.15),   # 500 Hz
    (2.00, 10.0),   # 1 kHz
    (1.25, 6.25),   # 2 kHz
    (0.80, 4.00),   # 4 kHz
    (2.50, 12.5),   # 8 kHz
)

#: Nominal modulation depth of each of the two STIPA modulations.
#: Source: IEC 60268-16:2011, Annex B (from memory: 0.55 per modulation frequency).
STIPA_MODULATION_DEPTH: float = 0.55

# ---------------------------------------------------------------------------
# Index computation (IEC 60268-16:2011, Annex A)
# ---------------------------------------------------------------------------

#: Effective signal-to-noise ratios are limited to this range, dB.
#: Source: IEC 60268-16:2011, A.2.4 (SNR_eff limited to -15 ... +15 dB).
SNR_LIMIT_DB: float = 15.0

#: Modulation transfer values are limited to at most 1 before conversion to SNR.
#: Source: IEC 60268-16:2011, A.2.4.
MTF_MAX: float = 1.0

#: Octave-band weighting factors alpha_k (7) and redundancy factors beta_k (6, between
#: band k and k+1), male speech. Source: IEC 60268-16:2011, Table A.1 (Ed.4 values).
#: Check: sum(alpha) - sum(beta) = 1.000.
ALPHA_MALE: tuple[float, ...] = (0.085, 0.127, 0.230, 0.233, 0.309, 0.224, 0.173)
BETA_MALE: tuple[float, ...] = (0.085, 0.078, 0.065, 0.011, 0.047, 0.095)

#: Female speech weights; the 125 Hz band is not used for female speech.
#: Source: IEC 60268-16:2011, Table A.1 (Ed.4 values; from memory).
#: Check: sum(alpha) - sum(beta) = 1.000.
ALPHA_FEMALE: tuple[float, ...] = (0.0, 0.117, 0.223, 0.216, 0.328, 0.250, 0.194)
BETA_FEMALE: tuple[float, ...] = (0.0, 0.099, 0.066, 0.062, 0.025, 0.076)

WEIGHTS: dict[str, tuple[tuple[float, ...], tuple[float, ...]]] = {
    "male": (ALPHA_MALE, BETA_MALE),
    "female": (ALPHA_FEMALE, BETA_FEMALE),
}

#: Octave-band levels of the standard speech spectrum relative to the A-weighted
#: speech level, dB. ``None`` means the band carries no speech for that talker.
#: Source: IEC 60268-16:2011, Table A.2 (from memory). Check: the A-weighted sum of
#: the male levels is 0.0 dB +-0.1 (tests/test_standards.py).
SPEECH_SPECTRUM_MALE_DB: tuple[float, ...] = (2.9, 2.9, -0.8, -6.8, -12.8, -18.8, -24.8)
SPEECH_SPECTRUM_FEMALE_DB: tuple[float | None, ...] = (None, 5.3, -1.9, -9.1, -15.8, -16.7, -18.0)

SPEECH_SPECTRA_DB: dict[str, tuple[float | None, ...]] = {
    "male": SPEECH_SPECTRUM_MALE_DB,
    "female": SPEECH_SPECTRUM_FEMALE_DB,
}

#: A-weighting at the octave-band centres, dB. Source: IEC 61672-1:2013, Table 3.
A_WEIGHTING_OCTAVE_DB: tuple[float, ...] = (-16.1, -8.6, -3.2, 0.0, 1.2, 1.0, -1.1)

#: Level-dependent auditory masking: the masking of band k by band k-1 is
#: amf = 10**(amdB/10), amdB = slope * L + offset for L (octave-band level of band
#: k-1, dB) below each upper bound. Source: IEC 60268-16:2011, Table A.3 (from memory;
#: the four pieces join continuously at 63, 67 and 100 dB, which tests/test_standards.py
#: checks).
MASKING_PIECES: tuple[tuple[float, float, float], ...] = (
    # (upper bound of L in dB, slope, offset in dB)
    (63.0, 0.5, -65.0),
    (67.0, 1.8, -146.9),
    (100.0, 0.5, -59.8),
    (float("inf"), 0.0, -10.0),
)

#: Octave-band levels of the absolute speech reception threshold, dB SPL.
#: Source: IEC 60268-16:2011, Table A.4 (from memory).
RECEPTION_THRESHOLD_DB: tuple[float, ...] = (46.0, 27.0, 12.0, 6.5, 7.5, 8.0, 12.0)

#: A-weighted speech levels at 1 m for the vocal efforts, dB(A).
#: Source: IEC 60268-16:2011, Table 4 / ISO 9921:2003, Table A.1 (from memory).
VOCAL_EFFORT_DBA: dict[str, float] = {
    "relaxed": 54.0,
    "normal": 60.0,
    "raised": 66.0,
    "loud": 72.0,
    "very loud": 78.0,
}

#: Default speech level used when the user gives none: normal vocal effort, dB(A).
DEFAULT_SPEECH_LEVEL_DBA: float = VOCAL_EFFORT_DBA["normal"]

#: Speech spectrum and band weights used when the user names no talker. Source:
#: IEC 60268-16:2011, Annex A (the male spectrum is the reference one; from memory).
DEFAULT_TALKER: str = "male"

#: Plausible range for a speech level option, dB(A): below the reception threshold of
#: every band there is nothing to rate; above 120 dB(A) the input is almost certainly
#: a mistake (common practice, no source).
SPEECH_LEVEL_RANGE_DBA: tuple[float, float] = (20.0, 120.0)

#: Plausible range for octave-band noise levels, dB SPL (common practice, no source).
NOISE_LEVEL_RANGE_DB: tuple[float, float] = (-20.0, 140.0)

# ---------------------------------------------------------------------------
# Qualification bands (IEC 60268-16:2011, Annex F, Table F.1)
# ---------------------------------------------------------------------------

#: (label, lower STI edge, nominal STI). A result at or above the lower edge and
#: below the next band's edge gets that label. Source: IEC 60268-16:2011, Table F.1
#: (bands 0.04 wide; A+ above 0.76; U below 0.36).
QUALIFICATION_BANDS: tuple[tuple[str, float, float | None], ...] = (
    ("A+", 0.76, None),
    ("A", 0.72, 0.74),
    ("B", 0.68, 0.70),
    ("C", 0.64, 0.66),
    ("D", 0.60, 0.62),
    ("E", 0.56, 0.58),
    ("F", 0.52, 0.54),
    ("G", 0.48, 0.50),
    ("H", 0.44, 0.46),
    ("I", 0.40, 0.42),
    ("J", 0.36, 0.38),
    ("U", 0.0, None),
)

#: Five-step subjective scale. Source: IEC 60268-16 earlier editions / ISO 9921:2003
#: (from memory).
SUBJECTIVE_SCALE: tuple[tuple[str, float], ...] = (
    ("excellent", 0.75),
    ("good", 0.60),
    ("fair", 0.45),
    ("poor", 0.30),
    ("bad", 0.0),
)

#: STI commonly required of voice-alarm and emergency sound systems (often stated
#: as qualification band G or better). Common practice, no single source; local
#: codes and standards set the real requirement.
VOICE_ALARM_TARGET_STI: float = 0.50

# ---------------------------------------------------------------------------
# Room-acoustic decay figures (ISO 3382-1:2009)
# ---------------------------------------------------------------------------

#: Onset of the impulse response: where the squared response first rises to within
#: this many dB of its maximum. Source: ISO 3382-1:2009, Annex A.3.2 (20 dB below the
#: maximum).
ONSET_THRESHOLD_DB: float = 20.0

#: Evaluation ranges on the Schroeder decay curve, dB re the start of the curve, and
#: the factor that scales the fitted decay time to 60 dB.
#: Source: ISO 3382-1:2009, 3.2 / 3.3 (EDT 0 to -10 dB; T20 -5 to -25 dB; T30 -5 to
#: -35 dB).
DECAY_RANGES_DB: dict[str, tuple[float, float]] = {
    "edt": (0.0, -10.0),
    "t20": (-5.0, -25.0),
    "t30": (-5.0, -35.0),
}

#: The bottom of an evaluation range must lie at least this far above the noise floor,
#: dB. Source: ISO 3382-1:2009, 5.3.3 (10 dB above the background noise).
DECAY_NOISE_HEADROOM_DB: float = 10.0

#: Early/late boundaries for clarity and definition, seconds. Source: ISO 3382-1:2009,
#: Annex A (C50, C80, D50).
C50_S: float = 0.050
C80_S: float = 0.080

#: Decay range a band needs for T30: the -35 dB end of its evaluation range plus the
#: 10 dB headroom above the noise floor, i.e. 45 dB. A response with no noise floor
#: that ends less than this below its peak was cut while still decaying. Derived from
#: ISO 3382-1:2009, 3.3 and 5.3.3 (the two tables above).
T30_NEEDED_RANGE_DB: float = -DECAY_RANGES_DB["t30"][1] + DECAY_NOISE_HEADROOM_DB

#: Divisor of the energy beyond the truncation point: an exponential decay with
#: reverberation time T holds E(t1) * T / 13.8 after t1 (13.8 = 60 / (10 lg e), rounded
#: as printed). Source: ISO 3382-1:2009, 5.3.3 (compensation term C), from memory.
DECAY_TAIL_DIVISOR: float = 13.8

# ---------------------------------------------------------------------------
# Noise floor and truncation point of an impulse response (Lundeby et al. 1995)
# ---------------------------------------------------------------------------
# Source: A. Lundeby, T. E. Vigran, H. Bietz, M. Vorlaender, "Uncertainties of
# measurements in room acoustics", Acustica 81 (1995) 344-355, the iterative
# procedure of Sec. 4 (steps 1-9). Values "from memory" were written from knowledge
# of the paper, not copied from it.

#: Share of the response at its end used for the first noise-floor estimate (step 2:
#: the last 10 % of the response).
LUNDEBY_NOISE_TAIL_FRACTION: float = 0.10

#: Averaging window of the first smoothing of the squared response, s (step 1: 10 to
#: 50 ms; the shortest is used). Bands below 400 Hz use 4 periods of their centre
#: frequency instead when that is longer (judgement: a window shorter than a few
#: periods leaves the carrier ripple in the envelope).
LUNDEBY_INITIAL_WINDOW_S: float = 0.010
LUNDEBY_INITIAL_WINDOW_PERIODS: float = 4.0

#: Intervals per 10 dB of decay for the smoothing of the later iterations (step 5:
#: 3 to 10 intervals per 10 dB; the middle of that range is used).
LUNDEBY_INTERVALS_PER_10DB: float = 5.0

#: The first regression line (step 3) and the later ones (step 7) fit the smoothed
#: decay from this level re its peak down to LUNDEBY_REGRESSION_NOISE_MARGIN_DB above
#: the noise, dB. The paper starts at 0 dB; -5 dB skips the direct sound, as the T30
#: range of ISO 3382-1 does (judgement).
LUNDEBY_REGRESSION_TOP_DB: float = -5.0
#: Step 3 / step 7: the regression ends this far above the noise level, dB (10 dB).
LUNDEBY_REGRESSION_NOISE_MARGIN_DB: float = 10.0
#: When fewer than two points lie in that range, the regression runs from the peak to
#: this far above the noise instead, dB (judgement).
LUNDEBY_FALLBACK_NOISE_MARGIN_DB: float = 5.0

#: Step 6: the noise is re-estimated from the point where the regression line lies
#: this far below the crossing point (the paper: 5 to 10 dB; 10 dB used), or from the
#: last LUNDEBY_NOISE_TAIL_FRACTION of the response if that starts earlier.
LUNDEBY_NOISE_POINT_DB: float = 10.0

#: Step 9: iterate until the crossing point moves less than one averaging window, at
#: most this many times (the paper reports convergence within a few iterations; from
#: memory: 5 is enough in practice).
LUNDEBY_MAX_ITERATIONS: int = 5

#: Bounds of the averaging window of the later iterations: at least this long, s, and
#: at most this share of the response (judgement: keeps a steep or a shallow decay
#: from a window of one sample or of the whole response).
LUNDEBY_MIN_WINDOW_S: float = 0.002
LUNDEBY_MAX_WINDOW_FRACTION: float = 0.10

# ---------------------------------------------------------------------------
# Is it an impulse response? Recognition rule and decay-curve checks
# ---------------------------------------------------------------------------
# An impulse response is a clear onset followed by a decay. The rule below tests both
# on the broadband energy envelope before any figure is computed (judgement where no
# standard gives a threshold; the reason is stated with each value). Measured on the
# test corpus of tests/test_ir_recognition.py: real-looking impulse responses give an
# onset prominence of 29-84 dB and a 10 dB fall within 0.6 s and 11 % of the response;
# steady noise, STIPA signals and recordings, chords and sweeps give 1-11 dB; speech
# gives 17-47 dB but needs 78-94 % of its length (2.3 s or more) to fall 10 dB.

#: The energy envelope is the squared signal (mean removed) averaged in blocks of this
#: length, s: the shortest first smoothing window of Lundeby's procedure (see
#: LUNDEBY_INITIAL_WINDOW_S below; it is defined there with the same value).
IR_ENVELOPE_BLOCK_S: float = 0.010

#: Onset: the highest block must stand at least this far above the background (the
#: median block, or the mean of the last 10 % of the blocks where that is lower: the
#: end of a response cut while still decaying), dB.
#: 20 dB is the least decay range any ISO 3382-1 figure uses (EDT: a 10 dB fall that
#: must end 10 dB above the noise floor, ISO 3382-1:2009, 3.2 and 5.3.3); a file with
#: less cannot yield a decay figure and cannot be told from a fading steady signal.
#: A steady signal reads 1-11 dB (white and pink noise, STIPA, music with sustained
#: chords).
IR_MIN_ONSET_PROMINENCE_DB: float = 20.0

#: Decay: the backward-integrated (Schroeder) energy from the onset, with the background
#: (the noise floor of an impulse response) taken off every block, must
#: fall by IR_DECAY_TEST_DB -- the EDT range (ISO 3382-1:2009, 3.2) -- within this
#: share of the response after its onset. A steady signal of any length needs 90 % of
#: its length (10 lg(1 - t/L) = -10 dB at t = 0.9 L); an exponential decay falls 10 dB
#: in T/6; 0.5 lies midway (judgement).
IR_DECAY_TEST_DB: float = 10.0
IR_MAX_DECAY_SHARE: float = 0.5

#: ... and within this time, s: the 10 dB fall of a decay with the longest
#: reverberation time met in rooms, about 12 s (the largest stone churches at low
#: frequencies; from memory), takes 12 / 6 = 2 s (judgement). A recording of a test
#: signal followed by silence passes the share test but not this one.
IR_MAX_REVERBERATION_S: float = 12.0

#: Non-linearity of a decay curve: xi = 1000 (1 - r^2), per mille, where r is the
#: correlation coefficient of the least-squares line over the evaluation range.
#: Source of the parameter: ISO 3382-2:2008, Annex B (from memory; the issue that asked
#: for it names ISO 3382-1 Annex B), which calls values above about 10 per mille
#: suspicious. The limit used here is 50 per mille (judgement): the straight line then
#: leaves 5 % of the curve's variance unexplained (about 1.3 dB RMS over T20's 20 dB).
#: At 10 per mille the caution would fire for straight decays that merely fluctuate:
#: exponential noise decays, straight on average, read up to 41 per mille at 125 Hz
#: over a 0.3 s decay (measured on the test corpus), the demo hall 30 per mille. A
#: strong echo reads 150-990 per mille. Applied to T20 and T30, the ranges the Annex
#: addresses; EDT's 0 to -10 dB holds the direct sound and the first reflections,
#: whose steps are expected (simulated small rooms read up to 110 per mille there).
DECAY_NONLINEARITY_LIMIT_PERMILLE: float = 50.0

#: A decay time T measured through a band filter of bandwidth B is the filter's own
#: decay, not the room's, unless B * T exceeds this. Source: ISO 3382-2:2008, 7.3 / F. Jacobsen,
#: "A note on acoustic decay measurements", JSV 115 (1987) 163-170 (from memory: B T > 16
#: for a forward filter; about 4 with time-reversed filtering). 16 is used: this tool's
#: zero-phase octave filters alone read B T = 3 to 5 on a unit impulse (measured), and
#: 16 keeps a margin of 3 above that. Such a figure is not printed.
DECAY_MIN_BANDWIDTH_TIME: float = 16.0

#: A fitted decay time that exceeds the time the curve itself takes to fall through
#: the evaluation range (scaled to 60 dB) by more than this factor describes the line,
#: not the decay: it is not printed (judgement: on a straight curve the two agree; a
#: factor 2 only passes curves far from straight). Nor is any decay time longer than
#: the response after its onset printed: the file cannot show such a decay.
DECAY_FIT_MAX_RATIO: float = 2.0


# ---------------------------------------------------------------------------
# STOI and ESTOI (Taal 2011; Jensen 2016)
# ---------------------------------------------------------------------------

#: Internal sample rate, Hz. Source: Taal 2011, Sec. II.
STOI_FS: int = 10000
#: Frame length (256 samples = 25.6 ms), Hann window, 50 % overlap. Source: Taal 2011.
STOI_FRAME_LEN: int = 256
STOI_HOP: int = 128
#: FFT size (zero-padded frames). Source: Taal 2011, Sec. II (512-point DFT).
STOI_NFFT: int = 512
#: Number of one-third-octave bands and the lowest centre frequency, Hz.
#: Source: Taal 2011, Sec. II (15 bands, lowest centre 150 Hz, highest about 4.3 kHz).
STOI_NUM_BANDS: int = 15
STOI_MIN_FREQ_HZ: float = 150.0
#: Frames per analysis segment (30 frames = 384 ms). Source: Taal 2011, Sec. II.
STOI_SEGMENT_FRAMES: int = 30
#: Lower bound of the signal-to-distortion ratio used for clipping, dB.
#: Source: Taal 2011, eq. (3) (beta = -15 dB).
STOI_BETA_DB: float = -15.0
#: Frames more than this many dB below the loudest clean frame are removed.
#: Source: Taal 2011, Sec. II (40 dB dynamic range).
STOI_DYNAMIC_RANGE_DB: float = 40.0



# ---------------------------------------------------------------------------
# Direct method: STIPA and full-STI test signals (IEC 60268-16:2011, 6.1 and Annex B)
# ---------------------------------------------------------------------------

#: Octave-band levels of the STIPA test signal relative to its A-weighted level, dB:
#: the male speech spectrum. Source: IEC 60268-16:2011, Annex B (from memory: the
#: STIPA signal has the spectrum of male speech, Table A.2), reused from
#: SPEECH_SPECTRUM_MALE_DB above so the two can never disagree.
STIPA_BAND_LEVELS_DB: tuple[float, ...] = SPEECH_SPECTRUM_MALE_DB

#: Intensity envelope of STIPA band k: I_k(t) = 1 + m (sin 2 pi f1 t - sin 2 pi f2 t)
#: with m = STIPA_MODULATION_DEPTH and (f1, f2) = STIPA_MODULATION_HZ[k].
#: Source: IEC 60268-16:2011, Annex B (from memory). Check: with f2 = 5 f1 (true of
#: every band of Table B.1) the minimum of the envelope is +0.0014, so the intensity
#: never goes negative (tests/test_signals.py); with a plus sign it would reach -0.1.
STIPA_MODULATION_SIGN: float = -1.0

#: Nominal modulation depth of each full-STI test signal (one sinusoidal intensity
#: modulation, I(t) = 1 + m cos 2 pi F t). Source: IEC 60268-16:2011, 6.1 (from
#: memory: the direct method uses fully modulated noise, m = 1). The intensity is
#: then never negative.
FULL_STI_MODULATION_DEPTH: float = 1.0

#: Default length of a generated STIPA signal, s, and the shortest one generated; the
#: shortest STIPA measurement the direct method accepts without a caution. IEC 60268-16
#: asks for a STIPA measurement of about 18 s, 15 s to 25 s recommended (Annex B of the
#: 2011 edition from memory; the same figures are quoted from the 2020 edition by the
#: documentation of an open STIPA implementation, github.com/zawi01/stipa), repeated.
#: 100 s is the common period of the seven STIPA frequency pairs
#: of Table B.1 (0.63 Hz: 63 periods, 1.6 Hz: 160 ...), so a 100 s signal loops without
#: a seam and a recording may start anywhere in the loop (choice of this tool).
STIPA_DEFAULT_SECONDS: float = 100.0
STIPA_MIN_SECONDS: float = 15.0

#: Analysed length of each full-STI signal, s; with a settling margin at each end the
#: total is rounded up to whole modulation periods. Choice of this tool (common
#: practice, no source: 10 s gives at least 6 periods of the lowest frequency). A
#: full-STI recording shorter than this plus the margins gets the short-recording caution
#: of the direct method.
FULL_STI_ANALYSIS_SECONDS: float = 10.0

#: Peak level of generated test signals, dB re full scale: 3 dB headroom so that no
#: D/A converter or file format clips them (common practice, no source).
TEST_SIGNAL_PEAK_DBFS: float = -3.0

#: Frequency of acoustic calibrators, Hz. Source: IEC 60942:2017 (class 1 and 2
#: sound calibrators work at a nominal 1 kHz; typical levels 94 or 114 dB SPL).
CALIBRATOR_HZ: float = 1000.0

#: Width of the noise carrier of each test-signal band, octaves, centred on the
#: octave-band centre (edges fc * 2**(-1/4) .. fc * 2**(1/4)). Source: IEC 60268-16:2011,
#: 6.1 / Annex B (from memory: Ed.4 uses half-octave carriers). It matters: with
#: full-octave carriers the octave analysis filters pass 10-15 % of the neighbouring
#: bands' (differently modulated) carriers into the 1-8 kHz bands and an undistorted
#: signal reads an MTF near 0.9; with half-octave carriers the leak is below 0.5 %
#: (2 % at 8 kHz), see tests/test_signals.py.
TEST_SIGNAL_CARRIER_OCTAVES: float = 0.5

# ---------------------------------------------------------------------------
# Three timescales of a signal; voicing and F0 (envpredict.timescales)
# ---------------------------------------------------------------------------

#: Boundaries between the three temporal levels of speech, Hz: envelope (slow
#: intensity changes, below about 50 Hz), periodicity (voicing and fundamental
#: frequency, about 50-500 Hz) and temporal fine structure (above about 500 Hz).
#: Source: S. Rosen, "Temporal information in speech: acoustic, auditory and
#: linguistic aspects", Phil. Trans. R. Soc. Lond. B 336 (1992) 367-373 (from
#: memory: 2-50 Hz, 50-500 Hz, 600-10000 Hz; the round 500 Hz boundary is ours).
TIMESCALE_ENVELOPE_MAX_HZ: float = 50.0
TIMESCALE_PERIODICITY_MAX_HZ: float = 500.0

#: F0 search range, Hz. Adult voices commonly lie at 100-300 Hz and periodicity spans
#: about 50-500 Hz (common practice, no source).
F0_MIN_HZ: float = 50.0
F0_MAX_HZ: float = 500.0

#: YIN absolute threshold on the cumulative mean normalised difference d'(tau): the
#: first dip below it is taken as the period. Source: A. de Cheveigne, H. Kawahara,
#: "YIN, a fundamental frequency estimator for speech and music", JASA 111(4) (2002)
#: 1917-1930, Sec. II.C step 4 (threshold 0.1).
YIN_THRESHOLD: float = 0.10

#: A frame counts as voiced when d'(tau) at the chosen period (its aperiodicity) is
#: below this. Judgement (common practice, no source): clean voicing gives about
#: 0-0.2, white noise about 0.8-1.
YIN_VOICING_THRESHOLD: float = 0.25

#: YIN integration window and frame hop, s. The window is longer than the longest
#: period searched (1/50 Hz = 20 ms), as YIN needs (de Cheveigne & Kawahara 2002,
#: Sec. II.A); the 10 ms hop is common practice (no source).
YIN_WINDOW_S: float = 0.030
YIN_HOP_S: float = 0.010

#: Centres of the one-third-octave modulation bands of the envelope spectra, Hz
#: (0.5 ... 31.5 Hz, base-2 steps of 2**(1/3), nominal values as for audio bands of
#: IEC 61260-1). The 0.63-12.5 Hz part is the STI set (IEC 60268-16:2011, 5.1); the
#: extension to 0.5-31.5 Hz covers syllable and phoneme rates (common practice, no
#: source) and stays below the 50 Hz envelope low-pass.
MODULATION_BANDS_HZ: tuple[float, ...] = (
    0.5, 0.63, 0.8, 1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0, 10.0, 12.5, 16.0,
    20.0, 25.0, 31.5,
)

# ---------------------------------------------------------------------------
# Single-number room-acoustic figures (ISO 3382-1:2009) -- used by envpredict.batch
# ---------------------------------------------------------------------------

#: Octave bands averaged for the single-number ("mid-frequency") EDT and T30, Hz.
#: Source: ISO 3382-1:2009, Annex A, Table A.1 (single-number frequency averaging
#: 500 Hz to 1000 Hz for EDT and T).
MID_FREQUENCY_BANDS_HZ: tuple[float, ...] = (500.0, 1000.0)

# ---------------------------------------------------------------------------
# Defaults of the tool's options, shared by the API signatures and the CLI
# ---------------------------------------------------------------------------
# Not from a standard unless a source is given: named here once so that the API and
# the command line use the same value (this module imports nothing, so the CLI can
# read them without loading the numeric code).

#: Default SNR range of a sweep, dB: from, to (inclusive) and step (judgement: spans
#: the steep part of typical psychometric functions of sentences in noise).
SWEEP_SNR_FROM_DB: float = -15.0
SWEEP_SNR_TO_DB: float = 15.0
SWEEP_SNR_STEP_DB: float = 3.0
#: Noise segments per SNR of a sweep (judgement: enough for a t interval, few enough
#: to keep a sweep short).
SWEEP_SEGMENTS: int = 5
#: Level convention of a sweep ("speech": the speech stays at its level and the noise
#: is scaled; judgement, the usual convention of SRT tests).
SWEEP_LEVEL: str = "speech"
#: Speech level the SNR of a sweep is referred to: "active" (the active speech level of
#: ITU-T P.56 method B, pauses excluded) or "long-term" (mean power over the whole
#: speech, pauses included). Speech tests set and report levels as active speech levels
#: (ITU-T P.56 (12/2011); judgement: the reference a researcher expects), so the
#: predicted SNRs can be set on an audiometer or a mixing script the usual way.
SWEEP_SNR_REFERENCE: str = "active"
#: Target score of the speech reception threshold, percent correct. Source: R. Plomp,
#: A. M. Mimpen, "Improving the reliability of testing the speech reception threshold
#: for sentences", Audiology 18 (1979) 43-52 (SRT = SNR at 50 % sentences correct).
SRT_PERCENT: float = 50.0
#: Presentation level of written stimuli, dB re full scale: the level the speech (or the
#: mixture) is brought to. -26 dB is the level ITU-T practice normalises speech to
#: (active speech level -26 dBov, ITU-T P.56 with the G.191 tools; from memory), leaving
#: room for the noise at low SNRs.
STIMULI_LEVEL_DB: float = -26.0
#: Shape of a fitted mapping and its fixed guess and lapse rates (judgement: the
#: logistic of an open-set test, no floor, no lapses).
MAPPING_SHAPE: str = "logistic"
MAPPING_GUESS: float = 0.0
MAPPING_LAPSE: float = 0.0
#: Intervals of a fitted mapping: "quasi" (widened by the estimated dispersion, Pearson
#: chi-square / df, when it exceeds 1; McCullagh & Nelder 1989, sec. 4.5.2) or
#: "binomial" (judgement: intervals never narrower than the pilot's own scatter).
MAPPING_DISPERSION: str = "quasi"
#: Sample rate of generated test signals, Hz (judgement: the common rate of
#: measurement recorders; the 8 kHz octave band needs more than 22.6 kHz).
TEST_SIGNAL_RATE_HZ: int = 48000
#: Seed of the test-signal noise generator (any fixed value: the same seed gives the
#: same signal).
TEST_SIGNAL_SEED: int = 0
#: Largest delay between a clean and a degraded signal searched by the pair analysis,
#: s (judgement: transmission and processing delays stay well below 1 s).
PAIR_MAX_DELAY_S: float = 1.0
#: Audio per processing chunk of the pair analysis, s (memory only; judgement).
PAIR_CHUNK_S: float = 60.0

# ---------------------------------------------------------------------------
# Design-stage prediction: the statistical room model (envpredict.roommodel)
# ---------------------------------------------------------------------------

#: Sabine's constant, s/m: T = SABINE_CONSTANT * V / A with V in m3 and A in m2
#: (24 ln 10 / c at c = 343 m/s is 0.1611; printed as 0.161). Source: W. C. Sabine,
#: Collected Papers on Acoustics (1922); the metric value as in ISO 3382-2:2008 and
#: every room-acoustics text (e.g. H. Kuttruff, Room Acoustics, 5th ed. 2009, eq. 5.24;
#: from memory).
SABINE_CONSTANT: float = 0.161

#: Speed of sound used for arrival times, m/s (air at about 20 degC; common practice).
SPEED_OF_SOUND_M_S: float = 343.0

#: The divisor of the reverberant term of the MTF: an exponential decay with
#: reverberation time T transfers m(F) = [1 + (2 pi F T / 13.8)^2]^(-1/2) (13.8 =
#: 60 / (10 lg e), as printed). Source: T. Houtgast, H. J. M. Steeneken, R. Plomp,
#: "Predicting speech intelligibility in rooms from the modulation transfer function.
#: I. General room acoustics", Acustica 46 (1980) 60-72; IEC 60268-16:2011, Annex
#: (prediction by statistical methods; from memory). Same constant as
#: DECAY_TAIL_DIVISOR (ISO 3382-1), named apart for its own source.
MTF_DECAY_DIVISOR: float = 13.8

#: Revised theory of the reflected sound level: the reverberant energy of a source heard
#: at distance r is the classic diffuse level times exp(-13.82 r / (c T)) (the decay has
#: run for r/c before the direct sound arrives). Source: M. Barron, L.-J. Lee, "Energy
#: relations in concert auditoriums. I", JASA 84 (1988) 618-628 (from memory).
BARRON_DECAY_CONSTANT: float = 13.82

#: An arrival later than this after the first arrival at a listener, and not more than
#: ECHO_LEVEL_DB below it, is flagged as likely to be heard as an echo. A common design
#: rule built on H. Haas, "Ueber den Einfluss eines Einfachechos auf die Hoersamkeit von
#: Sprache", Acustica 1 (1951) 49-58 (delayed speech up to about 35 ms fuses with the
#: first arrival even when 10 dB stronger; beyond about 50 ms a delayed sound within
#: about 10 dB of it disturbs; from memory). Judgement, not a standard's limit.
ECHO_DELAY_MS: float = 50.0
ECHO_LEVEL_DB: float = -10.0

#: Typical accuracy of statistical STI predictions: L. Galbrun, K. Kitapci, "Accuracy
#: of speech transmission index predictions based on the reverberation time and
#: signal-to-noise ratio", Applied Acoustics 81 (2014) 1-14: predictions from T and
#: the signal-to-noise ratio underestimated the measured STI, by less than 0.1 in all
#: 16 conditions and by less than 0.06 on average (abstract, checked).
STATISTICAL_STI_MAX_ERROR: float = 0.10
STATISTICAL_STI_MEAN_ERROR: float = 0.06


# ---------------------------------------------------------------------------
# Active speech level (ITU-T P.56, method B) -- used by envpredict.speechlevel
# ---------------------------------------------------------------------------
# Source: ITU-T Rec. P.56 (12/2011), "Objective measurement of active speech level",
# method B (from memory: the values below were not copied from the printed text; they
# agree with the ITU-T Software Tool Library of ITU-T Rec. G.191, module sv-p56.c,
# which defines T = 0.03 s, H = 0.20 s, M = 15.9 dB and 15 thresholds 2**-15 .. 2**-1
# of full scale in 2:1 steps).

#: Time constant of the two-stage exponential smoothing of the rectified signal (the
#: envelope), s. Source: ITU-T P.56 (12/2011), method B (from memory; G.191 sv-p56.c: T).
P56_TIME_CONSTANT_S: float = 0.03
#: Hangover: a sample stays active this long after the envelope last reached the
#: threshold, s (rounded up to whole samples). Source: ITU-T P.56 (12/2011), method B
#: (from memory; G.191 sv-p56.c: H).
P56_HANGOVER_S: float = 0.2
#: Margin between the active level and the threshold at which it is measured, dB.
#: Source: ITU-T P.56 (12/2011), method B (from memory; G.191 sv-p56.c: M).
P56_MARGIN_DB: float = 15.9
#: Ratio between neighbouring thresholds of the set (2:1, 6.02 dB) and their number.
#: Source: ITU-T P.56 (12/2011), method B (from memory: "steps of not more than 2:1");
#: G.191 sv-p56.c uses 15 thresholds 2**-15 .. 2**-1.
P56_THRESHOLD_RATIO: float = 2.0
P56_THRESHOLD_COUNT: int = 15

# ---------------------------------------------------------------------------
# Published index-to-score mappings -- used by envpredict.mapping
# ---------------------------------------------------------------------------

#: Taal et al. 2011 (see the module docstring), Sec. IV: a logistic from STOI d to the
#: percentage of words correct, f(d) = 100 / (1 + exp(a d + b)), fitted per corpus of
#: their listening test. Written in the paper's own form (a, b). The values were read
#: from a secondary transcription of the paper, not from the printed paper: verify them
#: against the paper before relying on them.
#: name -> (index, a, b, test material).
TAAL2011_MAPPINGS: dict[str, tuple[str, float, float, str]] = {
    "taal2011-ieee": ("stoi", -17.4906, 9.6921, "IEEE sentences, % words correct"),
    "taal2011-dantale": ("stoi", -14.5435, 7.0792, "Dantale II sentences, % words correct"),
}


# ---------------------------------------------------------------------------
# Envelope-power index: the speech-based envelope power spectrum model (sEPSM)
# Source: S. Jørgensen and T. Dau, "Predicting speech intelligibility based on the
# signal-to-noise envelope power ratio after modulation-frequency selective processing",
# J. Acoust. Soc. Am. 130(3), 1475-1487 (2011). Values marked "from memory" could not
# be checked against the paper here; the parameters of the ideal observer are those of
# its CLUE sentence material (from memory).
# ---------------------------------------------------------------------------

#: Centre frequencies of the gammatone filterbank, Hz: 22 filters at one-third-octave
#: spacing from 63 Hz to 8 kHz (from memory), 4th order, ERB bandwidths (Glasberg & Moore
#: 1990, as scipy.signal.gammatone designs them).
SEPSM_BANDS_HZ: tuple[float, ...] = (63, 80, 100, 125, 160, 200, 250, 315, 400, 500, 630, 800, 1000, 1250,
                                     1600, 2000, 2500, 3150, 4000, 5000, 6300, 8000)
#: Modulation filterbank: a low-pass (3rd order) at 1 Hz and band-pass filters with Q = 1
#: at 2, 4, ..., 64 Hz (octave spacing), Hz.
SEPSM_MODULATION_LOWPASS_HZ: float = 1.0
SEPSM_MODULATION_HZ: tuple[float, ...] = (1.0, 2.0, 4.0, 8.0, 16.0, 32.0, 64.0)
SEPSM_MODULATION_Q: float = 1.0
#: Low-pass of the Hilbert envelope, Hz (1st order; from memory, as in the EPSM of Ewert
#: & Dau 2000).
SEPSM_ENVELOPE_LOWPASS_HZ: float = 150.0
#: Only modulation filters centred below this share of the audio band's centre frequency
#: are used (from memory: one fourth).
SEPSM_MODULATION_SHARE: float = 0.25
#: Floor of the normalised envelope power (a share of the DC power; from memory: -20 dB,
#: a modulation-detection limit).
SEPSM_ENVELOPE_POWER_FLOOR: float = 0.01
#: Smallest SNR_env of one band and filter (linear; from memory, -30 dB).
SEPSM_SNR_ENV_MIN: float = 0.001
#: Ideal observer (Green & Birdsall 1964 as used by Jørgensen & Dau 2011): d' = k SNR_env^q,
#: m equally likely alternatives, response noise sigma_s. CLUE material: k = sqrt(1.2),
#: q = 0.5, sigma_s = 0.6, m = 8000 (from memory; material-specific: fit k and sigma_s for other material).
#: k is not certain: later reproductions of the paper's experiments use k = 0.82 as well as sqrt(1.2),
#: with the same q, m and sigma_s (from memory). With k = 0.82 the sweep's SRT of a demo sentence in its
#: speech-shaped noise is -3.2 dB instead of -5.2 dB (the paper: about -3.5 dB for CLUE, from memory).
#: Kept at sqrt(1.2) until the paper's Table can be checked.
SEPSM_K: float = 1.2 ** 0.5
SEPSM_Q: float = 0.5
SEPSM_SIGMA_S: float = 0.6
SEPSM_M: float = 8000.0
#: Smallest meaningful difference of the STI: about 0.03, the just-noticeable difference
#: reported in the STI literature (J. S. Bradley, "Predictors of speech intelligibility in
#: rooms", JASA 80(3), 837-845 (1986); from memory). Shown beside comparisons of the STI
#: family (sti, ssti, ssti_regression).
STI_JND: float = 0.03

# ---------------------------------------------------------------------------
# Listeners with hearing loss (issue 17): audiograms, ISO 389-7, ISO 7029
# ---------------------------------------------------------------------------

#: Audiometric frequencies an audiogram may name, Hz (pure-tone audiometry; ISO 8253-1 and
#: ISO 7029 use these eleven from 125 Hz to 8 kHz).
AUDIOMETRIC_FREQUENCIES_HZ: tuple[float, ...] = (125.0, 250.0, 500.0, 750.0, 1000.0, 1500.0, 2000.0, 3000.0,
                                                 4000.0, 6000.0, 8000.0)

#: Range of hearing levels an audiometer reports, dB HL (the usual audiometer range: -10 dB HL
#: at best, 120 dB HL at most; common practice, no source).
HEARING_LEVEL_RANGE_DB: tuple[float, float] = (-10.0, 120.0)

#: Reference threshold of hearing under free-field listening (frontal incidence, binaural),
#: dB SPL, at :data:`AUDIOMETRIC_FREQUENCIES_HZ`: the sound pressure level of 0 dB HL in a
#: free field. Source: ISO 389-7:2005, Table 1 (from memory; the same values are the
#: threshold curve of ISO 226:2003 and agree with a published open-source transcription).
REFERENCE_THRESHOLD_FREE_FIELD_DB: tuple[float, ...] = (22.1, 11.4, 4.4, 2.4, 2.4, 2.4, -1.3, -5.8, -5.4, 4.3,
                                                        12.6)

#: Median hearing threshold deviation from the median at 18 years:
#: dH_md = a * (Y - 18) ** b dB for age Y in years, per sex, at
#: :data:`AUDIOMETRIC_FREQUENCIES_HZ`, as (a, b) pairs. Source: ISO 7029:2017, 4.2 and
#: Table 1 (third edition). The coefficients were NOT read from the printed standard: they
#: are taken from a published open-source transcription of Table 1 and checked against the
#: one printed value we can name (4 kHz, male, 60 years: 20.2 dB). Treat as "from a
#: secondary source"; verify against your copy before relying on them.
ISO7029_MEDIAN_MALE: tuple[tuple[float, float], ...] = (
    (2.50e-6, 3.841), (1.39e-4, 2.832), (4.59e-4, 2.537), (5.70e-4, 2.512), (7.02e-4, 2.494), (1.09e-3, 2.446),
    (1.56e-3, 2.404), (2.54e-3, 2.350), (3.40e-3, 2.325), (4.53e-3, 2.315), (5.06e-3, 2.328),
)
ISO7029_MEDIAN_FEMALE: tuple[tuple[float, float], ...] = (
    (6.16e-4, 2.451), (3.98e-4, 2.568), (2.61e-4, 2.708), (2.25e-4, 2.775), (2.21e-4, 2.805), (2.53e-4, 2.813),
    (3.12e-4, 2.792), (4.88e-4, 2.728), (7.37e-4, 2.660), (1.47e-3, 2.539), (2.53e-3, 2.439),
)
ISO7029_MEDIAN: dict[str, tuple[tuple[float, float], ...]] = {"m": ISO7029_MEDIAN_MALE, "f": ISO7029_MEDIAN_FEMALE}

#: Ages the ISO 7029:2017 formulae cover, years (18 to 80; above 70 years the values at
#: 3 kHz to 8 kHz are given for information only). Source: ISO 7029:2017, Scope.
ISO7029_AGE_RANGE_YEARS: tuple[float, float] = (18.0, 80.0)
#: Age above which ISO 7029:2017 gives the values from 3 kHz up for information only, years.
ISO7029_INFORMATIVE_ABOVE_YEARS: float = 70.0
#: Lowest frequency of that informative range, Hz (ISO 7029:2017, Scope).
ISO7029_INFORMATIVE_FROM_HZ: float = 3000.0
