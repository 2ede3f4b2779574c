"""The family-wise test that decides whether a target is seen at all (Sidak 1967)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from coilshift.analysis.calibration.significance import FAMILY_ALPHA, family_test, sidak_adjust


def test_sidak_adjustment_against_the_formula():
    # Z. Sidak, J. Am. Stat. Assoc. 62 (1967): the family-wise level alpha over n independent tests
    # needs a per-test level 1 - (1 - alpha)^(1/n); adjusted p = 1 - (1 - p)^n
    p = np.array([1e-12, 1e-4, 0.003, 0.2, 1.0])
    assert sidak_adjust(p, 5) == pytest.approx(1 - (1 - p) ** 5, rel=1e-6, abs=1e-15)
    assert sidak_adjust(p, 1) == pytest.approx(p)
    assert sidak_adjust(np.array([1e-300]), 10)[0] == pytest.approx(1e-299, rel=1e-9)  # no cancellation
    sig = family_test([0.0] * 6, [1.0] * 6)
    assert sig.alpha_point == pytest.approx(1 - (1 - FAMILY_ALPHA) ** (1 / 6))
    # the rule's |z| is the two-sided normal quantile of that level (scipy.stats)
    assert f"|z| >= {stats.norm.isf(sig.alpha_point / 2):.2f} at a point" in sig.rule()


def test_points_without_an_error_never_count():
    sig = family_test([5.0, 0.1], [math.nan, 0.1])
    assert not sig.significant[0] and not sig.seen


def _rate(cov: np.ndarray, trials: int, seed: int) -> float:
    rng = np.random.default_rng(seed)
    chol = np.linalg.cholesky(cov)
    e = np.sqrt(np.diag(cov))
    hits = 0
    for _ in range(trials):
        y = chol @ rng.standard_normal(cov.shape[0])
        hits += family_test(y, e).seen
    return hits / trials


def test_false_detection_rate_of_pure_noise():
    # targets that do nothing (all true shifts zero), 6 points each. Independent points: Sidak's
    # level is exact, so the rate is alpha = 1 %. Points sharing baselines (adjacent correlation
    # 0.2, as analysis.calibration.covariance gives for equal stretches): Sidak's inequality for
    # jointly normal two-sided tests keeps the rate at or below alpha. Tolerance: 3 binomial
    # standard deviations over 4000 trials (sqrt(0.01 x 0.99 / 4000) = 0.0016).
    trials = 4000
    tol = 3 * math.sqrt(FAMILY_ALPHA * (1 - FAMILY_ALPHA) / trials)
    n = 6
    indep = _rate(np.eye(n), trials, 1)
    assert abs(indep - FAMILY_ALPHA) <= tol
    corr = np.eye(n) + 0.2 * (np.eye(n, k=1) + np.eye(n, k=-1))
    assert _rate(corr, trials, 2) <= FAMILY_ALPHA + tol


def test_default_family_level_is_one_percent_as_documented():
    # the module's and the docs' stated default: 1 % family-wise; the rule printed says so
    assert FAMILY_ALPHA == 0.01
    assert family_test([0.0] * 3, [1.0] * 3).rule().startswith("Sidak family-wise 1 % over 3 point(s)")


def test_single_point_is_a_plain_two_sided_test():
    # n = 1: Sidak's adjustment is the identity, so the adjusted p is the two-sided normal p
    # (scipy.stats.norm) and the per-point level is alpha itself
    sig = family_test([2.5], [1.0])
    assert sig.p_adjusted[0] == pytest.approx(2 * stats.norm.sf(2.5), rel=1e-12)
    assert sig.p_family == pytest.approx(2 * stats.norm.sf(2.5), rel=1e-12)
    assert sig.alpha_point == pytest.approx(FAMILY_ALPHA, rel=1e-12)
    assert not sig.seen                                         # p = 0.0124 > 0.01
    assert family_test([2.6], [1.0]).seen                       # p = 0.0093


def test_small_errors_count_and_zero_errors_do_not():
    # a 50-sigma point with a 0.1 Hz error is seen; a point whose error is 0 (unknown) never counts
    assert family_test([5.0], [0.1]).seen
    sig = family_test([5.0, 0.0], [0.0, 1.0])
    assert not sig.significant[0] and not sig.seen


@pytest.mark.parametrize("alpha", [0.0, 1.0, -0.1, 1.5])
def test_family_level_outside_zero_one_is_refused(alpha):
    with pytest.raises(ValueError, match="alpha"):
        family_test([1.0], [1.0], alpha=alpha)


def test_no_points_means_not_seen_with_p_one():
    sig = family_test([], [])
    assert not sig.seen and sig.p_family == 1.0 and sig.n == 0


def test_p_values_rounded_past_one_are_clipped():
    # a p-value can only lie in [0, 1]; one rounded just past 1 adjusts to 1, not NaN
    assert sidak_adjust(np.array([1.0 + 1e-9]), 4)[0] == pytest.approx(1.0)


def test_negative_shifts_are_tested_two_sided():
    # ferrous targets lower the frequency: a shift of -3 sigma is as much evidence as +3 sigma
    # (two-sided normal p = 2 sf(3), scipy.stats.norm)
    neg, pos = family_test([-3.0], [1.0]), family_test([3.0], [1.0])
    assert neg.seen and pos.seen
    assert neg.p_adjusted[0] == pytest.approx(2 * stats.norm.sf(3.0), rel=1e-12)
    assert neg.p_adjusted[0] == pos.p_adjusted[0]
