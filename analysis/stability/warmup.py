"""Warm-up: when the local drift rate of the oscillator falls below a threshold and stays there."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from coilshift.logger.errors import InputError

from coilshift.analysis.stability.drift import fit_line_ar1
from coilshift.analysis.stability.grid import UniformSeries

DEFAULT_SETTLE_PPM_PER_MIN = 1.0  # warm-up threshold: 1 ppm of the nominal frequency per minute


@dataclass
class Warmup:
    """When the drift rate settles.

    Attributes
    ----------
    threshold_hz_per_min : |drift rate| counted as settled
    window_s : length of the sliding windows the local rate is fitted over
    settled : True when the rate stays settled from some window to the end of the log
    warmup_s : time from the start of the log to the centre of the first window from which
        every later window is settled (0 when settled from the start; None when never)
    t_centre_s, rate_hz_per_min, u_rate_hz_per_min : local rate per window and its standard
        uncertainty (for the plot)
    """

    threshold_hz_per_min: float
    window_s: float
    settled: bool
    warmup_s: float | None
    t_centre_s: np.ndarray = field(repr=False)
    rate_hz_per_min: np.ndarray = field(repr=False)
    u_rate_hz_per_min: np.ndarray = field(repr=False)


#: a window counts as unsettled only when its rate exceeds the threshold by this many standard
#: uncertainties, so noise wander is not mistaken for warm-up drift
WARMUP_COVERAGE = 2.0


def find_warmup(series: UniformSeries, threshold_hz_per_min: float, window_s: float | None = None) -> Warmup:
    """Warm-up time: where the local drift rate falls below a threshold and stays there.

    The local rate is the least-squares slope over sliding windows (default: 60 s or a fifth
    of the record, whichever is shorter, but at least 10 samples), stepped by a quarter of a
    window; windows with fewer than half their samples usable are skipped. A window is
    unsettled when |rate| - 2 u(rate) > threshold, with u(rate) the AR(1)-aware uncertainty of
    :func:`fit_line_ar1`: a rate indistinguishable from the threshold within the window's own
    noise is not held against the oscillator. The slope of a window estimates the rate at its
    centre, hence the reported time is a window centre.
    """
    tau0 = series.tau0_s
    duration = series.freq_hz.size * tau0
    if window_s is None:
        window_s = min(60.0, duration / 5.0)
    if not window_s > 0:
        raise InputError(f"warm-up window must be positive, got {window_s}")
    w = max(int(round(window_s / tau0)), 10)
    t = series.t_s
    f = series.freq_hz
    step = max(w // 4, 1)
    starts = np.arange(0, max(f.size - w, 0) + 1, step)
    centres, rates, urates = [], [], []
    for s in starts:
        ff = f[s:s + w]
        if np.isfinite(ff).sum() < max(w // 2, 3):
            continue
        fit = fit_line_ar1(t[s:s + w], ff)
        rates.append(fit.slope * 60.0)
        urates.append(fit.u_slope * 60.0)
        centres.append(t[s] + (min(w, f.size - s) - 1) * tau0 / 2)
    centres_a = np.asarray(centres, float)
    rates_a = np.asarray(rates, float)
    u_a = np.asarray(urates, float)
    settled_mask = np.abs(rates_a) - WARMUP_COVERAGE * u_a <= threshold_hz_per_min
    if rates_a.size == 0 or not settled_mask[-1]:
        return Warmup(threshold_hz_per_min, w * tau0, False, None, centres_a, rates_a, u_a)
    unsettled = np.flatnonzero(~settled_mask)
    first = 0 if unsettled.size == 0 else int(unsettled[-1]) + 1
    warm = 0.0 if first == 0 else float(centres_a[first] - series.t0_s)
    return Warmup(threshold_hz_per_min, w * tau0, True, warm, centres_a, rates_a, u_a)
