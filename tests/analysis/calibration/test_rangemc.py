"""The range read from the measured points, its interpolants, and the coverage of its Monte Carlo
interval on points from a truth that is not the fitted law."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize, stats

from coilshift.analysis.calibration import rangemc
from coilshift.analysis.calibration.curvefit import dipole_shift, fit_dipole
from coilshift.analysis.calibration.detection import closed_form_range_mm, detection_range
from coilshift.analysis.calibration.shapes import DipoleShape, PowerShape


def test_crossing_matches_a_root_of_the_interpolant():
    # independent route: build the shape-linear interpolant between the bracketing points as a
    # plain function and find where it meets T with scipy's brentq
    shape = DipoleShape(30.0)
    d = np.array([[10.0, 25.0, 45.0, 70.0, 110.0], [12.0, 24.0, 47.0, 71.0, 108.0]])
    s = np.array([[9.0, 4.0, 1.3, 0.31, 0.02], [8.7, 4.2, 1.2, 0.35, -0.01]])
    t = np.array([0.5, 0.25])
    got, _, last = rangemc.crossing_mm(d, s, t, shape)
    for k in range(2):
        i = int(last[k])
        gi, gj = shape.g(d[k, i]), shape.g(d[k, i + 1])

        def f(x, k=k, i=i, gi=gi, gj=gj):
            return s[k, i] + (s[k, i + 1] - s[k, i]) * (shape.g(x) - gi) / (gj - gi) - t[k]

        assert got[k] == pytest.approx(optimize.brentq(f, d[k, i], d[k, i + 1], xtol=1e-12), abs=1e-6)
    assert list(last) == [2, 3]


def test_interpolants_are_exact_for_their_own_law():
    # points exactly on c d^-p: the log-log line is exact, (c/T)^(1/p) [algebra]
    d = np.array([[10.0, 20.0, 40.0, 80.0]])
    s = 300.0 * d ** -2.5
    _, alts, _ = rangemc.crossing_mm(d, s, np.array([0.2]), DipoleShape(25.0))
    assert alts["loglog"][0] == pytest.approx((300.0 / 0.2) ** (1 / 2.5), rel=1e-9)
    # points exactly on the shape: the shape-linear interpolant and both quadratics agree with the
    # closed form R sqrt((|A|/T)^(1/3) - 1)
    s = dipole_shift(d, 5.0, 25.0)
    got, alts, _ = rangemc.crossing_mm(d, s, np.array([0.2]), DipoleShape(25.0))
    want = closed_form_range_mm(5.0, 25.0, 0.2)
    assert got[0] == pytest.approx(want, rel=1e-9)
    assert alts["quad_in"][0] == pytest.approx(want, rel=1e-7) and alts["quad_out"][0] == pytest.approx(want, rel=1e-7)


def test_threshold_draws_follow_the_scaled_chi_squared():
    # with only the threshold uncertain, the interval's ends are the ranges at
    # T sqrt(edf / chi2_{0.975, edf}) and T sqrt(edf / chi2_{0.025, edf}) (NIST SP 1065 section 5.3;
    # quantiles from scipy.stats); 40000 draws put each end within about 0.5 % of its value
    d = np.array([10.0, 20.0, 35.0, 50.0, 70.0, 90.0, 130.0])
    y = dipole_shift(d, -20.0, 25.0)
    prob = rangemc.RangeProblem(d, y, np.eye(d.size) * 1e-30, -1.0, 0.1, 8.0, 0.0, DipoleShape(25.0))
    iv = rangemc.range_interval(prob, 80000, seed=2)
    lo, hi = iv.components["threshold"]
    t_hi = 0.1 * math.sqrt(8.0 / stats.chi2.ppf(0.025, 8.0))
    t_lo = 0.1 * math.sqrt(8.0 / stats.chi2.ppf(0.975, 8.0))
    assert lo == pytest.approx(closed_form_range_mm(-20.0, 25.0, t_hi), rel=0.005)
    assert hi == pytest.approx(closed_form_range_mm(-20.0, 25.0, t_lo), rel=0.005)
    assert iv.components["points"][0] == pytest.approx(iv.components["points"][1], rel=1e-9)


@pytest.fixture(scope="module")
def finite_truth():
    # the truth: a 40-turn winding 6 x 6 mm on a 150 mm former and a 25 mm sphere (sim.fields,
    # Biot-Savart and the volume mean of |h|^2), tabulated once (log-log interpolation; its error
    # is below 1e-5 on this grid)
    from coilshift.sim.fields import Target, Winding, finite_target_shift_hz

    grid = np.geomspace(3.0, 600.0, 500)
    g = finite_target_shift_hz(Winding.from_design_mm(40, 150, 6, 6), Target("sphere", 0.0125), grid, 1.0)
    lg, lx = np.log(g), np.log(grid)

    def shape(d):
        return np.exp(np.interp(np.log(np.asarray(d, float)), lx, lg))

    return shape


def test_coverage_on_points_from_a_finite_winding(finite_truth):
    # 200 simulated target-sessions drawn directly as points: a finite-winding, finite-sphere truth
    # (not the single-loop law the analysis fits here), point errors correlated as shared baselines
    # make them, every placement off by up to +-1 mm, and a threshold estimated from an Allan
    # deviation with 20 degrees of freedom (drawn from the scaled chi-squared around the truth).
    # The interval is a Monte Carlo propagation of distributions (JCGM 101:2008; the parametric
    # bootstrap of Efron & Tibshirani 1993, ch. 6): its nominal 95 % must cover the true range (the
    # truth's range at the true threshold) in at least 95 % - 3 binomial standard deviations =
    # 90.4 % of the sessions.
    rng = np.random.default_rng(12)
    radius = 78.0
    d = np.geomspace(0.3 * radius, 2.6 * radius, 6).round()
    n, edf, thr_true = 200, 20.0, 1.0
    cov = (np.eye(6) + 0.2 * (np.eye(6, k=1) + np.eye(6, k=-1))) * (0.08 * thr_true) ** 2
    chol = np.linalg.cholesky(cov)
    covered = 0
    for _ in range(n):
        r_true = radius * math.exp(rng.uniform(math.log(0.7), math.log(1.8)))
        sign = rng.choice([-1.0, 1.0])
        amp = sign * thr_true / float(finite_truth(r_true))
        y = amp * finite_truth(d + rng.uniform(-1.0, 1.0, 6)) + chol @ rng.standard_normal(6)
        thr = thr_true * math.sqrt(rng.chisquare(edf) / edf)
        fit = fit_dipole(d, y, np.sqrt(np.diag(cov)), cov=cov, placement_mm=1.0)
        res = detection_range(d, y, cov, thr, sign=sign, threshold_edf=edf, placement_mm=1.0, fit=fit,
                              n_draws=1000, seed=int(rng.integers(1000)))
        assert res.range_mm is not None, res.reason
        covered += res.ci_mm[0] <= r_true <= res.ci_mm[1]
    assert covered / n >= 0.95 - 3 * math.sqrt(0.95 * 0.05 / n)


def test_power_shape_inverse():
    # the shapes' inverses undo them (algebra)
    for shape in (DipoleShape(np.array([[20.0], [40.0]]), 3.0), PowerShape(np.array([[4.0], [6.0]]))):
        x = np.array([[5.0, 30.0, 90.0], [7.0, 45.0, 150.0]])
        assert shape.ginv(shape.g(x)) == pytest.approx(x, rel=1e-9)
