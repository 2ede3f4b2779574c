"""Per-step shifts: honest errors under correlated noise, drift removed by bracketing, repeats."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats
from scipy.signal import lfilter
from synthcal import make_run

from coilshift.logger.runfolder.reader import read_log
from coilshift.analysis.calibration.steps import (Step, combine_repeats, compute_steps, correlated_mean)
from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.markers import BASELINE, Marker


#: systematic coverage error claimed for correlated_mean's +-1 stderr (fraction of trials)
COVERAGE_ALLOWANCE = 0.025


def _ar1(rng, n, phi, sigma=1.0):
    e = rng.standard_normal(n + 300) * sigma * math.sqrt(1 - phi ** 2)
    return lfilter([1.0], [1.0, -phi], e)[300:]


@pytest.mark.parametrize("phi, n", [(0.0, 500), (0.5, 500), (0.8, 500), (0.8, 200), (0.95, 2000)])
def test_stderr_covers_68_percent_under_ar1_noise(phi, n):
    # AR(1) x_t = phi x_{t-1} + e_t has true mean 0 (Box & Jenkins, Time Series Analysis, ch. 3);
    # an honest one-sigma error covers the true mean in 68.27 % of trials (normal distribution).
    # Tolerance: 3 binomial standard deviations for the number of trials.
    # _LINE_LOSS in steps.py was set on seed 12345; these draws come from other seeds (out of sample)
    rng = np.random.default_rng([20240518, int(phi * 100), n])
    # (phi = 0.8 is about the correlation of 85 ms frames at a 20 ms hop; 0.95 needs ~50
    # correlation times of data, as any error estimate does; n = 200 is a 4 s stretch, where the
    # line-fit correction 1 / (1 - 6 tau_int / n) is about 1.4 and must be there)
    trials = 800
    hits = naive_hits = 0
    for _ in range(trials):
        x = _ar1(rng, n, phi)
        m = correlated_mean(x)
        hits += abs(m.mean) <= m.stderr
        naive_hits += abs(x.mean()) <= x.std(ddof=1) / math.sqrt(n)
    p = stats.norm.cdf(1) - stats.norm.cdf(-1)
    # the error is a first-order correction, claimed to cover 68 % within 2.5 points (3000 trials
    # per case on other seeds give 69-71 %), plus 3 binomial standard deviations of this study
    tol = COVERAGE_ALLOWANCE + 3 * math.sqrt(p * (1 - p) / trials)
    assert abs(hits / trials - p) <= tol
    if phi >= 0.8:
        # the naive std/sqrt(n) error is far too small here: the check above can tell the difference
        assert naive_hits / trials < p - tol


def test_integrated_autocorrelation_time_matches_ar1_theory():
    # AR(1): tau_int = (1 + phi)/(1 - phi) (Box & Jenkins; A. D. Sokal 1997, "Monte Carlo Methods in
    # Statistical Mechanics: Foundations and New Algorithms", eq. 2.20 with 2*tau_int convention). phi = 0.8 -> 9. The estimator's relative spread
    # is about sqrt(2 (2M+1)/n) with window M ~ 5 tau (Sokal), ~0.2 at n = 4000: allow 3 x 0.2/sqrt(trials).
    rng = np.random.default_rng(7)
    taus = [correlated_mean(_ar1(rng, 4000, 0.8)).tau_int for _ in range(40)]
    assert np.mean(taus) == pytest.approx(9.0, rel=3 * 0.2 / math.sqrt(40) + 0.05)


def test_bracketing_removes_drift_and_unbracketed_is_biased(tmp_path):
    # Drift 0.4 Hz/min (a few tenths of a hertz per minute, typical of a warming oscillator:
    # common practice). The truth is the dipole law put into the synthetic log by synthcal.
    truth = make_run(tmp_path / "run", {"steel": (-30.0, 25.0)}, distances_mm=(10, 20, 40, 80),
                     dwell_s=10.0, drift_hz_per_min=0.4, noise_hz=0.02, phi=0.8, seed=3)
    log = read_log(tmp_path / "run")
    steps, bases = compute_steps(log.t_s, log.freq_hz, log.markers, log.usable(), settle_s=1.0)
    assert len(steps) == 4 and all(s.bracketed for s in steps)
    z = np.array([(s.shift_hz - truth.true_shift[(s.target, s.distance_mm)]) / s.stderr_hz for s in steps])
    # standardised errors of unbiased estimates: each within 3.5 sigma, sum of squares below the
    # 99.9 % chi-squared quantile (4 dof)
    assert np.all(np.abs(z) < 3.5)
    assert float(np.sum(z ** 2)) < stats.chi2.ppf(0.999, len(z))
    # against the first baseline only, the drift accumulated since then (0.4/60 Hz/s times the
    # elapsed time) biases the shift: the bias is that drift, far beyond the error
    for s in steps:
        expected_bias = 0.4 / 60.0 * (0.5 * (s.start_s + s.end_s) - 10.0)
        bias = s.unbracketed_shift_hz - truth.true_shift[(s.target, s.distance_mm)]
        assert bias == pytest.approx(expected_bias, abs=4 * s.stderr_hz)
        assert abs(bias) > 5 * s.stderr_hz


def test_settling_time_is_discarded(tmp_path):
    # synthcal puts a 20 Hz disturbance in the first 0.5 s of every stretch; with 1 s settling
    # none of it reaches the means (shift within 4 sigma of the truth), with none it does.
    truth = make_run(tmp_path / "run", {"coin": (12.0, 25.0)}, distances_mm=(10, 30), dwell_s=8.0,
                     noise_hz=0.01, phi=0.5, jolt_hz=20.0, settle_s=0.5, seed=4)
    log = read_log(tmp_path / "run")
    clean, _ = compute_steps(log.t_s, log.freq_hz, log.markers, settle_s=1.0)
    raw, _ = compute_steps(log.t_s, log.freq_hz, log.markers, settle_s=0.0)
    for s in clean:
        assert abs(s.shift_hz - truth.true_shift[(s.target, s.distance_mm)]) < 4 * s.stderr_hz
        assert s.n == pytest.approx((8.0 - 2.0) / 0.02, abs=2)
    # untrimmed, the offset leaks into the mean: 20 Hz x 0.5 s / 8 s = 1.25 Hz
    for s in raw:
        assert s.shift_hz - truth.true_shift[(s.target, s.distance_mm)] == pytest.approx(1.25, abs=0.1)


def _step(x, e, target="t", d=10.0):
    return Step(target, d, 0.0, 1.0, x, e, 100, 0.0, True, x)


def test_repeats_weighted_mean_and_birge_ratio():
    # inverse-variance weighted mean (Bevington & Robinson, Data Reduction and Error Analysis,
    # eq. 4.17-4.19): values 1 and 4 with errors 1 and 2 -> weights 1, 1/4 -> mean 1.6,
    # error 1/sqrt(1.25) = 0.894427; chi2 = (0.6)^2 + (2.4/2)^2 = 1.8 (p = 0.18, consistent)
    (p,) = combine_repeats([_step(1.0, 1.0), _step(4.0, 2.0)])
    assert p.shift_hz == pytest.approx(1.6)
    assert p.stderr_hz == pytest.approx(1 / math.sqrt(1.25))
    assert p.chi2 == pytest.approx(1.8)
    assert p.consistent and p.repeats == 2 and p.n == 200
    # 0 and 10 with errors 1: chi2 = 50 on 1 dof -> inconsistent; error scaled by sqrt(50)
    # (Birge 1932): 1/sqrt(2) * sqrt(50) = 5
    (q,) = combine_repeats([_step(0.0, 1.0), _step(10.0, 1.0)])
    assert not q.consistent
    assert q.stderr_hz == pytest.approx(5.0)


def test_points_grouped_by_target_and_distance():
    pts = combine_repeats([_step(1, 1, "a", 20), _step(2, 1, "b", 10), _step(3, 1, "a", 10)])
    assert [(p.target, p.distance_mm) for p in pts] == [("a", 10.0), ("a", 20.0), ("b", 10.0)]


@pytest.mark.parametrize("markers, problem", [
    ([Marker(0, 5, BASELINE, math.nan)], "no target stretches"),
    ([Marker(0, 5, "coin", 10.0)], "no baseline stretches"),
    ([Marker(0, 0.05, BASELINE, math.nan), Marker(1, 5, "coin", 10.0)], "no baseline stretch has"),
])
def test_refuses_runs_without_what_it_needs(markers, problem):
    t = np.arange(0, 6, 0.02)
    with pytest.raises(InputError, match=problem):
        compute_steps(t, np.full(t.size, 1000.0), markers, source="x")


@pytest.mark.parametrize("ar, ma", [((1.2, -0.35), ()), ((), (0.9, 0.6, 0.3)), ((0.6,), (0.5,))])
def test_stderr_covers_68_percent_under_noise_that_is_not_ar1(ar, ma):
    # The small-sample factor of correlated_mean was set on AR(1) noise; here the truth is AR(2),
    # MA(3) and ARMA(1,1) noise (Box & Jenkins ch. 3; stationary, true mean 0), on fresh seeds.
    # Coverage of +-1 stderr must be 68.27 % within the claimed 2.5 points plus 3 binomial standard
    # deviations of 600 trials.
    rng = np.random.default_rng([7, len(ar), len(ma)])
    trials, n = 600, 800
    e = rng.standard_normal((trials, n + 400))
    x = lfilter(np.r_[1.0, ma], np.r_[1.0, -np.asarray(ar, float)], e, axis=1)[:, 400:]
    hits = sum(abs(m.mean) <= m.stderr for m in map(correlated_mean, x))
    p = stats.norm.cdf(1) - stats.norm.cdf(-1)
    assert abs(hits / trials - p) <= COVERAGE_ALLOWANCE + 3 * math.sqrt(p * (1 - p) / trials)


# --- trimming, frame counts and edge cases (mutation survivors, issue 18) ----------------------

def test_settling_trim_never_takes_more_than_a_quarter_of_a_stretch_per_end():
    # a 2 s stretch with 1 s settling: at most 0.5 s goes from each end (a quarter), 1 s is kept
    from coilshift.analysis.calibration.steps import segment_stats

    t = np.arange(0.0, 4.0, 0.01)
    seg = segment_stats(t, np.full(t.size, 1000.0), np.ones(t.size, bool), Marker(1.0, 3.0, "coin", 10.0),
                        settle_s=1.0)
    assert (seg.used_start_s, seg.used_end_s) == pytest.approx((1.5, 2.5))
    # frames 1.50 .. 2.50 inclusive at 0.01 s
    assert seg.stat.n == 101


def test_eight_usable_frames_make_a_stretch_and_seven_do_not():
    # MIN_FRAMES = 8 (steps.py): the documented minimum is itself enough
    from coilshift.analysis.calibration.steps import segment_stats

    t = np.arange(20) * 0.1
    f = 1000.0 + np.random.default_rng(3).standard_normal(t.size)
    usable = np.zeros(t.size, bool)
    usable[2:10] = True
    marker = Marker(0.0, 1.9, "coin", 10.0)
    assert segment_stats(t, f, usable, marker, settle_s=0.0).stat.n == 8
    usable[9] = False
    assert segment_stats(t, f, usable, marker, settle_s=0.0) is None


def test_three_values_already_have_a_standard_error():
    # n >= 3 leaves one degree of freedom about the fitted line: the error is finite and positive
    m = correlated_mean(np.array([1.0, 3.0, 2.0]))
    assert m.mean == pytest.approx(2.0) and math.isfinite(m.stderr) and m.stderr > 0
    two = correlated_mean(np.array([1.0, 3.0]))
    assert two.mean == pytest.approx(2.0) and math.isnan(two.stderr)


def test_constant_series_is_exact_and_uncorrelated():
    # a series that the fitted line leaves no residual of (zeros: the fit is exact in floating point)
    # has an exact mean (stderr 0), tau_int = 1 and n_eff = n by definition
    m = correlated_mean(np.zeros(50))
    assert (m.mean, m.stderr, m.tau_int, m.n_eff, m.converged) == (0.0, 0.0, 1.0, 50.0, True)


def test_small_sample_widening_is_taken_at_the_one_sigma_quantile():
    # +-1 sigma of a normal holds 68.27 %: its one-sided quantile Phi(1) = 0.841345 (standard normal
    # table, e.g. Abramowitz & Stegun 26.2; scipy.stats.norm.cdf written differently here)
    from coilshift.analysis.calibration import steps

    assert steps._Q68 == pytest.approx(0.5 * (1 + math.erf(1 / math.sqrt(2))), abs=1e-12)
    assert steps._Q68 == pytest.approx(0.841345, abs=5e-7)


def test_repeats_without_usable_errors_use_the_standard_error_of_their_mean():
    # no step error known: the error of the combined value is s / sqrt(k) with the sample standard
    # deviation s on k - 1 degrees of freedom (Python's statistics.stdev, an independent library)
    import statistics

    xs = [1.0, 2.0, 3.0, 6.0]
    (p,) = combine_repeats([_step(x, math.nan) for x in xs])
    assert p.shift_hz == pytest.approx(3.0)
    assert p.stderr_hz == pytest.approx(statistics.stdev(xs) / 2.0, rel=1e-12)
