"""How the tracker frames and searches the signal: :class:`TrackerSettings` and the tuned constants.

The constants are the tracker's design decisions (thresholds, guard bins, how many lines are
cancelled); each one says what it is for. Nothing here computes on samples.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

from coilshift.logger.errors import InputError, setting

#: a frame must hold this many cycles of the lowest frequency searched (and the search never goes
#: below this bin), so the Hann main lobe (+-2 bins) stays clear of DC
MIN_CYCLES = 4
#: the search stops this many bins below fs/2 so the three-bin interpolation has its neighbours
TOP_GUARD_BINS = 3
#: false-alarm probability per frame for "a tone is present" (noise-only peak above threshold)
FALSE_ALARM_PER_FRAME = 1e-3
#: a subharmonic counts as the fundamental if its peak is within this range of the strongest peak
SUBHARMONIC_RANGE_DB = 30.0
#: highest harmonic number that may be the strongest line and still be traced to its fundamental
MAX_HARMONIC_SEARCH = 10
#: a line supporting a candidate fundamental is "explained" by the strongest line when it sits
#: where harmonic k = 2..SELECT_FOLD_HARMONICS of that line folds; within SELECT_TIE_BINS the two
#: explanations tie, and the folded one is taken when the line is no stronger than
#: (FOLD_AMPLITUDE_GAIN / k)^2 times the strongest line (a waveform with jumps has harmonics
#: falling as 1/k: a 10 % pulse's reach 3.2/k of its fundamental, a square's 1/k)
SELECT_FOLD_HARMONICS = 128
SELECT_TIE_BINS = 0.1
FOLD_AMPLITUDE_GAIN = 4.0
#: error of the strongest line's Hann location in a spectrum dense with folded lines (bins); the
#: tie window of harmonic k widens by k times this
FP_UNCERTAINTY_BINS = 0.01
#: a fundamental whose folded harmonic would be the strongest line must be within this range of it
FOLDED_RANGE_DB = 10.0
#: a supporting line must lie within this many bins (plus four of its standard deviations) of
#: where the hypothesis puts it: chance neighbours in a dense spectrum are a bin or so off
SELECT_LOCATION_BINS = 0.1
#: standard deviation of Grandke's Hann location times sqrt(per-bin SNR) (bins): the single-tone
#: Cramer-Rao bound, 1/(pi sqrt(2/3 SNR_bin)) for the Hann window, times 1.9 (measured RMS ratio)
GRANDKE_LOCATION_SIGMA = 0.75
#: harmonics whose leakage is cancelled in the fine stage (a low pulse wave has a hundred or more
#: below fs/2, each leaking as 1/distance into the rectangular window)
LEAKAGE_HARMONICS = 256
#: aliasing (a signal sampled without an anti-alias filter): this many harmonics above fs/2,
#: from the first, are looked for at their folded positions, and at least FOLD_PROBE_MIN must
#: show as lines for a frame to count as aliased (a square wave lacks every other harmonic; one
#: stray line such as hum is not enough)
FOLD_PROBE_HARMONICS = 8
FOLD_PROBE_MIN = 2
#: a folded harmonic counts only when its line lies within this many bins of where folding puts it
FOLD_LOCATION_TOL = 0.5
#: a folded line closer than this many bins to a harmonic below fs/2 cannot be told from it (the
#: two-line fit through the Hann kernel loses its conditioning)
FOLD_RESOLVE_BINS = 0.7
#: lines closer than this many bins share the Hann main lobe (+-2 bins): neither reading is clean
CLOSE_BINS = 3.0
#: folded harmonics too close to separate: those up to this order are weighed
#: (:mod:`~coilshift.logger.tracking.aliasbias`), within this many bins of the tone
ALIAS_BIAS_HARMONICS = 4096
ALIAS_BIAS_REACH_BINS = 8.0
#: a frame whose bound on the error from such lines exceeds this (bins; 1.8 mHz with the default
#: frame) and its own noise-limited standard deviation is flagged alias_close
ALIAS_BIAS_LIMIT_BINS = 1.5e-4
#: a frame is flagged edge when the one-tone model leaves more than this of the tone's DTFT
#: samples unexplained, plus EDGE_NOISE_SIGMAS noise scales
#: (:mod:`~coilshift.logger.tracking.edges`): a tone missing from 3 % of the frame leaves 0.05
EDGE_LIMIT = 0.05
EDGE_NOISE_SIGMAS = 5.0
#: mains frequencies and the number of their harmonics treated as hum
MAINS_HZ = (50.0, 60.0)
HUM_HARMONICS = 10
#: a hum line must stand this far (power ratio, 10 dB) above the bins two either side of it
HUM_PEAK_RATIO = 10.0
#: a line more than this (power ratio, 10 dB) above the mains line is not taken for its harmonic
HUM_STRONGER = 10.0
#: other strong lines (hum, another oscillator) whose rectangular-window leakage is cancelled:
#: at most this many per frame, and only those within this range of the tone's Hann peak power
OTHER_LINES = 8
OTHER_LINES_RANGE_DB = 60.0
#: closed-form interpolation passes: the second uses the rectangular-window amplitude of the
#: first for the image correction, which takes the noiseless error of a 5-bin tone from 2e-5 to
#: 1e-6 bin (it leaves the RMS error at higher frequencies unchanged)
FINE_PASSES = 2
#: variance of Grandke's Hann interpolation over the Cramer-Rao bound (RMS 1.7-1.9 x in the benchmark)
GRANDKE_VARIANCE_FACTOR = 3.5
#: local detection test: this many cells (half each side), starting this many bins from the peak
LOCAL_CELLS = 24
LOCAL_GUARD = 3
#: a line must exceed this many times the single-precision rounding power of the frame
#: (eps^2 sum(xw^2)); rounding peaks reach about 800 times it
ROUNDING_FLOOR = 1e4
#: bins either side of each harmonic left out of the noise estimate
NOISE_GUARD_BINS = 3
#: the noise median uses about this many bins (every few bins: cheaper, and Hann neighbours are
#: correlated anyway); 256 bins give the median to about 6 % (0.3 dB)
NOISE_BINS = 256
#: frames analysed together (bounds memory; results do not depend on it)
CHUNK_FRAMES = 256
#: the fine stage evaluates DTFTs on a (rows x DTFT_BLOCK) reshaping of the frame
DTFT_BLOCK = 64
#: sub-bin estimators the fine stage can use (``TrackerSettings.fine_estimator``); each name is
#: the function in :mod:`coilshift.logger.tracking.estimators` with ``_`` written as ``-``
FINE_ESTIMATORS = ("aboutanios-mulgrew", "candan2013", "quinn2", "macleod3", "grandke-hann")


@dataclass(frozen=True)
class TrackerSettings:
    """How the tracker frames and searches the signal.

    Parameters
    ----------
    frame_ms : float
        Nominal frame length; the tracker rounds ``frame_ms * fs`` up to the next length with
        only small prime factors (``FrameTracker.frame_len`` gives the length used).
    hop_ms : float
        Spacing of frame starts (must not exceed the frame length).
    band_hz : (lo, hi) or None
        Search only here for the fundamental. Frames whose strongest line lies outside (and is not
        a harmonic of the tone found) get OUT_OF_BAND. With a band, hum lines are not excluded.
    near_hz : float or None
        Follow the tone nearest this frequency (useful with several oscillators in the signal).
    refine : bool
        Finish each frame with an IEEE Std 1057 four-parameter sine fit.
    min_snr_db : float
        Frames whose ``snr_db`` is below this get LOW_SNR (see :class:`FrameTracker` for the SNR
        definition).
    clip_level : float
        Frames with any ``|x| >= clip_level`` get CLIPPED.
    fine_estimator : str
        Sub-bin estimator of the fine stage, one of :data:`FINE_ESTIMATORS`. The default,
        ``"aboutanios-mulgrew"``, is the exact-kernel Aboutanios-Mulgrew step (Aboutanios &
        Mulgrew 2005) on DTFT samples at half-bin offsets. ``"candan2013"`` (Candan 2013),
        ``"quinn2"`` (Quinn 1997) and ``"macleod3"`` (Macleod 1998) apply those published
        formulas to the rectangular-window DFT bins either side of the peak; ``"grandke-hann"``
        keeps the coarse stage's Hann interpolation (Grandke 1983) and skips the rectangular
        stage. Every choice sees the same frames, coarse search and leakage cancellation, so
        they can be compared inside the real tracker (``benchmarks/tracker_accuracy.py``).
    """

    frame_ms: float = 85.0
    hop_ms: float = 20.0
    band_hz: tuple[float, float] | None = None
    near_hz: float | None = None
    refine: bool = False
    min_snr_db: float = 10.0
    clip_level: float = 0.999
    fine_estimator: str = "aboutanios-mulgrew"

    def __post_init__(self) -> None:
        if self.band_hz is not None:
            try:
                lo, hi = (float(v) for v in self.band_hz)
            except (TypeError, ValueError):
                raise InputError(f"tracker settings: band_hz must be two numbers (lo, hi), got {self.band_hz!r}") from None
            object.__setattr__(self, "band_hz", (lo, hi))
        problems = []
        if not (math.isfinite(self.frame_ms) and self.frame_ms > 0):
            problems.append(f"frame length {self.frame_ms} ms must be positive")
        if not (math.isfinite(self.hop_ms) and self.hop_ms > 0):
            problems.append(f"hop {self.hop_ms} ms must be positive")
        elif self.hop_ms > self.frame_ms:
            problems.append(f"hop {self.hop_ms:g} ms is longer than the frame {self.frame_ms:g} ms (samples would be skipped)")
        if self.band_hz is not None:
            lo, hi = self.band_hz
            if not (math.isfinite(lo) and math.isfinite(hi) and 0 <= lo < hi):
                problems.append(f"band {lo:g}..{hi:g} Hz must satisfy 0 <= lo < hi")
        if self.near_hz is not None and not (math.isfinite(self.near_hz) and self.near_hz > 0):
            problems.append(f"near_hz {self.near_hz} must be a positive frequency")
        if not (0 < self.clip_level <= 1):
            problems.append(f"clip_level {self.clip_level} must lie in (0, 1]")
        if not math.isfinite(self.min_snr_db):
            problems.append("min_snr_db must be a finite number")
        if self.fine_estimator not in FINE_ESTIMATORS:
            problems.append(f"{setting('fine_estimator')} {self.fine_estimator!r} is not one of "
                            f"{', '.join(FINE_ESTIMATORS)}")
        if problems:
            raise InputError("tracker settings: " + "; ".join(problems))

    def to_dict(self) -> dict:
        """Plain JSON-ready dict (for run.json)."""
        d = asdict(self)
        d["band_hz"] = list(self.band_hz) if self.band_hz is not None else None
        return d

    def check_rate(self, sample_rate_hz: float) -> None:
        """Raise :class:`InputError` if these settings cannot work at ``sample_rate_hz``."""
        fs = float(sample_rate_hz)
        if not (math.isfinite(fs) and fs > 0):
            raise InputError(f"tracker settings: sample rate {sample_rate_hz} Hz is not a positive number")
        nyq = fs / 2
        frame_s = self.frame_ms / 1000
        if frame_s * fs < 32:
            raise InputError(f"tracker settings: a {self.frame_ms:g} ms frame is only {frame_s * fs:.0f} samples at {fs:g} Hz (need 32 or more)")
        lowest = MIN_CYCLES / frame_s
        if self.band_hz is not None:
            lo, hi = self.band_hz
            if hi > nyq:
                raise InputError(f"tracker settings: band {lo:g}..{hi:g} Hz reaches above half the sample rate ({nyq:g} Hz)")
            if hi <= lowest:
                raise InputError(
                    f"tracker settings: band {lo:g}..{hi:g} Hz lies below {lowest:g} Hz, the lowest frequency a "
                    f"{self.frame_ms:g} ms frame resolves ({MIN_CYCLES} cycles per frame); use a longer frame")
            if 0 < lo < lowest:
                raise InputError(
                    f"tracker settings: a {self.frame_ms:g} ms frame holds fewer than {MIN_CYCLES} cycles of {lo:g} Hz; "
                    f"use frame_ms >= {1000 * MIN_CYCLES / lo:.0f} or raise the band's lower edge")
        if self.near_hz is not None:
            if self.near_hz >= nyq:
                raise InputError(f"tracker settings: near_hz {self.near_hz:g} Hz is not below half the sample rate ({nyq:g} Hz)")
            if self.band_hz is not None and not (self.band_hz[0] <= self.near_hz <= self.band_hz[1]):
                raise InputError(f"tracker settings: near_hz {self.near_hz:g} Hz lies outside band_hz {self.band_hz[0]:g}..{self.band_hz[1]:g} Hz")
