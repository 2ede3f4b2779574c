"""The settled drift: the linear frequency drift once the warm-up has died away, or why it is unknown.

With no warm-up term supported (:mod:`.settling`), the drift is the slope of the straight line
through the whole record, by generalised least squares under the record's own noise (white FM
plus random-walk FM). With a warm-up, the drift is fitted again on the part of the record
that starts two of the slowest time constants after the first usable sample (the slowest term
has fallen to e^-2 = 14 % of its amplitude, faster ones much further), with exactly one
exponential for what remains of the warm-up (its time constant within a factor 4 of the
slowest one) and the noise levels estimated again there. When less than two more time
constants of log remain, the whole-log fit's drift is kept: so short a stretch cannot tell the
remainder from a drift by itself.

Why the refit: a warm-up that no sum of the fitted exponentials follows exactly (more time
constants, or a continuum of them) biases a drift taken from the whole record; past two time
constants such a warm-up is close to one decaying exponential, which the refit describes. The
remainder is always fitted, never dropped on a model test: dropping a small but real
remainder would bias the drift by about its own uncertainty. (Checked by simulation over many
seeds in tests/analysis/stability/test_settling_coverage.py and
benchmarks/settling_coverage.py.)

A drift whose uncertainty is infinite or undefined is "not determined", with the reason.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from coilshift.analysis.stability.grid import UniformSeries
from coilshift.analysis.stability.settling import SettlingFit, fit_settling

#: the drift is refitted from this many of the slowest warm-up time constants on
SETTLED_TIME_CONSTANTS = 2.0
#: ... when at least this many more remain in the log (else the whole-log fit gives the drift)
REFIT_MIN_TIME_CONSTANTS = 2.0
#: the remainder's time constant is searched within this factor of the slowest one
TAIL_TAU_FACTOR = 4.0


@dataclass
class Drift:
    """Linear frequency drift of the settled oscillator.

    Attributes
    ----------
    rate_hz_per_min, u_rate_hz_per_min : the drift and its standard uncertainty (NaN when not
        determined)
    determined : False when the log cannot give a drift (``reason`` says why)
    start_s, end_s : the stretch of the log (its clock) the drift was fitted on
    warmup_terms : exponentials fitted with it in that stretch
    reason : how the drift was found, or why it could not be
    """

    rate_hz_per_min: float
    u_rate_hz_per_min: float
    determined: bool
    start_s: float
    end_s: float
    warmup_terms: int
    reason: str


def _checked(rate_hz_per_s: float, u_hz_per_s: float, start: float, end: float, terms: int, how: str) -> Drift:
    if not (math.isfinite(rate_hz_per_s) and math.isfinite(u_hz_per_s) and u_hz_per_s > 0):
        return Drift(math.nan, math.nan, False, start, end, terms,
                     "the fit cannot separate the drift from the other terms (its uncertainty is undefined)")
    return Drift(60.0 * rate_hz_per_s, 60.0 * u_hz_per_s, True, start, end, terms, how)


def settled_drift(series: UniformSeries, fit: SettlingFit, frame_s: float | None = None,
                  confidence: float = 0.6827) -> Drift:
    """The settled drift of a record from its settling fit (see the module docstring).

    Parameters
    ----------
    series : the record on its uniform grid (as given to :func:`~.settling.fit_settling`)
    fit : its settling fit
    frame_s : tracker frame length, when known
    confidence : passed on to the refit
    """
    if not math.isfinite(fit.drift_hz_per_s):
        return Drift(math.nan, math.nan, False, fit.t_ref_s, fit.t_end_s, 0, f"not determined: {fit.note}")
    if fit.n_exp == 0:
        why = fit.note or "no warm-up term is supported by the data"
        return _checked(fit.drift_hz_per_s, fit.u_drift_hz_per_s, fit.t_ref_s, fit.t_end_s, 0,
                        f"straight line through the whole log ({why})")
    if fit.tau_bound == "upper":
        return Drift(math.nan, math.nan, False, fit.t_ref_s, fit.t_end_s, fit.n_exp,
                     f"a warm-up time constant ({max(fit.taus_s):.4g} s) is longer than the log: the log "
                     "ends before the oscillator settles, so warm-up and drift cannot be told apart")
    tau_slow = max(fit.taus_s)
    start = fit.t_ref_s + SETTLED_TIME_CONSTANTS * tau_slow
    if fit.t_end_s - start < REFIT_MIN_TIME_CONSTANTS * tau_slow:
        # too short a stretch to tell the warm-up's remainder from a drift on its own: the
        # whole-log fit's drift it is
        return _checked(fit.drift_hz_per_s, fit.u_drift_hz_per_s, fit.t_ref_s, fit.t_end_s, fit.n_exp,
                        f"from the whole-log fit: after {SETTLED_TIME_CONSTANTS:g} time constants less than "
                        f"{REFIT_MIN_TIME_CONSTANTS:g} more remain, too little to fit the drift apart")
    i0 = math.ceil((start - series.t0_s) / series.tau0_s - 1e-9)
    y = series.freq_hz.copy()
    y[:max(i0, 0)] = np.nan
    late = UniformSeries(series.t0_s, series.tau0_s, y, series.n_frames, series.n_unusable, series.n_missing,
                         series.jitter_rms)
    if late.n_used < 3:
        return Drift(math.nan, math.nan, False, start, fit.t_end_s, fit.n_exp,
                     f"the log ends before {SETTLED_TIME_CONSTANTS:g} warm-up time constants have passed ({start:.4g} s)")
    refit = fit_settling(late, frame_s, confidence, max_exp=1, min_exp=1, check_noise=False,
                         tau_range_s=(tau_slow / TAIL_TAU_FACTOR, tau_slow * TAIL_TAU_FACTOR))
    if refit.tau_bound == "upper":
        return Drift(math.nan, math.nan, False, refit.t_ref_s, refit.t_end_s, 1,
                     f"what remains of the warm-up after {SETTLED_TIME_CONSTANTS:g} time constants is not separable from "
                     "a drift "
                     "in the rest of the log (its time constant reaches that stretch's length)")
    how = (f"fitted from {refit.t_ref_s:.4g} s, {SETTLED_TIME_CONSTANTS:g} time constants of the slowest warm-up "
           "term after the first frame, to the end"
           + (", with the warm-up's remainder as one exponential" if refit.n_exp else ""))
    return _checked(refit.drift_hz_per_s, refit.u_drift_hz_per_s, refit.t_ref_s, refit.t_end_s, refit.n_exp, how)
