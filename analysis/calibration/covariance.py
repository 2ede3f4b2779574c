"""Covariance of a target's calibration points: neighbouring steps share a baseline.

Every step's shift is its target stretch's mean minus a weighted sum of the baseline means
before and after it (:func:`~.steps.compute_steps`). Two steps on either side of one baseline
both subtract that baseline's mean, so their errors are positively correlated; with baselines as
long as the dwell the correlation coefficient of adjacent steps is about 0.2. The segment means
themselves are taken as independent (their stretches do not overlap; frame-noise correlation
times are far shorter than a stretch, and the bracketing removes a linear drift).

Points combine repeats with the same weights as :func:`~.steps.combine_repeats`; a point whose
repeats disagreed keeps its Birge-enlarged error, applied to its row and column.
"""

from __future__ import annotations

import math

import numpy as np

from coilshift.analysis.calibration.steps import Point, Step


def _step_vectors(steps: list[Step]) -> tuple[dict, np.ndarray, dict]:
    """Baseline index -> column, target variances per step, baseline variances per column."""
    cols: dict[int, int] = {}
    base_var: dict[int, float] = {}
    for s in steps:
        for i, _, e in s.baseline_terms:
            if i not in cols:
                cols[i] = len(cols)
                base_var[cols[i]] = float(e) ** 2 if math.isfinite(e) else 0.0
    tvar = np.array([s.target_stderr_hz ** 2 if math.isfinite(s.target_stderr_hz) else s.stderr_hz ** 2
                     for s in steps], float)
    return cols, tvar, base_var


def step_covariance(steps: list[Step]) -> np.ndarray:
    """Covariance matrix (Hz^2) of the shifts of ``steps``.

    ``cov[s, t] = delta_st var(target_s) + sum_j w_sj w_tj var(baseline_j)``.
    Steps without a recorded decomposition (built by hand) count as independent.
    """
    n = len(steps)
    if not any(s.baseline_terms for s in steps):
        return np.diag([s.stderr_hz ** 2 for s in steps]).astype(float) if n else np.zeros((0, 0))
    cols, tvar, base_var = _step_vectors(steps)
    w = np.zeros((n, len(cols)))
    for k, s in enumerate(steps):
        for i, wt, _ in s.baseline_terms:
            w[k, cols[i]] += wt
    bv = np.array([base_var[c] for c in range(len(cols))])
    return np.diag(tvar) + (w * bv) @ w.T


def point_covariance(points: list[Point]) -> np.ndarray:
    """Covariance matrix (Hz^2) of combined calibration points (one target or several).

    The diagonal reproduces each point's ``stderr_hz`` squared (including a Birge enlargement);
    points built without their steps are taken as independent.
    """
    n = len(points)
    if n == 0:
        return np.zeros((0, 0))
    if not all(p.steps for p in points):
        return np.diag([p.stderr_hz ** 2 for p in points]).astype(float)
    steps = [s for p in points for s in p.steps]
    cs = step_covariance(steps)
    comb = np.zeros((n, len(steps)))
    k = 0
    for i, p in enumerate(points):
        e = np.array([s.stderr_hz for s in p.steps], float)
        m = len(p.steps)
        if m > 1 and np.all(np.isfinite(e) & (e > 0)):
            w = 1.0 / e ** 2
            comb[i, k:k + m] = w / w.sum()
        else:
            comb[i, k:k + m] = 1.0 / m
        k += m
    cov = comb @ cs @ comb.T
    # keep each point's own error as combine_repeats stated it (Birge-enlarged where repeats disagree)
    d = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    want = np.array([p.stderr_hz for p in points], float)
    with np.errstate(divide="ignore", invalid="ignore"):
        f = np.where((d > 0) & np.isfinite(want), want / d, 1.0)
    cov = cov * np.outer(f, f)
    return 0.5 * (cov + cov.T)
