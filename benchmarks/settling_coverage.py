"""Accuracy check: how often the settled drift's stated uncertainty covers the truth.

Run: python benchmarks/settling_coverage.py [SEEDS]. Simulates frame-level records (300 s at
0.05 s: white FM 2 mHz at 1 s smoothed over four frames as overlapping tracker frames smooth
it, random-walk FM 0.4 mHz/sqrt(s), a drift of -0.0012 Hz/min) with five kinds of warm-up, and
prints for each how often +-1 and +-2 standard uncertainties cover the true drift (goal: 68.3 %
and 95.4 %), the 95th percentile of |error| / u, how many drifts were not determined, and for
the single-exponential warm-up how often the time-constant interval and the amplitude's
+-1 u cover. The numbers quoted in docs/stability.md come from this script.
"""

from __future__ import annotations

import math
import sys
import time

import numpy as np

from coilshift.analysis.stability.drift import settled_drift
from coilshift.analysis.stability.grid import to_uniform
from coilshift.analysis.stability.settling import fit_settling

TAU0_S, N_FRAMES, FRAME_STEPS = 0.05, 6000, 4
DRIFT_HZ_PER_S = -2e-5
WARMUPS = {
    "one time constant (25 s)": lambda t: 0.6 * np.exp(-t / 25),
    "two (25 s, 6 s)": lambda t: 0.45 * np.exp(-t / 25) + 0.15 * np.exp(-t / 6),
    "three (25 s, 6 s, 1.5 s)": lambda t: 0.45 * np.exp(-t / 25) + 0.15 * np.exp(-t / 6) + 0.08 * np.exp(-t / 1.5),
    "stretched exp(-(t/25 s)^0.8)": lambda t: 0.6 * np.exp(-(t / 25) ** 0.8),
    "none": lambda t: 0.0 * t,
}


def record(seed: int, warmup):
    rng = np.random.default_rng(10_000 + seed)
    t = np.arange(N_FRAMES) * TAU0_S
    white = np.convolve(rng.standard_normal(N_FRAMES + FRAME_STEPS - 1) * 0.002 / math.sqrt(TAU0_S),
                        np.ones(FRAME_STEPS) / FRAME_STEPS, "valid")
    walk = np.cumsum(rng.standard_normal(N_FRAMES)) * 0.0004 * math.sqrt(TAU0_S)
    return t, 3000.0 + warmup(t) + DRIFT_HZ_PER_S * t + white + walk


def main(seeds: int = 400) -> None:
    print(f"{seeds} seeds per warm-up; goal: +-1 u covers 68.3 %, +-2 u 95.4 %")
    for name, warmup in WARMUPS.items():
        t0 = time.perf_counter()
        z, not_det, tau_hit, a_hit = [], 0, [], []
        for seed in range(seeds):
            t, f = record(seed, warmup)
            series = to_uniform(t, f)
            fit = fit_settling(series, FRAME_STEPS * TAU0_S, check_noise=False)
            d = settled_drift(series, fit, FRAME_STEPS * TAU0_S)
            if name.startswith("one") and fit.n_exp == 1:
                tau_hit.append(fit.tau_lo_s[0] <= 25 <= fit.tau_hi_s[0])
                a_hit.append(abs(fit.amplitudes_hz[0] - 0.6) <= fit.u_amplitudes_hz[0])
            if not d.determined:
                not_det += 1
                continue
            z.append(abs(d.rate_hz_per_min / 60 - DRIFT_HZ_PER_S) / (d.u_rate_hz_per_min / 60))
        z = np.asarray(z)
        extra = (f"; time-constant interval {100 * np.mean(tau_hit):.1f} %, amplitude {100 * np.mean(a_hit):.1f} %"
                 if tau_hit else "")
        print(f"{name:30s}: +-1 u {100 * np.mean(z <= 1):5.1f} %, +-2 u {100 * np.mean(z <= 2):5.1f} %, "
              f"95th percentile of |error|/u {np.quantile(z, 0.95):.2f}, not determined {not_det}{extra} "
              f"({time.perf_counter() - t0:.0f} s)")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 400)
