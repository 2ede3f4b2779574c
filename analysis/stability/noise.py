"""The Allan deviation at a dwell, used as the noise figure of a detection threshold."""

from __future__ import annotations

import math

import numpy as np

from coilshift.logger.errors import InputError

from coilshift.analysis.stability import allan
from coilshift.analysis.stability.grid import to_uniform


def noise_at_tau_hz(t_s, freq_hz, tau_s: float) -> float:
    """Overlapping Allan deviation in Hz at averaging time ``tau_s``.

    Why this is the right noise figure for a step-mean difference: a calibration step compares
    the mean frequency over a dwell of length tau with the mean over an adjacent baseline
    dwell of the same length. By definition the Allan variance is half the expected squared
    difference of adjacent tau-averages, sigma_y^2(tau) = <(ybar_{k+1} - ybar_k)^2> / 2, so the
    standard deviation of such a difference is sqrt(2) sigma(tau) in Hz, with every noise type
    and the drift between the two dwells included. The plain standard deviation of the frames
    does not do this: it ignores averaging and diverges for flicker and random-walk FM. For
    dwells of unequal length or not adjacent, this figure is only a guide.

    Parameters
    ----------
    t_s, freq_hz : frame times (s) and frequencies (Hz); NaN frequencies are gaps
    tau_s : averaging time (dwell), seconds; at least the frame spacing

    Returns
    -------
    float : overlapping Allan deviation in Hz, computed at the nearest whole multiple m of the
        frame spacing when tau_s is one, else interpolated linearly in log tau / log sigma
        between the two neighbouring multiples.

    Raises
    ------
    InputError : tau_s shorter than the frame spacing or longer than half the usable record
    """
    series = to_uniform(t_s, freq_hz, None, "noise_at_tau_hz")
    y = series.freq_hz
    m_f = float(tau_s) / series.tau0_s
    if not np.isfinite(m_f) or m_f < 1 - 1e-9:
        raise InputError(f"noise_at_tau_hz: tau {tau_s} s is shorter than the frame spacing {series.tau0_s:.6g} s")
    m_lo = max(int(math.floor(m_f + 1e-9)), 1)
    exact = abs(m_f - round(m_f)) <= 1e-9 * max(m_f, 1.0)
    ms = np.array([int(round(m_f))]) if exact else np.array([m_lo, m_lo + 1])
    dev, n = allan.oadev(y, ms)
    if np.any(n == 0) or not np.all(np.isfinite(dev)):
        raise InputError(f"noise_at_tau_hz: no stretch of the log long enough for tau {tau_s} s "
                         f"(needs 2 tau of gap-free frames)")
    if exact:
        return float(dev[0])
    w = (math.log(m_f) - math.log(ms[0])) / (math.log(ms[1]) - math.log(ms[0]))
    return float(math.exp((1 - w) * math.log(dev[0]) + w * math.log(dev[1])))
