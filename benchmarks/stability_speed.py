"""Speed check: the full stability analysis of one million frames, at any frame spacing, must take
under 2 s.

Run: python benchmarks/stability_speed.py [N]. Prints the seconds for the four estimators
alone and for the whole analysis (grid, settling fit with its noise model, settled start and
drift, estimators, noise labels, edf). The first record is white FM noise plus a slow drift
with one gap at 0.02 s spacing; the second has a warm-up and random-walk FM at 1 s spacing
(11.6 days), where a cost growing with the record's duration would show. Both are generated
here with fixed seeds.
"""

from __future__ import annotations

import sys
import time

import numpy as np

from coilshift.analysis.stability import allan
from coilshift.analysis.stability.analyse import analyse_stability

GOAL_S = 2.0


def _white_with_drift(n: int):
    rng = np.random.default_rng(20261201)
    t_s = np.arange(n) * 0.02
    freq_hz = 50_000.0 + 0.02 * rng.standard_normal(n) + 1e-4 * t_s
    freq_hz[n // 3: n // 3 + 500] = np.nan
    return t_s, freq_hz


def _warmup_slow_spacing(n: int):
    rng = np.random.default_rng(20261202)
    t_s = np.arange(n) * 1.0
    walk = 2e-4 * np.cumsum(rng.standard_normal(n))
    freq_hz = 50_000.0 + 3.0 * np.exp(-t_s / 20_000.0) + 0.01 * rng.standard_normal(n) + walk
    return t_s, freq_hz


def main(n: int = 1_000_000) -> None:
    t_s, freq_hz = _white_with_drift(n)
    ms = allan.octave_factors(n)
    t0 = time.perf_counter()
    allan.adev(freq_hz, ms)
    allan.oadev(freq_hz, ms)
    allan.mdev(freq_hz, ms)
    t1 = time.perf_counter()
    result = analyse_stability(t_s, freq_hz)
    t2 = time.perf_counter()
    print(f"{n} points, {ms.size} octave averaging times")
    print(f"estimators (adev, oadev, mdev; tdev derives from mdev): {t1 - t0:.2f} s")
    print(f"whole analysis: {t2 - t1:.2f} s  (drift {result.drift.rate_hz_per_min:.4g} Hz/min)")
    t_s, freq_hz = _warmup_slow_spacing(n)
    t3 = time.perf_counter()
    slow = analyse_stability(t_s, freq_hz)
    t4 = time.perf_counter()
    taus = ", ".join(f"{x:.4g} s" for x in slow.settling.taus_s) or "none"
    print(f"whole analysis at 1 s spacing with a warm-up: {t4 - t3:.2f} s  (warm-up time constants {taus}; "
          f"truth 20000 s)")
    print(f"goal: under {GOAL_S:g} s each")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000)
