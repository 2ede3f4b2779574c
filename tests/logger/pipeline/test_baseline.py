"""Baseline selection: which frames count, checked against numpy.median of hand-picked frames."""

from __future__ import annotations

import numpy as np
import pytest

from coilshift.logger.runfolder import flags
from coilshift.logger.pipeline.baseline import (METHOD_MARKERS, METHOD_START, baseline_from_markers,
                                       baseline_from_start)
from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.markers import Marker

HOP = 0.02


def _table(freq, fl=None):
    n = len(freq)
    t = (np.arange(n) + 0.5) * HOP
    return FrameTable(t, np.asarray(freq, float), np.full(n, -6.0), np.full(n, 40.0),
                      np.zeros(n, np.int64) if fl is None else fl)


def test_start_median_skips_unusable_frames():
    rng = np.random.default_rng(0)
    f = 5000.0 + 0.01 * rng.standard_normal(500)  # 10 s
    fl = np.zeros(500, np.int64)
    fl[3] = flags.NO_TONE
    f[3] = np.nan
    fl[7] = flags.GAP
    f[7] = 1.0  # a gap frame's value must not count
    b = baseline_from_start(_table(f, fl), seconds=2.0)
    t = (np.arange(500) + 0.5) * HOP
    pick = (t <= 2.0) & (fl == 0)
    assert b.freq_hz == np.median(f[pick])  # reference: numpy.median
    assert b.method == METHOD_START and b.details["frames_used"] == int(pick.sum())
    # spread: 1.4826 MAD estimates the 10 mHz Gaussian sigma (loose: 100 samples)
    assert b.details["spread_hz"] == pytest.approx(0.01, rel=0.3)


def test_low_snr_frames_used_only_when_nothing_else():
    f = np.r_[np.full(50, 1000.0), np.full(50, 1000.5)]
    fl = np.r_[np.full(50, flags.LOW_SNR), np.zeros(50, np.int64)]
    assert baseline_from_start(_table(f, fl), seconds=10.0).freq_hz == 1000.5
    only_low = np.full(100, flags.LOW_SNR)
    assert baseline_from_start(_table(f, only_low), seconds=1.0).freq_hz == 1000.0


def test_start_without_tone_is_refused():
    f = np.full(200, np.nan)
    with pytest.raises(InputError, match="no usable tone in the first 2 s"):
        baseline_from_start(_table(f, np.full(200, flags.NO_TONE)), 2.0, "rec.wav")


def test_short_run_uses_everything():
    b = baseline_from_start(_table(np.full(10, 700.0)), seconds=2.0)
    assert b.freq_hz == 700.0 and b.details["run_shorter_than_window"]


def test_markers_baseline_pools_all_stretches():
    t = (np.arange(1000) + 0.5) * HOP  # 20 s
    f = np.full(1000, 4000.0)
    f[(t > 5) & (t < 8)] = 3990.0  # a ferrous target lowers the frequency
    f[t >= 12] = 4000.2  # a little drift before the second baseline
    markers = [Marker(0.0, 4.0, "baseline", np.nan), Marker(5.0, 8.0, "coin", 30.0),
               Marker(12.0, 16.0, "baseline", np.nan)]
    b = baseline_from_markers(_table(f), markers)
    inside = ((t >= 0) & (t <= 4)) | ((t >= 12) & (t <= 16))
    assert b.freq_hz == np.median(f[inside])  # reference: numpy.median
    assert b.method == METHOD_MARKERS
    assert [s["median_hz"] for s in b.details["stretches"]] == [4000.0, 4000.2]


def test_markers_without_baseline_rows_refused():
    with pytest.raises(InputError, match="no baseline rows"):
        baseline_from_markers(_table(np.full(10, 1.0)), [Marker(0, 1, "coin", 10.0)])


def test_markers_baseline_is_the_median_not_the_mean_of_unequal_stretches():
    # Two baseline stretches of unequal length at different levels, plus a few glitch frames: the
    # median (reference: numpy.median, and the value worked out by hand) differs from the mean.
    t = (np.arange(1000) + 0.5) * HOP  # 20 s
    f = np.full(1000, 4000.0)
    f[t >= 12] = 4000.6               # second stretch 0.6 Hz higher, and shorter (2 s against 4 s)
    f[[10, 11, 12]] = 4100.0          # three glitches inside the first stretch
    markers = [Marker(0.0, 4.0, "baseline", np.nan), Marker(12.0, 14.0, "baseline", np.nan)]
    b = baseline_from_markers(_table(f), markers)
    inside = (t <= 4) | ((t >= 12) & (t <= 14))
    assert b.freq_hz == np.median(f[inside]) == 4000.0  # 200 frames at 4000 (3 glitched) vs 100
    assert abs(np.mean(f[inside]) - 4000.0) > 0.5         # so the mean would be told apart


def test_start_baseline_is_the_median_not_the_mean():
    f = np.full(500, 5000.0)
    f[:40] = 5000.0 + np.linspace(0, 30, 40)  # a target passing by in the first 0.8 s
    b = baseline_from_start(_table(f), seconds=2.0)
    t = (np.arange(500) + 0.5) * HOP
    assert b.freq_hz == np.median(f[t <= 2.0])  # reference: numpy.median
    assert b.freq_hz < np.mean(f[t <= 2.0]) - 1.0
