"""Error propagation of a calibration, each check against a computation outside coilshift.

Written to catch planted bugs that survived the older tests (benchmarks/mutation_survivors.md):
unsquared interpolation weights in the baseline variance, the repeat test with k instead of k - 1
degrees of freedom, a fit covariance that ignores chi2/dof, an extrapolated interval that ignores it.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from scipy import optimize, stats

from coilshift.analysis.calibration.curvefit import fit_power_law
from coilshift.analysis.calibration.detection import detection_range
from coilshift.analysis.calibration.steps import Step, combine_repeats, compute_steps
from coilshift.logger.runfolder.markers import BASELINE, Marker

HOP_S = 0.02


def _bracketed_log(rng, n_runs, shift_hz, sigma_hz):
    """White-noise logs: short baselines (100 frames) around a long target stretch (2000 frames),
    the target exactly half way, so each baseline weighs 1/2 in the interpolation."""
    t = np.arange(2200) * HOP_S + 0.5 * HOP_S
    markers = [Marker(0.0, 2.0, BASELINE, math.nan), Marker(2.0, 42.0, "coin", 10.0),
               Marker(42.0, 44.0, BASELINE, math.nan)]
    f = 1000.0 + sigma_hz * rng.standard_normal((n_runs, t.size))
    f[:, (t > 2.0) & (t < 42.0)] += shift_hz
    return t, f, markers


def test_interpolated_baseline_variance_squares_the_weights():
    # Variance of a linear combination of independent means (Bevington & Robinson, Data Reduction
    # and Error Analysis, eq. 3.13): var(m_t - w0 m_0 - w1 m_1) = s_t^2 + w0^2 s_0^2 + w1^2 s_1^2.
    # Here the baselines dominate: 0.25 s_0^2 + 0.25 s_1^2 = 0.005 s^2 against 0.0005 s^2 for the
    # target; unsquared weights (0.5 s_0^2 + 0.5 s_1^2) would nearly double the variance.
    # Check: z = (shift - truth)/stderr over 200 simulated runs; sum z^2 is chi-squared with 200
    # degrees of freedom when the errors are right (99.9 % two-sided band from scipy.stats.chi2).
    rng = np.random.default_rng(20240518)
    t, f, markers = _bracketed_log(rng, 200, 3.0, 1.0)
    z = []
    for row in f:
        (step,), _ = compute_steps(t, row, markers, settle_s=0.0)
        assert step.bracketed and step.baseline_terms[0][1] == pytest.approx(0.5, abs=0.01)
        z.append((step.shift_hz - 3.0) / step.stderr_hz)
    s = float(np.sum(np.square(z)))
    assert stats.chi2.ppf(0.0005, 200) <= s <= stats.chi2.ppf(0.9995, 200)
    # and the expected size itself, written out: 1/sqrt(2000) target, 1/sqrt(100) per baseline
    expected = math.sqrt(1 / 2000 + 0.25 / 100 + 0.25 / 100)
    (one,), _ = compute_steps(t, f[0], markers, settle_s=0.0)
    # the standard error of a 100-sample white-noise std is 1/sqrt(2 x 100) = 7 %; 4 sigma
    assert one.stderr_hz == pytest.approx(expected, rel=4 * 0.07)


def _step(x, e):
    return Step("t", 10.0, 0.0, 1.0, x, e, 100, 0.0, True, x)


def test_repeat_consistency_test_has_k_minus_1_degrees_of_freedom():
    # Three repeats 0, +sqrt 5, -sqrt 5 with unit errors: weighted mean 0, chi2 = 10 on k - 1 = 2
    # degrees of freedom (Bevington & Robinson eq. 11.8; one mean estimated). scipy.stats.chi2
    # gives p = 0.0067 < 1 % (inconsistent) on 2 dof but p = 0.019 on 3 (consistent): the two
    # readings disagree, so the test below tells them apart.
    a = math.sqrt(5.0)
    assert stats.chi2.sf(10.0, 2) < 0.01 < stats.chi2.sf(10.0, 3)
    (p,) = combine_repeats([_step(0.0, 1.0), _step(a, 1.0), _step(-a, 1.0)])
    assert p.chi2 == pytest.approx(10.0)
    assert not p.consistent
    # Birge ratio sqrt(chi2/(k-1)) (Birge 1932) on the weighted-mean error 1/sqrt(3)
    assert p.stderr_hz == pytest.approx(math.sqrt(10.0 / 2.0) / math.sqrt(3.0), rel=1e-12)
    # a scatter just inside the 1 % level on 2 dof stays consistent and unscaled
    b = math.sqrt(4.5)  # chi2 = 9 < chi2.isf(0.01, 2) = 9.21
    (q,) = combine_repeats([_step(0.0, 1.0), _step(b, 1.0), _step(-b, 1.0)])
    assert q.consistent and q.stderr_hz == pytest.approx(1 / math.sqrt(3.0), rel=1e-12)


def _power_data(scatter):
    d = np.array([10.0, 14.0, 20.0, 28.0, 40.0, 56.0, 80.0])
    e = np.full(d.size, 0.05)
    noise = np.array([1.0, -1.0, 0.5, 1.0, -1.2, 0.8, -0.4]) * scatter
    return d, -2.0e4 * d ** -3.0 + noise * e, e


@pytest.mark.parametrize("scatter", [3.0, 0.3])
def test_fit_covariance_is_scaled_by_chi2_per_dof_above_one(scatter):
    # Reference: scipy.optimize.curve_fit, whose absolute_sigma=False scales the covariance by
    # chi2/dof and absolute_sigma=True does not (scipy documentation). The fit scales only when
    # chi2/dof > 1 (Birge 1932; Particle Data Group's "scale factor" practice), so it must match the
    # scaled reference for scatter 3 x the errors and the unscaled one for scatter 0.3 x.
    # Tolerance: both minimise the same chi-squared; 1e-4 covers the optimisers' stopping rules.
    d, y, e = _power_data(scatter)
    fit = fit_power_law(d, y, e)

    def model(x, c, p):
        return c * x ** -p

    popt, pcov = optimize.curve_fit(model, d, y, p0=[fit.params["c_hz"], fit.params["p"]], sigma=e,
                                    absolute_sigma=scatter < 1.0, xtol=1e-14, ftol=1e-14)
    chi2 = float(np.sum(((y - model(d, *popt)) / e) ** 2))
    assert fit.chi2 == pytest.approx(chi2, rel=1e-6)
    assert (chi2 / fit.dof > 1.0) == (scatter > 1.0)
    assert fit.errors["p"] == pytest.approx(math.sqrt(pcov[1, 1]), rel=1e-4)
    assert fit.errors["c_hz"] == pytest.approx(math.sqrt(pcov[0, 0]), rel=1e-4)


def test_extrapolated_interval_widens_with_the_fits_chi2_per_dof():
    # Today the interval is read from the measured points (rangemc); chi2/dof reaches it only past
    # the farthest point, where the shape is drawn from the fit's covariance. For a small spread
    # the range is a smooth function of the shape parameters, so its spread is linear in their
    # standard deviations (first-order propagation, JCGM 100:2008 section 5.1): a covariance scaled
    # by chi2/dof = 4 doubles the shape component's width. Tolerance: percentiles of 20 000 draws
    # scatter by about 1.5 %; allow 10 %.
    d, y, e = _power_data(0.3)
    fit = fit_power_law(d, y, e)
    cov = np.diag(e ** 2)
    thr = 0.5 * abs(y[-1])  # below the farthest point: an extrapolation
    res = [detection_range(d, y, cov, thr, sign=-1.0, fit=dataclasses.replace(fit, cov=fit.cov * k),
                           n_draws=20000, seed=5) for k in (1.0, 4.0)]
    assert all(r.basis == "extrapolated" for r in res), [r.basis for r in res]
    w = [r.components["model"][1] - r.components["model"][0] for r in res]
    assert w[1] / w[0] == pytest.approx(2.0, rel=0.10)
    assert (res[1].ci_mm[1] - res[1].ci_mm[0]) > (res[0].ci_mm[1] - res[0].ci_mm[0])
