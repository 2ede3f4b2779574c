"""The detector's statistic against independent computations (numpy.polyfit, plain means)."""

import math

import numpy as np
import pytest

from coilshift.logger.events.statistic import (Windows, deviation, noise_of_statistic, smoothed,
                                               trailing_lines)


def _frames(n=3000, seed=1):
    rng = np.random.default_rng(seed)
    t = 1000.0 + (np.arange(n) + 0.5) * 0.02
    y = 20000.0 + 0.01 * rng.standard_normal(n) + 0.002 * (t - t[0])
    ok = rng.random(n) > 0.1
    return t, y, ok


def test_trailing_lines_match_polyfit_on_the_same_frames():
    # reference: numpy.polyfit (least squares through QR) on the window each frame uses
    t, y, ok = _frames()
    fit = ok & (np.arange(t.size) % 7 != 0)  # some frames not baseline
    win = Windows(smooth=10, gap=5, fit=200)
    lines, good = trailing_lines(t, y, fit, 0, t.size, win)
    idx = np.flatnonzero(fit)
    for j in (400, 1234, 2999):
        b_end = j - win.smooth - win.gap
        use = idx[idx <= b_end][-win.fit:]
        slope, icpt = np.polyfit(t[use] - t[use].mean(), y[use], 1)
        assert good[j]
        assert lines.slope[j] == pytest.approx(slope, rel=1e-7)
        assert lines.y_at[j] + lines.slope[j] * (t[j] - lines.t_at[j]) == pytest.approx(icpt + slope * (t[j] - t[use].mean()), abs=1e-8)
    assert not good[: win.fit].any()  # not enough baseline frames yet


def test_smoothed_is_the_plain_mean_of_usable_frames():
    t, y, ok = _frames()
    ma, tc = smoothed(t, y, ok, 0, t.size, 25)
    for j in (30, 700, 2999):
        sel = np.arange(j - 24, j + 1)[ok[j - 24:j + 1]]
        assert ma[j] == pytest.approx(np.mean(y[sel]), abs=1e-9)
        assert tc[j] == pytest.approx(np.mean(t[sel]), abs=1e-9)
    assert np.isnan(ma[:24]).all()


def test_a_linear_drift_gives_zero_deviation():
    # the statistic's weights remove a constant and a straight line exactly (by construction)
    t = (np.arange(5000) + 0.5) * 0.02
    y = 15000.0 + 0.3 / 60.0 * t
    ok = np.ones(t.size, bool)
    d, _, _ = deviation(t, y, ok, ok, 0, t.size, Windows.from_seconds(0.02, 0.5, 0.5, 5.0))
    assert np.nanmax(np.abs(d)) < 1e-8


def test_noise_of_white_values():
    # MAD x 1.4826 estimates sigma for normal data (Hampel 1974); its large-sample standard error is
    # about 1.17 sigma / sqrt(n) (efficiency 0.37); 5 standard errors
    rng = np.random.default_rng(3)
    x = 0.7 * rng.standard_normal(20000)
    nl = noise_of_statistic(x, robust=True)
    assert abs(nl.sigma_hz - 0.7) < 5 * 1.17 * 0.7 / math.sqrt(x.size)
    assert abs(nl.rho1) < 5 / math.sqrt(x.size) + 1e-12
    assert nl.n_eff == pytest.approx(0.37 * x.size, rel=0.05)
    rms = noise_of_statistic(x, robust=False)
    assert abs(rms.sigma_hz - 0.7) < 5 * 0.7 / math.sqrt(2 * x.size)
