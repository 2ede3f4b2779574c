"""Generalised least squares under an oscillator's own noise: white FM plus random-walk FM.

The frequency samples of a free-running oscillator are not independent: besides white
frequency noise (independent from sample to sample) their level wanders as a random walk
(random-walk FM). A least-squares fit that treats the samples as independent then states
errors far too small for anything slow, such as a drift rate or a warm-up time constant. The
fix is to weight the fit by the inverse of the noise covariance (Aitken's generalised least
squares); this module builds that covariance and applies its inverse square root to a model's
columns in O(n) time and memory, gaps included.

The noise model on the sample grid (spacing tau0), for observed samples at grid steps
k_0 < k_1 < ... :

    y_j = (model)_j + r(k_j) + w_j,   w_j ~ N(0, s_w^2) independent,
    r(k) - r(k - 1) ~ N(0, s_r^2) independent,   var r(k_0) = s_r^2

(the walk is measured from one step before the first sample). Its covariance is
s_w^2 delta_ij + s_r^2 (min(k_i, k_j) - k_0 + 1), dense. Taking the first value and then the
differences of consecutive values (a linear map of determinant one, so the least-squares
solution and the likelihood are unchanged) gives independent walk increments over disjoint
stretches and white terms shared only by neighbours, so the covariance of the differenced
vector is tridiagonal, exactly, with any gaps; :mod:`.blocks` gives its entries for block
means (for single samples: var d_j = s_r^2 (k_j - k_{j-1}) + 2 s_w^2, cov = -s_w^2). Its
banded Cholesky factor U (U'U = cov) whitens: z = U'^{-1} d has unit covariance.

References
----------
A. C. Aitken, "On least squares and linear combination of observations", Proc. Royal Society
of Edinburgh 55 (1935): generalised least squares.
A. C. Harvey, *Forecasting, Structural Time Series Models and the Kalman Filter*, Cambridge
University Press (1989), section 2.3: the random walk plus noise (local level) model, whose
first difference is a first-order moving average.
"""

from __future__ import annotations

import math

import numpy as np


class Whitener:
    """Whitening for white FM plus random-walk FM noise, from a tridiagonal covariance.

    Parameters
    ----------
    parts : (white diagonal, white off-diagonal, walk diagonal, walk off-diagonal) of the
        differenced vector per unit variance (:meth:`.blocks.Blocks.covariance_parts`)
    white_var : s_w^2, variance of the white FM per sample (Hz^2)
    walk_var : s_r^2, variance of one random-walk step (Hz^2)

    Notes
    -----
    ``whiten(v)`` returns U'^{-1} D v for values ``v`` (a vector, or one column per
    regressor), D the first-value-then-differences map; for a model X beta the generalised
    least-squares chi-squared is |whiten(y) - whiten(X) beta|^2. ``logdet`` is ln det of the
    covariance (that of D v equals that of v).
    """

    def __init__(self, parts, white_var: float, walk_var: float):
        from scipy.linalg import cholesky_banded

        wd, wo, rd, ro = parts
        sw2, sr2 = float(white_var), float(walk_var)
        if not (sw2 >= 0 and sr2 >= 0 and sw2 + sr2 > 0 and np.isfinite(sw2 + sr2)):
            raise ValueError(f"noise variances must be non-negative and not both zero (got {sw2}, {sr2})")
        # work in units of the larger variance so the factor stays near 1
        self.scale = max(sw2, sr2)
        w, r = sw2 / self.scale, sr2 / self.scale
        self.n = int(wd.size)
        ab = np.empty((2, self.n))
        ab[1] = w * wd + r * rd
        ab[0, 0] = 0.0
        ab[0, 1:] = w * wo + r * ro
        self._u = cholesky_banded(ab, lower=False, check_finite=False)
        self.logdet = float(2.0 * np.sum(np.log(self._u[1])) + self.n * math.log(self.scale))

    def whiten(self, v) -> np.ndarray:
        """U'^{-1} D v: whitened values (same shape as ``v``; columns are regressors)."""
        from scipy.linalg import lapack

        v = np.asarray(v, dtype=float)
        if v.shape[0] != self.n:
            raise ValueError(f"expected {self.n} values, got {v.shape[0]}")
        col = v.ndim == 1
        vv = v.reshape(self.n, -1)
        d = np.empty(vv.shape, order="F")
        d[0] = vv[0]
        np.subtract(vv[1:], vv[:-1], out=d[1:])
        z, info = lapack.dtbtrs(self._u, d, uplo="U", trans="T", overwrite_b=1)
        if info != 0:  # a positive-definite tridiagonal factor cannot be singular
            raise FloatingPointError(f"banded triangular solve failed (info {info})")
        z /= math.sqrt(self.scale)
        return z[:, 0] if col else z


def solve_normal(g: np.ndarray, c: np.ndarray, yy: float) -> tuple[np.ndarray, np.ndarray, float]:
    """Solve the normal equations of a whitened least-squares problem.

    Parameters
    ----------
    g : (p, p) Gram matrix Z'Z of the whitened regressors
    c : (p,) Z'z of the whitened regressors with the whitened data
    yy : z'z of the whitened data

    Returns
    -------
    beta : (p,) estimates
    cov : (p, p) covariance (X' C^-1 X)^-1 under the noise model (no rescaling by the fit);
        all NaN when the columns are (nearly) dependent and the parameters cannot be separated
    chi2 : the minimised |z - Z beta|^2
    """
    # scale columns to unit norm so the small solve is well conditioned whatever the units
    s = np.sqrt(np.diag(g))
    s = np.where(s > 0, s, 1.0)
    gs = g / np.outer(s, s)
    ev = np.linalg.eigvalsh(gs)
    if not np.all(np.isfinite(ev)) or ev[0] <= 1e-12 * ev[-1]:
        beta = (np.linalg.pinv(gs, hermitian=True) @ (c / s)) / s
        return beta, np.full(g.shape, np.nan), max(float(yy - c @ beta), 0.0)
    inv = np.linalg.inv(gs) / np.outer(s, s)
    beta = inv @ c
    return beta, inv, max(float(yy - c @ beta), 0.0)


def chi2_many(g: np.ndarray, c: np.ndarray, yy: float, subsets: np.ndarray) -> np.ndarray:
    """Minimised chi-squared of many sub-models at once: each row of ``subsets`` picks columns
    of the full Gram matrix ``g`` (and of ``c``). Sub-models whose columns are (nearly)
    dependent get +inf, so a search never picks one."""
    gs = g[subsets[:, :, None], subsets[:, None, :]]
    cs = c[subsets]
    sc = np.sqrt(np.einsum("kii->ki", gs))
    sc = np.where(sc > 0, sc, 1.0)
    gs = gs / (sc[:, :, None] * sc[:, None, :])
    cs = cs / sc
    ev = np.linalg.eigvalsh(gs)
    good = np.all(np.isfinite(ev), axis=1) & (ev[:, 0] > 1e-12 * ev[:, -1])
    eye = np.eye(gs.shape[1])
    beta = np.linalg.solve(np.where(good[:, None, None], gs, eye), cs[:, :, None])[:, :, 0]
    chi2 = yy - np.einsum("ki,ki->k", cs, beta)
    return np.where(good, np.maximum(chi2, 0.0), np.inf)


def gls_fit(zx: np.ndarray, zy: np.ndarray) -> tuple[np.ndarray, np.ndarray, float]:
    """Least squares on whitened columns ``zx`` (n, p) and data ``zy`` (n,): as :func:`solve_normal`."""
    return solve_normal(zx.T @ zx, zx.T @ zy, float(zy @ zy))


_INV_PHI = (math.sqrt(5.0) - 1.0) / 2.0


def golden_min(f, a: float, b: float, tol: float) -> float:
    """Minimiser of a unimodal ``f`` on [a, b] by golden-section search (J. Kiefer, "Sequential
    minimax search for a maximum", Proc. AMS 4(3), 1953); the ends are candidates too, so a
    minimum on a limit is found as such."""
    c, d = b - _INV_PHI * (b - a), a + _INV_PHI * (b - a)
    fc, fd = f(c), f(d)
    while b - a > tol:
        if fc <= fd:
            b, d, fd = d, c, fc
            c = b - _INV_PHI * (b - a)
            fc = f(c)
        else:
            a, c, fc = c, d, fd
            d = a + _INV_PHI * (b - a)
            fd = f(d)
    return min([(fc, c), (fd, d), (f(a), a), (f(b), b)])[1]
