"""Benchmark: does the event detector find hand passes, keep its false-event rate, and measure
peaks within their uncertainty?

Simulated at the log level (:mod:`coilshift.sim.passstudy`): ``--sessions`` sessions (default
16) of 12 hand passes each past a 150 mm coil (truth model: a finite winding's field by
Biot-Savart; paths along the axis or across the face; 80-300 mm/s; closest 30-120 mm), strengths
log-uniform from 2x to 50x the frame noise, random signs; frame noise 5 or 20 mHz of white plus
AR(1) (phi 0.8) parts, random-walk FM, drift 0 or +-0.3 Hz/min. Then ``--quiet-hours`` (default
10) of quiet baseline in 30-minute sessions of the same noise. Each recording is analysed by
:func:`coilshift.analysis.events.find.find_events_in` at the default settings (at most one false
event per hour of quiet baseline).

Printed, with Clopper-Pearson 95 % intervals (Poisson for the false-event rate):

* detection rate by strength, and for passes above 5x the noise (goal: at least 95 %);
* false events per hour on the quiet baselines (goal: at most the stated 1 per hour), and found
  events that match no pass in the pass sessions;
* how often a found event's 95 % interval on the peak shift covers the true peak (goal: at least
  90 %);
* classes right for every found event above 5x the noise (goal: all).

Usage::

    python benchmarks/events.py [--sessions 16] [--quiet-hours 10] [--seed 1] [--json]
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import time

import numpy as np
from scipy import stats

from coilshift.analysis.events.find import find_events_in
from coilshift.logger.events.crossings import DEFAULT_FALSE_PER_HOUR
from coilshift.sim.passstudy import pass_session, quiet_session, score

LEVELS_HZ = (0.005, 0.02)
DRIFTS = (0.0, 0.3, -0.3)
BINS = ((2, 3), (3, 5), (5, 10), (10, 20), (20, 50.01))


def cp(k: int, n: int) -> tuple[float, float]:
    """Clopper-Pearson 95 % interval of a binomial proportion."""
    lo = stats.beta.ppf(0.025, k, n - k + 1) if k > 0 else 0.0
    hi = stats.beta.ppf(0.975, k + 1, n - k) if k < n else 1.0
    return float(lo), float(hi)


def poisson_ci(k: int, exposure: float) -> tuple[float, float]:
    """Exact (Garwood) 95 % interval of a Poisson rate."""
    lo = stats.chi2.ppf(0.025, 2 * k) / 2 if k > 0 else 0.0
    hi = stats.chi2.ppf(0.975, 2 * k + 2) / 2
    return float(lo / exposure), float(hi / exposure)


def run(sessions: int, quiet_hours: float, seed: int) -> dict:
    rng = np.random.default_rng(seed)
    scored, unmatched, t0 = [], 0, time.perf_counter()
    for k in range(sessions):
        lvl, drift = LEVELS_HZ[k % 2], DRIFTS[k % 3]
        t, f, passes, _ = pass_session(rng, 12, lvl, drift)
        events, _, _, _ = find_events_in(t, f, np.ones(t.size, bool))
        sc, fa = score(passes, events, lvl)
        scored += sc
        unmatched += fa
    t_pass = time.perf_counter() - t0
    n_quiet = max(int(round(quiet_hours * 2)), 1)
    false_counts, t1, frames = [], time.perf_counter(), 0
    for k in range(n_quiet):
        t, f = quiet_session(rng, 30.0, LEVELS_HZ[k % 2], DRIFTS[k % 3])
        frames += t.size
        events, _, _, _ = find_events_in(t, f, np.ones(t.size, bool))
        false_counts.append(len(events))
    t_quiet = time.perf_counter() - t1
    hours = n_quiet * 0.5
    above = [s for s in scored if s.strength >= 5.0]
    found = [s for s in scored if s.found]
    det_k = sum(s.found for s in above)
    cov_k = sum(s.covered for s in found)
    cls = [s for s in found if s.strength >= 5.0]
    bins = {}
    for lo, hi in BINS:
        g = [s for s in scored if lo <= s.strength < hi]
        k = sum(s.found for s in g)
        bins[f"{lo:g}-{min(hi, 50):g}x"] = {"n": len(g), "found": k, "rate": k / len(g) if g else None,
                                             "ci": cp(k, len(g)) if g else None}
    nf = int(sum(false_counts))
    return {"passes": len(scored), "above_5x": len(above), "detected_above_5x": det_k,
            "detection_rate_above_5x": det_k / len(above), "detection_ci": cp(det_k, len(above)),
            "by_strength": bins, "unmatched_in_pass_sessions": unmatched,
            "quiet_hours": hours, "false_events": nf, "false_per_hour": nf / hours,
            "false_per_hour_ci": poisson_ci(nf, hours), "stated_false_per_hour": DEFAULT_FALSE_PER_HOUR,
            "false_by_session": false_counts, "found": len(found), "peaks_covered": cov_k,
            "coverage": cov_k / len(found), "coverage_ci": cp(cov_k, len(found)),
            "classified_above_5x": len(cls), "classes_right_above_5x": sum(s.kind_right for s in cls),
            "pass_sessions_s": t_pass, "quiet_s": t_quiet,
            "quiet_speed_x_real_time": frames * 0.02 / t_quiet}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sessions", type=int, default=16)
    ap.add_argument("--quiet-hours", type=float, default=10.0)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--json", action="store_true")
    a = ap.parse_args(argv)
    r = run(a.sessions, a.quiet_hours, a.seed)
    goals = {"detection above 5x >= 95 %": r["detection_rate_above_5x"] >= 0.95,
             f"false events <= {r['stated_false_per_hour']:g} per hour of quiet baseline":
                 r["false_per_hour"] <= r["stated_false_per_hour"],
             "peak 95 % intervals cover >= 90 %": r["coverage"] >= 0.90,
             "every class right above 5x": r["classes_right_above_5x"] == r["classified_above_5x"]}
    r["goals"] = goals
    if a.json:
        print(json.dumps(r, indent=2))
        return 0 if all(goals.values()) else 1
    lo, hi = r["detection_ci"]
    print(f"{r['passes']} simulated hand passes in {a.sessions} sessions ({r['pass_sessions_s']:.1f} s); "
          f"{r['quiet_hours']:g} h of quiet baseline ({r['quiet_s']:.1f} s, "
          f"{r['quiet_speed_x_real_time']:.0f}x real time)")
    print("detection by strength (x the frame noise):")
    for name, b in r["by_strength"].items():
        if b["n"]:
            print(f"  {name:>8}: {b['found']:3d}/{b['n']:3d} = {100 * b['rate']:5.1f} % "
                  f"({100 * b['ci'][0]:.1f}-{100 * b['ci'][1]:.1f})")
    print(f"detected above 5x: {r['detected_above_5x']}/{r['above_5x']} = "
          f"{100 * r['detection_rate_above_5x']:.1f} % (95 % CI {100 * lo:.1f}-{100 * hi:.1f})")
    flo, fhi = r["false_per_hour_ci"]
    print(f"false events on quiet baseline: {r['false_events']} in {r['quiet_hours']:g} h = "
          f"{r['false_per_hour']:.2f} per hour (95 % CI {flo:.2f}-{fhi:.2f}); stated at most "
          f"{r['stated_false_per_hour']:g} per hour; per 30-min session: {r['false_by_session']}")
    print(f"found events matching no pass in the pass sessions: {r['unmatched_in_pass_sessions']}")
    clo, chi = r["coverage_ci"]
    print(f"peak 95 % intervals covering the true peak: {r['peaks_covered']}/{r['found']} = "
          f"{100 * r['coverage']:.1f} % (95 % CI {100 * clo:.1f}-{100 * chi:.1f})")
    print(f"classes right above 5x: {r['classes_right_above_5x']}/{r['classified_above_5x']}")
    for name, ok in goals.items():
        print(f"goal: {name}: {'PASS' if ok else 'FAIL'}")
    return 0 if all(goals.values()) else 1


if __name__ == "__main__":
    sys.exit(main())
