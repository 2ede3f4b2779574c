"""The false-event level: the discrete crossing count of a stationary Gaussian sequence."""

import math

import numpy as np
import pytest
from scipy import stats
from scipy.signal import lfilter

from coilshift.logger.events.crossings import expected_false_events, level_for_rate, upcrossing_probability


@pytest.mark.parametrize("u,rho", [(0.0, 0.0), (1.5, 0.5), (3.0, 0.9), (4.2, 0.995), (5.0, 0.9999), (2.0, -0.3)])
def test_upcrossing_probability_matches_scipy_bivariate_normal(u, rho):
    # reference: scipy.stats.multivariate_normal's CDF (Genz's algorithm), a different computation:
    # P(Z0 < u < Z1) = P(Z0 < u) - P(Z0 < u, Z1 < u)
    mvn = stats.multivariate_normal([0.0, 0.0], [[1.0, rho], [rho, 1.0]])
    ref = stats.norm.cdf(u) - mvn.cdf([u, u])
    assert upcrossing_probability(u, rho) == pytest.approx(ref, rel=1e-4, abs=1e-9)


def test_independent_values_cross_with_probability_phi_times_q():
    # rho = 0: P(Z0 < u) P(Z1 > u), by independence (closed form)
    u = 2.5
    assert upcrossing_probability(u, 0.0) == pytest.approx(stats.norm.cdf(u) * stats.norm.sf(u), rel=1e-9)


def test_crossing_count_of_a_simulated_ar1_sequence():
    # Rice's count in its discrete form (Rice 1944; Cramer & Leadbetter 1967): the expected number of
    # up-crossings of u in n steps of a stationary Gaussian sequence is (n - 1) P(Z0 < u < Z1). Check
    # on a simulated AR(1) sequence (lag-one correlation phi); the count's spread is bounded by a
    # Poisson-like 5 sigma band inflated for clustering (each up-crossing is separate at these levels).
    rng = np.random.default_rng(7)
    phi, n, u = 0.9, 400_000, 2.0
    x = lfilter([1.0], [1.0, -phi], rng.standard_normal(n + 2000) * math.sqrt(1 - phi ** 2))[2000:]
    count = int(np.sum((x[:-1] < u) & (x[1:] > u)))
    expect = (n - 1) * upcrossing_probability(u, phi)
    assert abs(count - expect) < 5 * math.sqrt(3 * expect)


@pytest.mark.parametrize("rate", [0.1, 1.0, 10.0])
def test_level_for_rate_gives_the_rate(rate):
    hop = 0.02
    u = level_for_rate(rate, 0.99, hop)
    assert expected_false_events(u, 0.99, 3600 / hop) == pytest.approx(rate, rel=1e-6)
    # a higher correlation (smoother statistic) crosses less often: a lower level suffices
    assert level_for_rate(rate, 0.999, hop) < u < level_for_rate(rate, 0.0, hop)


def test_level_for_rate_refuses_nonsense():
    with pytest.raises(ValueError):
        level_for_rate(0.0, 0.5, 0.02)
