"""Hand passes and steady slides in the simulator."""

import math

import numpy as np
import pytest

from coilshift.logger.runfolder.reader import read_log
from coilshift.sim.fields import Winding
from coilshift.sim.logsession import FrameNoise
from coilshift.sim.passes import HandPass, Ramp, pass_shape, pass_span_s, write_pass_session, write_ramp_session


def test_axial_pass_follows_the_loop_field_on_its_axis():
    # one thin loop of radius a: h_z(0, z) = a^2 / (2 (a^2 + z^2)^(3/2)) (Jackson 1999, 5.5), so the
    # shape along an axial path is (h(d) / h(closest))^2 with d the path's distance
    a_mm = 50.0
    loop = Winding(1.0, a_mm * 1e-3, a_mm * 1e-3, 0.0)
    p = HandPass(10.0, 1.0, closest_mm=40.0, speed_mm_s=100.0, profile="axial")
    t = np.linspace(9.0, 11.0, 201)
    x = 100.0 * (t - 10.0)
    c = 20.0
    d = 40.0 + np.sqrt(x * x + c * c) - c
    h = a_mm ** 2 / (2 * (a_mm ** 2 + d ** 2) ** 1.5)
    h0 = a_mm ** 2 / (2 * (a_mm ** 2 + 40.0 ** 2) ** 1.5)
    # the shape is interpolated in log-log on a grid of 400 nodes: 1e-3 relative
    assert pass_shape(loop, p, t) == pytest.approx((h / h0) ** 2, rel=1e-3)


def test_sweep_is_symmetric_and_peaks_at_one():
    w = Winding.from_design_mm(40, 150.0, 6.0, 6.0)
    p = HandPass(5.0, 1.0, closest_mm=80.0, speed_mm_s=200.0, profile="sweep")
    t = np.linspace(3.0, 7.0, 401)
    s = pass_shape(w, p, t)
    assert s == pytest.approx(s[::-1], rel=1e-6)
    assert s.max() == pytest.approx(1.0, abs=2e-3)
    lo, hi = pass_span_s(w, p)
    assert lo < 5.0 < hi and hi - 5.0 == pytest.approx(5.0 - lo, abs=2e-3)


def test_pass_session_is_a_run_folder_without_markers(tmp_path):
    w = Winding.from_design_mm(40, 150.0, 6.0, 6.0)
    rng = np.random.default_rng(0)
    truth = write_pass_session(tmp_path / "run", w, [HandPass(20.0, -0.5)], 40.0, FrameNoise(white_hz=0.01), rng)
    log = read_log(tmp_path / "run")
    assert not log.markers
    i = int(np.argmin(np.abs(log.t_s - 20.0)))
    assert log.freq_hz[i] - 20000.0 == pytest.approx(-0.5, abs=0.06)  # 6 sigma of the white noise
    assert truth.spans_s[0][0] < 20.0 < truth.spans_s[0][1]


def test_ramp_session_moves_at_a_steady_pace(tmp_path):
    rng = np.random.default_rng(1)
    truth = write_ramp_session(tmp_path / "ramp", Ramp("ball", 100.0, 20.0, 30.0, 10.0, 5.0, 0.0),
                               lambda d: -d / 10.0, FrameNoise(), rng)
    log = read_log(tmp_path / "ramp")
    inside = (log.t_s > truth.start_s) & (log.t_s < truth.end_s)
    d = 100.0 + (20.0 - 100.0) * (log.t_s[inside] - 10.0) / 30.0
    assert log.freq_hz[inside] - 20000.0 == pytest.approx(-d / 10.0, abs=1e-6)
    assert [m.is_baseline for m in log.markers] == [True, True]
    assert math.isclose(truth.true_from_mm, 100.0) and math.isclose(truth.true_to_mm, 20.0)
