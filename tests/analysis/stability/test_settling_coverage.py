"""Do the settling fit's stated uncertainties cover the truth as often as they say?

Simulated studies over 200 seeds each, at the frame level, whose truth is NOT the fitted model:
the white FM is smoothed over four frames (as the tracker's overlapping frames smooth it), the
noise levels are unknown to the fit (it estimates them), and in the first study the warm-up has
three time constants, the fastest shorter than the fit's blocks, while the fit allows at most
two. Each 1-sigma claim should hold in 68.27 % of seeds; the binomial standard deviation over
200 seeds is sqrt(0.6827 x 0.3173 / 200) = 0.033 and the tolerance is 3 of them (each check
fails by chance with probability 0.27 %; the seeds are fixed, so the outcome is reproducible).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from coilshift.analysis.stability.drift import settled_drift
from coilshift.analysis.stability.grid import to_uniform
from coilshift.analysis.stability.settling import fit_settling
from coilshift.analysis.stability.settling_lsq import GRID_POINTS

pytestmark = pytest.mark.slow

N_SEEDS = 200
P_1SIGMA = 0.6827
TOL = 3 * math.sqrt(P_1SIGMA * (1 - P_1SIGMA) / N_SEEDS)
TAU0_S, N_FRAMES, FRAME_STEPS = 0.05, 6000, 4
WHITE_FM_HZ, RANDOM_WALK_HZ = 0.002, 0.0004  # at 1 s; Hz/sqrt(s) (the bundled recording's levels)
DRIFT_HZ_PER_S = -2e-5


def _record(seed: int, warmup) -> tuple[np.ndarray, np.ndarray]:
    """Frame-level record: warm-up + drift + white FM averaged over FRAME_STEPS frames + random walk."""
    rng = np.random.default_rng(seed)
    t = np.arange(N_FRAMES) * TAU0_S
    white = rng.standard_normal(N_FRAMES + FRAME_STEPS - 1) * WHITE_FM_HZ / math.sqrt(TAU0_S)
    # a moving average keeps the low-frequency level (the Allan deviation at long tau) unchanged
    white = np.convolve(white, np.ones(FRAME_STEPS) / FRAME_STEPS, "valid")
    walk = np.cumsum(rng.standard_normal(N_FRAMES)) * RANDOM_WALK_HZ * math.sqrt(TAU0_S)
    return t, 3000.0 + warmup(t) + DRIFT_HZ_PER_S * t + white + walk


def _study(warmup):
    fits, drifts = [], []
    for seed in range(N_SEEDS):
        t, f = _record(seed, warmup)
        series = to_uniform(t, f)
        fit = fit_settling(series, frame_s=FRAME_STEPS * TAU0_S, check_noise=False)
        fits.append(fit)
        drifts.append(settled_drift(series, fit, frame_s=FRAME_STEPS * TAU0_S))
    return fits, drifts


def _drift_coverage(drifts) -> tuple[float, int]:
    det = [d for d in drifts if d.determined]
    hits = [abs(d.rate_hz_per_min - 60 * DRIFT_HZ_PER_S) <= d.u_rate_hz_per_min for d in det]
    return float(np.mean(hits)), len(drifts) - len(det)


def test_settled_drift_covers_with_three_time_constants():
    fits, drifts = _study(lambda t: 0.45 * np.exp(-t / 25) + 0.15 * np.exp(-t / 6) + 0.08 * np.exp(-t / 1.5))
    coverage, not_determined = _drift_coverage(drifts)
    assert abs(coverage - P_1SIGMA) <= TOL, coverage
    # a 300 s record holds twelve of the slowest time constants: the drift is always determined
    assert not_determined == 0


def test_single_exponential_parameters_cover():
    a_true, tau_true = 0.6, 25.0
    fits, drifts = _study(lambda t: a_true * np.exp(-t / tau_true))
    coverage, not_determined = _drift_coverage(drifts)
    assert abs(coverage - P_1SIGMA) <= TOL and not_determined == 0
    one = [f for f in fits if f.n_exp == 1]
    assert len(one) >= N_SEEDS // 2  # the cases below need enough seeds to judge
    tol = 3 * math.sqrt(P_1SIGMA * (1 - P_1SIGMA) / len(one))
    tau_cov = np.mean([f.tau_lo_s[0] <= tau_true <= f.tau_hi_s[0] for f in one])
    a_cov = np.mean([abs(f.amplitudes_hz[0] - a_true) <= f.u_amplitudes_hz[0] for f in one])
    assert abs(tau_cov - P_1SIGMA) <= tol, tau_cov
    assert abs(a_cov - P_1SIGMA) <= tol, a_cov


def test_no_warmup_is_rarely_invented_and_the_line_drift_covers():
    fits, drifts = _study(lambda t: 0.0 * t)
    # BIC keeps an exponential only if it lowers chi^2 by more than 2 ln n (two more parameters);
    # for one fixed time constant that chi^2 drop, chi-squared with 2 degrees of freedom, exceeds
    # 2 ln n with probability exp(-ln n) = 1/n (Schwarz 1978; the chi-squared(2) tail is
    # exp(-x/2)). A union bound over the grid's time constants gives at most GRID_POINTS / n
    # (approximately: the refinement moves within one grid step, where the drops are strongly
    # correlated with the grid point's)
    n_blocks = fits[0].n
    p_max = min(1.0, GRID_POINTS / n_blocks)
    invented = np.mean([f.n_exp > 0 for f in fits])
    assert invented <= p_max + 3 * math.sqrt(p_max * (1 - p_max) / N_SEEDS), invented
    coverage, not_determined = _drift_coverage(drifts)
    assert abs(coverage - P_1SIGMA) <= TOL, coverage
    assert not_determined <= invented * N_SEEDS  # only where a spurious warm-up was kept
