"""Speed check: the full stability analysis of one million frames must take a few seconds.

Run: python benchmarks/stability_speed.py [N]. Prints the seconds for the four estimators
alone and for the whole analysis (grid, estimators, noise identification, edf, drift, warm-up).
The data are white FM noise plus a slow drift with one gap, generated here with a fixed seed.
"""

from __future__ import annotations

import sys
import time

import numpy as np

from coilshift.analysis.stability import allan
from coilshift.analysis.stability.analyse import analyse_stability


def main(n: int = 1_000_000) -> None:
    rng = np.random.default_rng(20261201)
    t_s = np.arange(n) * 0.02
    freq_hz = 50_000.0 + 0.02 * rng.standard_normal(n) + 1e-4 * t_s
    freq_hz[n // 3: n // 3 + 500] = np.nan
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


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000)
