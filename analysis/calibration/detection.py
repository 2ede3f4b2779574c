"""Detection range of a target: the rules that decide whether a range is reported, and how.

The threshold is ``k`` times the frequency noise at the dwell time (the overlapping Allan
deviation of the target-free baselines at an averaging time equal to the dwell,
:mod:`.threshold`), or a value the user gives. The range is the largest distance at which the
target's |shift| is at or above the threshold.

Why ``k = 5`` by default: a reading is a dwell-long mean compared with a baseline interpolated
from two neighbouring dwell-long means, so its noise is about ``sqrt(1.5)`` times the Allan
deviation at the dwell (white frequency noise, adjacent averages). ``5 sigma_A`` is then about
4.1 standard deviations of a reading: a two-sided false-alarm probability of about 4e-5 per
reading for Gaussian noise, i.e. roughly one false call in 20 000 readings, with margin for the
heavier tails of real oscillators. ``k = 3`` would give about 1.4 % per reading, a false call
every few dozen readings.

How (:func:`detection_range`):

* **measured**: the threshold is crossed between two calibration points; the range is
  interpolated between them (:mod:`.rangemc`), whatever a curve fit says;
* **extrapolated**: every point is above the threshold; the fitted law's shape is carried on from
  the farthest point, but only from a fit that passes its chi-squared test and only up to
  :data:`EXTRAPOLATION_LIMIT` times the farthest distance (the far field falls as d^-6, so 1.5x
  farther is already 11x weaker than the farthest point measured);
* **undefined** (``None``, with a reason): no threshold; the target is not seen (no significant
  shift: nothing to report, not even advice); no point reaches the threshold; or the range lies
  beyond the farthest point with no accepted fit, or beyond the extrapolation limit.

The 95 % interval is the Monte Carlo interval of :func:`.rangemc.range_interval`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import optimize

from coilshift.analysis.calibration.defaults import DEFAULT_BOOTSTRAP, DEFAULT_K, DEFAULT_SEED  # noqa: F401  (re-exported)
from coilshift.analysis.calibration.curvefit import DIPOLE, POWER, CurveFit
from coilshift.analysis.calibration import rangemc
from coilshift.analysis.calibration.shapes import PowerShape

#: a range farther than this times the farthest calibration distance is not reported
EXTRAPOLATION_LIMIT = 1.5
MEASURED = "measured"
EXTRAPOLATED = "extrapolated"
#: what each uncertainty component is called in the outputs
COMPONENT_NAMES = {"points": "point errors", "placement": "placement tolerance",
                   "threshold": "threshold's noise estimate", "model": "interpolation model"}


def closed_form_range_mm(a_hz: float, radius_mm: float, threshold_hz: float, offset_mm: float = 0.0) -> float:
    """Distance where ``|A| (R^2/(R^2+(d+d0)^2))^3`` falls to the threshold ``T``.

    ``d = R sqrt((|A|/T)^(1/3) - 1) - d0``; 0 when the curve is below ``T`` already at
    ``d = 0`` (nothing to detect even in contact); NaN when ``T`` is not positive.
    """
    if not (threshold_hz > 0 and math.isfinite(threshold_hz)):
        return math.nan
    ratio = abs(a_hz) / threshold_hz
    if ratio <= 1.0:
        return 0.0
    d = radius_mm * math.sqrt(ratio ** (1.0 / 3.0) - 1.0) - offset_mm
    return max(d, 0.0)


def numeric_range_mm(fit: CurveFit, threshold_hz: float, d_max_mm: float = 1e6) -> float:
    """Largest distance where the fitted ``|shift|`` is at or above ``threshold_hz`` (root finding).

    The curves fall monotonically with distance beyond the coil plane, so the root of
    ``|shift(d)| - T`` is bracketed by doubling an upper bound. Returns 0 when ``|shift(0)| < T``
    (or, for the power law, the curve is below ``T`` at 1 um), NaN when ``T`` is not positive.
    """
    if not (threshold_hz > 0 and math.isfinite(threshold_hz)):
        return math.nan
    lo = 1e-3 if fit.model == POWER else 0.0

    def f(d):
        return float(abs(fit.predict(d))) - threshold_hz

    if f(lo) < 0:
        return 0.0
    hi = max(1.0, 2 * lo)
    while f(hi) >= 0:
        hi *= 2.0
        if hi > d_max_mm:
            return math.inf
    return float(optimize.brentq(f, lo, hi, xtol=1e-9, rtol=1e-12))


@dataclass(frozen=True)
class RangeResult:
    """Detection range of one target.

    Attributes
    ----------
    range_mm : the range, None when undefined (see ``reason``)
    ci_mm : (low, high) 95 % Monte Carlo interval, None when undefined or no draws were asked for
    basis : ``measured`` (interpolated between two points), ``extrapolated`` (past the farthest
        point, from an accepted fit's shape) or '' when undefined
    bracket_mm : the two distances the range lies between (measured), or (farthest, None)
    extrapolated_mm : where the fitted curve crosses the threshold, even when not reported (NaN if none)
    closed_form_mm : the closed-form value for the single-loop curve (NaN for other curves)
    threshold_hz : threshold used
    reason : why the range is undefined, '' when defined
    n_draws : Monte Carlo draws behind the interval
    components : component -> (low, high) interval with only that component on
    dominant : the component with the widest interval
    lower_bound_mm : for a range beyond the farthest point that cannot be extrapolated: that point
    """

    range_mm: float | None
    ci_mm: tuple[float, float] | None
    extrapolated_mm: float
    closed_form_mm: float
    threshold_hz: float
    reason: str = ""
    n_draws: int = 0
    basis: str = ""
    bracket_mm: tuple | None = None
    components: dict = field(default_factory=dict)
    dominant: str = ""
    lower_bound_mm: float | None = None

    def component_label(self, name: str) -> str:
        label = COMPONENT_NAMES[name]
        return label.replace("interpolation", "extrapolation") if self.basis == EXTRAPOLATED else label

    def shares(self) -> dict:
        w2 = {k: (hi - lo) ** 2 for k, (lo, hi) in self.components.items()}
        tot = sum(w2.values())
        return {k: (v / tot if tot > 0 else 0.0) for k, v in w2.items()}

    def to_dict(self) -> dict:
        shares = self.shares()
        return {"range_mm": self.range_mm, "range_ci_mm": list(self.ci_mm) if self.ci_mm else None,
                "range_basis": self.basis or None,
                "bracket_mm": list(self.bracket_mm) if self.bracket_mm else None,
                "range_lower_bound_mm": self.lower_bound_mm,
                "extrapolated_mm": self.extrapolated_mm, "closed_form_mm": self.closed_form_mm,
                "threshold_hz": self.threshold_hz, "reason": self.reason, "draws": self.n_draws,
                "uncertainty": {k: {"label": self.component_label(k), "ci_mm": list(v), "width_mm": v[1] - v[0],
                                    "share": shares[k]} for k, v in self.components.items()},
                "dominant": self.dominant or None}


def shape_of(fit: CurveFit | None, power: CurveFit | None):
    """The response shape the range interpolates in: the main fit's (accepted or not: only its
    curvature is used, the interpolant passes through the points), else the power law's, else
    the far-field d^-6."""
    if fit is not None and all(fit.determined(k) for k in fit.free if k not in ("a_hz",)):
        return fit.shape()
    if power is not None and power.determined("p"):
        return power.shape()
    return PowerShape(6.0)


def _shape_draws(fit: CurveFit):
    """Draws of the fit's shape parameters (amplitude left out: the shape is anchored at a point)."""
    names = [k for k in fit.free if k not in ("a_hz", "c_hz")]
    if not names:
        return None
    idx = [fit.free.index(k) for k in names]
    sub = fit.cov[np.ix_(idx, idx)]
    mean = np.array([fit.params[k] for k in names])

    def draws(rng, n):
        x = rng.multivariate_normal(mean, sub, size=n, check_valid="ignore", method="eigh")
        kw = {k: x[:, i:i + 1] for i, k in enumerate(names)}
        if "radius_mm" in kw:
            kw["radius_mm"] = np.maximum(kw["radius_mm"], 1e-6)
        if "p" in kw:
            kw["p"] = np.maximum(kw["p"], 1e-3)
        return fit.shape(**kw)

    return draws


def detection_range(distance_mm, shift_hz, cov, threshold_hz: float, *, seen: bool = True, sign: float = 1.0,
                    threshold_edf: float = math.inf, placement_mm: float = 0.0, fit: CurveFit | None = None,
                    power: CurveFit | None = None, n_draws: int = rangemc.DEFAULT_DRAWS, seed: int = DEFAULT_SEED,
                    fit_reason: str = "") -> RangeResult:
    """Detection range of one target from its points, with a 95 % Monte Carlo interval.

    Parameters
    ----------
    distance_mm, shift_hz, cov : the target's points and their covariance
    threshold_hz : detection threshold (Hz, positive); ``threshold_edf`` its degrees of freedom
    seen : the family-wise significance test found the target (else nothing is reported)
    sign : sign of the target's response
    placement_mm : distance placement tolerance +-delta
    fit : the main curve fit (its shape is used to interpolate; to extrapolate only if accepted)
    power : the power-law fit (shape fallback)
    n_draws, seed : Monte Carlo draws (0: no interval) and seed
    fit_reason : why there is no fit, when there is none

    Returns
    -------
    RangeResult
    """
    nan = math.nan
    if not (threshold_hz > 0 and math.isfinite(threshold_hz)):
        return RangeResult(None, None, nan, nan, threshold_hz, "no threshold (no noise estimate and none given)")
    if not seen:
        return RangeResult(None, None, nan, nan, threshold_hz, "not detected: no significant shift at any distance")
    d = np.asarray(distance_mm, float)
    order = np.argsort(d)
    d, y = d[order], np.asarray(shift_hz, float)[order]
    c = np.asarray(cov, float)[np.ix_(order, order)]
    curve = fit if fit is not None and fit.accepted else None
    closed = nan
    if curve is not None and curve.model == DIPOLE:
        p = curve.params
        closed = closed_form_range_mm(p["a_hz"], p["radius_mm"], threshold_hz, p["offset_mm"])
    extrap = numeric_range_mm(curve, threshold_hz) if curve is not None else nan
    prob = rangemc.RangeProblem(d, y, c, float(sign), float(threshold_hz), float(threshold_edf),
                                float(placement_mm), shape_of(fit, power))
    rng_mm, last, _ = rangemc.nominal_range_mm(prob)
    if last < 0:
        return RangeResult(None, None, extrap, closed, threshold_hz,
                           "no calibration point reaches the threshold: move the target closer")
    basis, bracket = MEASURED, (float(d[last]), float(d[last + 1]) if last + 1 < d.size else None)
    if last >= d.size - 1:
        d_far = float(d[-1])
        if curve is None:
            why = fit_reason or ("the curve fit is rejected by its chi-squared test" if fit is not None
                                 else "there is no curve fit")
            return RangeResult(None, None, extrap, closed, threshold_hz,
                               f"beyond the farthest calibration distance ({d_far:g} mm) and {why}: no "
                               "extrapolation; calibrate farther out", lower_bound_mm=d_far)
        prob = rangemc.RangeProblem(d, y, c, float(sign), float(threshold_hz), float(threshold_edf),
                                    float(placement_mm), curve.shape(), _shape_draws(curve))
        rng_mm, _, _ = rangemc.nominal_range_mm(prob)
        if not (rng_mm <= EXTRAPOLATION_LIMIT * d_far):
            return RangeResult(None, None, rng_mm, closed, threshold_hz,
                               f"range lies beyond {EXTRAPOLATION_LIMIT:g} x the farthest calibration distance "
                               f"({d_far:g} mm): calibrate farther out", lower_bound_mm=d_far)
        basis = EXTRAPOLATED
    if n_draws <= 0:
        return RangeResult(float(rng_mm), None, extrap, closed, threshold_hz, "", 0, basis, bracket)
    iv = rangemc.range_interval(prob, n_draws, seed)
    return RangeResult(float(rng_mm), iv.ci_mm, extrap, closed, threshold_hz, "", iv.n_draws, basis, bracket,
                       iv.components, iv.dominant)


def noise_at_dwell_hz(t_s: np.ndarray, freq_hz: np.ndarray, dwell_s: float) -> tuple[float, float]:
    """(noise_hz, tau_s) of :func:`.threshold.noise_at_dwell` (NaN, NaN when the baselines
    support no averaging time at all)."""
    from coilshift.analysis.calibration.threshold import noise_at_dwell

    est = noise_at_dwell(t_s, freq_hz, dwell_s)
    return est.noise_hz, est.tau_s
