"""The event finder on simulated hand-pass sessions with known truth (a lighter version of
benchmarks/events.py; the truth is the finite-winding field model of coilshift.sim.fields, not
the detector's own model: passes are field profiles along a path, noise is white + AR(1) +
random walk + drift).

Tolerances are binomial or Poisson limits at the stated goals (scipy.stats), so a method that
meets its goals fails these checks at most a few per cent of the time for a random seed; the
seeds are fixed.
"""

import numpy as np
import pytest
from scipy import stats

from coilshift.analysis.events.find import find_events_in
from coilshift.logger.events.crossings import DEFAULT_FALSE_PER_HOUR
from coilshift.sim.passstudy import pass_session, quiet_session, score


@pytest.fixture(scope="module")
def scored():
    rng = np.random.default_rng(11)
    out, unmatched = [], 0
    for k, (lvl, drift) in enumerate([(0.005, 0.0), (0.02, 0.3), (0.005, -0.3), (0.02, 0.0)]):
        t, f, passes, _ = pass_session(rng, 12, lvl, drift)
        events, _, _, _ = find_events_in(t, f, np.ones(t.size, bool))
        sc, fa = score(passes, events, lvl)
        out += sc
        unmatched += fa
    return out, unmatched


def test_detection_above_five_times_the_noise(scored):
    # goal: at least 95 %; binomial 2.5 % quantile at p = 0.95 (scipy.stats.binom)
    sc, _ = scored
    above = [s for s in sc if s.strength >= 5.0]
    assert len(above) >= 25
    assert sum(s.found for s in above) >= stats.binom.ppf(0.025, len(above), 0.95)


def test_peaks_within_their_intervals(scored):
    # goal: the 95 % interval covers the true peak in at least 90 % of found events; binomial
    # 2.5 % quantile at p = 0.90
    sc, _ = scored
    found = [s for s in sc if s.found]
    assert sum(s.covered for s in found) >= stats.binom.ppf(0.025, len(found), 0.90)


def test_every_class_right_above_five_times_the_noise(scored):
    sc, _ = scored
    wrong = [s for s in sc if s.found and s.strength >= 5.0 and not s.kind_right]
    assert not wrong


def test_found_events_are_passes(scored):
    # 48 passes over ~13 minutes: false events at the stated rate would be ~0.2; Poisson 97.5 % quantile
    _, unmatched = scored
    assert unmatched <= stats.poisson.ppf(0.975, DEFAULT_FALSE_PER_HOUR * 13 / 60 + 1.0)


def test_false_events_on_an_hour_of_quiet_baseline():
    # stated: at most one false event per hour of quiet baseline on average; over one hour (two
    # 30-minute sessions) the count is at most the Poisson(1) 97.5 % quantile (3)
    rng = np.random.default_rng(12)
    total = 0
    for lvl, drift in ((0.005, 0.3), (0.02, -0.3)):
        t, f = quiet_session(rng, 30.0, lvl, drift)
        events, _, _, _ = find_events_in(t, f, np.ones(t.size, bool))
        total += len(events)
    assert total <= stats.poisson.ppf(0.975, DEFAULT_FALSE_PER_HOUR * 1.0)
