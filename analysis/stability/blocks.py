"""Block means of a gridded record, their regressors, and their exact noise covariance.

The settling fit works on means over blocks of m grid steps. Blocks make the fit cost the same
at any record length (at most :data:`MAX_BLOCKS` of them), and blocks at least four tracker
frames long are nearly free of the short-range correlation the tracker's overlapping frames
add, so white FM plus random-walk FM then describes them at every lag (without a known frame
length, 16 samples). With m = 1 a block is a sample. A block is the mean of its usable samples; blocks with none are left out.

Covariance (derived here from the model of :mod:`.gls`; with m = 1 it is exactly that one).
Take the first block mean and then the differences of consecutive block means. The random walk
enters block j, starting at grid step s_j, as r(s_j) + sum_u F_ju e(s_j + u), u = 1..m-1,
where F_ju is the fraction of the block's usable samples at offsets >= u. A difference
D_l = Y_l - Y_{l-1} therefore holds the increments inside block l-1 with weights G = 1 - F,
every increment between the blocks with weight 1 (s_l - s_{l-1} - m + 1 of them), and those
inside block l with weights F. Increments are independent, so with c_j usable samples in
block j:

    var D_l / s_r^2 = sum G_{l-1}^2 + (s_l - s_{l-1} - m + 1) + sum F_l^2
    cov(D_{l-1}, D_l) / s_r^2 = sum F_{l-1} G_{l-1}
    var D_l / s_w^2 = 1/c_{l-1} + 1/c_l,   cov(D_{l-1}, D_l) / s_w^2 = -1/c_{l-1}

and the first block mean has var = s_r^2 (1 + sum F_0^2) + s_w^2 / c_0. Nothing reaches two
blocks apart: the covariance is tridiagonal. For a full block sum F^2 = (m-1)(2m-1)/(6m) and
sum F G = (m^2 - 1)/(6m), so var D / s_r^2 = (2m^2 + 1)/(3m), twice the Allan variance of a
random walk at m samples, as it must be.
"""

from __future__ import annotations

import math

import numpy as np

from coilshift.analysis.stability.grid import UniformSeries

MAX_BLOCKS = 20_000  # the fit's cost is bounded by this many block means
FRAMES_PER_BLOCK = 4.0  # blocks span at least this many tracker frames when the frame is known
#: without the frame length (a bare CSV): samples per block, enough for coilshift's default
#: tracker (85 ms frames every 20 ms, so four frames span 17 samples: close to this)
UNKNOWN_FRAME_BLOCK = 16
MIN_BLOCKS_UNKNOWN_FRAME = 64


def block_length(n_grid: int, tau0_s: float, frame_s: float | None) -> int:
    """Grid steps per block: at least four tracker frames (when the frame is not known,
    UNKNOWN_FRAME_BLOCK samples unless that leaves fewer than 64 blocks), at most MAX_BLOCKS
    blocks."""
    m = math.ceil(n_grid / MAX_BLOCKS)
    if frame_s is not None and frame_s > 0:
        m = max(m, math.ceil(FRAMES_PER_BLOCK * frame_s / tau0_s - 1e-9))
    else:  # ... but a short record keeps at least MIN_BLOCKS_UNKNOWN_FRAME blocks
        m = max(m, min(UNKNOWN_FRAME_BLOCK, n_grid // MIN_BLOCKS_UNKNOWN_FRAME))
    return max(int(m), 1)


class Blocks:
    """Block means of the usable samples of ``series``, blocks of ``m`` grid steps.

    Blocks start at the first usable sample. Attributes: ``m``, ``n`` (blocks kept),
    ``start`` (grid step of each block's start, relative to the first usable sample),
    ``count`` (usable samples per block), ``mean_hz`` (block means), ``t_s`` (mean time of each
    block's usable samples, from the first usable sample), ``tau0_s``, ``span_s`` (time from the
    first to the last usable sample), ``t_first_s`` (that first sample's time on the log's clock).
    """

    def __init__(self, series: UniformSeries, m: int):
        y = series.freq_hz
        fin = np.isfinite(y)
        i0 = int(np.argmax(fin))
        last = int(y.size - 1 - np.argmax(fin[::-1]))
        n_all = math.ceil((last - i0 + 1) / m)
        obs = np.zeros(n_all * m, bool)
        obs[: last - i0 + 1] = fin[i0:last + 1]
        vals = np.zeros(n_all * m)
        vals[: last - i0 + 1] = np.where(fin[i0:last + 1], y[i0:last + 1], 0.0)
        obs, vals = obs.reshape(n_all, m), vals.reshape(n_all, m)
        cnt = obs.sum(axis=1)
        keep = cnt > 0
        self.m, self.tau0_s = int(m), float(series.tau0_s)
        self.obs = obs[keep].astype(float)
        self.count = cnt[keep].astype(float)
        self.start = np.flatnonzero(keep).astype(np.int64) * m
        self.n = int(self.count.size)
        self.mean_hz = vals[keep].sum(axis=1) / self.count
        self._offsets = np.arange(m, dtype=float)
        self._partial = np.flatnonzero(self.count < m)
        self.t_s = self.tau0_s * (self.start + self.obs @ self._offsets / self.count)
        self.span_s = (last - i0) * self.tau0_s
        self.t_first_s = series.t0_s + i0 * series.tau0_s
        self._i0, self._last, self._keep = i0, last, keep
        self._walk_sums()

    def _walk_sums(self) -> None:
        # F_u = fraction of usable samples at offsets >= u, u = 1..m-1 (see the module docstring)
        if self.m == 1:
            self.sf2 = self.sg2 = self.sfg = np.zeros(self.n)
            return
        before = np.cumsum(self.obs, axis=1)[:, :-1]  # usable samples at offsets <= u - 1
        f = 1.0 - before / self.count[:, None]
        g = 1.0 - f
        self.sf2, self.sg2, self.sfg = (f * f).sum(1), (g * g).sum(1), (f * g).sum(1)

    def means(self, values) -> np.ndarray:
        """Block means of another quantity given on the same grid (e.g. temperature), over the
        blocks' usable samples; NaN values there make the block mean NaN."""
        v = np.asarray(values, float)
        seg = np.zeros(self._keep.size * self.m)
        seg[: self._last - self._i0 + 1] = v[self._i0:self._last + 1]
        seg = seg.reshape(-1, self.m)[self._keep]
        return (np.where(self.obs > 0, seg, 0.0).sum(axis=1)
                + np.where((self.obs > 0) & ~np.isfinite(seg), np.nan, 0.0).sum(axis=1)) / self.count

    def covariance_parts(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Tridiagonal of the first-mean-then-differences vector, split by noise:
        (white diagonal, white off-diagonal, walk diagonal, walk off-diagonal), per unit
        s_w^2 (white variance per sample) and s_r^2 (random-walk step variance); the
        off-diagonals have n - 1 entries."""
        inv_c = 1.0 / self.count
        wd = np.empty(self.n)
        wd[0] = inv_c[0]
        wd[1:] = inv_c[:-1] + inv_c[1:]
        wo = -inv_c[:-1]
        rd = np.empty(self.n)
        rd[0] = 1.0 + self.sf2[0]
        rd[1:] = self.sg2[:-1] + (np.diff(self.start) - self.m + 1) + self.sf2[1:]
        ro = self.sfg[:-1].copy()
        return wd, wo, rd, ro

    def exp_means(self, tau_s: float) -> tuple[np.ndarray, np.ndarray]:
        """Block means of exp(-t/tau) over the usable samples (t from the first usable sample),
        and of its derivative with respect to ln(tau), (t/tau) exp(-t/tau)."""
        q = math.exp(-self.tau0_s / tau_s)
        pw = q ** self._offsets
        # a full block's sums are the same for every block; only partial blocks need their own
        s = np.full(self.n, pw.sum())
        s1 = np.full(self.n, float(self._offsets @ pw))
        if self._partial.size:
            s[self._partial] = self.obs[self._partial] @ pw
            s1[self._partial] = self.obs[self._partial] @ (self._offsets * pw)
        ts = self.start * self.tau0_s
        base = np.exp(-ts / tau_s) / self.count
        return base * s, base * ((ts / tau_s) * s + (self.tau0_s / tau_s) * s1)
