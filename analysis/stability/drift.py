"""Linear frequency drift: a least-squares line whose slope error allows for correlated residuals."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from coilshift.logger.errors import InputError

from coilshift.analysis.stability.grid import UniformSeries


def _lag1(resid: np.ndarray) -> float:
    """Lag-1 autocorrelation of grid residuals, skipping pairs that touch a gap."""
    fin = np.isfinite(resid)
    if fin.sum() < 3:
        return 0.0
    r = resid - np.nanmean(resid)
    pair = fin[1:] & fin[:-1]
    den = np.sum(r[fin] ** 2)
    return float(np.sum((r[1:] * r[:-1])[pair]) / den) if den > 0 else 0.0


@dataclass
class LineFit:
    """Least-squares line y = intercept + slope (x - x_ref), with serial-correlation-aware error.

    Attributes
    ----------
    slope, u_slope : slope and its standard uncertainty allowing for lag-1 correlated residuals
    u_slope_white : the ordinary least-squares standard error (assumes independent residuals)
    intercept : fitted value at ``x_ref``
    x_ref : mean of x over the points used
    residual_rms : RMS of the residuals
    lag1 : lag-1 autocorrelation of the residuals (on the time grid)
    n, n_eff : points used, effective independent points n (1 - r1) / (1 + r1)
    """

    slope: float
    u_slope: float
    u_slope_white: float
    intercept: float
    x_ref: float
    residual_rms: float
    lag1: float
    n: int
    n_eff: float


def fit_line_ar1(x, y) -> LineFit:
    """Ordinary least squares with the slope's uncertainty inflated for AR(1) residuals.

    The residuals of a frequency record are rarely independent (flicker and random-walk FM,
    slow thermal wander), so the textbook standard error is too small. Following Santer et al.
    (J. Geophys. Res. 105(D6), 2000) the effective sample size n_eff = n (1 - r1)/(1 + r1)
    from the residuals' lag-1 autocorrelation r1 replaces n in the residual variance,
    s^2 = sum e^2 / (n_eff - 2). A negative r1 is taken as 0 so correlation never shrinks the
    error. This models the residual as first-order autoregressive; for strongly non-stationary
    noise (random-walk FM over the whole record) even this understates the uncertainty.

    Parameters
    ----------
    x, y : points in time order on a uniform grid, NaN at gaps (pairs across a gap are
        skipped when r1 is estimated; gaps are otherwise ignored)
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    fin = np.isfinite(x) & np.isfinite(y)
    n = int(fin.sum())
    if n < 3:
        raise InputError("fit: fewer than three usable points")
    xf, yf = x[fin], y[fin]
    x_ref = float(xf.mean())
    dx = xf - x_ref
    sxx = float(np.sum(dx * dx))
    if sxx <= 0:
        raise InputError("fit: the independent variable does not vary")
    slope = float(np.sum(dx * (yf - yf.mean())) / sxx)
    intercept = float(yf.mean())
    resid_all = y - (intercept + slope * (x - x_ref))
    resid = resid_all[fin]
    r1 = _lag1(resid_all)
    r1 = max(r1, 0.0)
    n_eff = n * (1 - r1) / (1 + r1) if r1 < 1 else 0.0
    ss = float(np.sum(resid ** 2))
    u_white = math.sqrt(ss / (n - 2) / sxx) if n > 2 else math.inf
    u = math.sqrt(ss / (n_eff - 2) / sxx) if n_eff > 2 else math.inf
    return LineFit(slope=slope, u_slope=u, u_slope_white=u_white, intercept=intercept, x_ref=x_ref,
                   residual_rms=math.sqrt(ss / n), lag1=r1, n=n, n_eff=n_eff)


@dataclass
class Drift:
    """Linear frequency drift over the whole record (SP 1065, drift analysis: linear fit to frequency)."""

    rate_hz_per_min: float
    u_rate_hz_per_min: float
    u_rate_white_hz_per_min: float
    freq_at_mid_hz: float
    t_mid_s: float
    residual_rms_hz: float
    residual_lag1: float
    n_eff: float


def fit_drift(series: UniformSeries) -> Drift:
    """Least-squares line through the usable samples, uncertainty as :func:`fit_line_ar1`."""
    t = series.t_s
    fit = fit_line_ar1(t, series.freq_hz)
    return Drift(rate_hz_per_min=fit.slope * 60.0, u_rate_hz_per_min=fit.u_slope * 60.0,
                 u_rate_white_hz_per_min=fit.u_slope_white * 60.0, freq_at_mid_hz=fit.intercept,
                 t_mid_s=fit.x_ref, residual_rms_hz=fit.residual_rms, residual_lag1=fit.lag1,
                 n_eff=fit.n_eff)
