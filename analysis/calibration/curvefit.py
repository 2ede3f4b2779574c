"""Shift-versus-distance curves: the on-axis dipole model and a power-law alternative.

A small target on the axis of a loop of radius R at distance z becomes an induced dipole in the
loop's field, ``H ~ R^2/(R^2+z^2)^(3/2)``; by reciprocity the change of the loop's inductance is
proportional to the dipole's moment times the field per ampere at the target, i.e. to ``H^2``,
so (Wait 1951; see docs/calibration.md)::

    shift(d) = A * (R^2 / (R^2 + (d + d0)^2))^3        (falls as d^-6 far from the coil)

``A`` is the signed shift at the coil plane, ``R`` an effective coil radius, ``d0`` an optional
offset between the distance reference (housing face) and the coil plane. The fits are weighted
least squares (``scipy.optimize.least_squares``, weights 1/stderr). Parameter errors come from
the inverse of ``J^T J``; when chi-squared per degree of freedom exceeds 1 they are scaled up by
it (the model or the errors fall short), never scaled down.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import optimize, stats

DIPOLE = "dipole"
POWER = "power"


class FitError(ValueError):
    """The points do not allow this fit (too few, no spread in distance)."""


def dipole_shift(distance_mm, a_hz: float, radius_mm: float, offset_mm: float = 0.0) -> np.ndarray:
    """On-axis small-target response ``A (R^2/(R^2+(d+d0)^2))^3`` in Hz."""
    z = np.asarray(distance_mm, dtype=float) + offset_mm
    r2 = radius_mm * radius_mm
    return a_hz * (r2 / (r2 + z * z)) ** 3


def power_shift(distance_mm, c_hz: float, p: float) -> np.ndarray:
    """Power law ``C d^-p`` in Hz (``C`` is the shift at 1 mm)."""
    return c_hz * np.asarray(distance_mm, dtype=float) ** (-p)


@dataclass
class CurveFit:
    """A fitted shift-versus-distance curve.

    Attributes
    ----------
    model : ``"dipole"`` or ``"power"``
    params : fitted and fixed parameter values by name (``a_hz``, ``radius_mm``, ``offset_mm``
        for the dipole; ``c_hz``, ``p`` for the power law)
    errors : one-sigma errors by name (0 for fixed parameters)
    free : names of the fitted parameters, in covariance order
    cov : covariance of the free parameters
    chi2, dof : weighted sum of squared residuals and degrees of freedom
    distance_mm, shift_hz, stderr_hz : the points fitted
    """

    model: str
    params: dict
    errors: dict
    free: tuple
    cov: np.ndarray
    chi2: float
    dof: int
    distance_mm: np.ndarray = field(repr=False)
    shift_hz: np.ndarray = field(repr=False)
    stderr_hz: np.ndarray = field(repr=False)

    def predict(self, distance_mm) -> np.ndarray:
        """The fitted shift (Hz) at ``distance_mm``."""
        if self.model == DIPOLE:
            return dipole_shift(distance_mm, self.params["a_hz"], self.params["radius_mm"],
                                self.params["offset_mm"])
        return power_shift(distance_mm, self.params["c_hz"], self.params["p"])

    @property
    def residuals_hz(self) -> np.ndarray:
        return self.shift_hz - self.predict(self.distance_mm)

    @property
    def normalized_residuals(self) -> np.ndarray:
        return self.residuals_hz / self.stderr_hz

    @property
    def chi2_red(self) -> float:
        return self.chi2 / self.dof if self.dof > 0 else math.nan

    @property
    def p_value(self) -> float:
        """Probability of a chi-squared at least this large if the model and errors are right."""
        return float(stats.chi2.sf(self.chi2, self.dof)) if self.dof > 0 else math.nan

    def to_dict(self) -> dict:
        return {"model": self.model, "params": dict(self.params), "errors": dict(self.errors),
                "chi2": self.chi2, "dof": self.dof, "chi2_red": self.chi2_red, "p_value": self.p_value}


def _prepare(distance_mm, shift_hz, stderr_hz):
    d = np.asarray(distance_mm, dtype=float)
    y = np.asarray(shift_hz, dtype=float)
    e = np.asarray(stderr_hz, dtype=float)
    ok = np.isfinite(d) & np.isfinite(y)
    d, y, e = d[ok], y[ok], e[ok]
    good = np.isfinite(e) & (e > 0)
    # a point without a usable error gets the largest error seen (it should not dominate)
    floor = float(e[good].max()) if good.any() else max(float(np.abs(y).max(initial=0.0)) * 1e-3, 1e-9)
    e = np.where(good, e, floor)
    return d, y, e


def _finish(model, names, free, x, fixed, res, d, y, e) -> CurveFit:
    chi2 = float(np.sum(res.fun ** 2))
    dof = int(len(d) - len(free))
    jac = res.jac
    try:
        cov = np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError:
        cov = np.linalg.pinv(jac.T @ jac)
    if dof > 0 and chi2 / dof > 1.0:
        cov = cov * (chi2 / dof)
    params = dict(fixed)
    errors = {k: 0.0 for k in fixed}
    for i, name in enumerate(free):
        params[name] = float(x[i])
        errors[name] = float(math.sqrt(max(cov[i, i], 0.0)))
    params = {k: params[k] for k in names}
    errors = {k: errors[k] for k in names}
    return CurveFit(model, params, errors, tuple(free), cov, chi2, dof, d, y, e)


def fit_dipole(distance_mm, shift_hz, stderr_hz, radius_mm: float | None = None,
               fit_offset: bool = False, start: dict | None = None) -> CurveFit:
    """Weighted least-squares fit of ``A (R^2/(R^2+(d+d0)^2))^3``.

    Parameters
    ----------
    distance_mm, shift_hz, stderr_hz : calibration points of one target
    radius_mm : coil radius when known (then fixed), else fitted
    fit_offset : also fit the offset ``d0`` between distance reference and coil plane
        (bounded to keep ``d + d0 >= 0`` at the nearest point); fixed at 0 otherwise
    start : starting values (used by the bootstrap to refit quickly)

    Raises
    ------
    FitError : fewer points than free parameters, or fewer than two distinct distances
    """
    d, y, e = _prepare(distance_mm, shift_hz, stderr_hz)
    free = ["a_hz"] + (["radius_mm"] if radius_mm is None else []) + (["offset_mm"] if fit_offset else [])
    if len(np.unique(d)) < 2 or len(d) < len(free):
        raise FitError(f"dipole fit needs at least {max(2, len(free))} distances, got {len(np.unique(d))}")
    fixed = {}
    if radius_mm is not None:
        if not (math.isfinite(radius_mm) and radius_mm > 0):
            raise FitError(f"coil radius must be positive, got {radius_mm}")
        fixed["radius_mm"] = float(radius_mm)
    if not fit_offset:
        fixed["offset_mm"] = 0.0
    w = 1.0 / e

    def linear_a(r, off):
        g = dipole_shift(d, 1.0, r, off)
        den = np.sum((w * g) ** 2)
        return float(np.sum(w * w * g * y) / den) if den > 0 else 0.0

    if start is None:
        # grid over the radius (A solved linearly at each) for a start away from local minima
        radii = [fixed["radius_mm"]] if "radius_mm" in fixed else np.geomspace(
            0.1 * max(d.min(), 1.0), 10.0 * max(d.max(), 1.0), 80)
        best = None
        for r in radii:
            a = linear_a(r, 0.0)
            c = float(np.sum((w * (dipole_shift(d, a, r) - y)) ** 2))
            if best is None or c < best[0]:
                best = (c, a, r)
        start = {"a_hz": best[1], "radius_mm": best[2], "offset_mm": 0.0}
    x0 = np.array([start[k] for k in free], dtype=float)
    lo = np.array([-np.inf if k == "a_hz" else (1e-6 if k == "radius_mm" else -0.9 * d.min()) for k in free])
    hi = np.full(len(free), np.inf)
    x0 = np.maximum(x0, np.where(np.isfinite(lo), lo, -np.inf))  # least_squares needs lo <= x0

    def resid(x):
        p = dict(fixed)
        p.update(zip(free, x))
        return w * (dipole_shift(d, p["a_hz"], p["radius_mm"], p["offset_mm"]) - y)

    res = optimize.least_squares(resid, x0, bounds=(lo, hi), x_scale="jac", method="trf")
    return _finish(DIPOLE, ("a_hz", "radius_mm", "offset_mm"), free, res.x, fixed, res, d, y, e)


def fit_power_law(distance_mm, shift_hz, stderr_hz, start: dict | None = None) -> CurveFit:
    """Weighted least-squares fit of ``C d^-p`` (``C`` signed, ``p > 0``).

    Started from the straight-line fit of ``log|shift|`` against ``log d``.

    Raises
    ------
    FitError : fewer than two distinct positive distances
    """
    d, y, e = _prepare(distance_mm, shift_hz, stderr_hz)
    pos = d > 0
    d, y, e = d[pos], y[pos], e[pos]
    if len(np.unique(d)) < 2:
        raise FitError(f"power-law fit needs at least 2 distances above 0 mm, got {len(np.unique(d))}")
    w = 1.0 / e
    if start is None:
        sign = 1.0 if np.sum(w * w * y) >= 0 else -1.0
        ay = np.abs(y)
        keep = ay > 0
        lw = (ay[keep] / e[keep]) ** 2  # weight of log|y| is (|y|/e)^2
        slope, icpt = np.polyfit(np.log(d[keep]), np.log(ay[keep]), 1, w=np.sqrt(lw)) if keep.sum() >= 2 \
            else (-6.0, math.log(max(ay.max(), 1e-12)) + 6 * math.log(d.min()))
        start = {"c_hz": sign * math.exp(icpt), "p": max(-slope, 0.1)}
    free = ["c_hz", "p"]
    x0 = np.array([start["c_hz"], start["p"]], dtype=float)

    def resid(x):
        return w * (power_shift(d, x[0], x[1]) - y)

    res = optimize.least_squares(resid, x0, bounds=([-np.inf, 1e-3], [np.inf, 50.0]), x_scale="jac")
    return _finish(POWER, ("c_hz", "p"), free, res.x, {}, res, d, y, e)
