"""Log-level calibration sessions: the noise process's Allan variance and the written run folder."""

from __future__ import annotations

import math

import numpy as np
import pytest

from coilshift.logger.runfolder.reader import read_log
from coilshift.sim.logsession import FrameNoise, Session, write_session


def test_allan_variance_closed_forms():
    # NIST SP 1065 (Table 5 and section 5.2): white FM, sigma^2(tau) = sigma_frame^2 / m for
    # averages of m independent frames; random-walk FM with diffusion q^2 (Hz^2/s),
    # sigma^2(tau) = q^2 tau / 3 (+ O(1/m^2) for sampled frames); linear drift D, sigma(tau) = D tau / sqrt(2)
    hop = 0.02
    assert FrameNoise(hop, white_hz=0.01).allan_variance_hz2(2.0) == pytest.approx(0.01 ** 2 / 100, rel=1e-12)
    q = 0.003
    assert FrameNoise(hop, rw_hz_per_sqrt_s=q).allan_variance_hz2(2.0) == pytest.approx(q * q * 2.0 / 3, rel=1e-3)
    drift = 0.6  # Hz/min
    assert math.sqrt(FrameNoise(hop, drift_hz_per_min=drift).allan_variance_hz2(2.0)) == \
        pytest.approx(drift / 60 * 2.0 / math.sqrt(2), rel=1e-12)
    # AR(1) averaged over many correlation times is white FM with the long-run variance
    # s^2 (1 + phi)/(1 - phi) per frame (textbook time series)
    phi, s = 0.9, 0.02
    big = FrameNoise(hop, ar_hz=s, ar_phi=phi).allan_variance_hz2(40.0)
    assert big == pytest.approx(s * s * (1 + phi) / (1 - phi) / 2000, rel=0.01)


def test_allan_variance_against_a_long_simulation():
    # the same noise simulated for 2 x 10^5 frames: the overlapping Allan variance at m = 100
    # computed by its definition (plain numpy, not the project's estimator) has about
    # 2e5 / (2 x 100) x 3/2 ~ 1500 degrees of freedom for white-like noise, so agrees to 3 x sqrt(2/1500) = 11 %
    noise = FrameNoise(0.02, ar_hz=0.01, ar_phi=0.5, white_hz=0.005, rw_hz_per_sqrt_s=0.002, drift_hz_per_min=0.3)
    y = noise.frames(np.random.default_rng(2), 200_000)
    m = 100
    c = np.cumsum(np.concatenate([[0.0], y]))
    means = (c[m:] - c[:-m]) / m
    avar = 0.5 * np.mean((means[m:] - means[:-m]) ** 2)
    assert avar == pytest.approx(noise.allan_variance_hz2(m * 0.02), rel=3 * math.sqrt(2 / 1500))


def test_session_run_folder_holds_the_response_at_the_true_distances(tmp_path):
    # no noise: each target stretch (after the hand's jolt) reads the response at the placement's
    # true distance, which is within the tolerance of the nominal one
    sess = Session((10.0, 20.0, 40.0), dwell_s=2.0, baseline_s=2.0, first_baseline_s=4.0, placement_mm=1.0,
                   hand_hz=5.0, hand_s=0.5, f0_hz=1000.0)
    truth = write_session(tmp_path / "run", "coin", lambda d: -100.0 / d, sess, FrameNoise(0.02),
                          np.random.default_rng(1))
    assert np.all(np.abs(truth.true_distance_mm - np.array(sess.distances_mm)) <= 1.0)
    log = read_log(tmp_path / "run")
    assert [(m.target, m.distance_mm) for m in log.markers if not m.is_baseline] == \
        [("coin", 10.0), ("coin", 20.0), ("coin", 40.0)]
    stretches = [m for m in log.markers if not m.is_baseline]
    for m, want, d in zip(stretches, truth.true_shift_hz, truth.true_distance_mm):
        sel = (log.t_s > m.start_s + 0.5) & (log.t_s < m.end_s)
        assert want == pytest.approx(-100.0 / d, rel=1e-12)
        assert log.freq_hz[sel] - 1000.0 == pytest.approx(want, abs=1e-6)  # log.csv keeps 6 decimals
