"""Whether one stationary tone explains the frame: no start, stop or jump inside it (EDGE).

The fine stage fits one tone of fixed frequency and amplitude, plus its harmonics, other lines
and the mean, to the whole frame. When the tone starts or stops inside the frame, or jumps by
more than the frame resolves (the line the tracker follows is then there for part of the frame
only), its estimate is biased by up to a tenth of a bin and nothing else in the frame shows it.
The fit then leaves a residual at the DTFT samples where the tone was measured:
:func:`~coilshift.logger.tracking.fine.model_misfit`, ``|p - a W(f - g)| / |a W(f - g)|``. In
white noise its scale is ``sqrt(1 / (eta N))`` (the relative standard deviation of a DTFT sample
of a tone at per-sample SNR ``eta`` over N samples; Kay 1993, ch. 3), which measurement confirms:
mean 1.0 and largest of 30 trials 2.3 times that scale, from 40 dB down to -10 dB. A frequency that drifts
smoothly across the frame (a target passing the coil) leaves a symmetric spectrum and almost no
residual (a drift of two bins across the frame: 0.016), a tone cut off for 5 % of the frame
leaves 0.08, one that jumps by 1.7 bins for its last 6 % leaves 0.10. EDGE when the misfit
exceeds EDGE_LIMIT plus EDGE_NOISE_SIGMAS times the noise scale.
"""

from __future__ import annotations

import numpy as np

from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import EDGE_LIMIT, EDGE_NOISE_SIGMAS


def edge_frames(plan: Plan, misfit, snr_db):
    """(F,) bool: the misfit of the one-tone model is beyond what noise and smooth drift leave."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        eta = 10 ** (snr_db / 10)
        allow = EDGE_LIMIT + EDGE_NOISE_SIGMAS * np.sqrt(1 / (eta * plan.n))
    return np.isfinite(misfit) & (misfit > allow)
