"""Measuring one event: the parabola's peak, the baselines, the class."""

import numpy as np
import pytest

from coilshift.logger.events.measure import FERROUS, INDETERMINATE, NON_FERROUS, kind_of, measure_event
from coilshift.logger.events.variogram import Variogram, lag_set


def test_noise_free_pulse_on_a_drift_is_measured_exactly_enough():
    # a Gaussian pulse of height A on a straight drift: the baselines' line removes the drift
    # exactly; the parabola through the top (the frames within 3 sigma_d of it) is off by the
    # pulse's fourth-order term only: |error| < A (x/s)^4 / 8 at the stretch's edge x, here < 1e-3 A
    hop = 0.02
    t = (np.arange(3000) + 0.5) * hop
    a, t0, s = 0.4, 30.0, 0.5
    y = 1000.0 + 0.01 * t + a * np.exp(-0.5 * ((t - t0) / s) ** 2)
    ok = np.ones(t.size, bool)
    quiet = ~((t > t0 - 3) & (t < t0 + 3))
    vg = Variogram(lag_set(hop))
    rng = np.random.default_rng(0)
    vg.add(1e-3 * rng.standard_normal(5000), np.ones(5000, bool))
    i0, i1 = np.searchsorted(t, [t0 - 3, t0 + 3])
    ev = measure_event(t, y, ok, quiet, i0, i1, vg, sigma_d_hz=0.001, smooth=25, side=100)
    assert ev.peak_shift_hz == pytest.approx(a, rel=1e-3)
    assert ev.peak_t_s == pytest.approx(t0, abs=hop)
    assert ev.baseline_before_hz == pytest.approx(1000.0 + 0.01 * np.mean(t[i0 - 125:i0 - 25]), abs=1e-9)
    assert ev.kind == NON_FERROUS and ev.sign == 1
    assert ev.peak_u_hz > 0


def test_kind_follows_the_sign_and_the_polarity():
    # common practice: frequency down = ferrous for an LC oscillator read directly ("normal")
    assert kind_of(-1.0, 0.1) == FERROUS
    assert kind_of(1.0, 0.1) == NON_FERROUS
    assert kind_of(-1.0, 0.1, "inverted") == NON_FERROUS
    assert kind_of(0.15, 0.1) == INDETERMINATE  # within 1.96 u of zero
