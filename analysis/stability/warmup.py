"""The settled start: when the fitted warm-up's rate of change falls below a threshold for good.

The warm-up is the exponential part of the settling fit (:mod:`.settling`), without the linear
drift. Its rate r(t) = -sum_i (a_i / tau_i) exp(-(t - t1) / tau_i) decays; the settled start
is the last time |r(t)| equals the threshold (for one exponential, t1 + tau ln(|a| / (tau
r_max)), the same formula a single exponential settling gives by hand). Its uncertainty
follows from the fit's covariance of (a_i, ln tau_i) by first-order propagation (the delta
method: BIPM et al., *Guide to the Expression of Uncertainty in Measurement*, JCGM 100:2008,
section 5.1) through the implicit equation |r(t*)| = r_max.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from coilshift.analysis.stability.settling import SettlingFit

DEFAULT_SETTLE_PPM_PER_MIN = 1.0  # warm-up threshold: 1 ppm of the nominal frequency per minute


@dataclass
class Warmup:
    """When the warm-up has settled.

    Attributes
    ----------
    threshold_hz_per_min : |warm-up rate| counted as settled
    settled : the warm-up rate is below the threshold by the end of the log (True also when
        there is no warm-up term or it is below the threshold from the start)
    warmup_s : settled start measured from the start of the log (None when never settled)
    u_warmup_s : its standard uncertainty (NaN when not determined; 0 when settled from the start)
    t_settled_s : the settled start on the log's clock (None when never settled)
    reason : one line saying how the start was found
    """

    threshold_hz_per_min: float
    settled: bool
    warmup_s: float | None
    u_warmup_s: float
    t_settled_s: float | None
    reason: str


def _crossing(fit: SettlingFit, r_max: float) -> float:
    """Time after t_ref of the last crossing of |rate| = r_max (the rate is above it at 0)."""
    def excess(t: float) -> float:
        return abs(float(fit.warmup_rate_hz_per_s(fit.t_ref_s + t))) - r_max

    # log-spaced from well inside the fastest term to 60 of the slowest time constants (beyond
    # that every term has decayed by e^-60); a sum of terms of opposite sign may cross more than once
    t_grid = np.concatenate(([0.0], np.geomspace(min(fit.taus_s) / 100.0, 60.0 * max(fit.taus_s), 20000)))
    above = np.abs(fit.warmup_rate_hz_per_s(fit.t_ref_s + t_grid)) > r_max
    last = int(np.flatnonzero(above)[-1])
    lo, hi = float(t_grid[last]), float(t_grid[min(last + 1, t_grid.size - 1)])
    for _ in range(60):  # bisection to float resolution
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if excess(mid) > 0 else (lo, mid)
    return 0.5 * (lo + hi)


def _u_crossing(fit: SettlingFit, t_rel: float) -> float:
    """Delta-method uncertainty of the crossing time from cov(a_i, ln tau_i)."""
    a = np.asarray(fit.amplitudes_hz)
    tau = np.asarray(fit.taus_s)
    e = np.exp(-t_rel / tau)
    rate = -np.sum(a / tau * e)
    s = math.copysign(1.0, rate)
    d_a = -e / tau  # d rate / d a_i
    d_lntau = -a / tau * e * (t_rel / tau - 1.0)  # d rate / d ln tau_i
    d_t = np.sum(a / tau ** 2 * e)  # d rate / d t
    if d_t == 0:
        return math.nan
    g = -np.concatenate([d_a, d_lntau]) / d_t  # implicit function: dt*/dtheta = -(dF/dtheta)/(dF/dt)
    var = float(g @ fit.cov_warmup @ g) if np.all(np.isfinite(fit.cov_warmup)) else math.nan
    return math.sqrt(var) if var >= 0 else math.nan


def settled_start(fit: SettlingFit, threshold_hz_per_min: float, log_start_s: float) -> Warmup:
    """Settled start from a settling fit and a rate threshold.

    Parameters
    ----------
    fit : the settling fit of the record
    threshold_hz_per_min : |warm-up rate| counted as settled, Hz/min
    log_start_s : start of the log (the settled start is reported from here)
    """
    r_max = threshold_hz_per_min / 60.0
    thr = float(threshold_hz_per_min)
    if fit.n_exp == 0:
        why = fit.note or "no warm-up term is supported by the data"
        return Warmup(thr, True, fit.t_ref_s - log_start_s, 0.0, fit.t_ref_s, f"{why}: settled from the first usable frame")
    if fit.tau_bound == "upper":
        return Warmup(thr, False, None, math.nan, None,
                      f"a warm-up time constant ({max(fit.taus_s):.4g} s) is longer than the log: "
                      "the log ends before the oscillator settles")
    if abs(float(fit.warmup_rate_hz_per_s(fit.t_ref_s))) <= r_max:
        return Warmup(thr, True, fit.t_ref_s - log_start_s, 0.0, fit.t_ref_s,
                      f"the warm-up rate is below {thr:.3g} Hz/min from the first usable frame")
    t_rel = _crossing(fit, r_max)
    t_abs = fit.t_ref_s + t_rel
    if t_abs > fit.t_end_s:
        rate_end = 60.0 * abs(float(fit.warmup_rate_hz_per_s(fit.t_end_s)))
        return Warmup(thr, False, None, math.nan, None,
                      f"the warm-up rate is still {rate_end:.3g} Hz/min at the end of the log (threshold "
                      f"{thr:.3g} Hz/min, reached {t_abs - fit.t_end_s:.4g} s after it)")
    return Warmup(thr, True, t_abs - log_start_s, _u_crossing(fit, t_rel), t_abs,
                  f"the warm-up rate falls below {thr:.3g} Hz/min")
