"""The detector's statistic: the frames' short moving average minus a straight baseline fitted to
the quiet frames before it, in units of its own noise.

For frame ``j`` (frame spacing ``hop``)::

    d_j = mean(y over the usable frames j-w+1 .. j) - line_j(tc_j)

where ``line_j`` is the least-squares straight line through the last ``L`` quiet usable frames
that end ``G`` frames before the average's window (``G``: a guard, so the rising edge of an event
does not pull the baseline after it), and ``tc_j`` the mean time of the averaged frames. A
moving average of ``w`` frames is the matched filter of a box of that length (North 1943, RCA
Lab. Rep. PTR-6C; Turin 1960, *IRE Trans. Inf. Theory* 6, 311-329): the statistic's gain on an
event of about that length against white frame noise. The weights of ``d_j`` sum to zero and
remove a linear drift exactly, so on quiet baseline ``d`` is stationary (white, correlated,
random-walk and drifting frame noise alike); its standard deviation and lag-one correlation are
measured, not assumed (:func:`noise_of_statistic`).

Arrays are processed in chunks with their own time and frequency origins so that the running sums
behind the fits keep their precision on long recordings.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

CHUNK = 16384  # frames per chunk of the running sums


@dataclass(frozen=True)
class Windows:
    """The statistic's windows in frames: ``smooth`` (w), ``gap`` (G), ``fit`` (L)."""

    smooth: int
    gap: int
    fit: int

    @classmethod
    def from_seconds(cls, hop_s: float, smooth_s: float, gap_s: float, fit_s: float) -> "Windows":
        return cls(max(int(round(smooth_s / hop_s)), 1), max(int(round(gap_s / hop_s)), 0),
                   max(int(round(fit_s / hop_s)), 3))


@dataclass(frozen=True)
class Lines:
    """Baseline lines per frame, ``value(t) = y_at + slope * (t - t_at)`` (absolute s and Hz)."""

    t_at: np.ndarray
    y_at: np.ndarray
    slope: np.ndarray

    def at(self, t_s: np.ndarray) -> np.ndarray:
        return self.y_at + self.slope * (t_s - self.t_at)


def smoothed(t_s: np.ndarray, y_hz: np.ndarray, usable: np.ndarray, j0: int, j1: int,
             w: int) -> tuple[np.ndarray, np.ndarray]:
    """Moving average of the usable frames ``j-w+1 .. j`` and its mean time, for ``j0 <= j < j1``
    (NaN where the window has no usable frame or starts before the array)."""
    a0 = max(j0 - w + 1, 0)
    t = t_s[a0:j1]
    ok = usable[a0:j1]
    t_ref, y_ref = float(t[0]), _ref(y_hz[a0:j1], ok)
    m = ok.astype(float)
    c0 = np.concatenate([[0.0], np.cumsum(m)])
    cy = np.concatenate([[0.0], np.cumsum(np.where(ok, y_hz[a0:j1] - y_ref, 0.0))])
    ct = np.concatenate([[0.0], np.cumsum(m * (t - t_ref))])
    j = np.arange(j0, j1) - a0
    lo = j - w + 1
    valid = lo >= 0
    lo = np.maximum(lo, 0)
    n = c0[j + 1] - c0[lo]
    with np.errstate(invalid="ignore", divide="ignore"):
        ma = np.where(valid & (n > 0), (cy[j + 1] - cy[lo]) / n + y_ref, math.nan)
        tc = np.where(valid & (n > 0), (ct[j + 1] - ct[lo]) / n + t_ref, math.nan)
    return ma, tc


def trailing_lines(t_s: np.ndarray, y_hz: np.ndarray, fitmask: np.ndarray, j0: int, j1: int,
                   win: Windows) -> tuple[Lines, np.ndarray]:
    """Least-squares lines through the last ``win.fit`` frames of ``fitmask`` ending at frame
    ``j - win.smooth - win.gap`` for ``j0 <= j < j1``; and where there were enough such frames."""
    out_t, out_y, out_s, out_ok = [], [], [], []
    for c0 in range(j0, j1, CHUNK):
        c1 = min(c0 + CHUNK, j1)
        lt, ly, ls, ok = _lines_chunk(t_s, y_hz, fitmask, c0, c1, win)
        out_t.append(lt), out_y.append(ly), out_s.append(ls), out_ok.append(ok)
    if not out_t:
        e = np.zeros(0)
        return Lines(e, e, e), np.zeros(0, bool)
    return Lines(np.concatenate(out_t), np.concatenate(out_y), np.concatenate(out_s)), np.concatenate(out_ok)


def _ref(y: np.ndarray, ok: np.ndarray) -> float:
    good = y[ok]
    return float(good[0]) if good.size else 0.0


def _lines_chunk(t_s, y_hz, fitmask, j0, j1, win: Windows):
    """One chunk of :func:`trailing_lines`: the window of each frame found through the running
    count of fit frames, then sums over it from running sums in the chunk's own origins."""
    b_end = np.arange(j0, j1) - win.smooth - win.gap  # last frame of each window (inclusive)
    b_hi = max(int(b_end[-1]) + 1, 0) if b_end.size else 0
    cq_all = np.cumsum(fitmask[:b_hi])
    need = cq_all[np.clip(b_end, 0, None)] if b_hi else np.zeros(b_end.size, int)
    need = np.where(b_end >= 0, need, 0)
    # first frame whose inclusion gives `fit` frames: count before it = need - fit
    a_start = np.searchsorted(cq_all, need - win.fit, side="right") if b_hi else np.zeros(b_end.size, int)
    ok = (b_end >= 0) & (need >= win.fit)
    if not np.any(ok):
        nan = np.full(b_end.size, math.nan)
        return nan, nan, nan, ok
    lo = int(a_start[ok].min())
    hi = int(b_end[ok].max()) + 1
    t = t_s[lo:hi]
    m = fitmask[lo:hi]
    t_ref, y_ref = float(t[0]), _ref(y_hz[lo:hi], m)
    tt = np.where(m, t - t_ref, 0.0)
    yy = np.where(m, y_hz[lo:hi] - y_ref, 0.0)
    sums = [np.concatenate([[0.0], np.cumsum(v)]) for v in (m.astype(float), tt, tt * tt, yy, tt * yy)]
    a = np.clip(a_start - lo, 0, hi - lo)
    b = np.clip(b_end + 1 - lo, 0, hi - lo)
    s0, s1, s2, sy, sty = (s[b] - s[a] for s in sums)
    with np.errstate(invalid="ignore", divide="ignore"):
        mt = s1 / s0
        my = sy / s0
        stt = s2 - s0 * mt * mt
        slope = (sty - s0 * mt * my) / stt
    slope = np.where(ok & (stt > 0), slope, 0.0)
    return np.where(ok, mt + t_ref, math.nan), np.where(ok, my + y_ref, math.nan), slope, ok


def deviation(t_s: np.ndarray, y_hz: np.ndarray, usable: np.ndarray, fitmask: np.ndarray, j0: int, j1: int,
              win: Windows) -> tuple[np.ndarray, Lines, np.ndarray]:
    """``d_j`` for ``j0 <= j < j1`` (NaN where undefined), the baseline lines, and the moving-average times."""
    ma, tc = smoothed(t_s, y_hz, usable, j0, j1, win.smooth)
    lines, ok = trailing_lines(t_s, y_hz, fitmask, j0, j1, win)
    d = np.where(ok, ma - lines.at(np.where(ok, tc, 0.0)), math.nan)
    return d, lines, tc


@dataclass(frozen=True)
class NoiseLevel:
    """The statistic's noise on quiet baseline: standard deviation (Hz), lag-one correlation, and
    the effective number of independent values it was measured from (AR(1) approximation)."""

    sigma_hz: float
    rho1: float
    n_eff: float

    def sigma_for_threshold(self) -> float:
        """The standard deviation used for the threshold: the estimate raised to its one-sided 95 %
        upper limit, ``s (1 + 1.645 / sqrt(2 n_eff))`` (the large-sample standard error of a
        standard deviation, ``s / sqrt(2 n)``; e.g. Kendall & Stuart, *Advanced Theory of
        Statistics* vol. 1, 10.8), so a short learning stretch errs towards fewer false events."""
        return self.sigma_hz * (1.0 + 1.645 / math.sqrt(2.0 * max(self.n_eff, 1.0)))


def _effective_count(d: np.ndarray, fin: np.ndarray) -> float:
    """Effective number of independent values behind the variance of ``d``:
    ``n / (1 + 2 sum_k rho_k^2)`` (Bartlett 1946, *JRSS Suppl.* 8, 27-41; Priestley, *Spectral
    Analysis and Time Series*, 1981, 5.3.3), the sum taken to the first lag where ``rho_k`` falls
    below 0.05 (autocorrelation by FFT, gaps as zeros)."""
    x = np.where(fin, d - np.mean(d[fin]), 0.0)
    n = int(np.sum(fin))
    size = 1 << int(np.ceil(np.log2(2 * x.size)))
    f = np.fft.rfft(x, size)
    acf = np.fft.irfft(f * np.conj(f), size)[: min(x.size, 20000)]
    m = np.fft.irfft(np.abs(np.fft.rfft(fin.astype(float), size)) ** 2, size)[: acf.size]
    with np.errstate(invalid="ignore", divide="ignore"):
        rho = np.where(m > 0.5, acf / np.maximum(m, 1.0), 0.0) / (acf[0] / max(m[0], 1.0))
    low = np.flatnonzero(rho[1:] < 0.05)
    k = int(low[0]) + 1 if low.size else rho.size
    return n / (1.0 + 2.0 * float(np.sum(rho[1:k] ** 2)))


def noise_of_statistic(d: np.ndarray, robust: bool = True) -> NoiseLevel:
    """The noise of quiet values of ``d`` (NaN are skipped; consecutive finite pairs give rho1).

    ``robust``: the standard deviation from the median absolute deviation (x 1.4826, exact for a
    normal sample; Hampel 1974, *JASA* 69, 383-393), so events inside the stretch move it
    little; else the root mean square. The effective count of independent values is
    :func:`_effective_count`'s (for the MAD, with its asymptotic efficiency 0.37 for a normal
    sample, Hampel 1974).
    """
    d = np.asarray(d, float)
    fin = np.isfinite(d)
    x = d[fin]
    if x.size < 10:
        return NoiseLevel(math.nan, math.nan, 0.0)
    if robust:
        sigma = 1.4826 * float(np.median(np.abs(x - np.median(x))))
    else:
        sigma = float(np.sqrt(np.mean(x * x)))
    pair = fin[1:] & fin[:-1]
    a, b = d[1:][pair], d[:-1][pair]
    rho = float(np.corrcoef(a, b)[0, 1]) if a.size > 10 and np.std(a) > 0 and np.std(b) > 0 else 0.0
    rho = min(max(rho, 0.0), 0.9999)
    n_eff = _effective_count(d, fin) * (0.37 if robust else 1.0)
    return NoiseLevel(sigma, rho, n_eff)
