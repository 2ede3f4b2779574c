"""Ramp calibration: points from a steady slide, their errors, and the range against the truth and
against fixed stops on the same simulated detector (truth: the finite-winding, finite-target
model of coilshift.sim.fields, not the fitted single-loop law)."""

import math

import numpy as np
import pytest
from scipy import optimize, stats

from coilshift.analysis.calibration.ramp import RampSpec, analyse_ramp, parse_ramp
from coilshift.analysis.calibration.run import analyse_run
from coilshift.logger.errors import InputError
from coilshift.sim.fields import Target, Winding, finite_target_shift_hz
from coilshift.sim.logsession import FrameNoise
from coilshift.sim.passes import Ramp, write_ramp_session, write_stops_and_ramp

THR = 0.05


def _detector():
    w = Winding.from_design_mm(40, 150.0, 6.0, 6.0)
    tg = Target("sphere", 12.5e-3)
    amp = -THR / float(finite_target_shift_hz(w, tg, np.array([100.0]), 1.0)[0])
    return lambda d: finite_target_shift_hz(w, tg, d, amp)


def test_bin_errors_on_white_noise_match_the_closed_form(tmp_path):
    # independent frames of sd s: a bin of n frames minus the line through two baseline means
    # (nb, na frames, weights 1 - lam and lam) has variance s^2 (1/n + (1-lam)^2/nb + lam^2/na).
    # The variogram is estimated from 20000 baseline frames: 10 % covers its sampling error
    s = 0.01
    rt = write_ramp_session(tmp_path / "r", Ramp("x", 100.0, 20.0, 20.0, 200.0, 200.0, 0.0), lambda d: 0.0 * d,
                            FrameNoise(white_hz=s), np.random.default_rng(3))
    res = analyse_ramp(tmp_path / "r", RampSpec(rt.start_s, rt.end_s, "x", 100.0, 20.0), bins=4, threshold_hz=0.1,
                       n_boot=0)
    nb = na = 500  # the last / first 10 s of each baseline at 20 ms
    for k, (n, e) in enumerate(zip(res.n_frames, res.stderr_hz)):
        lam = ((k + 0.5) * 5.0 + 5.0) / 30.0  # bin centre between the baseline means' times (195 s, 225 s)
        ref = s * math.sqrt(1 / n + (1 - lam) ** 2 / nb + lam ** 2 / na)
        assert e == pytest.approx(ref, rel=0.10)
    assert not res.seen  # nothing there: the family-wise test sees nothing


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    response = _detector()
    truth = optimize.brentq(lambda d: abs(float(response(np.array([d]))[0])) - THR, 1.0, 500.0)
    noise = FrameNoise(0.02, ar_hz=0.003, ar_phi=0.8, white_hz=0.003, rw_hz_per_sqrt_s=0.0003, drift_hz_per_min=0.1)
    out = []
    for seed in range(6):
        run = tmp_path_factory.mktemp("ramp") / "run"
        _, rt = write_stops_and_ramp(run, "ball", (30.0, 40.0, 56.0, 79.0, 113.0, 160.0),
                                     Ramp("ball", 160.0, 30.0, 60.0, 40.0, 10.0, 1.0), response, noise,
                                     np.random.default_rng(seed))
        fx = analyse_run(run, threshold_hz=THR, n_boot=1000)
        out.append(analyse_ramp(run, RampSpec(rt.start_s, rt.end_s, "ball", 160.0, 30.0), threshold_hz=THR,
                                n_boot=1000, fixed=fx))
    return truth, out


def test_ramp_interval_covers_the_true_range(runs):
    # nominal 95 % intervals; goal: cover at least 90 %: binomial 2.5 % quantile of 6 at p = 0.9
    truth, res = runs
    covered = sum(r.range.ci_mm[0] <= truth <= r.range.ci_mm[1] for r in res)
    assert covered >= stats.binom.ppf(0.025, len(res), 0.9)


def test_ramp_agrees_with_fixed_stops_within_three_percent(runs):
    # goal: the mean ramp - fixed difference within 3 % of the fixed-stop range
    _, res = runs
    diffs = [100 * r.difference_mm / r.fixed_range.range_mm for r in res]
    assert abs(np.mean(diffs)) <= 3.0


@pytest.mark.parametrize("text", ["1,2,ball,10", "2,1,ball,10,20", "a,2,ball,10,20", "1,2,,10,20", "1,2,b,10,10"])
def test_bad_ramp_descriptions_are_refused(text):
    with pytest.raises(InputError):
        parse_ramp(text)


def test_a_good_ramp_description():
    assert parse_ramp("40, 100, coin, 150, 20") == RampSpec(40.0, 100.0, "coin", 150.0, 20.0)
