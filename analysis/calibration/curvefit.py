"""Shift-versus-distance curves: the finite-winding law, the single-loop law, a power law.

By reciprocity a small target's inductance change is proportional to the square of the coil's
field per ampere at the target (Wait 1951; docs/calibration.md), so the shift is ``A g(d + d0)``
with g the squared on-axis field normalised at the face:

* ``winding`` (the coil's geometry is known, ``--coil``): ``g = h(d)^2 / h(0)^2`` with h the
  field summed over the winding's length and depth, plus the second-order term of a sphere's
  finite size when its diameter is known (:mod:`coilshift.analysis.models.windinglaw`); only A
  (and optionally d0) is fitted;
* ``dipole`` (no coil file): a single loop of effective radius R,
  ``(R^2/(R^2 + (d + d0)^2))^3`` (falls as d^-6 far away); A and R fitted;
* ``power``: ``C d^-p``, an alternative shape.

The fits are generalised least squares: residuals are whitened by the Cholesky factor of the
points' covariance (neighbouring steps share baselines, :mod:`.covariance`), to which the
distance placement tolerance adds ``(f'(d) sigma_d)^2`` (the effective-variance method, J. Orear,
Am. J. Phys. 50, 912 (1982); two passes). Each fit is tested: its chi-squared is compared with
the chi-squared distribution with ``dof`` degrees of freedom, and a fit with p <
:data:`FIT_ACCEPT_P` is *rejected* (its curve does not describe the points; it is not drawn and
not used to extrapolate). Parameter errors come from ``(J^T J)^-1`` scaled up by chi2/dof when
that exceeds 1 (Birge 1932), never down; a parameter whose error exceeds its value is "not
determined".
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
from scipy import linalg, optimize, special

from coilshift.analysis.calibration.shapes import DipoleShape, PowerShape, TableShape

DIPOLE = "dipole"
WINDING = "winding"
POWER = "power"
#: a fit whose chi-squared p-value is below this is rejected
FIT_ACCEPT_P = 0.01
#: a placement tolerance +-delta is a rectangular distribution: standard deviation delta/sqrt(3)
RECTANGULAR_SD = 1.0 / math.sqrt(3.0)


class FitError(ValueError):
    """The points do not allow this fit (too few, no spread in distance)."""


def dipole_shift(distance_mm, a_hz: float, radius_mm: float, offset_mm: float = 0.0) -> np.ndarray:
    """On-axis small-target response of a single loop ``A (R^2/(R^2+(d+d0)^2))^3`` in Hz."""
    return a_hz * DipoleShape(radius_mm, offset_mm).g(distance_mm)


def power_shift(distance_mm, c_hz: float, p: float) -> np.ndarray:
    """Power law ``C d^-p`` in Hz (``C`` is the shift at 1 mm)."""
    return c_hz * np.asarray(distance_mm, dtype=float) ** (-p)


@dataclass
class CurveFit:
    """A fitted shift-versus-distance curve.

    Attributes
    ----------
    model : ``"winding"``, ``"dipole"`` or ``"power"``
    params, errors : parameter values and one-sigma errors by name (errors 0 for fixed ones)
    free : names of the fitted parameters, in covariance order
    cov : covariance of the free parameters (Birge-scaled when chi2/dof > 1)
    chi2, dof : generalised chi-squared and degrees of freedom
    distance_mm, shift_hz : the points fitted
    stderr_hz : their effective errors (own error and placement tolerance, the diagonal used)
    fixed_from : fixed parameter -> where its value comes from
    shape_fn : for the winding law, distance_mm -> normalised shape (no offset)
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
    fixed_from: dict = field(default_factory=dict)
    shape_fn: Callable | None = field(default=None, repr=False)

    @property
    def amplitude_name(self) -> str:
        return "c_hz" if self.model == POWER else "a_hz"

    def shape(self, offset_mm=None, radius_mm=None, p=None, d_max_mm: float | None = None):
        """The fit's normalised shape (a :mod:`.shapes` object); keyword values (arrays of draws
        allowed) replace the fitted shape parameters."""
        pr = self.params
        if self.model == POWER:
            return PowerShape(pr["p"] if p is None else p)
        off = pr["offset_mm"] if offset_mm is None else offset_mm
        if self.model == DIPOLE:
            return DipoleShape(pr["radius_mm"] if radius_mm is None else radius_mm, off)
        d_max = d_max_mm or 4.0 * float(np.max(self.distance_mm)) + 1.0
        return TableShape(self.shape_fn, d_max, off)

    def predict(self, distance_mm) -> np.ndarray:
        """The fitted shift (Hz) at ``distance_mm``."""
        if self.model == POWER:
            return power_shift(distance_mm, self.params["c_hz"], self.params["p"])
        if self.model == DIPOLE:
            return dipole_shift(distance_mm, self.params["a_hz"], self.params["radius_mm"], self.params["offset_mm"])
        x = np.asarray(distance_mm, float) + self.params["offset_mm"]
        return self.params["a_hz"] * np.asarray(self.shape_fn(np.maximum(x, 0.0)), float)

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
        return float(special.chdtrc(self.dof, self.chi2)) if self.dof > 0 else math.nan

    @property
    def accepted(self) -> bool:
        """The chi-squared test passes at :data:`FIT_ACCEPT_P` (a fit with no spare degree of
        freedom cannot be tested and is not accepted)."""
        return bool(self.dof > 0 and self.p_value >= FIT_ACCEPT_P)

    def determined(self, name: str) -> bool:
        """A free parameter whose one-sigma error does not exceed its magnitude."""
        return name not in self.free or (math.isfinite(self.errors[name])
                                         and self.errors[name] <= abs(self.params[name]))

    def to_dict(self) -> dict:
        return {"model": self.model, "params": dict(self.params), "errors": dict(self.errors),
                "fixed": dict(self.fixed_from), "not_determined": [k for k in self.free if not self.determined(k)],
                "chi2": self.chi2, "dof": self.dof, "chi2_red": self.chi2_red, "p_value": self.p_value,
                "accepted": self.accepted, "accept_level_p": FIT_ACCEPT_P}


def _prepare(distance_mm, shift_hz, stderr_hz, cov):
    d = np.asarray(distance_mm, dtype=float)
    y = np.asarray(shift_hz, dtype=float)
    e = np.asarray(stderr_hz, dtype=float)
    ok = np.isfinite(d) & np.isfinite(y)
    good = np.isfinite(e) & (e > 0)
    # a point without a usable error gets the largest error seen (it should not dominate)
    floor = float(e[ok & good].max()) if (ok & good).any() else max(float(np.abs(y[ok]).max(initial=0.0)) * 1e-3, 1e-9)
    e = np.where(good, e, floor)
    if cov is None:
        c = np.diag(e ** 2)
    else:
        c = np.array(cov, dtype=float)
        bad = ~good
        c[bad, :] = 0.0
        c[:, bad] = 0.0
        c[bad, bad] = floor ** 2
    return d[ok], y[ok], c[np.ix_(ok, ok)]


def _slope(model, d: np.ndarray, p: dict) -> np.ndarray:
    h = 1e-3 * np.maximum(np.abs(d), 1.0)
    return (model(d + h, p) - model(np.maximum(d - h, 0.0), p)) / (d + h - np.maximum(d - h, 0.0))


def _gls(model, names, free, fixed, x0, lo, hi, d, y, cov, placement_mm, kind, fixed_from, shape_fn=None):
    """Whitened least squares, a second pass with the placement tolerance, the CurveFit."""
    def solve(c, start):
        chol = linalg.cholesky(c + np.eye(len(d)) * 1e-30 * np.trace(c), lower=True)

        def resid(x):
            p = dict(fixed)
            p.update(zip(free, x))
            return linalg.solve_triangular(chol, model(d, p) - y, lower=True)

        start = np.clip(start, np.where(np.isfinite(lo), lo, -np.inf), hi)
        return optimize.least_squares(resid, start, bounds=(lo, hi), x_scale="jac", method="trf")

    res = solve(cov, np.asarray(x0, float))
    c_eff = cov
    if placement_mm > 0:
        p = dict(fixed)
        p.update(zip(free, res.x))
        c_eff = cov + np.diag((_slope(model, d, p) * placement_mm * RECTANGULAR_SD) ** 2)
        res = solve(c_eff, res.x)
    chi2 = float(np.sum(res.fun ** 2))
    dof = int(len(d) - len(free))
    jtj = res.jac.T @ res.jac
    try:
        pcov = np.linalg.inv(jtj)
    except np.linalg.LinAlgError:
        pcov = np.linalg.pinv(jtj)
    if dof > 0 and chi2 / dof > 1.0:
        pcov = pcov * (chi2 / dof)
    params = dict(fixed)
    errors = {k: 0.0 for k in fixed}
    for i, name in enumerate(free):
        params[name] = float(res.x[i])
        errors[name] = float(math.sqrt(max(pcov[i, i], 0.0)))
    params = {k: params[k] for k in names}
    errors = {k: errors[k] for k in names}
    return CurveFit(kind, params, errors, tuple(free), pcov, chi2, dof, d, y, np.sqrt(np.diag(c_eff)),
                    dict(fixed_from), shape_fn)


def _offset_bounds(d: np.ndarray) -> float:
    return -0.9 * float(d.min()) if d.min() > 0 else 0.0


def fit_dipole(distance_mm, shift_hz, stderr_hz, radius_mm: float | None = None, fit_offset: bool = False,
               start: dict | None = None, cov=None, placement_mm: float = 0.0,
               radius_from: str = "coil file") -> CurveFit:
    """Fit of the single-loop law ``A (R^2/(R^2+(d+d0)^2))^3``.

    Parameters
    ----------
    distance_mm, shift_hz, stderr_hz : calibration points of one target
    radius_mm : coil radius when known (then fixed; ``radius_from`` says where it came from)
    fit_offset : also fit the offset ``d0`` between distance reference and coil plane (bounded to
        keep ``d + d0 >= 0.1 d`` at the nearest point); fixed at 0 otherwise
    start : starting values
    cov : covariance of the points (default: diagonal from ``stderr_hz``)
    placement_mm : distance placement tolerance +-delta (effective variance)

    Raises
    ------
    FitError : fewer points than free parameters, or fewer than two distinct distances
    """
    d, y, c = _prepare(distance_mm, shift_hz, stderr_hz, cov)
    free = ["a_hz"] + (["radius_mm"] if radius_mm is None else []) + (["offset_mm"] if fit_offset else [])
    if len(np.unique(d)) < 2 or len(d) < len(free):
        raise FitError(f"single-loop fit needs at least {max(2, len(free))} distances, got {len(np.unique(d))}")
    fixed, fixed_from = {}, {}
    if radius_mm is not None:
        if not (math.isfinite(radius_mm) and radius_mm > 0):
            raise FitError(f"coil radius must be positive, got {radius_mm}")
        fixed["radius_mm"], fixed_from["radius_mm"] = float(radius_mm), radius_from
    if not fit_offset:
        fixed["offset_mm"], fixed_from["offset_mm"] = 0.0, "offset not fitted"
    w = 1.0 / np.sqrt(np.diag(c))
    if start is None:
        # grid over the radius (A solved linearly at each) for a start away from local minima
        radii = [fixed["radius_mm"]] if "radius_mm" in fixed else np.geomspace(
            0.1 * max(d.min(), 1.0), 10.0 * max(d.max(), 1.0), 80)
        best = None
        for r in radii:
            g = dipole_shift(d, 1.0, r)
            den = float(np.sum((w * g) ** 2))
            a = float(np.sum(w * w * g * y) / den) if den > 0 else 0.0
            cost = float(np.sum((w * (a * g - y)) ** 2))
            if best is None or cost < best[0]:
                best = (cost, a, r)
        start = {"a_hz": best[1], "radius_mm": best[2], "offset_mm": 0.0}
    lo = np.array([-np.inf if k == "a_hz" else (1e-6 if k == "radius_mm" else _offset_bounds(d)) for k in free])

    def model(dd, p):
        return dipole_shift(dd, p["a_hz"], p["radius_mm"], p["offset_mm"])

    return _gls(model, ("a_hz", "radius_mm", "offset_mm"), free, fixed, [start[k] for k in free], lo,
                np.full(len(free), np.inf), d, y, c, placement_mm, DIPOLE, fixed_from)


def fit_winding(distance_mm, shift_hz, stderr_hz, shape_fn, fit_offset: bool = False, cov=None,
                placement_mm: float = 0.0, shape_from: str = "coil file") -> CurveFit:
    """Fit of the finite-winding law ``A g(d + d0)`` with the coil's shape g known.

    Parameters
    ----------
    shape_fn : distance_mm -> normalised shape (e.g. ``windinglaw.winding_shape`` bound to a coil)
    other parameters : as :func:`fit_dipole`

    Raises
    ------
    FitError : fewer points than free parameters
    """
    d, y, c = _prepare(distance_mm, shift_hz, stderr_hz, cov)
    free = ["a_hz"] + (["offset_mm"] if fit_offset else [])
    if len(np.unique(d)) < len(free) + (1 if fit_offset else 0) or len(d) < len(free):
        raise FitError(f"winding-law fit needs at least {len(free) + 1} distances, got {len(np.unique(d))}")
    fixed, fixed_from = {}, {"shape": shape_from}
    if not fit_offset:
        fixed["offset_mm"], fixed_from["offset_mm"] = 0.0, "offset not fitted"
    w = 1.0 / np.sqrt(np.diag(c))
    g = np.asarray(shape_fn(d), float)
    den = float(np.sum((w * g) ** 2))
    a0 = float(np.sum(w * w * g * y) / den) if den > 0 else 0.0

    def model(dd, p):
        return p["a_hz"] * np.asarray(shape_fn(np.maximum(dd + p["offset_mm"], 0.0)), float)

    x0 = [a0] + ([0.0] if fit_offset else [])
    lo = np.array([-np.inf] + ([_offset_bounds(d)] if fit_offset else []))
    return _gls(model, ("a_hz", "offset_mm"), free, fixed, x0, lo, np.full(len(free), np.inf), d, y, c,
                placement_mm, WINDING, fixed_from, shape_fn)


def fit_power_law(distance_mm, shift_hz, stderr_hz, start: dict | None = None, cov=None,
                  placement_mm: float = 0.0) -> CurveFit:
    """Fit of ``C d^-p`` (``C`` signed, ``0 < p <= 50``), started from the log-log line.

    Raises
    ------
    FitError : fewer than two distinct positive distances
    """
    d, y, c = _prepare(distance_mm, shift_hz, stderr_hz, cov)
    pos = d > 0
    d, y, c = d[pos], y[pos], c[np.ix_(pos, pos)]
    if len(np.unique(d)) < 2:
        raise FitError(f"power-law fit needs at least 2 distances above 0 mm, got {len(np.unique(d))}")
    e = np.sqrt(np.diag(c))
    if start is None:
        sign = 1.0 if np.sum(y / e ** 2) >= 0 else -1.0
        ay = np.abs(y)
        keep = ay > 0
        if keep.sum() >= 2:
            slope, icpt = np.polyfit(np.log(d[keep]), np.log(ay[keep]), 1, w=ay[keep] / e[keep])
        else:
            slope, icpt = -6.0, math.log(max(ay.max(), 1e-12)) + 6 * math.log(d.min())
        start = {"c_hz": sign * math.exp(icpt), "p": min(max(-slope, 0.1), 49.0)}

    def model(dd, p):
        return power_shift(np.maximum(dd, 1e-9), p["c_hz"], p["p"])

    return _gls(model, ("c_hz", "p"), ["c_hz", "p"], {}, [start["c_hz"], start["p"]], np.array([-np.inf, 1e-3]),
                np.array([np.inf, 50.0]), d, y, c, placement_mm, POWER, {})


def fit_curves(distance_mm, shift_hz, stderr_hz, cov=None, coil=None, placement_mm: float = 0.0,
               fit_offset: bool = False, sphere_mm: float = 0.0) -> tuple[CurveFit | None, str, CurveFit | None]:
    """The main fit and the power law of one target's points: ``(fit, reason, power)``.

    The main fit is the finite-winding law when the coil is known (``coil``, with the sphere's
    diameter ``sphere_mm`` where given), else the single-loop law; ``reason`` says why there is
    none. ``power`` is :func:`fit_power_law`, or None where it cannot be fitted.
    """
    fit, reason, power = None, "", None
    try:
        if coil is not None:
            from coilshift.analysis.models.windinglaw import winding_shape

            fit = fit_winding(distance_mm, shift_hz, stderr_hz, lambda dd: winding_shape(coil, dd, sphere_mm),
                              fit_offset=fit_offset, cov=cov, placement_mm=placement_mm,
                              shape_from="coil file" + (f", {sphere_mm:g} mm sphere" if sphere_mm > 0 else ""))
        else:
            fit = fit_dipole(distance_mm, shift_hz, stderr_hz, fit_offset=fit_offset, cov=cov,
                             placement_mm=placement_mm)
    except FitError as exc:
        reason = f"no curve: {exc}"
    try:
        power = fit_power_law(distance_mm, shift_hz, stderr_hz, cov=cov, placement_mm=placement_mm)
    except FitError:
        power = None
    return fit, reason, power
