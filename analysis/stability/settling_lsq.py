"""The least-squares core of the settling fit: a line plus k exponentials on whitened block means.

For fixed time constants the model f_inf + b t + sum_i a_i exp(-t/tau_i) is linear, so the
time constants are found by minimising the profile chi-squared (variable projection: G. H.
Golub and V. Pereyra, "The differentiation of pseudo-inverses and nonlinear least squares
problems whose variables separate", SIAM J. Numer. Anal. 10(2), 1973) over ln(tau): on a log
grid (every pair of grid points for two exponentials), then by golden-section search along
each time constant in turn (J. Kiefer, Proc. AMS 4(3), 1953), then by Gauss-Newton steps. The
covariance of all parameters is the linearised (J' C^-1 J)^-1 with the time constants
entering as ln(tau).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np

from coilshift.analysis.stability.blocks import Blocks
from coilshift.analysis.stability.gls import Whitener, chi2_many, golden_min, solve_normal

GRID_POINTS = 28  # log-spaced time constants of the first search
GOLDEN_TOL = 3e-3  # golden-section tolerance in ln(tau) (well inside any u(ln tau) a record gives)
MIN_LN_SEPARATION = 0.4  # two time constants must differ by this much in ln(tau) (a factor 1.5)
ROUNDS = 2  # passes of one-at-a-time refinement for two time constants
POLISH_STEPS = 4  # Gauss-Newton steps after the searches


@dataclass
class KFit:
    """One fitted model: parameters [f0 - y_ref, b span, a_1..a_k, ln tau_1..ln tau_k], their
    covariance, chi-squared, and the unwhitened Jacobian columns."""

    ln_taus: tuple
    beta: np.ndarray
    cov: np.ndarray
    chi2: float
    columns: np.ndarray
    step: np.ndarray  # Gauss-Newton step in ln(tau) from here (zero at the optimum)


class SettlingProblem:
    """The whitened problem on the block means of ``blocks`` under one noise model."""

    def __init__(self, blocks: Blocks, white_var: float, walk_var: float):
        self.b = blocks
        self.span = blocks.span_s
        self.w = Whitener(blocks.covariance_parts(), white_var, walk_var)
        self.y_ref = float(blocks.mean_hz.mean())
        self.base = np.column_stack([np.ones(blocks.n), blocks.t_s / self.span])
        self.zb = self.w.whiten(self.base)
        self.zy = self.w.whiten(blocks.mean_hz - self.y_ref)
        self.yy = float(self.zy @ self.zy)
        self._cache: dict[float, tuple[np.ndarray, np.ndarray, np.ndarray]] = {}

    def _col(self, ln_tau: float):
        """(whitened exp column, exp column, its d/d ln tau), cached (refinement revisits)."""
        got = self._cache.get(ln_tau)
        if got is None:
            e, de = self.b.exp_means(math.exp(ln_tau))
            got = (self.w.whiten(e), e, de)
            if len(self._cache) > 64:
                self._cache.clear()
            self._cache[ln_tau] = got
        return got

    def chi2(self, ln_taus) -> float:
        z = np.column_stack([self.zb] + [self._col(x)[0] for x in ln_taus])
        return solve_normal(z.T @ z, z.T @ self.zy, self.yy)[2]

    def fit(self, ln_taus=()) -> KFit:
        """Parameters, linearised covariance and chi-squared at the given time constants."""
        cols = [self._col(x) for x in ln_taus]
        z = np.column_stack([self.zb] + [c[0] for c in cols])
        beta, cov, chi2 = solve_normal(z.T @ z, z.T @ self.zy, self.yy)
        jac = [self.base] + [c[1][:, None] for c in cols]
        step = np.zeros(len(ln_taus))
        if ln_taus:  # d f / d ln(tau_i) = a_i (t / tau_i) exp(-t / tau_i)
            jac += [(beta[2 + i] * c[2])[:, None] for i, c in enumerate(cols)]
            jj = np.column_stack(jac)
            zj = self.w.whiten(jj)
            full, cov, _ = solve_normal(zj.T @ zj, zj.T @ self.zy, self.yy)
            # the coefficients of the derivative columns are the Gauss-Newton step in ln(tau)
            step = full[2 + len(ln_taus):] if np.all(np.isfinite(full)) else step
            beta = np.concatenate([beta, ln_taus])
        return KFit(tuple(ln_taus), beta, cov, chi2, np.column_stack(jac), step)

    def polish(self, ln_taus: tuple, lo: float, hi: float) -> KFit:
        """Gauss-Newton steps from ``ln_taus`` (each kept only if it lowers chi-squared): the
        searches stop at GOLDEN_TOL, which a precise record can resolve far better."""
        kf = self.fit(ln_taus)
        for _ in range(POLISH_STEPS):
            x = np.clip(np.asarray(kf.ln_taus) + np.clip(kf.step, -0.5, 0.5), math.log(lo), math.log(hi))
            if len(x) > 1 and np.any(np.diff(x) < MIN_LN_SEPARATION):
                break
            trial = self.fit(tuple(float(v) for v in x))
            if not trial.chi2 < kf.chi2:
                break
            kf = trial
        return kf

    def best(self, k: int, lo: float, hi: float, refine: bool = True) -> tuple:
        """ln(tau_1) < ... < ln(tau_k) minimising the profile chi-squared on [lo, hi] (k = 1, 2);
        ``refine=False`` stops at the grid's best point."""
        grid = np.linspace(math.log(lo), math.log(hi), GRID_POINTS)
        step = float(grid[1] - grid[0])
        zg = np.column_stack([self._col(float(x))[0] for x in grid])
        z = np.column_stack([self.zb, zg])
        g, c = z.T @ z, z.T @ self.zy
        sep = max(1, math.ceil(MIN_LN_SEPARATION / step - 1e-9))
        combos = np.array([p for p in itertools.combinations(range(grid.size), k) if all(np.diff(p) >= sep)])
        subsets = np.hstack([np.tile([0, 1], (combos.shape[0], 1)), 2 + combos])
        chi2 = chi2_many(g, c, self.yy, subsets)
        x = [float(grid[i]) for i in combos[int(np.argmin(chi2))]]
        lo_x, hi_x = float(grid[0]), float(grid[-1])
        for _ in range((ROUNDS if k > 1 else 1) if refine else 0):
            for i in range(k):
                a = max(x[i] - step, lo_x if i == 0 else x[i - 1] + MIN_LN_SEPARATION)
                b = min(x[i] + step, hi_x if i == k - 1 else x[i + 1] - MIN_LN_SEPARATION)
                if b <= a:
                    continue

                def f(v, i=i):
                    return self.chi2(x[:i] + [v] + x[i + 1:])

                x[i] = golden_min(f, a, b, GOLDEN_TOL)
        return tuple(x)
