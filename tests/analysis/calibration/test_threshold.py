"""The noise behind the detection threshold: its degrees of freedom and the noise type they assume."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from coilshift.analysis.calibration.threshold import noise_at_dwell
from coilshift.sim.logsession import FrameNoise

HOP_S = 0.02


def _baseline(noise: FrameNoise, seconds: float, rng) -> tuple[np.ndarray, np.ndarray]:
    n = int(round(seconds / HOP_S))
    return (np.arange(n) + 0.5) * HOP_S, 1000.0 + noise.frames(rng, n)


@pytest.mark.parametrize("noise, kind", [(FrameNoise(white_hz=0.02), "white FM"),
                                         (FrameNoise(rw_hz_per_sqrt_s=0.02), "random-walk FM")])
def test_chi_squared_interval_from_the_edf_covers_the_true_noise(noise, kind):
    # NIST SP 1065 section 5.3: edf s^2 / sigma^2 ~ chi2(edf), so s sqrt(edf / chi2_{0.975}) ..
    # s sqrt(edf / chi2_{0.025}) (scipy.stats quantiles) covers the true Allan deviation 95 % of the
    # time. The truth is the closed-form Allan variance of the simulated frames (sim.logsession).
    # 300 baselines of 15 dwells each; tolerance 3 binomial standard deviations (0.038).
    rng = np.random.default_rng(5)
    dwell = 2.0
    sigma = math.sqrt(noise.allan_variance_hz2(dwell))
    hits, kinds = 0, set()
    for _ in range(300):
        t, f = _baseline(noise, 15 * dwell, rng)
        est = noise_at_dwell(t, f, dwell)
        assert est.tau_s == dwell
        lo = est.noise_hz * math.sqrt(est.edf / stats.chi2.ppf(0.975, est.edf))
        hi = est.noise_hz * math.sqrt(est.edf / stats.chi2.ppf(0.025, est.edf))
        hits += lo <= sigma <= hi
        kinds.add(est.edf_noise)
    assert abs(hits / 300 - 0.95) <= 3 * math.sqrt(0.95 * 0.05 / 300)
    # the noise type is read from the slope and is the simulated one most of the time
    assert kind in kinds


def test_short_baselines_fall_back_to_a_shorter_tau_with_few_degrees_of_freedom():
    rng = np.random.default_rng(6)
    t, f = _baseline(FrameNoise(white_hz=0.02), 5.0, rng)
    est = noise_at_dwell(t, f, 4.0)
    assert est.tau_s == 2.0 and 0 < est.edf < 5
    nothing = noise_at_dwell(t[:2], f[:2], 4.0)
    assert math.isnan(nothing.noise_hz) and math.isnan(nothing.edf)


def _greenhall_oadev_edf(alpha, m, n_freq):
    # allantools' own Greenhall-Riley edf (an independent implementation) for the overlapping Allan
    # variance (d = 2) of n_freq frequency samples, i.e. n_freq + 1 phase points
    allantools = pytest.importorskip("allantools")
    return float(allantools.edf_greenhall(alpha=alpha, d=2, m=m, N=n_freq + 1, overlapping=True, modified=False))


@pytest.mark.parametrize("noise, alpha, kind", [(FrameNoise(white_hz=0.02), 0, "white FM"),
                                                (FrameNoise(rw_hz_per_sqrt_s=0.02), -2, "random-walk FM")])
def test_long_baseline_reads_the_noise_type_and_its_greenhall_edf(noise, alpha, kind):
    # 20 s of one gap-free baseline (1000 frames), dwell 0.64 s (m = 32 frames): the Allan
    # variance's slope (NIST SP 1065 Table 7: mu = -1 white FM, +1 random-walk FM) names the
    # simulated type, and the edf is Greenhall & Riley's for that type (allantools.edf_greenhall,
    # at an m where allantools sums the series exactly, as in tests/analysis/stability/test_edf.py)
    rng = np.random.default_rng(21)
    t, f = _baseline(noise, 20.0, rng)
    est = noise_at_dwell(t, f, 32 * HOP_S)
    assert est.tau_s == pytest.approx(32 * HOP_S)
    assert est.edf_noise == kind
    assert est.edf == pytest.approx(_greenhall_oadev_edf(alpha, 32, t.size), rel=1e-6)


def test_unreadable_slope_takes_the_fewest_degrees_of_freedom_of_the_three_types():
    # at m = 2 frames the slope between tau/4 and tau cannot be read: the edf is the smallest of the
    # white, flicker and random-walk FM values (allantools.edf_greenhall), and the label says so
    rng = np.random.default_rng(22)
    t, f = _baseline(FrameNoise(white_hz=0.02), 3.0, rng)       # 150 frames: N / m = 75
    est = noise_at_dwell(t, f, 2 * HOP_S)
    assert est.tau_s == pytest.approx(2 * HOP_S)
    fewest = min(_greenhall_oadev_edf(a, 2, t.size) for a in (0, -1, -2))
    assert est.edf == pytest.approx(fewest, rel=1e-6)
    assert est.edf_noise.endswith("the fewest degrees of freedom of the FM types")


def test_dwell_of_one_frame_is_still_an_averaging_time():
    # the shortest averaging time is the frame spacing itself (m = 1): it is used, not refused
    # (frames every 0.25 s, a spacing binary floating point holds exactly)
    rng = np.random.default_rng(23)
    t = np.arange(400) * 0.25
    f = 1000.0 + 0.02 * rng.standard_normal(t.size)
    est = noise_at_dwell(t, f, 0.25)
    assert est.tau_s == 0.25
    # white FM at the frame level: the Allan deviation at m = 1 is the frames' standard deviation
    # (sigma^2(tau0) = E[(y2 - y1)^2] / 2 = s^2 for independent frames); chi2 bounds from the edf
    s2 = 0.02 ** 2
    assert est.noise_hz ** 2 * est.edf / s2 == pytest.approx(est.edf, abs=4 * math.sqrt(2 * est.edf))


def test_noise_type_follows_the_allan_slope_between_the_pure_types():
    # AR(1) frames with a correlation time near tau: the Allan variance's slope mu between tau/4 and
    # tau lies between the pure types, where the rounding of -mu - 1 decides. mu from
    # allantools.oadev (reference library) at tau and tau/4, alpha = round(-mu - 1) clamped to
    # -2..0 (NIST SP 1065 Table 7 mu = -alpha - 1)
    allantools = pytest.importorskip("allantools")
    from coilshift.analysis.calibration.threshold import fm_alpha_from_slope

    rng = np.random.default_rng(31)
    t, f = _baseline(FrameNoise(ar_hz=0.05, ar_phi=0.9), 60.0, rng)
    for m in (16, 64):
        tau = m * HOP_S
        hi, lo = (allantools.oadev(f, rate=1 / HOP_S, data_type="freq", taus=[x])[1][0] for x in (tau, tau / 4))
        mu = math.log(hi ** 2 / lo ** 2) / math.log(4.0)
        assert -0.6 < mu < 0.6                       # not a pure type: the test can tell
        assert fm_alpha_from_slope(t, f, tau) == int(min(max(round(-mu - 1.0), -2), 0))


def test_constant_frames_have_no_noise_figure():
    # a frequency that never moves (a tracker at its resolution) has Allan deviation 0 at every tau:
    # that is no measurement of the noise (a zero threshold would call any shift a detection)
    from coilshift.analysis.calibration.threshold import fm_alpha_from_slope

    t = (np.arange(1000) + 0.5) * HOP_S
    f = np.full(t.size, 1000.0)
    est = noise_at_dwell(t, f, 0.64)
    assert math.isnan(est.noise_hz) and math.isnan(est.edf)
    assert fm_alpha_from_slope(t, f, 0.64) is None


def test_three_frames_give_an_allan_deviation_at_the_frame_spacing():
    # three frames make two adjacent differences: the Allan deviation at tau0 exists (SP 1065 eq. 6)
    t = np.array([0.0, 0.25, 0.5])
    f = np.array([1000.0, 1000.3, 999.9])
    est = noise_at_dwell(t, f, 0.25)
    expected = math.sqrt(((0.3) ** 2 + (0.4) ** 2) / 2 / 2)   # sum of squared differences / (2 (M - 1))
    assert est.tau_s == 0.25 and est.noise_hz == pytest.approx(expected, rel=1e-9)


def test_a_pause_in_the_log_does_not_stretch_the_frame_spacing():
    # frames every 0.02 s with one 100 s pause: the spacing is the typical (median) one, so a
    # 4-frame dwell is still measured at 0.08 s (the mean spacing would be 0.22 s and refuse it)
    rng = np.random.default_rng(24)
    t = np.concatenate([np.arange(250) * HOP_S, 100.0 + np.arange(250) * HOP_S])
    f = 1000.0 + 0.02 * rng.standard_normal(t.size)
    assert float(np.mean(np.diff(t))) > 0.2
    est = noise_at_dwell(t, f, 4 * HOP_S)
    assert est.tau_s == pytest.approx(4 * HOP_S) and math.isfinite(est.noise_hz)


@pytest.mark.parametrize("make, kind", [
    # linear frequency drift: sigma_y ~ tau, mu = +2 (NIST SP 1065 section 5.2), steeper than RW FM
    (lambda rng, n: 1e-3 * np.arange(n) + 1e-6 * rng.standard_normal(n), "random-walk FM"),
    # white PM: frequency = first difference of white phase, mu = -2 (SP 1065 Table 7)
    (lambda rng, n: np.diff(rng.standard_normal(n + 1)), "white FM"),
])
def test_slopes_beyond_the_fm_types_are_clamped_to_the_nearest(make, kind):
    rng = np.random.default_rng(25)
    n = 1000
    t = (np.arange(n) + 0.5) * HOP_S
    est = noise_at_dwell(t, 1000.0 + make(rng, n), 16 * HOP_S)
    assert est.edf_noise == kind and math.isfinite(est.edf)


def test_the_slope_is_read_from_four_frames_up():
    # m = 4 frames is the shortest tau whose tau/4 is a whole frame: the slope is read there
    rng = np.random.default_rng(26)
    t, f = _baseline(FrameNoise(white_hz=0.02), 20.0, rng)
    est = noise_at_dwell(t, f, 4 * HOP_S)
    assert est.edf_noise == "white FM"
    assert est.edf == pytest.approx(_greenhall_oadev_edf(0, 4, t.size), rel=1e-6)


def test_edf_at_one_frame_is_the_fewest_of_the_fm_types():
    t = np.arange(400) * 0.25
    f = 1000.0 + 0.02 * np.random.default_rng(27).standard_normal(t.size)
    est = noise_at_dwell(t, f, 0.25)
    fewest = min(_greenhall_oadev_edf(a, 1, t.size) for a in (0, -1, -2))
    assert est.edf == pytest.approx(fewest, rel=1e-6)


def test_stretches_shorter_than_two_dwells_add_no_degrees_of_freedom():
    # two baselines separated by a target (NaN frames): 600 frames and 20 frames, dwell m = 16.
    # The short one holds no Allan term at m (2m = 32 frames needed), so the edf is the long one's
    # alone (allantools.edf_greenhall, white FM read from the slope)
    rng = np.random.default_rng(28)
    t = (np.arange(700) + 0.5) * HOP_S
    f = 1000.0 + 0.02 * rng.standard_normal(t.size)
    f[600:680] = np.nan
    est = noise_at_dwell(t, f, 16 * HOP_S)
    assert est.edf_noise == "white FM"
    assert est.edf == pytest.approx(_greenhall_oadev_edf(0, 16, 600), rel=1e-6)


def test_a_baseline_of_exactly_two_dwells_has_one_degree_of_freedom():
    # 2m frames make a single overlapping Allan term: one squared difference, chi-squared with 1 dof
    # (allantools.edf_greenhall gives 1 for every type there)
    rng = np.random.default_rng(29)
    t = (np.arange(8) + 0.5) * HOP_S
    f = 1000.0 + 0.02 * rng.standard_normal(t.size)
    est = noise_at_dwell(t, f, 4 * HOP_S)
    assert est.tau_s == pytest.approx(4 * HOP_S)
    assert est.edf == pytest.approx(_greenhall_oadev_edf(0, 4, 8), rel=1e-9) == 1.0


def test_no_slope_when_the_deviation_at_tau_vanishes():
    # frames alternating +-0.01 Hz (a square wave of two frames): every 4-frame mean is exactly
    # 1000 Hz, so the Allan deviation at tau = 4 frames is 0 while at tau/4 it is not. A slope
    # through log 0 means nothing: no noise type is read
    from coilshift.analysis.calibration.threshold import fm_alpha_from_slope

    t = np.arange(400) * 0.25
    f = 1000.0 + 0.01 * np.where(np.arange(t.size) % 2 == 0, 1.0, -1.0)
    assert fm_alpha_from_slope(t, f, 1.0) is None
