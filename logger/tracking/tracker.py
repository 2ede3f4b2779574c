"""Frame-by-frame frequency tracker: pure NumPy/SciPy, no I/O.

The signal is cut into overlapping frames (default 85 ms every 20 ms). Each frame goes through

1. **Coarse stage, Hann window.** One real FFT per frame (batched over a strided frame matrix).
   The noise floor is the median of the Hann power spectrum (robust against tones, harmonics and
   hum lines). The strongest peak in the search band is found; then its subharmonics ``f/m``
   (m = 2..10) are checked for a real peak with harmonic support, and the lowest consistent one is
   taken as the fundamental, because a pulse-shaped oscillator output (a 555, a comparator) can
   carry harmonics as strong as or stronger than its fundamental after AC coupling. Mains hum lines
   (50/60 Hz and harmonics, when the 50/60 Hz line itself is present) are excluded from the search
   unless a band is given. A tone must clear both a global threshold (median noise floor) and a
   local ordered-statistic CFAR test, each set for about 1e-3 false alarms per frame. The coarse
   sub-bin offset comes from Grandke's two-bin Hann formula.
2. **Fine stage, rectangular window.** The DTFT of the frame (DC removed) is evaluated at
   ``f_coarse +- 1/2`` bin and one Aboutanios-Mulgrew interpolation step is solved in closed form
   with the exact finite-N Dirichlet kernel (so it is exact for a noiseless complex tone, like
   Candan's 2013 correction of Jacobsen's estimator). Before the step, the leakage of the tone's
   own negative-frequency image, of its harmonics (amplitudes from the Hann spectrum), of other
   strong lines (hum, a second oscillator) and of the removed frame mean is subtracted
   analytically; this removes the bias a rectangular window otherwise shows for real signals and
   pulse waves. The variance is close to the Cramer-Rao bound.
3. **Optional refinement** (``refine=True``): IEEE Std 1057 four-parameter least-squares sine fit
   started from the fine estimate.

Frequencies and times are raw: the nominal sample rate, no clock or divider corrections.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np
import scipy.fft as sfft
from numpy.lib.stride_tricks import sliding_window_view

from coilshift.logger.runfolder import flags as fl
from coilshift.logger.errors import InputError
from coilshift.logger.tracking.estimators import grandke_hann
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.tracking.sinefit import fit_sine4_frames

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
#: harmonics whose leakage is cancelled in the fine stage (a low pulse wave has a hundred or more
#: below fs/2, each leaking as 1/distance into the rectangular window)
LEAKAGE_HARMONICS = 256
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
#: bins either side of each harmonic left out of the noise estimate
NOISE_GUARD_BINS = 3
#: the noise median uses about this many bins (every few bins: cheaper, and Hann neighbours are
#: correlated anyway); 256 bins give the median to about 6 % (0.3 dB)
NOISE_BINS = 256
#: frames analysed together (bounds memory; results do not depend on it)
CHUNK_FRAMES = 256
#: the fine stage evaluates DTFTs on a (rows x DTFT_BLOCK) reshaping of the frame
DTFT_BLOCK = 64


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
    """

    frame_ms: float = 85.0
    hop_ms: float = 20.0
    band_hz: tuple[float, float] | None = None
    near_hz: float | None = None
    refine: bool = False
    min_snr_db: float = 10.0
    clip_level: float = 0.999

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


def _clamp(a, lo, hi):
    """``np.clip`` without its Python-level overhead (called many times per chunk)."""
    return np.minimum(np.maximum(a, lo), hi)


def os_cfar_factor(cells: int, rank: int, p_false: float) -> float:
    """Threshold factor T on the ``rank``-th smallest of ``cells`` exponential noise powers.

    An ordered-statistic CFAR test declares a signal when ``P > T * X(rank)``; for independent
    exponential cells the false-alarm probability is ``prod_{i=0}^{rank-1} (cells - i) /
    (cells - i + T)`` (Rohling 1983, IEEE Trans. Aerosp. Electron. Syst. 19(4)). Solved for T.
    """
    def pfa(t):
        return math.prod((cells - i) / (cells - i + t) for i in range(rank))

    lo, hi = 0.0, 1.0
    while pfa(hi) > p_false:
        hi *= 2.0
    for _ in range(100):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if pfa(mid) > p_false else (lo, mid)
    return hi


def dirichlet(nu, n: int):
    """Rectangular-window kernel ``sum_{i=0}^{n-1} exp(2j pi nu i / n)`` for fractional ``nu`` (bins).

    A component ``a exp(2j pi f i / n)`` contributes ``a * dirichlet(f - g, n)`` to the DTFT
    ``sum_i x[i] exp(-2j pi g i / n)``.
    """
    z = np.pi * np.asarray(nu, dtype=float)
    num = np.sin(z)
    den = np.sin(z / n)
    small = np.abs(den) < 1e-12
    if np.logical_or.reduce(small, axis=None):  # ndarray.any() goes through Python-level wrappers
        # at nu = multiple of n the sum is n (times the sign of the alternating phase)
        ratio = np.where(small, n * np.cos(z) / np.cos(z / n), num / np.where(small, 1.0, den))
    else:
        ratio = num / den
    return ratio * np.exp(1j * (z * ((n - 1) / n)))


def hann_kernel(nu, n: int):
    """Kernel of the periodic Hann window ``0.5 - 0.5 cos(2 pi i / n)``, same convention as :func:`dirichlet`."""
    nu = np.asarray(nu, dtype=float)
    return 0.5 * dirichlet(nu, n) - 0.25 * dirichlet(nu + 1, n) - 0.25 * dirichlet(nu - 1, n)


class _Plan:
    """Everything that depends only on (sample rate, frame length, settings)."""

    def __init__(self, fs: float, n: int, settings: TrackerSettings):
        self.fs = fs
        self.n = n
        self.settings = settings
        self.df = fs / n
        nbins = n // 2 + 1
        self.nbins = nbins
        i = np.arange(n)
        self.window = 0.5 - 0.5 * np.cos(2 * np.pi * i / n)  # periodic Hann
        self.window32 = self.window.astype(np.float32)
        self.win_power = float(np.sum(self.window ** 2))  # = 3n/8
        self.kmin = MIN_CYCLES
        self.kmax = nbins - 1 - TOP_GUARD_BINS
        if settings.band_hz is not None:
            lo, hi = settings.band_hz
            self.lo_bin = max(lo / self.df, float(self.kmin))
            self.hi_bin = min(hi / self.df, float(self.kmax))
        else:
            self.lo_bin, self.hi_bin = float(self.kmin), float(self.kmax)
        self.s0 = max(self.kmin, int(math.floor(self.lo_bin)))
        self.s1 = min(self.kmax, int(math.ceil(self.hi_bin)))
        in_band = np.zeros(nbins, dtype=bool)
        in_band[self.s0:self.s1 + 1] = True
        self.search_mask = in_band
        self.noise_step = int(min(8, max(1, (self.kmax - self.kmin + 1) // NOISE_BINS)))
        self.noise_idx = np.arange(self.kmin, self.kmax + 1, self.noise_step)
        m_search = max(self.s1 - self.s0 + 1, 2)
        self.detect_ratio = math.log(m_search / FALSE_ALARM_PER_FRAME)
        # local test (ordered-statistic CFAR): the peak against the median of nearby bins, so a
        # hump of coloured noise (1/f, rumble) is not taken for a tone
        half = LOCAL_CELLS // 2
        self.local_offsets = np.concatenate([-np.arange(LOCAL_GUARD, LOCAL_GUARD + half)[::-1],
                                             np.arange(LOCAL_GUARD, LOCAL_GUARD + half)])
        self.local_ratio = os_cfar_factor(LOCAL_CELLS, LOCAL_CELLS // 2, FALSE_ALARM_PER_FRAME / m_search)
        # subharmonic hypotheses: positions h/m of the strongest line, h = 1..m, m = 2..M
        ratios, hs = [], []
        for m in range(2, MAX_HARMONIC_SEARCH + 1):
            for h in range(1, m + 1):
                ratios.append(h / m)
                hs.append(h)
        self.sub_ratio = np.array(ratios)
        self.sub_start = np.flatnonzero(np.array(hs) == 1)  # first column of each divisor's group
        self.sub_need = np.array([math.ceil(m / 2) for m in range(2, MAX_HARMONIC_SEARCH + 1)])
        self.divisors = np.arange(1, MAX_HARMONIC_SEARCH + 1, dtype=float)
        # hum: bins around k * mains, excluded when the mains line itself shows (no band given)
        self.hum = []
        if settings.band_hz is None:
            tol = max(1.0, 2.0 / self.df)
            for mains in MAINS_HZ:
                centre = mains / self.df
                if centre < 1.5:
                    continue
                mask = np.zeros(nbins, dtype=bool)
                for k in range(1, HUM_HARMONICS + 1):
                    c = k * centre
                    lo_b, hi_b = int(math.floor(c - tol)), int(math.ceil(c + tol))
                    mask[max(lo_b, 0):min(hi_b, nbins - 1) + 1] = True
                c = int(round(centre))
                # the line must be a local peak: a strong tone's skirt also lights up these bins
                cells = _clamp(c + self.local_offsets, 2, nbins - 1)
                self.hum.append((np.arange(c - 1, c + 2), np.array([c - 2, c + 2]), mask, cells))
        self.near_bin = None if settings.near_hz is None else settings.near_hz / self.df
        # fine-stage DTFT: frame (zero-padded) reshaped to rows of DTFT_BLOCK samples
        self.rows = -(-n // DTFT_BLOCK)
        self.npad = self.rows * DTFT_BLOCK
        self.rows_hi = -(-self.rows // 8)  # row phasors as a (rows_hi x 8) outer product
        # phasors of the frequency one bin lower = phasors times exp(+2j pi i / n)
        self.col_shift = np.exp(2j * np.pi * np.arange(DTFT_BLOCK) / n)
        self.row_shift = np.exp(2j * np.pi * DTFT_BLOCK * np.arange(self.rows) / n)
        self.step8 = np.arange(max(8, self.rows_hi), dtype=float)
        self.step3 = np.array([-1, 0, 1])
        self.step5 = np.array([-2, -1, 0, 1, 2])
        self.half_pm = np.array([0.5, -0.5])
        self.harm = np.arange(1, LEAKAGE_HARMONICS + 1, dtype=float)
        self.am_phase = np.exp(1j * np.pi * (n - 1) / n)
        self.am_tan = math.tan(math.pi / (2 * n))

    # ------------------------------------------------------------------ stages
    def dtft_pair(self, xpad, g_plus):
        """DTFT of each row of ``xpad`` (F, npad) at bins ``g_plus`` and ``g_plus - 1``.

        Returns ((F, 2) complex, (F,) row sums). The frame is reshaped to rows of DTFT_BLOCK
        samples; one small matrix product per frame applies the in-row phasors of both
        frequencies (and a column of ones, which gives the frame sum for free), then the row
        phasors finish the sums. Phasors come from 8 x 8 outer products of exponentials, and
        the second frequency's from the first times a fixed vector.
        """
        nrow = xpad.shape[0]
        theta = -2 * np.pi * g_plus / self.n  # (F,)
        fine = np.exp(1j * theta[:, None] * self.step8[:8])  # (F, 8)
        coarse = np.exp(1j * theta[:, None] * (8 * self.step8[:8]))
        col_p = (coarse[:, :, None] * fine[:, None, :]).reshape(nrow, DTFT_BLOCK)
        col_m = col_p * self.col_shift  # one bin lower
        w = np.empty((nrow, 5, DTFT_BLOCK))
        w[:, 0], w[:, 1] = col_p.real, col_p.imag
        w[:, 2], w[:, 3] = col_m.real, col_m.imag
        w[:, 4] = 1.0
        inner = np.matmul(xpad.reshape(nrow, self.rows, DTFT_BLOCK), w.transpose(0, 2, 1))  # (F, rows, 5)
        rfine = np.exp(1j * theta[:, None] * (DTFT_BLOCK * self.step8[:8]))
        rcoarse = np.exp(1j * theta[:, None] * (8 * DTFT_BLOCK * self.step8[:self.rows_hi]))
        row_p = (rcoarse[:, :, None] * rfine[:, None, :]).reshape(nrow, -1)[:, :self.rows]
        row_m = row_p * self.row_shift
        out = np.empty((nrow, 2), dtype=complex)
        out[:, 0] = np.einsum("fr,fr->f", inner[:, :, 0] + 1j * inner[:, :, 1], row_p)
        out[:, 1] = np.einsum("fr,fr->f", inner[:, :, 2] + 1j * inner[:, :, 3], row_m)
        return out, inner[:, :, 4].sum(axis=1)

    def analyse(self, frames, clipped):
        """Analyse a (F, N) frame matrix; return freq_hz, amp_dbfs, snr_db, flags (arrays of F)."""
        s = self.settings
        n = self.n
        nf = frames.shape[0]
        # a DC offset leaks only into bins 0 and 1 of a periodic-Hann DFT, which are never
        # searched, so the coarse stage needs no mean removal; single precision is ample here
        xw = frames.astype(np.float32)
        xw *= self.window32
        spec = sfft.rfft(xw, axis=1)
        sq = spec.view(np.float32)
        sq = sq * sq
        power = sq[:, 0::2] + sq[:, 1::2]  # |X|^2, (F, nbins) float32

        # noise floor per Hann bin: median of a decimated spectrum / ln 2 (exponential power)
        noise_bins = power[:, self.kmin:self.noise_idx[-1] + 1:self.noise_step]  # = the noise_idx bins
        noise_sorted = np.sort(noise_bins, axis=1)
        nd = noise_sorted.shape[1]
        noise_raw = noise_sorted[:, nd // 2].astype(float) / math.log(2.0)
        detect = noise_raw * self.detect_ratio

        searchable = power
        for probe, flank, mask, cells in self.hum:
            top = power[:, probe].max(axis=1)
            hum_on = (top > detect) & (top > HUM_PEAK_RATIO * power[:, flank].max(axis=1))
            if hum_on.any():
                # the same local test as for a tone, so a noise spike on a tone's skirt is not hum
                near = np.sort(power[:, cells], axis=1)[:, LOCAL_CELLS // 2 - 1]
                hum_on &= top > self.local_ratio * near
            if hum_on.any():
                if searchable is power:
                    searchable = power.copy()
                # lines far stronger than the mains line itself are not its harmonics
                region = searchable[hum_on][:, mask]
                weak = region < HUM_STRONGER * top[hum_on, None]
                region[weak] = 0.0
                sub = searchable[hum_on]
                sub[:, mask] = region
                searchable[hum_on] = sub
        if self.settings.band_hz is not None:
            if searchable is power:
                searchable = power.copy()
            searchable[:, ~self.search_mask] = 0.0
            # only local maxima count inside a band: the skirt of a strong tone just outside the
            # band must not hide a weaker tone inside it
            inner = searchable[:, 1:-1]
            skirt = (inner < power[:, :-2]) | (inner < power[:, 2:])
            inner[skirt] = 0.0
        rows = np.arange(nf)

        if self.near_bin is None:
            kp = self.s0 + np.argmax(searchable[:, self.s0:self.s1 + 1], axis=1)
        else:
            kp = self._nearest_peak(searchable, detect)
        p_peak = searchable[rows, kp].astype(float)
        have = p_peak > detect

        fp = kp + self._grandke(power, kp)

        # subharmonic hypotheses (vectorised): is there a real peak at h * fp / m?
        thr_sub = np.maximum(detect, p_peak * 10 ** (-SUBHARMONIC_RANGE_DB / 10))
        pos = np.rint(fp[:, None] * self.sub_ratio[None, :]).astype(int)  # (F, L)
        pos = _clamp(pos, 1, self.nbins - 2)
        best = np.maximum(np.maximum(searchable[rows[:, None], pos - 1], searchable[rows[:, None], pos]),
                          searchable[rows[:, None], pos + 1])
        present = best > thr_sub[:, None]
        # per divisor m (columns grouped by m): the h = 1 peak, and how many of h = 1..m show
        counts = np.add.reduceat(present, self.sub_start, axis=1, dtype=np.int64)
        f0_all = fp[:, None] / self.divisors[None, :]  # (F, M), divisor 1 first
        m_valid = np.ones(f0_all.shape, dtype=bool)
        m_valid[:, 1:] = (present[:, self.sub_start] & (counts >= self.sub_need[None, :])
                          & (f0_all[:, 1:] >= max(self.lo_bin - 0.5, self.kmin)))
        if self.near_bin is None:
            # lowest consistent fundamental = largest valid divisor
            choice = (m_valid.shape[1] - 1) - np.argmax(m_valid[:, ::-1], axis=1)
        else:
            dist = np.where(m_valid, np.abs(f0_all - self.near_bin), np.inf)
            choice = np.argmin(dist, axis=1)
        f_guess = f0_all[rows, choice]

        # settle on the local maximum nearest the guess, then Grandke's Hann interpolation
        b0 = _clamp(np.rint(f_guess).astype(int), self.kmin + 1, self.kmax - 1)
        nb = searchable[rows[:, None], b0[:, None] + self.step3[None, :]]
        k = _clamp(b0 - 1 + np.argmax(nb, axis=1), self.kmin, self.kmax)
        fc = k + self._grandke(power, k)
        p_k = searchable[rows, k]
        local = _clamp(k[:, None] + self.local_offsets[None, :], 2, self.nbins - 1)
        local_sorted = np.sort(power[rows[:, None], local], axis=1)
        have &= (p_k > detect) & (p_k > self.local_ratio * local_sorted[:, LOCAL_CELLS // 2 - 1])

        # complex amplitudes of the fundamental and of the harmonics that stand out of the noise
        # (weaker ones leak less than the noise does), from the Hann spectrum
        # (only as many columns as the lowest fundamental of the chunk has harmonics below fs/2)
        n_range = int(min(len(self.harm), max(1.0, (self.nbins - 3) // max(float(fc.min()), 1.0))))
        hf = fc[:, None] * self.harm[None, :n_range]  # (F, H)
        hbin = np.rint(hf).astype(int)
        hvalid = (hbin <= self.nbins - 3) & (hbin >= 2)
        hbin = _clamp(hbin, 2, self.nbins - 3)
        # a harmonic must be a line: a peak within +-1 bin above the threshold and above the bins
        # two either side (the skirt of the fundamental falls steadily and fails this); the bin
        # nearest h*fc lies in the line's main lobe, so it alone decides whether to look closer
        hvalid[:, 1:] &= power[rows[:, None], hbin[:, 1:]] > detect[:, None]
        n_look = int(np.max(np.nonzero(hvalid[:, 1:].any(axis=0))[0], initial=-1)) + 1
        around = power[rows[:, None, None], hbin[:, 1:n_look + 1, None] + self.step5[None, None, :]]  # (F, n_look, 5)
        top = around[:, :, 1:4].max(axis=2)
        hvalid[:, 1:n_look + 1] &= (top > detect[:, None]) & (top > around[:, :, 0]) & (top > around[:, :, 4])
        # columns beyond the last significant harmonic are all zero; dropping them for the whole
        # chunk changes no frame's result because the leakage sums run column by column
        n_h = int(np.max(np.nonzero(hvalid.any(axis=0))[0], initial=0)) + 1
        hf, hbin, hvalid = hf[:, :n_h], hbin[:, :n_h], hvalid[:, :n_h]
        xh = spec[rows[:, None], hbin].astype(complex)
        amp_h = np.where(hvalid, xh / hann_kernel(hf - hbin, n), 0.0)

        # fine stage: exact-kernel Aboutanios-Mulgrew step with leakage cancellation
        g = fc[:, None] + self.half_pm[None, :]  # (F, 2): fc + 1/2, fc - 1/2
        if self.npad == n:
            xpad = frames
        else:
            xpad = np.zeros((nf, self.npad))
            xpad[:, :n] = frames
        # DTFT of the frame minus its mean: subtract the mean's kernel analytically
        s_pm, total = self.dtft_pair(xpad, g[:, 0])
        mean = total / n
        wg_conj = np.conj(dirichlet(g, n))
        s_pm -= mean[:, None] * wg_conj
        lines = self._other_lines(power, spec, detect, k, fc, hvalid)
        s_pm -= self._lines_leakage(lines, g, wg_conj)
        f_fine = fc.copy()
        ah = np.where(hvalid, amp_h, 0.0)
        target = np.zeros(nf, dtype=np.int64)
        for _ in range(FINE_PASSES):
            f_fine, ah[:, 0] = self._am_step(s_pm, g, wg_conj, f_fine, ah, target)
        freq_bins = f_fine
        amp = 2 * np.abs(ah[:, 0])


        if s.refine and have.any():
            fit_rows = np.flatnonzero(have)
            f_hz, ca, cb, _, _, conv = fit_sine4_frames(frames[fit_rows], self.fs, freq_bins[fit_rows] * self.df)
            ok = conv & (np.abs(f_hz / self.df - freq_bins[fit_rows]) < 0.5)
            freq_bins = freq_bins.copy()
            freq_bins[fit_rows[ok]] = f_hz[ok] / self.df
            amp = amp.copy()
            amp[fit_rows[ok]] = np.hypot(ca, cb)[ok]

        # noise with the tone's harmonics left out: the median of the remaining bins sits at rank
        # (nd - above + below) / 2 of the full sorted set, where above/below count the left-out
        # bins above/below the overall median (exact when none of them straddles the new median)
        # (only the fundamental and the harmonics found above are left out)
        centre = freq_bins[:, None] * self.harm[None, :n_h]
        step_b = self.noise_step
        j_first = np.ceil((centre - NOISE_GUARD_BINS - self.kmin) / step_b).astype(int)
        left_out = []
        for step in range(2 * NOISE_GUARD_BINS // step_b + 1):
            j = j_first + step
            inside = (j >= 0) & (j < nd) & (self.kmin + step_b * j <= centre + NOISE_GUARD_BINS)
            left_out.append((inside & hvalid & have[:, None], _clamp(j, 0, nd - 1)))
        median_raw = noise_sorted[:, nd // 2:nd // 2 + 1]
        n_above = np.zeros(nf, dtype=int)
        n_below = np.zeros(nf, dtype=int)
        for inside, j in left_out:
            high = np.take_along_axis(noise_bins, j, axis=1) > median_raw
            n_above += np.sum(inside & high, axis=1)
            n_below += np.sum(inside & ~high, axis=1)
        rank = _clamp((nd - n_above + n_below) // 2, 0, nd - 1)
        noise_bin = np.take_along_axis(noise_sorted, rank[:, None], axis=1)[:, 0].astype(float) / math.log(2.0)
        noise_var = noise_bin / self.win_power  # white-equivalent noise variance per sample
        if n_h > 1:
            # harmonics: first their Hann estimates; with that f0 (good enough to place even a high
            # harmonic within a small fraction of a bin) the most informative one goes through the
            # fine stage, and the combination is formed again with it
            args = (amp, amp_h, hvalid, hbin, around[:, :n_h - 1], noise_var, have)
            f_comb = self._with_harmonics(freq_bins, *args)
            fine_h = self._fine_harmonic(xpad, mean, lines, f_comb, ah, hvalid)
            freq_bins = self._with_harmonics(freq_bins, *args, harmonic_fine=fine_h)
        with np.errstate(divide="ignore", invalid="ignore"):
            snr_db = 10 * np.log10((amp * amp / 2) / noise_var)
            amp_dbfs = 20 * np.log10(amp)

        fl_arr = np.zeros(nf, dtype=np.int64)
        fl_arr[clipped] |= fl.CLIPPED
        freq_hz = freq_bins * self.df
        if s.band_hz is not None:
            # the dominant line over the whole spectrum: outside the band and not one of our harmonics?
            f_safe = np.where(freq_bins > 1, freq_bins, 1.0)
            full = power[:, self.kmin:self.kmax + 1]
            kg = self.kmin + np.argmax(full, axis=1)
            pg = power[rows, kg].astype(float)
            outside = (kg < self.s0) | (kg > self.s1)
            hnum = np.rint(kg / f_safe)
            harmonic = have & (hnum >= 1) & (np.abs(kg - hnum * f_safe) <= 1.5)
            oob = outside & (pg > detect) & ~harmonic
            oob |= have & ((freq_hz < s.band_hz[0]) | (freq_hz > s.band_hz[1]))
            fl_arr[oob] |= fl.OUT_OF_BAND
        fl_arr[~have] |= fl.NO_TONE
        low = have & ~(snr_db >= s.min_snr_db)
        fl_arr[low] |= fl.LOW_SNR
        freq_hz = np.where(have, freq_hz, np.nan)
        amp_dbfs = np.where(have, amp_dbfs, np.nan)
        snr_db = np.where(have, snr_db, np.nan)
        return freq_hz, amp_dbfs, snr_db, fl_arr

    def _fine_harmonic(self, xpad, mean, lines, f0, ah, hvalid):
        """The fine stage again, on each frame's most informative harmonic (largest h^2 |a_h|^2).

        Returns (column, f0 estimate from it in bins, usable) per frame. Its variance is the
        single-tone bound of that harmonic divided by h^2, against about 3.5 times that for the
        Grandke estimate it replaces.
        """
        n = self.n
        n_h = ah.shape[1]
        rows = np.arange(f0.shape[0])
        info = np.where(hvalid[:, 1:], self.harm[None, 1:n_h] ** 2 * np.abs(ah[:, 1:]) ** 2, 0.0)
        best = 1 + np.argmax(info, axis=1)
        hstar = self.harm[best]
        g = (hstar * f0)[:, None] + self.half_pm[None, :]
        s_pm, _ = self.dtft_pair(xpad, g[:, 0])
        wg_conj = np.conj(dirichlet(g, n))
        s_pm -= mean[:, None] * wg_conj
        s_pm -= self._lines_leakage(lines, g, wg_conj)
        ah = ah.copy()
        f_est = f0.copy()
        for _ in range(FINE_PASSES):
            f_target, ah[rows, best] = self._am_step(s_pm, g, wg_conj, f_est, ah, best)
            f_est = f_target / hstar
        usable = hvalid[rows, best] & (info[rows, best - 1] > 0) & (g[:, 0] < self.nbins - 2)
        return best, f_est, usable

    def _with_harmonics(self, f1, amp, amp_h, hvalid, hbin, around, noise_var, have, harmonic_fine=None):
        """Combine the fundamental's estimate with its harmonics' (all in bins).

        Harmonic h measures h*f0 with the same absolute accuracy, so its estimate of f0 is h times
        finer: the Fisher information of f0 is the sum over harmonics of h^2 times each line's
        single-tone information (the harmonics are asymptotically orthogonal). Each harmonic line
        is located by Grandke's Hann interpolation (measured at about GRANDKE_VARIANCE_FACTOR x
        the Cramer-Rao variance); all estimates are weighted by inverse variance, and any that
        disagrees with the most precise one by more than 4 standard deviations is left out.
        """
        n = self.n
        # Grandke on the three bins around each harmonic's peak (around = bins hbin-2 .. hbin+2)
        peak_i = 1 + np.argmax(around[:, :, 1:4], axis=2)
        pick = np.stack([np.take_along_axis(around, (peak_i + d)[..., None], axis=2)[..., 0] for d in (0, -1, 1)])
        mags = np.sqrt(pick.astype(float))
        f_h = hbin[:, 1:] + (peak_i - 2) + grandke_hann(mags[0], mags[1], mags[2])
        hnum = self.harm[1:hbin.shape[1]]
        crb_unit = 12.0 * n / ((2 * np.pi) ** 2 * (n * n - 1.0))  # bins^2 times eta
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            eta_h = 2 * np.abs(amp_h[:, 1:]) ** 2 / noise_var[:, None]  # (2|a|)^2 / 2 / s^2
            var_h = GRANDKE_VARIANCE_FACTOR * crb_unit / (eta_h * hnum * hnum)
            var_1 = crb_unit / ((amp * amp / 2) / noise_var)
            # every estimate of f0 (column 0: the fundamental's fine estimate) and its variance
            est = np.concatenate([f1[:, None], f_h / hnum], axis=1)
            var = np.concatenate([var_1[:, None], var_h], axis=1)
            if harmonic_fine is not None:
                # the most informative harmonic went through the fine stage: near its bound
                col, f_fine_h, usable = harmonic_fine
                rows_u = np.flatnonzero(usable)
                est[rows_u, col[rows_u]] = f_fine_h[rows_u]
                var[rows_u, col[rows_u]] /= GRANDKE_VARIANCE_FACTOR
            valid = np.concatenate([have[:, None], hvalid[:, 1:] & have[:, None]], axis=1)
            valid &= np.isfinite(est) & np.isfinite(var) & (var > 0)
            # reference: the most precise estimate; keep those within 4 sigma of it (a stray
            # fundamental estimate is outvoted by its harmonics, a stray harmonic is dropped)
            v_masked = np.where(valid, var, np.inf)
            ref = np.argmin(v_masked, axis=1)
            rows = np.arange(est.shape[0])
            ref_est, ref_var = est[rows, ref], var[rows, ref]
            keep = valid & (np.abs(est - ref_est[:, None]) < 4 * np.sqrt(var + ref_var[:, None]))
            w = np.where(keep, 1 / var, 0.0)
            # running sums: trailing all-zero columns do not change a frame's result
            shift = (np.cumsum(w * np.where(keep, est - f1[:, None], 0.0), axis=1)[:, -1]
                     / np.cumsum(w, axis=1)[:, -1])
        return f1 + np.where(np.isfinite(shift), shift, 0.0)

    def _other_lines(self, power, spec, detect, k, fc, hvalid):
        """Strong lines that are not the tone's cancelled harmonics: (frequencies, amplitudes).

        Mains hum or a second oscillator leaks into a rectangular-window DTFT as 1/distance; the
        strongest OTHER_LINES such lines (local maxima of the Hann spectrum within
        OTHER_LINES_RANGE_DB of the tone) are located by Grandke's interpolation and their complex
        amplitudes read through the Hann kernel. Returns (F, L) arrays (amplitude 0 = no line),
        or None when no frame has such a line.
        """
        n = self.n
        nf = power.shape[0]
        rows = np.arange(nf)
        thr = np.maximum(detect, power[rows, k].astype(float) * 10 ** (-OTHER_LINES_RANGE_DB / 10))
        # threshold first (one pass, few survivors), then test only those for a local maximum
        above = power[:, 2:-2] > thr[:, None].astype(np.float32)
        # flat indices are far cheaper to collect than 2-D ones
        r, c = np.divmod(np.flatnonzero(above), above.shape[1])
        c = c + 2
        top = power[r, c]
        local = (top > power[r, c - 1]) & (top >= power[r, c + 1])
        r, c = r[local], c[local]
        # leave out the tone and the harmonics already cancelled
        h = np.rint(c / fc[r]).astype(int)
        n_h = hvalid.shape[1]
        cancelled = (h >= 1) & (h <= n_h) & (np.abs(c - h * fc[r]) <= 2.0)
        cancelled &= hvalid[r, _clamp(h - 1, 0, n_h - 1)] | (h == 1)
        r, c = r[~cancelled], c[~cancelled]
        if r.size == 0:
            return None
        # strongest first within each frame, then keep OTHER_LINES per frame
        order = np.lexsort((-power[r, c], r))
        r, c = r[order], c[order]
        rank = np.arange(r.size) - np.searchsorted(r, r)
        keep = rank < OTHER_LINES
        r, c, rank = r[keep], c[keep], rank[keep]
        n_l = int(rank.max()) + 1
        line_bin = np.full((nf, n_l), 2 * self.kmin)
        line_on = np.zeros((nf, n_l), dtype=bool)
        line_bin[r, rank] = c
        line_on[r, rank] = True
        mags = np.sqrt(power[rows[:, None, None], line_bin[:, :, None] + self.step3[None, None, :]].astype(float))
        f_line = line_bin + grandke_hann(mags[:, :, 1], mags[:, :, 0], mags[:, :, 2])
        amp = np.where(line_on, spec[rows[:, None], line_bin].astype(complex) / hann_kernel(f_line - line_bin, n), 0.0)
        return f_line, amp

    def _lines_leakage(self, lines, g, wg_conj):
        """Exact rectangular-window contribution of ``lines`` at the DTFT points ``g`` (F, 2):
        each line, its negative-frequency image, and its share of the subtracted frame mean."""
        out = np.zeros(g.shape, dtype=complex)
        if lines is None:
            return out
        f_line, amp = lines
        n = self.n
        n_l = f_line.shape[1]
        g0, g1 = g[:, :1], g[:, 1:]
        ker = dirichlet(np.concatenate([f_line, f_line - g0, f_line - g1, f_line + g0, f_line + g1], axis=1), n)
        k_f, k_m0, k_m1, k_p0, k_p1 = (ker[:, i * n_l:(i + 1) * n_l] for i in range(5))
        mu = np.cumsum(2 * np.real(amp * k_f) / n, axis=1)[:, -1]
        # running sums: a frame's result does not depend on the chunk's column count
        for j, (k_minus, k_plus) in enumerate(((k_m0, k_p0), (k_m1, k_p1))):
            terms = amp * k_minus + np.conj(amp) * np.conj(k_plus)
            out[:, j] = np.cumsum(terms, axis=1)[:, -1] - mu * wg_conj[:, j]
        return out

    def _grandke(self, power, k):
        """Grandke's offset at bin k from the Hann power spectrum (magnitudes of three bins)."""
        rows = np.arange(power.shape[0])
        idx = _clamp(k[:, None] + self.step3[None, :], 0, self.nbins - 1)
        mags = np.sqrt(power[rows[:, None], idx].astype(float))
        return grandke_hann(mags[:, 1], mags[:, 0], mags[:, 2])

    def _nearest_peak(self, searchable, detect):
        """Bin of the significant local maximum nearest ``near_hz`` in each frame."""
        p = searchable
        local = np.zeros(p.shape, dtype=bool)
        local[:, 1:-1] = (p[:, 1:-1] > p[:, :-2]) & (p[:, 1:-1] >= p[:, 2:])
        strongest = p.max(axis=1).astype(float)
        thr = np.maximum(detect, strongest * 10 ** (-SUBHARMONIC_RANGE_DB / 10))
        cand = local & (p > thr[:, None])
        dist = np.where(cand, np.abs(np.arange(p.shape[1])[None, :] - self.near_bin), np.inf)
        best = np.argmin(dist, axis=1)
        fallback = np.argmax(p, axis=1)
        return np.where(np.isfinite(dist[np.arange(p.shape[0]), best]), best, fallback)

    def _am_step(self, s_pm, g, wg_conj, f0_est, ah, target):
        """One closed-form AM step for harmonic ``target + 1`` on DTFTs at its ``centre +- 1/2``.

        ``g`` (F, 2) are the evaluation points, ``wg_conj`` = conj(dirichlet(g)) the kernel of a
        constant there, ``f0_est`` the current fundamental (bins), ``ah`` (F, H) the complex
        amplitudes of the harmonics (0 where none), ``target`` (F,) the column being estimated.
        The leakage of every other modelled component is removed first. Returns the target's
        frequency (bins) and complex amplitude.
        """
        n = self.n
        n_h = ah.shape[1]
        hf = f0_est[:, None] * self.harm[None, :n_h]  # (F, H)
        ah_c = np.conj(ah)
        others = np.arange(n_h)[None, :] != target[:, None]
        g0, g1 = g[:, :1], g[:, 1:]
        # every kernel value this step needs, in one call: at hf, hf + g, hf - g
        ker = dirichlet(np.concatenate([hf, hf + g0, hf + g1, hf - g0, hf - g1], axis=1), n)
        k_hf, k_p0, k_p1, k_m0, k_m1 = (ker[:, i * n_h:(i + 1) * n_h] for i in range(5))
        # mean of the modelled periodic part (the frame mean was subtracted before the DTFT);
        # the kernel at -nu is the conjugate of the kernel at nu
        mean_terms = 2 * np.real(ah * k_hf)
        # leakage at each evaluation point: images of all components, and the positive-frequency
        # components other than the target
        leak_terms = []
        for k_plus, k_minus in ((k_p0, k_m0), (k_p1, k_m1)):
            leak_terms.append(ah_c * np.conj(k_plus) + np.where(others, ah * k_minus, 0.0))
        # running (sequential) sums keep each frame's result independent of the chunk's column
        # count: trailing all-zero columns add exact zeros
        mu = np.cumsum(mean_terms, axis=1)[:, -1] / n
        leak0 = np.cumsum(leak_terms[0], axis=1)[:, -1]
        leak1 = np.cumsum(leak_terms[1], axis=1)[:, -1]
        p_plus = s_pm[:, 0] - leak0 + mu * wg_conj[:, 0]
        p_minus = s_pm[:, 1] - leak1 + mu * wg_conj[:, 1]
        with np.errstate(divide="ignore", invalid="ignore"):
            rho = -(p_plus / p_minus) * self.am_phase
            q = np.real((rho + 1) / (rho - 1))
            r = np.arctan(self.am_tan * q) * (n / np.pi)
        r = np.where(np.isfinite(r), _clamp(r, -0.5, 0.5), 0.0)
        f_new = (g[:, 0] - 0.5) + r
        # least-squares amplitude from both samples (their kernels have nearly opposite phase)
        w = dirichlet(f_new[:, None] - g, n)
        w_plus, w_minus = w[:, 0], w[:, 1]
        with np.errstate(divide="ignore", invalid="ignore"):
            a_new = (np.conj(w_plus) * p_plus + np.conj(w_minus) * p_minus) / (
                np.abs(w_plus) ** 2 + np.abs(w_minus) ** 2)
        a_new = np.where(np.isfinite(a_new), a_new, 0.0)
        return f_new, a_new


class FrameTracker:
    """Streaming frequency tracker; feed blocks of samples, get finished frames back.

    Frame ``i`` after the start (or after the last gap) covers samples ``start + i*hop_len`` ..
    ``+ frame_len - 1``; its ``t_s`` is the time of the frame centre, ``(first + (frame_len-1)/2)
    / fs``, counted in samples received since the first one at the nominal rate (missing samples
    in a gap are not counted). Results do not depend on how the signal is cut into blocks.

    Per frame: ``freq_hz`` (NaN with NO_TONE when no tone stands out of the noise at a false-alarm
    probability of about 1e-3 per frame), ``amp_dbfs`` (peak amplitude of the fundamental, dB re a
    full-scale sine of peak 1.0), ``snr_db`` and ``flags``.

    ``snr_db`` is the per-sample SNR of the fundamental, ``10 log10(A^2 / (2 s^2))``: tone power
    over the noise power in the whole band 0..fs/2, where ``s^2`` is the white-equivalent noise
    variance from the median of the frame's Hann power spectrum with the tone's harmonics left
    out. It is the ``eta`` of the Cramer-Rao bound (Kay 1993, ex. 3.14). The SNR within one
    Hann-window bin, as a spectrum display shows it, is ``snr_db + 10 log10(frame_len / 3)``.

    Parameters
    ----------
    sample_rate_hz : float
    settings : TrackerSettings, optional
    """

    def __init__(self, sample_rate_hz: float, settings: TrackerSettings | None = None):
        self.settings = settings if settings is not None else TrackerSettings()
        self.settings.check_rate(sample_rate_hz)
        self.sample_rate_hz = float(sample_rate_hz)
        nominal = int(round(self.settings.frame_ms * self.sample_rate_hz / 1000))
        self.frame_len = int(sfft.next_fast_len(nominal, real=True))
        self.hop_len = max(1, int(round(self.settings.hop_ms * self.sample_rate_hz / 1000)))
        self._plan = _Plan(self.sample_rate_hz, self.frame_len, self.settings)
        self._buf = np.zeros(0)
        self._buf_start = 0  # absolute index of _buf[0]
        self._next = 0  # absolute index of the next frame's first sample
        self._received = 0
        self._gap_pending = False
        self._clip_pending = False

    def push(self, block, gap_before: bool = False) -> FrameTable:
        """Add samples; return the frames this block completed.

        Parameters
        ----------
        block : array_like of float, 1-D, nominally in [-1, 1]
        gap_before : bool
            Samples were lost before this block: the partial frame is dropped (no frame spans a
            gap) and the next frame gets the GAP flag.
        """
        x = np.asarray(block, dtype=np.float64)
        if x.ndim != 1:
            raise InputError(f"tracker input: expected a 1-D block of samples, got shape {x.shape}")
        # max and min are cheap passes; NaN propagates through them and infinities show up in them
        top = float(x.max()) if x.size else 0.0
        bottom = float(x.min()) if x.size else 0.0
        if not (math.isfinite(top) and math.isfinite(bottom)):
            raise InputError("tracker input: block contains NaN or infinite samples")
        level = self.settings.clip_level
        if gap_before:
            self._clip_pending = False
            self._buf = np.zeros(0)
            self._buf_start = self._received
            self._next = self._received
            self._gap_pending = True
        if x.size == 0:
            return FrameTable.empty()
        if top >= level or bottom <= -level:
            self._clip_pending = True  # some buffered sample is clipped; find it when framing
        # no copy when nothing is buffered: the tail is copied below
        self._buf = np.concatenate([self._buf, x]) if self._buf.size else x
        self._received += x.size
        n, hop = self.frame_len, self.hop_len
        off = self._next - self._buf_start
        avail = self._buf.size - off
        if avail < n:
            if self._buf is x:
                self._buf = x.copy()  # the caller may reuse its block buffer
            return FrameTable.empty()
        count = (avail - n) // hop + 1
        used = self._buf[off:off + (count - 1) * hop + n]
        windows = sliding_window_view(used, n)[::hop]
        # frames holding a clipped sample, from one pass over the samples (not one per frame)
        if self._clip_pending:
            tail = self._buf[off:]  # everything still buffered, not only what these frames use
            hits = np.flatnonzero((tail >= level) | (tail <= -level))
            # the clipped samples may still be buffered for the next frames
            self._clip_pending = hits.size > 0 and hits[-1] >= count * hop
        else:
            hits = np.zeros(0, dtype=np.int64)
        starts_rel = np.arange(count) * hop
        clipped = np.searchsorted(hits, starts_rel) < np.searchsorted(hits, starts_rel + n)
        tables = []
        for i in range(0, count, CHUNK_FRAMES):
            chunk = windows[i:i + CHUNK_FRAMES]
            freq, amp, snr, flg = self._plan.analyse(chunk, clipped[i:i + CHUNK_FRAMES])
            starts = self._next + (np.arange(i, i + chunk.shape[0])) * hop
            t_s = (starts + (n - 1) / 2) / self.sample_rate_hz
            tables.append(FrameTable(t_s, freq, amp, snr, flg))
        if self._gap_pending:
            tables[0].flags[0] |= fl.GAP
            self._gap_pending = False
        self._next += count * hop
        drop = self._next - self._buf_start
        self._buf = self._buf[drop:].copy()
        self._buf_start = self._next
        return FrameTable.concat(tables)

    def finish(self) -> FrameTable:
        """End of input: drop the trailing partial frame and reset; returns the frames still due.

        Frames are emitted as soon as they are complete, so this returns an empty table; the
        trailing samples (fewer than a frame) are never analysed. The tracker can be reused for a
        new signal afterwards (times restart at zero).
        """
        self._buf = np.zeros(0)
        self._buf_start = self._next = self._received = 0
        self._gap_pending = False
        return FrameTable.empty()


def track_array(x, sample_rate_hz: float, settings: TrackerSettings | None = None) -> FrameTable:
    """Track a whole signal at once; identical to pushing it block by block into a :class:`FrameTracker`.

    Parameters
    ----------
    x : array_like of float, 1-D, nominally in [-1, 1]
    sample_rate_hz : float
    settings : TrackerSettings, optional

    Returns
    -------
    FrameTable
    """
    tracker = FrameTracker(sample_rate_hz, settings)
    return FrameTable.concat([tracker.push(x), tracker.finish()])
