"""Covariance of calibration points whose steps share baselines, against a Monte Carlo of the steps."""

from __future__ import annotations

import math

import numpy as np
import pytest

from coilshift.analysis.calibration.covariance import point_covariance, step_covariance
from coilshift.analysis.calibration.steps import combine_repeats, compute_steps
from coilshift.logger.runfolder.markers import BASELINE, Marker

HOP_S = 0.02


def _markers(n_targets: int, dwell_s: float, repeats: int = 1) -> list[Marker]:
    out = [Marker(0.0, dwell_s, BASELINE, math.nan)]
    t = dwell_s
    for _ in range(repeats):
        for k in range(n_targets):
            out.append(Marker(t, t + dwell_s, "coin", 10.0 * (k + 1)))
            out.append(Marker(t + dwell_s, t + 2 * dwell_s, BASELINE, math.nan))
            t += 2 * dwell_s
    return out


def test_shared_baselines_correlate_neighbouring_steps_as_predicted():
    # white frame noise, equal stretches: the steps' covariance predicted from their decomposition
    # (averaged over the realisations, since each predicts from its own estimated errors) against
    # the covariance of 600 independent noise realisations. Adjacent steps share one
    # baseline with weight 1/2 each side, so with equal stretch errors s^2 the correlation is
    # (s^2/4) / (s^2 (1 + 1/4 + 1/4)) = 1/6 [derived]; the empirical correlation must match it within
    # 3 standard errors of Fisher's z (1/sqrt(N - 3)), the prediction too.
    markers = _markers(5, 3.0)
    n = int(round(markers[-1].end_s / HOP_S))
    t = (np.arange(n) + 0.5) * HOP_S
    rng = np.random.default_rng(7)
    shifts, predicted = [], 0.0
    for _ in range(600):
        f = 1000.0 + rng.standard_normal(n) * 0.05
        steps, _ = compute_steps(t, f, markers, settle_s=0.0)
        shifts.append([s.shift_hz for s in steps])
        predicted = predicted + step_covariance(steps) / 600
    emp = np.corrcoef(np.array(shifts).T)
    pred = predicted / np.sqrt(np.outer(np.diag(predicted), np.diag(predicted)))
    tol = 3.0 / math.sqrt(600 - 3)
    for k in range(4):
        assert abs(np.arctanh(emp[k, k + 1]) - np.arctanh(pred[k, k + 1])) < tol
        assert pred[k, k + 1] == pytest.approx(1 / 6, abs=0.03)
    for k in range(3):
        assert abs(np.arctanh(emp[k, k + 2])) < tol  # steps two apart share nothing
    assert pred[0, 2] == 0.0


def test_point_covariance_keeps_each_points_error():
    # repeats combined by combine_repeats (inverse-variance weights, Birge enlargement where they
    # disagree): the diagonal of the points' covariance is each point's stated error squared
    markers = _markers(3, 2.0, repeats=2)
    n = int(round(markers[-1].end_s / HOP_S))
    t = (np.arange(n) + 0.5) * HOP_S
    rng = np.random.default_rng(3)
    f = 1000.0 + rng.standard_normal(n) * 0.05
    f[(t > 12.0) & (t < 14.0)] += 0.5  # one repeat of one point far off: Birge-enlarged
    steps, _ = compute_steps(t, f, markers, settle_s=0.0)
    points = combine_repeats(steps)
    cov = point_covariance(points)
    assert np.sqrt(np.diag(cov)) == pytest.approx([p.stderr_hz for p in points], rel=1e-9)
    assert not all(p.consistent for p in points)
    assert np.all(np.linalg.eigvalsh(cov) > 0)
