"""Which frames are used: a calibration log's baselines, and the part the deviations cover.
These are the project's own rules (docs/stability.md, "Which part of the log"); nothing here
checks a computation against an outside reference."""

from __future__ import annotations

import math

import numpy as np
import pytest

from coilshift.analysis.stability.analyse import analyse_stability
from coilshift.analysis.stability.grid import UniformSeries
from coilshift.analysis.stability.span import baseline_mask, choose_span
from coilshift.analysis.stability.warmup import Warmup
from coilshift.logger.errors import InputError


def _series(n=1000, tau0=0.1):
    return UniformSeries(0.0, tau0, np.random.default_rng(1).standard_normal(n), n, 0, 0, 0.0)


def test_baseline_mask_keeps_the_stretches_ends_included():
    t = np.arange(10) * 1.0
    assert list(baseline_mask(t, [(1, 2), (5, 5.5)])) == [False, True, True, False, False, True] + [False] * 4


def test_frames_outside_the_baselines_are_gaps():
    t = np.arange(3000) * 0.02
    f = 7000 + 0.01 * np.random.default_rng(2).standard_normal(t.size)
    f[(t > 20) & (t < 30)] += 50.0  # a target stretch
    res = analyse_stability(t, f, baselines=[(0.0, 20.0), (30.0, 60.0)])
    assert res.baselines.n_stretches == 2 and res.baselines.n_frames_outside == 499
    assert res.n_segments == 2 and np.nanmax(res.series.freq_hz) < 7001
    with pytest.raises(InputError, match="no usable frame lies inside"):
        analyse_stability(t, f, baselines=[(100.0, 200.0)])


@pytest.mark.parametrize("settled_at,kind,words", [
    (30.0, "settled", "settled part"),
    (0.0, "settled", "the whole log is settled"),
    (99.5, "whole", "too short for one averaging time"),
])
def test_settled_span(settled_at, kind, words):
    s = _series()
    w = Warmup(0.1, True, settled_at, 1.0, settled_at, "the warm-up rate falls below 0.1 Hz/min")
    span, part = choose_span(s, w)
    assert span.kind == kind and words in span.reason
    if kind == "settled" and settled_at > 0:
        assert part.t0_s == pytest.approx(settled_at) and part.freq_hz.size == 700


def test_never_settled_uses_the_whole_log_and_says_why():
    s = _series()
    w = Warmup(0.1, False, None, math.nan, None, "the warm-up rate is still 3 Hz/min at the end of the log")
    span, part = choose_span(s, w)
    assert span.kind == "whole" and "still 3 Hz/min" in span.reason and part is s


def test_chosen_start_and_whole_log():
    s = _series()
    w = Warmup(0.1, True, 30.0, 1.0, 30.0, "x")
    span, part = choose_span(s, w, start_s=12.3)
    assert span.kind == "start" and part.t0_s == pytest.approx(12.3) and "as asked" in span.reason
    span, part = choose_span(s, w, whole_log=True)
    assert span.kind == "whole" and part is s
    for bad in (-1.0, 100.0, math.nan):
        with pytest.raises(InputError, match="start_s"):
            choose_span(s, w, start_s=bad)
    with pytest.raises(InputError, match="too few"):
        choose_span(s, w, start_s=99.5)
