"""The frames' variogram, and the variance of any zero-sum combination of frames from it.

``D(k) = E[(y_{i+k} - y_i)^2]`` (twice the semivariogram) is defined for any process with
stationary increments: white, correlated, random-walk and drifting frequency noise alike. For
weights ``a`` with ``sum a = 0`` the variance of ``sum a_i y_i`` is ``-1/2 sum_ij a_i a_j
D(|i - j|)`` (Matheron 1963, *Econ. Geol.* 58, 1246-1266; Cressie, *Statistics for Spatial
Data*, 1993, section 2.3.1). An event's peak shift minus its baselines is such a combination, so
its uncertainty comes from the measured variogram with no noise model assumed.

``D`` is estimated at geometrically spaced lags from the pairs of quiet usable frames (the
method-of-moments estimator) and smoothed by a valid model (:meth:`Variogram.model`).
"""

from __future__ import annotations

import numpy as np

#: longest lag estimated (s); longer ones are extrapolated
MAX_LAG_S = 30.0


def lag_set(hop_s: float, max_lag_s: float = MAX_LAG_S) -> np.ndarray:
    """Lags (frames) at which ``D`` is estimated: every lag to 8, then about 5 per factor of 2."""
    top = max(int(round(max_lag_s / hop_s)), 2)
    return np.unique(np.concatenate([np.arange(1, min(top, 8) + 1),
                                     np.round(np.geomspace(8, max(top, 8), 36)).astype(int)]))


class Variogram:
    """Running sums of squared frame differences at :func:`lag_set` lags."""

    def __init__(self, lags: np.ndarray):
        self.lags = np.asarray(lags, int)
        self.sums = np.zeros(self.lags.size)
        self.counts = np.zeros(self.lags.size)
        self._fit = None

    def add(self, y_hz: np.ndarray, ok: np.ndarray, first: int = 0, stop: int | None = None) -> None:
        """Add the pairs ``(i, i + k)`` of ``ok`` frames with ``first <= i < stop`` (default: all).

        The frames' least-squares straight line (by frame index) is removed first: the
        combinations this variogram serves cancel a linear drift, which would otherwise add
        ``(drift x lag)^2`` to ``D`` and swamp the noise at long lags."""
        y = np.asarray(y_hz, float)
        n = y.size
        stop = n if stop is None else stop
        self._fit = None
        idx = np.flatnonzero(ok)
        if idx.size >= 3:
            x = idx - idx.mean()
            yy = y[idx] - y[idx].mean()
            slope = float(np.einsum("i,i->", x, yy) / np.einsum("i,i->", x, x)) if np.any(x) else 0.0
            y = y - y[idx].mean() - slope * (np.arange(n) - idx.mean())
        elif idx.size:
            y = y - float(np.mean(y[idx]))
        for m, k in enumerate(self.lags):
            hi = min(stop, n - k)
            if hi <= first:
                continue
            a, b = slice(first, hi), slice(first + k, hi + k)
            both = ok[a] & ok[b]
            dd = np.where(both, y[b] - y[a], 0.0)
            self.sums[m] += float(np.einsum("i,i->", dd, dd))  # not BLAS: its threads contend on small vectors
            self.counts[m] += int(np.count_nonzero(both))

    def known(self) -> bool:
        return bool(np.sum(self.counts > 0) >= 2)

    def at(self, lag_frames) -> np.ndarray:
        """``D`` (Hz^2) at lags in frames (0 gives 0), from the fitted model (:meth:`model`)."""
        k = np.abs(np.asarray(lag_frames, float))
        c, tau = self.model()
        out = c[0] + c[1] * -np.expm1(-k / tau) + c[2] * k
        return np.where(k > 0, out, 0.0)

    def model(self) -> tuple[np.ndarray, float]:
        """The estimate smoothed by a valid variogram model, fitted once per change of the sums::

            D(k) = c0 + c1 (1 - exp(-k / tau)) + c2 k        (k >= 1; D(0) = 0)

        a nugget (white frames), an exponential part (AR(1)-like correlated noise) and a linear
        part (random-walk FM), each a valid variogram (Cressie 1993, 2.3.1 and 2.6.1); non-negative
        coefficients (``scipy.optimize.nnls``) keep their sum valid, so every variance from it is
        >= 0. The raw estimates at single lags scatter by a few per cent, and a combination
        spread over many frames (a mean minus two others) would amplify that scatter hundreds of
        times; the model pools every lag. ``tau`` is chosen on a grid by least squares weighted
        by each lag's pair count over its squared value (relative errors)."""
        if self._fit is not None:
            return self._fit
        from scipy.optimize import nnls

        have = self.counts > 0
        k = self.lags[have].astype(float)
        d = self.sums[have] / np.maximum(self.counts[have], 1)
        if k.size < 2 or not np.any(d > 0):
            self._fit = (np.array([float(d.mean()) if d.size else 0.0, 0.0, 0.0]), 1.0)
            return self._fit
        w = np.sqrt(self.counts[have]) / np.maximum(d, 1e-300)
        best = None
        for tau in np.geomspace(0.5, max(k.max(), 1.0), 24):
            x = np.column_stack([np.ones_like(k), -np.expm1(-k / tau), k])
            coef, resid = nnls(x * w[:, None], d * w)
            if best is None or resid < best[0]:
                best = (resid, coef, float(tau))
        self._fit = (best[1], best[2])
        return self._fit

    def raw(self, lag_frames) -> np.ndarray:
        """The unsmoothed estimate interpolated between its lags (0 gives 0)."""
        k = np.abs(np.asarray(lag_frames, float))
        have = self.counts > 0
        lags = np.concatenate([[0.0], self.lags[have].astype(float)])
        vals = np.concatenate([[0.0], self.sums[have] / self.counts[have]])
        out = np.interp(k, lags, vals)
        if lags.size >= 3:
            slope = (vals[-1] - vals[-2]) / (lags[-1] - lags[-2])
            beyond = k > lags[-1]
            out = np.where(beyond, vals[-1] + max(slope, 0.0) * (k - lags[-1]), out)
        return out

    def variance(self, index: np.ndarray, weights: np.ndarray) -> float:
        """Variance of ``sum weights * y[index]`` for weights that sum to zero.

        ``sum_ij a_i a_j D(|i-j|) = sum_k D(k) R(k)`` with ``R`` the autocorrelation of the weights
        laid on the frame grid (by FFT), so the cost grows with the span, not its square.
        """
        idx = np.asarray(index, int)
        a = np.asarray(weights, float)
        if idx.size == 0:
            return 0.0
        lo = int(idx.min())
        dense = np.bincount(idx - lo, weights=a)
        size = 1 << int(np.ceil(np.log2(2 * dense.size)))
        f = np.fft.rfft(dense, size)
        r = np.fft.irfft(f * np.conj(f), size)[: dense.size]
        k = np.arange(dense.size)
        total = float(np.einsum("i,i->", self.at(k[1:]), r[1:])) * 2.0  # D(0) = 0; each lag k > 0 appears twice
        return max(-0.5 * total, 0.0)
