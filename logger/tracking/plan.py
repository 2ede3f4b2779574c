"""Everything the per-frame stages need that depends only on (sample rate, frame length, settings).

A :class:`Plan` is built once per :class:`~coilshift.logger.tracking.tracker.FrameTracker`: the
window, the searched bins, detection thresholds, the subharmonic hypotheses, the hum masks and the
phasor tables of the blocked DTFT. The stages read it and never change it.
"""

from __future__ import annotations

import math

import numpy as np

from coilshift.logger.tracking.kernels import clamp, os_cfar_factor
from coilshift.logger.tracking.settings import (
    DTFT_BLOCK, FALSE_ALARM_PER_FRAME, HUM_HARMONICS, LEAKAGE_HARMONICS, LOCAL_CELLS, LOCAL_GUARD,
    MAINS_HZ, MAX_HARMONIC_SEARCH, MIN_CYCLES, NOISE_BINS, SELECT_FOLD_HARMONICS, TOP_GUARD_BINS,
    TrackerSettings)


class Plan:
    """Precomputed tables for frames of ``n`` samples at ``fs`` Hz analysed with ``settings``.

    Parameters
    ----------
    fs : float
        Sample rate (Hz).
    n : int
        Frame length (samples).
    settings : TrackerSettings
    """

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
        self._search_range()
        self._subharmonic_hypotheses()
        self._hum_masks()
        self.near_bin = None if settings.near_hz is None else settings.near_hz / self.df
        self._dtft_tables()

    def _search_range(self) -> None:
        """Searched bins, the noise-floor bins and both detection thresholds."""
        settings, nbins = self.settings, self.nbins
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

    def _subharmonic_hypotheses(self) -> None:
        """Fundamentals the strongest line ``fp`` may belong to: ``f = (c N + s fp) / m``.

        ``m`` = 1..MAX_HARMONIC_SEARCH is the harmonic number ``fp`` would have; ``c = 0`` (``fp``
        is harmonic m as it is) or ``c = 1..m/2`` with ``s = +-1`` (harmonic m of ``f`` lies
        above fs/2 and folds onto ``fp``). Column 0 is ``fp`` itself. Each hypothesis is
        supported by its harmonics h = 1..m-1, and needs a line of its waveform besides h = 1 and
        ``fp`` among h = 2..m-1 and m+1..2m (flattened: ``sup_hyp``, ``sup_h``; ``sup_above``
        marks h > m).
        """
        ms, cs, ss = [1], [0], [1]
        for m in range(2, MAX_HARMONIC_SEARCH + 1):
            for c in range(0, m // 2 + 1):
                for sign in ((1,) if c == 0 else (1, -1)):
                    ms.append(m)
                    cs.append(c)
                    ss.append(sign)
        self.hyp_m = np.array(ms, dtype=float)
        self.hyp_c = np.array(cs, dtype=float)
        self.hyp_s = np.array(ss, dtype=float)
        self.hyp_need = np.array([math.ceil(m / 2) for m in ms])
        # preference among accepted hypotheses: the highest harmonic number (the lowest
        # fundamental that explains fp), then fp itself below fs/2, then the fewest folds
        self.hyp_rank = self.hyp_m * 100 - self.hyp_c * 2 - (self.hyp_s < 0)
        hyp, hh = [], []
        for i, m in enumerate(ms):
            for h in [*range(1, m), *(range(m + 1, 2 * m + 1) if m > 1 else ())]:
                hyp.append(i)
                hh.append(h)
        self.sup_hyp = np.array(hyp)
        self.sup_h = np.array(hh, dtype=float)
        self.sup_above = self.sup_h > self.hyp_m[self.sup_hyp]
        self.sup_first = np.flatnonzero(self.sup_h == 1)  # the h = 1 entry of hypotheses 1..
        self.fold_k = np.arange(1, SELECT_FOLD_HARMONICS + 1, dtype=float)

    def _hum_masks(self) -> None:
        """Bins around k * mains, excluded when the mains line itself shows (no band given).

        ``hum`` holds one (probe bins, flank bins, excluded-bin mask, local-test cells) per mains
        frequency that lies inside the spectrum.
        """
        self.hum = []
        if self.settings.band_hz is not None:
            return
        nbins = self.nbins
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
            cells = clamp(c + self.local_offsets, 2, nbins - 1)
            self.hum.append((np.arange(c - 1, c + 2), np.array([c - 2, c + 2]), mask, cells))

    def _dtft_tables(self) -> None:
        """Phasor tables of the fine stage's blocked DTFT and the harmonic numbers it models."""
        n = self.n
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
