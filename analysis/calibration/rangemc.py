"""The detection range from the measured points, and its Monte Carlo interval.

**Range.** The range is where the target's |shift| falls to the threshold T. It is read from the
calibration points themselves: between the farthest point at or above T and the next one out,
the shift is interpolated linearly in the response shape g(d) of the best available law (the
finite-winding law, the single-loop law, a power law), i.e. ``y = y_i + (y_j - y_i)
(g - g_i)/(g_j - g_i)``, which passes through both points and is exact whenever the points
follow the shape's curvature; it also copes with a far point that reads zero or the wrong sign.
Past the farthest point (every point above T) the shape is carried on from that point
("extrapolated"; the caller allows it only from a fit that passes its chi-squared test).

**Interval.** Monte Carlo propagation of distributions (JCGM 101:2008, "Evaluation of
measurement data - Supplement 1 to the GUM: propagation of distributions using a Monte Carlo
method"; the parametric bootstrap of Efron & Tibshirani, *An Introduction to the Bootstrap*,
1993, ch. 6), with no refits, all draws at once:

* ``points``: the shifts from a normal distribution with their full covariance (shared
  baselines correlate neighbouring steps, :mod:`.covariance`);
* ``placement``: each distance uniformly within +-delta of its nominal value (a tolerance is a
  rectangular distribution, JCGM 100:2008 section 4.3.7);
* ``threshold``: T = k sigma with sigma from an Allan deviation of ``edf`` equivalent degrees of
  freedom: ``edf s^2/sigma^2`` is chi-squared (NIST SP 1065 section 5.3), so sigma is drawn as
  ``s sqrt(edf / X)``, X ~ chi2(edf);
* ``model``: the interpolant's own error, a normal term whose standard deviation is estimated from
  the data's local curvature: the next-order interpolants through the bracketing points and one
  neighbour on either side (quadratic in g), whose difference from the linear one estimates its
  error (the usual error estimate of an interpolation rule: the difference from the rule one order
  higher), and the straight line in log|shift| against log d through the same two points, whose
  difference is counted at :data:`MODEL_FRACTION` where the curvature is seen on both sides (in
  full at the ends of the calibrated span and past them). A difference partly reflects the points' noise,
  which the ``points`` component already carries, so its noise-only variance (from the points'
  draws) is subtracted from its square (method of moments) before the largest is taken. For an
  extrapolation the fitted shape's parameters are also drawn from the fit's covariance.

The 95 % interval is the 2.5 and 97.5 percentiles of the draws. Each component's share is the
width of the interval with only that component on; the widest one is named as dominant.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from coilshift.analysis.calibration.defaults import DEFAULT_BOOTSTRAP

#: sources of uncertainty, in the order they are reported
COMPONENTS = ("points", "placement", "threshold", "model")
#: the interpolant's curvature error, as a fraction of its difference from the log-log line (1 sigma),
#: where neighbours on both sides show the local curvature
MODEL_FRACTION = 0.5
#: a far point below this fraction of T is taken at this fraction for the log-log line
LOGLOG_FLOOR = 0.1
#: draws for the interval with everything on (each component alone gets half as many)
DEFAULT_DRAWS = DEFAULT_BOOTSTRAP


@dataclass(frozen=True)
class RangeProblem:
    """What the range of one target is computed from.

    Attributes
    ----------
    distance_mm, shift_hz : the target's points, by increasing distance
    cov : their covariance (Hz^2)
    sign : +1 or -1, the sign of the target's response (so ``sign x shift`` is its magnitude)
    threshold_hz, threshold_edf : T and the degrees of freedom of the noise behind it (inf: given)
    placement_mm : distance placement tolerance +-delta
    shape : nominal response shape (:mod:`.shapes`)
    shape_draws : ``(rng, n) -> shape`` with its parameters drawn (extrapolation), or None
    """

    distance_mm: np.ndarray
    shift_hz: np.ndarray
    cov: np.ndarray
    sign: float
    threshold_hz: float
    threshold_edf: float
    placement_mm: float
    shape: object
    shape_draws: Callable | None = None


def _pick(a: np.ndarray, idx: np.ndarray) -> np.ndarray:
    return a[np.arange(a.shape[0]), idx]


def crossing_mm(d: np.ndarray, s: np.ndarray, t: np.ndarray, shape) -> tuple[np.ndarray, dict, np.ndarray]:
    """Range per draw from points ``d`` (draws x points, increasing), magnitudes ``s`` and thresholds ``t``.

    Returns
    -------
    d_shape : the range from the shape-linear interpolant (or the anchored shape past the ends)
    alternatives : name -> the range from another interpolant (NaN where it is not defined):
        ``loglog`` the straight log-log line, ``quad_in`` / ``quad_out`` the quadratic in g through
        the bracket and its inner / outer neighbour
    last : index of the farthest point at or above T (-1: none; n-1: extrapolated)
    """
    n = s.shape[1]
    g = shape.g(d)
    above = s >= t[:, None]
    last = np.where(above.any(axis=1), n - 1 - np.argmax(above[:, ::-1], axis=1), -1)
    i = np.clip(last, 0, max(n - 2, 0))
    j = np.minimum(i + 1, n - 1)
    gi, gj, si, sj = _pick(g, i), _pick(g, j), _pick(s, i), _pick(s, j)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        g_between = gi + (t - si) * (gj - gi) / (sj - si)
        g_beyond = g[:, -1] * t / s[:, -1]
        g_below = np.where(s[:, 0] > 0, g[:, 0] * t / s[:, 0], np.inf)
    gstar = np.where(last < 0, g_below, np.where(last >= n - 1, g_beyond, g_between))
    d_shape = np.asarray(shape.ginv(gstar[:, None]), float)[:, 0]
    d_shape = np.where(np.isfinite(gstar), np.maximum(d_shape, 0.0), 0.0)
    interior = (last >= 0) & (last < n - 1)
    alts = {"loglog": _loglog_mm(d, s, t, last)}
    for name, k in (("quad_in", i - 1), ("quad_out", j + 1)):
        ok = interior & (k >= 0) & (k <= n - 1)
        kk = np.clip(k, 0, n - 1)
        gq = _quadratic_root(gi, si, gj, sj, _pick(g, kk), _pick(s, kk), t)
        dq = np.asarray(shape.ginv(gq[:, None]), float)[:, 0]
        alts[name] = np.where(ok & np.isfinite(gq), dq, math.nan)
    return d_shape, alts, last


def _quadratic_root(g1, s1, g2, s2, g3, s3, t) -> np.ndarray:
    """g in [g2, g1] where the quadratic through (g1, s1), (g2, s2), (g3, s3) equals t (NaN if none)."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # Newton's divided differences: s = s1 + b (g - g1) + c (g - g1)(g - g2)
        b = (s2 - s1) / (g2 - g1)
        c = ((s3 - s2) / (g3 - g2) - b) / (g3 - g1)
        # in x = g - g1: c x^2 + (b - c (g2 - g1)) x + (s1 - t) = 0
        qa, qb, qc = c, b - c * (g2 - g1), s1 - t
        disc = np.sqrt(np.maximum(qb * qb - 4 * qa * qc, 0.0))
        # the cancellation-free pair of roots: q = -(qb + sign(qb) disc)/2, roots q/qa and qc/q
        q = -0.5 * (qb + np.where(qb >= 0, 1.0, -1.0) * disc)
        r1 = q / qa
        r2 = qc / q
        lo, hi = np.minimum(g1, g2), np.maximum(g1, g2)
        x1, x2 = g1 + r1, g1 + r2
        in1 = (x1 >= lo) & (x1 <= hi)
        in2 = (x2 >= lo) & (x2 <= hi)
        return np.where(in1, x1, np.where(in2, x2, math.nan))


def _loglog_mm(d: np.ndarray, s: np.ndarray, t: np.ndarray, last: np.ndarray) -> np.ndarray:
    """The straight log-log line through the bracketing points (or the two end points)."""
    n = s.shape[1]
    if n < 2:
        return np.full(s.shape[0], math.nan)
    i = np.where(last < 0, 0, np.where(last >= n - 1, n - 2, last))
    j = i + 1
    di, dj, si, sj = _pick(d, i), _pick(d, j), _pick(s, i), _pick(s, j)
    floor = LOGLOG_FLOOR * t
    interior = (last >= 0) & (last < n - 1)
    sj = np.where(interior, np.maximum(sj, floor), sj)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        slope = (np.log(sj) - np.log(si)) / (np.log(dj) - np.log(di))
        anchor_d = np.where(last >= n - 1, dj, di)
        anchor_s = np.where(last >= n - 1, sj, si)
        out = np.exp(np.log(anchor_d) + (np.log(t) - np.log(anchor_s)) / slope)
    ok = (di > 0) & (si > 0) & (sj > 0) & (slope < 0) & np.isfinite(out)
    return np.where(ok, out, math.nan)


def _draw(prob: RangeProblem, n: int, on: frozenset, rng: np.random.Generator,
          model_sd: float = 0.0) -> tuple[np.ndarray, dict]:
    y = np.broadcast_to(prob.shift_hz, (n, prob.shift_hz.size))
    if "points" in on:
        chol = np.linalg.cholesky(prob.cov + np.eye(prob.shift_hz.size) * 1e-30 * max(np.trace(prob.cov), 1e-300))
        y = y + rng.standard_normal((n, prob.shift_hz.size)) @ chol.T
    d = np.broadcast_to(prob.distance_mm, y.shape)
    if "placement" in on and prob.placement_mm > 0:
        d = np.maximum(d + rng.uniform(-prob.placement_mm, prob.placement_mm, y.shape), 0.0)
        order = np.argsort(d, axis=1)
        d, y = np.take_along_axis(d, order, 1), np.take_along_axis(np.asarray(y), order, 1)
    t = np.full(n, prob.threshold_hz)
    if "threshold" in on and math.isfinite(prob.threshold_edf):
        t = prob.threshold_hz * np.sqrt(prob.threshold_edf / rng.chisquare(prob.threshold_edf, n))
    shape = prob.shape
    if "model" in on and prob.shape_draws is not None:
        shape = prob.shape_draws(rng, n)
    d_shape, alts, _ = crossing_mm(np.asarray(d, float), prob.sign * np.asarray(y, float), t, shape)
    if "model" in on and model_sd > 0:
        d_shape = np.maximum(d_shape + rng.standard_normal(n) * model_sd, 0.0)
    return d_shape, alts


def interpolation_sd_mm(nominal: float, nominal_alts: dict, noisy: np.ndarray, noisy_alts: dict) -> float:
    """Standard deviation of the interpolant's own error (see the module notes).

    ``nominal``/``nominal_alts``: the range from the interpolant and its alternatives on the data;
    ``noisy``/``noisy_alts``: the same over draws of the points' noise alone. The log-log line
    counts at :data:`MODEL_FRACTION` where the curvature is seen on both sides of the bracket (both
    quadratic alternatives exist), in full where it is seen from one side or not at all.
    """
    both_sides = all(math.isfinite(nominal_alts.get(k, math.nan)) for k in ("quad_in", "quad_out"))
    best = 0.0
    for name, alt in nominal_alts.items():
        if not math.isfinite(alt):
            continue
        diff = noisy - noisy_alts[name]
        diff = diff[np.isfinite(diff) & (np.abs(diff) < 10.0 * max(abs(nominal), 1.0))]
        noise_var = float(np.var(diff)) if diff.size > 10 else 0.0
        sys2 = max((nominal - alt) ** 2 - noise_var, 0.0)
        weight = (MODEL_FRACTION if both_sides else 1.0) if name == "loglog" else 1.0
        best = max(best, weight * math.sqrt(sys2))
    return best


@dataclass(frozen=True)
class RangeInterval:
    """The Monte Carlo interval and each component's share.

    Attributes
    ----------
    ci_mm : 95 % interval (2.5 and 97.5 percentiles)
    components : component -> its 95 % interval with only it on
    dominant : the component with the widest interval
    n_draws : draws with everything on
    """

    ci_mm: tuple[float, float]
    components: dict
    dominant: str
    n_draws: int

    def shares(self) -> dict:
        """Each component's fraction of the summed squared widths."""
        w2 = {k: (hi - lo) ** 2 for k, (lo, hi) in self.components.items()}
        tot = sum(w2.values())
        return {k: (v / tot if tot > 0 else 0.0) for k, v in w2.items()}


def nominal_range_mm(prob: RangeProblem) -> tuple[float, int, dict]:
    """(range, index of the farthest point at or above T, alternatives) on the nominal data."""
    d_shape, alts, last = crossing_mm(prob.distance_mm[None, :], prob.sign * prob.shift_hz[None, :],
                                      np.array([prob.threshold_hz]), prob.shape)
    return float(d_shape[0]), int(last[0]), {k: float(v[0]) for k, v in alts.items()}


def range_interval(prob: RangeProblem, n_draws: int = DEFAULT_DRAWS, seed: int = 0) -> RangeInterval:
    """95 % Monte Carlo interval of the range, with every component's own interval."""
    rng = np.random.default_rng(seed)
    n = int(n_draws)
    n_c = max(n // 2, 20)
    nominal, _, nominal_alts = nominal_range_mm(prob)
    comps = {}
    pts, pts_alts = _draw(prob, n_c, frozenset(["points"]), rng)
    model_sd = interpolation_sd_mm(nominal, nominal_alts, pts, pts_alts)
    for c in COMPONENTS:
        x = pts if c == "points" else _draw(prob, n_c, frozenset([c]), rng, model_sd)[0]
        a, b = np.percentile(x, [2.5, 97.5])
        comps[c] = (float(a), float(b))
    total = _draw(prob, n, frozenset(COMPONENTS), rng, model_sd)[0]
    lo, hi = np.percentile(total, [2.5, 97.5])
    dominant = max(comps, key=lambda k: comps[k][1] - comps[k][0])
    return RangeInterval((float(lo), float(hi)), comps, dominant, n)
