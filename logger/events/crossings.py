"""The detection threshold that gives a stated false-event rate on quiet baseline.

The detector's statistic ``z`` is a stationary Gaussian sequence on quiet baseline (a linear
combination of frames whose weights remove a constant and a linear drift, see
:mod:`.statistic`), standardised to unit variance, with lag-one correlation ``rho``. An event
starts only where ``|z|`` crosses a level ``u`` from below, so the expected number of false
events in ``n`` quiet frames is at most the expected number of such crossings,
``2 n P(Z_0 < u < Z_1)`` (up and down; by linearity of expectation, exact for any stationary
sequence: the discrete form of Rice's crossing count, Rice 1944, *Bell Syst. Tech. J.* 23,
282-332; Cramer & Leadbetter 1967, *Stationary and Related Stochastic Processes*, ch. 10).
``(Z_0, Z_1)`` is standard bivariate normal with correlation ``rho``, so

    P(Z_0 < u < Z_1) = int_0^inf phi(u - y) Q((u (1 - rho) + rho y) / sqrt(1 - rho^2)) dy

(``x = u - y`` the value before the crossing; ``Q`` the normal upper tail). The bound is close
to equality at high levels, where crossings come alone (each excursion is one event).
"""

from __future__ import annotations

import math

import numpy as np

_NODES, _WEIGHTS = np.polynomial.legendre.leggauss(160)

#: the default false-event rate on quiet baseline
DEFAULT_FALSE_PER_HOUR = 1.0


def upcrossing_probability(u: float, rho: float) -> float:
    """``P(Z_0 < u < Z_1)`` for a standard bivariate normal pair with correlation ``rho``.

    Gauss-Legendre quadrature of the integral in the module docstring over the range where the
    integrand is not negligible (the Q factor is below 1e-17 beyond it).
    """
    rho = min(max(float(rho), -0.999999), 0.999999)
    s = math.sqrt(1.0 - rho * rho)
    if rho > 0:
        y_max = min(12.0, max((9.0 * s - u * (1.0 - rho)) / rho, 1e-9) + 1e-9)
    else:
        y_max = 12.0
    y = 0.5 * y_max * (_NODES + 1.0)
    w = 0.5 * y_max * _WEIGHTS
    phi = np.exp(-0.5 * (u - y) ** 2) / math.sqrt(2.0 * math.pi)
    from scipy.special import ndtr  # here, not at the top: the CLI imports this module for a
    # default when it builds its parser, and scipy.special costs every command 0.25 s

    q = ndtr(-(u * (1.0 - rho) + rho * y) / s)
    return float(np.sum(w * phi * q))


def expected_false_events(u: float, rho: float, n_frames: float) -> float:
    """Upper bound on the expected false events (both signs) in ``n_frames`` quiet frames at level ``u``."""
    return 2.0 * n_frames * upcrossing_probability(u, rho)


def level_for_rate(false_per_hour: float, rho: float, hop_s: float) -> float:
    """The level ``u`` (in standard deviations of the statistic) whose crossing count gives at most
    ``false_per_hour`` false events per hour of quiet baseline (bisection; monotone in ``u``)."""
    if not (false_per_hour > 0 and hop_s > 0):
        raise ValueError("the false-event rate and the frame spacing must be positive")
    n = 3600.0 / hop_s
    lo, hi = 0.0, 40.0
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        if expected_false_events(mid, rho, n) > false_per_hour:
            lo = mid
        else:
            hi = mid
    return hi
