"""Detection threshold and detection range, with a bootstrap confidence interval.

The threshold is ``k`` times the frequency noise at the dwell time (the overlapping Allan
deviation of the target-free baselines at an averaging time equal to the dwell), or a value the
user gives. The range is the largest distance at which the fitted ``|shift|`` is at or above the
threshold. For the dipole curve it has a closed form,
``d = R sqrt((|A|/T)^(1/3) - 1) - d0``; the numeric root of the fitted curve is used for any
model and must agree with it.

Why ``k = 5`` by default: a reading is a dwell-long mean compared with a baseline interpolated
from two neighbouring dwell-long means, so its noise is about ``sqrt(1.5)`` times the Allan
deviation at the dwell (white frequency noise, adjacent averages). ``5 sigma_A`` is then about
4.1 standard deviations of a reading: a two-sided false-alarm probability of about 4e-5 per
reading for Gaussian noise, i.e. roughly one false call in 20 000 readings, with margin for the
heavier tails of real oscillators. ``k = 3`` would give about 1.4 % per reading, a false call
every few dozen readings.

The range is reported as undefined (``None``) when no threshold is known, when no calibration
point reaches the threshold (detection was never seen, only extrapolated), or when the range lies
more than :data:`EXTRAPOLATION_LIMIT` times beyond the farthest calibration distance (the far
field falls as d^-6, so 1.5x farther is already 11x weaker than the farthest point measured);
the extrapolated value is still given for information.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize

from coilshift.logger.errors import InputError

from coilshift.analysis.calibration.defaults import DEFAULT_BOOTSTRAP, DEFAULT_K, DEFAULT_SEED  # noqa: F401  (re-exported)
from coilshift.analysis.calibration.curvefit import DIPOLE, CurveFit, FitError, fit_dipole, fit_power_law

#: a range farther than this times the farthest calibration distance is not reported
EXTRAPOLATION_LIMIT = 1.5


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

    Both curves fall monotonically with distance beyond the coil plane, so the root of
    ``|shift(d)| - T`` is bracketed by doubling an upper bound. Returns 0 when ``|shift(0)| < T``
    (or, for the power law, the curve is below ``T`` at 1 um), NaN when ``T`` is not positive.
    """
    if not (threshold_hz > 0 and math.isfinite(threshold_hz)):
        return math.nan
    lo = 0.0 if fit.model == DIPOLE else 1e-3

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
    ci_mm : (low, high) 95 % bootstrap interval, None when the range is undefined
    extrapolated_mm : the curve's range even when beyond the calibrated distances (NaN if none)
    closed_form_mm : the closed-form value for the dipole curve (NaN for other curves)
    threshold_hz : threshold used
    reason : why the range is undefined, '' when defined
    n_boot : bootstrap replicates that gave a fit
    """

    range_mm: float | None
    ci_mm: tuple[float, float] | None
    extrapolated_mm: float
    closed_form_mm: float
    threshold_hz: float
    reason: str = ""
    n_boot: int = 0

    def to_dict(self) -> dict:
        return {"range_mm": self.range_mm, "range_ci_mm": list(self.ci_mm) if self.ci_mm else None,
                "extrapolated_mm": self.extrapolated_mm, "closed_form_mm": self.closed_form_mm,
                "threshold_hz": self.threshold_hz, "reason": self.reason, "bootstrap_fits": self.n_boot}


def _refit(fit: CurveFit, y: np.ndarray) -> CurveFit:
    start = dict(fit.params)
    if fit.model == DIPOLE:
        radius = None if "radius_mm" in fit.free else fit.params["radius_mm"]
        return fit_dipole(fit.distance_mm, y, fit.stderr_hz, radius_mm=radius,
                          fit_offset="offset_mm" in fit.free, start=start)
    return fit_power_law(fit.distance_mm, y, fit.stderr_hz, start=start)


def bootstrap_ranges_mm(fit: CurveFit, threshold_hz: float, n_boot: int = DEFAULT_BOOTSTRAP,
                        seed: int = DEFAULT_SEED) -> np.ndarray:
    """Ranges of ``n_boot`` refits to calibration points redrawn within their errors.

    Each replicate draws every point from a normal distribution about the fitted curve with the
    point's standard error (scaled by ``sqrt(chi2/dof)`` when that exceeds 1) and refits the same
    model. This is the parametric bootstrap (Efron & Tibshirani, *An Introduction to the
    Bootstrap*, 1993, section 6.5): with the handful of distances of a calibration run, resampling
    the points themselves would often leave too few distinct distances for a fit. Seeded, so
    reproducible. Replicates whose fit fails are dropped.
    """
    rng = np.random.default_rng(seed)
    scale = math.sqrt(max(1.0, fit.chi2_red)) if fit.dof > 0 else 1.0
    mu = fit.predict(fit.distance_mm)
    out = []
    for _ in range(int(n_boot)):
        y = mu + rng.standard_normal(mu.size) * fit.stderr_hz * scale
        try:
            f = _refit(fit, y)
        except (FitError, ValueError, np.linalg.LinAlgError):
            continue
        out.append(numeric_range_mm(f, threshold_hz))
    return np.asarray(out, dtype=float)


def detection_range(fit: CurveFit | None, threshold_hz: float, n_boot: int = DEFAULT_BOOTSTRAP,
                    seed: int = DEFAULT_SEED, fit_reason: str = "") -> RangeResult:
    """Detection range of one target from its fitted curve, with a 95 % bootstrap interval.

    Parameters
    ----------
    fit : fitted curve (None when the fit failed; ``fit_reason`` says why)
    threshold_hz : detection threshold (Hz, positive)
    n_boot, seed : bootstrap replicates and random seed (0 replicates: no interval)

    Returns
    -------
    RangeResult
    """
    nan = math.nan
    if not (threshold_hz > 0 and math.isfinite(threshold_hz)):
        return RangeResult(None, None, nan, nan, threshold_hz, "no threshold (no noise estimate and none given)")
    if fit is None:
        return RangeResult(None, None, nan, nan, threshold_hz, fit_reason or "no curve fitted")
    closed = nan
    if fit.model == DIPOLE:
        p = fit.params
        closed = closed_form_range_mm(p["a_hz"], p["radius_mm"], threshold_hz, p["offset_mm"])
    d = numeric_range_mm(fit, threshold_hz)
    if not np.any(np.abs(fit.shift_hz) >= threshold_hz):
        return RangeResult(None, None, d, closed, threshold_hz,
                           "no calibration point reaches the threshold: move the target closer")
    d_far = float(np.max(fit.distance_mm))
    if not (d <= EXTRAPOLATION_LIMIT * d_far):
        return RangeResult(None, None, d, closed, threshold_hz,
                           f"range lies beyond {EXTRAPOLATION_LIMIT:g} x the farthest calibration distance "
                           f"({d_far:g} mm): calibrate farther out")
    ci = None
    boots = bootstrap_ranges_mm(fit, threshold_hz, n_boot, seed) if n_boot > 0 else np.zeros(0)
    if boots.size >= 20:
        lo, hi = np.percentile(boots, [2.5, 97.5])
        ci = (float(lo), float(hi))
    return RangeResult(float(d), ci, float(d), closed, threshold_hz, "", int(boots.size))


def noise_at_dwell_hz(t_s: np.ndarray, freq_hz: np.ndarray, dwell_s: float) -> tuple[float, float]:
    """Overlapping Allan deviation (Hz) of target-free frames at the dwell time.

    ``freq_hz`` should be NaN outside the baselines (so no Allan term straddles a target).
    When the baselines are too short for an averaging time equal to the dwell, the longest
    averaging time they support is used (halving from the dwell); for white frequency noise the
    deviation falls with averaging time, so this errs on the side of a higher threshold.

    Returns
    -------
    (noise_hz, tau_s) : NaN, NaN when the baselines support no averaging time at all
    """
    from coilshift.analysis.stability.noise import noise_at_tau_hz

    tau = float(dwell_s)
    t_s = np.asarray(t_s, float)
    if t_s.size < 3:
        return math.nan, math.nan
    step = float(np.median(np.diff(t_s)))
    while tau >= step:
        try:
            v = float(noise_at_tau_hz(t_s, freq_hz, tau))
        except (ValueError, InputError):  # baselines too short for this averaging time
            v = math.nan
        if math.isfinite(v) and v > 0:
            return v, tau
        tau /= 2.0
    return math.nan, math.nan
