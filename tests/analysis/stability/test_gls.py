"""Generalised least squares under white + random-walk FM: the banded whitening and the block-mean
covariance against dense matrix algebra, and REML against an independent dense computation."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from coilshift.analysis.stability.blocks import Blocks
from coilshift.analysis.stability.gls import Whitener, chi2_many, gls_fit, solve_normal
from coilshift.analysis.stability.grid import UniformSeries
from coilshift.analysis.stability.noise_model import discrete_avar, fit_noise_reml


def _gappy_series(seed: int, n: int = 230) -> UniformSeries:
    rng = np.random.default_rng(seed)
    y = rng.standard_normal(n)
    y[rng.random(n) < 0.2] = np.nan  # scattered unusable frames
    y[100:130] = np.nan  # and a long gap
    y[0] = np.nan  # the record starts after the first grid step
    return UniformSeries(0.0, 0.1, y, n, 0, 0, 0.0)


def _dense_block_covariance(series: UniformSeries, m: int, sw2: float, sr2: float):
    """Covariance of block means the long way: the dense sample covariance
    s_w^2 I + s_r^2 (min(k_i, k_j) - k_0 + 1) (white noise plus a random walk started one step
    before the first sample; definition) averaged by the block-mean operator A, A C A'."""
    k = np.flatnonzero(np.isfinite(series.freq_hz))
    c = sw2 * np.eye(k.size) + sr2 * (np.minimum.outer(k, k) - k[0] + 1)
    blk = (k - k[0]) // m
    labels = np.unique(blk)
    a = np.zeros((labels.size, k.size))
    for i, b in enumerate(labels):
        sel = blk == b
        a[i, sel] = 1.0 / sel.sum()
    return a @ c @ a.T, a, k


@pytest.mark.parametrize("m", [1, 4, 7])
def test_block_gls_equals_dense_gls(m):
    # the tridiagonal derived in blocks.py must give exactly the dense answer (any gaps, partial
    # blocks): estimates, covariance, chi-squared and log-determinant
    s = _gappy_series(3)
    sw2, sr2 = 0.3, 0.05
    b = Blocks(s, m)
    cb, a, k = _dense_block_covariance(s, m, sw2, sr2)
    w = Whitener(b.covariance_parts(), sw2, sr2)
    x = np.column_stack([np.ones(b.n), b.t_s, b.exp_means(3.0)[0]])
    # the block regressors are the block means of the sample regressors
    t_k = (k - k[0]) * 0.1
    np.testing.assert_allclose(a @ np.column_stack([np.ones(k.size), t_k, np.exp(-t_k / 3.0)]), x, rtol=1e-12)
    beta, cov, chi2 = gls_fit(w.whiten(x), w.whiten(b.mean_hz))
    ci = np.linalg.inv(cb)
    cov_ref = np.linalg.inv(x.T @ ci @ x)
    beta_ref = cov_ref @ x.T @ ci @ b.mean_hz
    r = b.mean_hz - x @ beta_ref
    np.testing.assert_allclose(beta, beta_ref, rtol=1e-9)
    np.testing.assert_allclose(cov, cov_ref, rtol=1e-9)
    assert chi2 == pytest.approx(r @ ci @ r, rel=1e-9)
    assert w.logdet == pytest.approx(np.linalg.slogdet(cb)[1], rel=1e-10)


def test_exp_derivative_matches_finite_difference():
    # d/d ln(tau) of the block means of exp(-t/tau): central difference (error ~ h^2)
    b = Blocks(_gappy_series(4), 5)
    h = 1e-5
    e_plus, e_minus = b.exp_means(3.0 * math.exp(h))[0], b.exp_means(3.0 * math.exp(-h))[0]
    np.testing.assert_allclose((e_plus - e_minus) / (2 * h), b.exp_means(3.0)[1], rtol=1e-7, atol=1e-12)


def test_full_block_walk_variance_is_twice_the_allan_variance():
    # definition of the Allan variance: half the mean square difference of adjacent means, so the
    # walk part of var(D) for adjacent full blocks is 2 AVAR = (2m^2 + 1)/(3m) (SP 1065 Table 11
    # limit q^2 tau / 3 for large m)
    m = 9
    s = UniformSeries(0.0, 1.0, np.ones(90), 90, 0, 0, 0.0)
    wd, wo, rd, ro = Blocks(s, m).covariance_parts()
    assert rd[1:] == pytest.approx(2 * discrete_avar(m, 0.0, 1.0) * np.ones(9))
    assert wd[1:] == pytest.approx(2.0 / m) and wo == pytest.approx(-1.0 / m)


def test_chi2_many_equals_one_by_one():
    rng = np.random.default_rng(5)
    z = rng.standard_normal((50, 6))
    z[:, 5] = z[:, 0] + z[:, 1]  # a dependent column: such sub-models get +inf
    zy = rng.standard_normal(50)
    g, c, yy = z.T @ z, z.T @ zy, float(zy @ zy)
    subsets = np.array([[0, 1, 2], [0, 3, 4], [1, 2, 4], [0, 1, 5]])
    got = chi2_many(g, c, yy, subsets)
    for sub, val in zip(subsets[:3], got[:3]):
        assert val == pytest.approx(solve_normal(g[np.ix_(sub, sub)], c[sub], yy)[2], rel=1e-10)
    assert got[3] == np.inf


def _dense_reml(phi, y, x, parts_dense):
    """-2 restricted log-likelihood (Patterson & Thompson 1971) with s^2 profiled out, the dense way."""
    w, r = parts_dense
    c = math.cos(phi) ** 2 * w + math.sin(phi) ** 2 * r
    ci = np.linalg.inv(c)
    g = x.T @ ci @ x
    beta = np.linalg.solve(g, x.T @ ci @ y)
    res = y - x @ beta
    n, p = x.shape
    s2 = float(res @ ci @ res) / (n - p)
    return (n - p) * math.log(s2) + np.linalg.slogdet(c)[1] + np.linalg.slogdet(g)[1], s2


def test_reml_matches_dense_computation():
    # simulated white + random-walk block means; REML by the banded code against a dense REML
    # maximised by scipy's bounded scalar minimiser (independent library)
    rng = np.random.default_rng(6)
    n = 400
    y = 0.5 * rng.standard_normal(n) + 0.05 * np.cumsum(rng.standard_normal(n)) + 0.01 * np.arange(n)
    s = UniformSeries(0.0, 1.0, y, n, 0, 0, 0.0)
    b = Blocks(s, 4)
    x = np.column_stack([np.ones(b.n), b.t_s])
    sw2, sr2 = fit_noise_reml(b.covariance_parts(), b.mean_hz, x)
    cw, _, _ = _dense_block_covariance(s, 4, 1.0, 0.0)
    cr, _, _ = _dense_block_covariance(s, 4, 0.0, 1.0)
    opt = minimize_scalar(lambda ph: _dense_reml(ph, b.mean_hz, x, (cw, cr))[0], bounds=(0, math.pi / 2),
                          method="bounded", options={"xatol": 1e-6})
    s2 = _dense_reml(opt.x, b.mean_hz, x, (cw, cr))[1]
    ref = (s2 * math.cos(opt.x) ** 2, s2 * math.sin(opt.x) ** 2)
    # the banded search stops within REML_TOL (1e-3 rad) of the optimum in phi; s_w^2 = s^2 cos^2 phi
    # and s_r^2 = s^2 sin^2 phi then move by 2 tan(phi) and 2 cot(phi) times that, relatively
    # (s^2 itself is stationary at the optimum)
    tol = 2 * 1e-3 * max(math.tan(opt.x), 1 / math.tan(opt.x)) + 1e-6
    assert sw2 == pytest.approx(ref[0], rel=tol) and sr2 == pytest.approx(ref[1], rel=tol)
