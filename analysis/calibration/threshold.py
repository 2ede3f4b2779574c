"""The noise behind the detection threshold, and how well the baselines know it.

The threshold is ``k`` times the overlapping Allan deviation of the target-free baselines at an
averaging time equal to the dwell (:func:`noise_at_dwell`). That deviation is itself an estimate
from a few minutes of baseline at most: ``edf s^2 / sigma^2`` follows a chi-squared distribution
with ``edf`` equivalent degrees of freedom (NIST SP 1065 section 5.3; Greenhall & Riley 2003 for
the edf of the overlapping estimator, pooled over the baselines' gap-free stretches by
Satterthwaite's rule, :func:`coilshift.analysis.stability.allan_edf.edf_with_gaps`). The edf
depends on the noise type, which is read from the slope of the Allan variance between tau/4 and
tau (sigma^2 ~ tau^mu: mu = -1 white FM, 0 flicker FM, +1 random-walk FM; NIST SP 1065 section
5.6, the mu of its Table 7), rounded to the nearest of the three and clamped to them. When the
slope cannot be measured the edf is taken for the type that gives the fewest degrees of freedom,
so the threshold's uncertainty errs wide.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from coilshift.logger.errors import InputError

#: power-law exponents of S_y(f) for white, flicker and random-walk FM (SP 1065 Table 5)
FM_ALPHAS = {0: "white FM", -1: "flicker FM", -2: "random-walk FM"}


@dataclass(frozen=True)
class NoiseEstimate:
    """The baselines' noise at the dwell.

    Attributes
    ----------
    noise_hz : overlapping Allan deviation (Hz), NaN when the baselines support no averaging time
    tau_s : averaging time it was computed at (the dwell, or shorter when the baselines are short)
    edf : equivalent degrees of freedom of ``noise_hz^2`` (the smallest over the FM noise types)
    edf_noise : the noise type that edf belongs to
    """

    noise_hz: float
    tau_s: float
    edf: float
    edf_noise: str = ""


def noise_at_dwell(t_s: np.ndarray, freq_hz: np.ndarray, dwell_s: float) -> NoiseEstimate:
    """Overlapping Allan deviation (Hz) of target-free frames at the dwell time, with its edf.

    ``freq_hz`` should be NaN outside the baselines (so no Allan term straddles a target). When
    the baselines are too short for an averaging time equal to the dwell, the longest averaging
    time they support is used (halving from the dwell); for white frequency noise the deviation
    falls with averaging time, so this errs on the side of a higher threshold.
    """
    from coilshift.analysis.stability.noise import noise_at_tau_hz

    tau = float(dwell_s)
    t_s = np.asarray(t_s, float)
    if t_s.size < 3:
        return NoiseEstimate(math.nan, math.nan, math.nan)
    step = float(np.median(np.diff(t_s)))
    while tau >= step:
        try:
            v = float(noise_at_tau_hz(t_s, freq_hz, tau))
        except (ValueError, InputError):  # baselines too short for this averaging time
            v = math.nan
        if math.isfinite(v) and v > 0:
            edf, kind = allan_edf(t_s, freq_hz, tau)
            return NoiseEstimate(v, tau, edf, kind)
        tau /= 2.0
    return NoiseEstimate(math.nan, math.nan, math.nan)


def fm_alpha_from_slope(t_s: np.ndarray, freq_hz: np.ndarray, tau_s: float) -> int | None:
    """FM noise type (alpha 0, -1 or -2) from the Allan variance's slope between tau/4 and tau,
    or None when either cannot be computed."""
    from coilshift.analysis.stability.noise import noise_at_tau_hz

    try:
        hi = float(noise_at_tau_hz(t_s, freq_hz, tau_s))
        lo = float(noise_at_tau_hz(t_s, freq_hz, tau_s / 4.0))
    except (ValueError, InputError):
        return None
    if not (hi > 0 and lo > 0 and math.isfinite(hi) and math.isfinite(lo)):
        return None
    mu = math.log(hi * hi / (lo * lo)) / math.log(4.0)
    return int(min(max(round(-mu - 1.0), -2), 0))


def allan_edf(t_s: np.ndarray, freq_hz: np.ndarray, tau_s: float) -> tuple[float, str]:
    """edf of the overlapping Allan variance at ``tau_s``, pooled over the gap-free stretches, for
    the FM noise type read from the slope (or the smallest over the three); and that type."""
    from coilshift.analysis.stability.allan_edf import edf_with_gaps
    from coilshift.analysis.stability.grid import to_uniform

    series = to_uniform(t_s, freq_hz, None, "noise_at_dwell")
    m = max(int(round(tau_s / series.tau0_s)), 1)
    lengths = [int(n) for n in series.segment_lengths() if n >= 2 * m]
    alpha = fm_alpha_from_slope(t_s, freq_hz, tau_s) if m >= 4 else None
    best = (math.nan, "")
    for a, name in FM_ALPHAS.items():
        if alpha is not None and a != alpha:
            continue
        try:
            e = float(edf_with_gaps(a, m, lengths, "oadev"))
        except (ValueError, ZeroDivisionError):
            continue
        if math.isfinite(e) and e > 0 and not (e >= best[0]):
            best = (e, name if alpha is not None else f"{name}, the fewest degrees of freedom of the FM types")
    return best
