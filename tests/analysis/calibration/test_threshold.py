"""The noise behind the detection threshold: its degrees of freedom and the noise type they assume."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from coilshift.analysis.calibration.threshold import noise_at_dwell
from coilshift.sim.logsession import FrameNoise

HOP_S = 0.02


def _baseline(noise: FrameNoise, seconds: float, rng) -> tuple[np.ndarray, np.ndarray]:
    n = int(round(seconds / HOP_S))
    return (np.arange(n) + 0.5) * HOP_S, 1000.0 + noise.frames(rng, n)


@pytest.mark.parametrize("noise, kind", [(FrameNoise(white_hz=0.02), "white FM"),
                                         (FrameNoise(rw_hz_per_sqrt_s=0.02), "random-walk FM")])
def test_chi_squared_interval_from_the_edf_covers_the_true_noise(noise, kind):
    # NIST SP 1065 section 5.3: edf s^2 / sigma^2 ~ chi2(edf), so s sqrt(edf / chi2_{0.975}) ..
    # s sqrt(edf / chi2_{0.025}) (scipy.stats quantiles) covers the true Allan deviation 95 % of the
    # time. The truth is the closed-form Allan variance of the simulated frames (sim.logsession).
    # 300 baselines of 15 dwells each; tolerance 3 binomial standard deviations (0.038).
    rng = np.random.default_rng(5)
    dwell = 2.0
    sigma = math.sqrt(noise.allan_variance_hz2(dwell))
    hits, kinds = 0, set()
    for _ in range(300):
        t, f = _baseline(noise, 15 * dwell, rng)
        est = noise_at_dwell(t, f, dwell)
        assert est.tau_s == dwell
        lo = est.noise_hz * math.sqrt(est.edf / stats.chi2.ppf(0.975, est.edf))
        hi = est.noise_hz * math.sqrt(est.edf / stats.chi2.ppf(0.025, est.edf))
        hits += lo <= sigma <= hi
        kinds.add(est.edf_noise)
    assert abs(hits / 300 - 0.95) <= 3 * math.sqrt(0.95 * 0.05 / 300)
    # the noise type is read from the slope and is the simulated one most of the time
    assert kind in kinds


def test_short_baselines_fall_back_to_a_shorter_tau_with_few_degrees_of_freedom():
    rng = np.random.default_rng(6)
    t, f = _baseline(FrameNoise(white_hz=0.02), 5.0, rng)
    est = noise_at_dwell(t, f, 4.0)
    assert est.tau_s == 2.0 and 0 < est.edf < 5
    nothing = noise_at_dwell(t[:2], f[:2], 4.0)
    assert math.isnan(nothing.noise_hz) and math.isnan(nothing.edf)
