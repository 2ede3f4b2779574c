"""Detection range: closed form against root finding, bootstrap interval, undefined cases."""

from __future__ import annotations

import math

import numpy as np
import pytest
from synthcal import make_run

from coilshift.analysis.calibration.curvefit import dipole_shift, fit_dipole, fit_power_law
from coilshift.analysis.calibration.detection import (DEFAULT_K, closed_form_range_mm, detection_range,
                                          noise_at_dwell_hz, numeric_range_mm)
from coilshift.logger.runfolder.reader import read_log
from coilshift.analysis.calibration.steps import combine_repeats, compute_steps


def test_closed_form_worked_example():
    # [derived by hand] |A|/T = 64 -> cube root 4 -> d = R sqrt(3): R = 10 mm -> 17.3205 mm;
    # with a 2 mm housing offset 15.3205 mm
    assert closed_form_range_mm(-64.0, 10.0, 1.0) == pytest.approx(10 * math.sqrt(3), rel=1e-12)
    assert closed_form_range_mm(64.0, 10.0, 1.0, 2.0) == pytest.approx(10 * math.sqrt(3) - 2, rel=1e-12)
    # below threshold even at contact: nothing to detect
    assert closed_form_range_mm(0.5, 10.0, 1.0) == 0.0
    assert math.isnan(closed_form_range_mm(5.0, 10.0, 0.0))


@pytest.mark.parametrize("a_hz, r_mm, off_mm, t_hz", [(-30.0, 25.0, 0.0, 0.05), (12.0, 40.0, 6.0, 0.02),
                                                     (-500.0, 8.0, 0.0, 0.5)])
def test_closed_form_matches_numeric_root(a_hz, r_mm, off_mm, t_hz):
    # the closed form is algebra on the model; brentq on the fitted curve must agree to its xtol
    d = np.array([5.0, 10.0, 20.0, 40.0, 80.0])
    fit = fit_dipole(d, dipole_shift(d, a_hz, r_mm, off_mm), np.full(5, 1e-4), fit_offset=off_mm > 0)
    p = fit.params
    closed = closed_form_range_mm(p["a_hz"], p["radius_mm"], t_hz, p["offset_mm"])
    assert numeric_range_mm(fit, t_hz) == pytest.approx(closed, abs=1e-6)
    # the curve sits exactly at the threshold there
    assert abs(fit.predict(closed)) == pytest.approx(t_hz, rel=1e-6)


def test_power_law_numeric_range_matches_its_closed_form():
    # |C| d^-p = T  ->  d = (|C|/T)^(1/p)
    d = np.array([10.0, 20.0, 40.0])
    fit = fit_power_law(d, -2e5 * d ** -4.0, np.full(3, 1e-6))
    assert numeric_range_mm(fit, 0.1) == pytest.approx((2e5 / 0.1) ** 0.25, rel=1e-6)


def test_small_hobby_coil_range_is_a_few_centimetres():
    # common practice [unconfirmed, from memory]: a small hobby search coil of about 5 cm
    # diameter finds coin-sized targets out to roughly 7-8 cm. Plausible numbers (from memory):
    # a coin at the coil plane shifts a ~100 kHz LC oscillator by tens of hertz (A = -30 Hz),
    # and the FFT-tracked noise at a 1 s dwell is about 0.01 Hz; threshold k = 5 x noise.
    # Loose check only: the range must land between 5 and 10 cm.
    d = closed_form_range_mm(-30.0, 25.0, DEFAULT_K * 0.01)
    assert 50.0 <= d <= 100.0


def _fit_run(tmp_path, a, r, distances, noise_hz=0.02, seed=5, threshold=None):
    make_run(tmp_path / "run", {"coin": (a, r)}, distances_mm=distances, dwell_s=6.0, noise_hz=noise_hz,
             phi=0.8, drift_hz_per_min=0.2, seed=seed)
    log = read_log(tmp_path / "run")
    steps, _ = compute_steps(log.t_s, log.freq_hz, log.markers)
    pts = combine_repeats(steps)
    return fit_dipole([p.distance_mm for p in pts], [p.shift_hz for p in pts], [p.stderr_hz for p in pts]), log


def test_bootstrap_interval_covers_the_true_range_and_is_reproducible(tmp_path):
    # truth: A = -20 Hz, R = 25 mm, T = 0.1 Hz -> true range from the closed form (68.6 mm)
    fit, _ = _fit_run(tmp_path, -20.0, 25.0, (10, 20, 35, 50, 70, 90))
    true_range = closed_form_range_mm(-20.0, 25.0, 0.1)
    res = detection_range(fit, 0.1, n_boot=300, seed=1)
    assert res.reason == "" and res.range_mm is not None
    lo, hi = res.ci_mm
    assert lo <= true_range <= hi
    assert lo < res.range_mm < hi
    assert res.range_mm == pytest.approx(res.closed_form_mm, abs=1e-6)
    # same seed -> same interval; another seed -> a different one
    assert detection_range(fit, 0.1, n_boot=300, seed=1).ci_mm == res.ci_mm
    assert detection_range(fit, 0.1, n_boot=300, seed=2).ci_mm != res.ci_mm


def test_range_undefined_when_no_point_reaches_threshold_or_far_beyond_data():
    d = np.array([10.0, 20.0, 40.0])
    fit = fit_dipole(d, dipole_shift(d, -2.0, 25.0), np.full(3, 0.01))
    # every point below a 2 Hz threshold: never seen, not reported
    res = detection_range(fit, 2.0)
    assert res.range_mm is None and res.ci_mm is None and "no calibration point" in res.reason
    # a tiny threshold puts the range far beyond 40 mm x 1.5: extrapolated value kept for info
    res = detection_range(fit, 1e-6, n_boot=0)
    assert res.range_mm is None and "beyond" in res.reason
    assert res.extrapolated_mm == pytest.approx(closed_form_range_mm(-2.0, 25.0, 1e-6), rel=1e-6)
    assert detection_range(fit, math.nan).range_mm is None
    assert detection_range(None, 1.0, fit_reason="too few").reason == "too few"


def test_noise_at_dwell_from_baselines_only(tmp_path):
    # white frequency noise (phi = 0): the Allan deviation at tau = m tau0 is sigma/sqrt(m)
    # (NIST SP 1065, section 5.2.2 / table of noise types: white FM sigma_y ~ tau^-1/2);
    # the first baseline of synthcal runs is 2 x dwell long, so tau = dwell is measurable
    make_run(tmp_path / "run", {"coin": (-20.0, 25.0)}, distances_mm=(10, 20), dwell_s=4.0,
             noise_hz=0.05, phi=0.0, jolt_hz=0.0, seed=8)
    log = read_log(tmp_path / "run")
    f = np.full(log.t_s.size, np.nan)
    for m in log.markers:
        if m.is_baseline:
            sel = (log.t_s >= m.start_s) & (log.t_s < m.end_s)
            f[sel] = log.freq_hz[sel]
    noise, tau = noise_at_dwell_hz(log.t_s, f, 4.0)
    assert tau == 4.0
    expected = 0.05 / math.sqrt(4.0 / 0.02)
    # few terms at tau = 4 s in an 8 s baseline (edf ~ 2, SP 1065 section 5.3): factor 2 band
    assert expected / 2 < noise < expected * 2
    # a dwell longer than any baseline can support: falls back to a shorter tau
    noise2, tau2 = noise_at_dwell_hz(log.t_s, f, 8.0)
    assert tau2 == 4.0 and noise2 == noise
