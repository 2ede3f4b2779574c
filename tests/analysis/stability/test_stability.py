"""Stability analysis: intervals, noise types, drift, warm-up, tempco, gaps and the noise figure."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.signal import lfilter

from coilshift.analysis.stability import allan
from coilshift.analysis.stability.allan_edf import confidence_interval, edf_greenhall, edf_with_gaps, noise_id_acf
from coilshift.analysis.stability.analyse import analyse_stability
from coilshift.analysis.stability.drift import fit_drift
from coilshift.analysis.stability.grid import to_uniform
from coilshift.analysis.stability.noise import noise_at_tau_hz
from coilshift.analysis.stability.tempco import read_temperature_csv, temperature_coefficient
from coilshift.logger.errors import InputError

allantools = pytest.importorskip("allantools")
ci_ref = pytest.importorskip("allantools.ci")


# ---- equivalent degrees of freedom and intervals ------------------------------------------------

def _edf_cases():
    # where allantools evaluates Greenhall & Riley's basic sum exactly (J <= 100), not by tables
    for kind in ("adev", "oadev", "mdev"):
        for alpha in (2, 1, 0, -1, -2):
            ms = (1, 2, 8, 33, 64, 256) if kind == "adev" else (1, 2, 4, 8, 16, 32)
            for m in ms:
                for n_phase in (300, 1001):
                    if 3 * m < n_phase:  # at least one term (the record holds 2m + 1 phase points)
                        yield kind, alpha, m, n_phase


@pytest.mark.parametrize("kind,alpha,m,n_phase", list(_edf_cases()))
def test_edf_matches_allantools_greenhall(kind, alpha, m, n_phase):
    # Greenhall & Riley (PTTI 2003) as implemented in allantools.ci.edf_greenhall (reference
    # library). Tolerance: our Taylor form of the kernel's second difference is exact to
    # about (1/(F t))^6 relative, far below 1e-6.
    overlapping, modified = {"adev": (False, False), "oadev": (True, False), "mdev": (True, True)}[kind]
    try:
        ref = ci_ref.edf_greenhall(alpha, 2, m, n_phase, overlapping=overlapping, modified=modified)
    except NotImplementedError:
        pytest.skip("allantools has no formula for this case")
    assert edf_greenhall(alpha, m, n_phase, kind) == pytest.approx(ref, rel=1e-6)


def test_edf_too_short_is_nan():
    assert math.isnan(edf_greenhall(0, 256, 300, "adev"))


def test_edf_with_gaps_pools_segments():
    # Satterthwaite (1946): two equal independent segments double the edf; one segment is unchanged
    e = edf_greenhall(0, 4, 401, "oadev")
    assert edf_with_gaps(0, 4, [400], "oadev") == pytest.approx(e, rel=1e-12)
    assert edf_with_gaps(0, 4, [400, 400], "oadev") == pytest.approx(2 * e, rel=1e-12)
    assert edf_with_gaps(0, 4, [400, 5], "oadev") == pytest.approx(e, rel=1e-12)  # too short: no terms


def test_confidence_interval_matches_allantools():
    # chi-squared interval, SP 1065 section 5.3.1; reference: allantools.ci.confidence_interval
    for edf in (1.7, 12.0, 250.0):
        lo, hi = confidence_interval(np.array([2.0]), np.array([edf]), 0.6827)
        rlo, rhi = ci_ref.confidence_interval(2.0, edf, ci=0.6827)
        assert lo[0] == pytest.approx(rlo, rel=1e-9) and hi[0] == pytest.approx(rhi, rel=1e-9)


def test_interval_coverage_white_fm():
    # frequency of the 68.27% interval covering the true sigma (white FM: sigma_y(m) = s/sqrt(m),
    # SP 1065 Table 11); binomial sd of the rate over 400 trials is 0.023, allow 4 sd
    rng = np.random.default_rng(11)
    m, n = 4, 256
    e = edf_greenhall(0, m, n + 1, "oadev")
    hits = 0
    for _ in range(400):
        d, _ = allan.oadev(rng.standard_normal(n), [m])
        lo, hi = confidence_interval(d, [e], 0.6827)
        hits += bool(lo[0] <= 1 / math.sqrt(m) <= hi[0])
    assert abs(hits / 400 - 0.6827) <= 4 * math.sqrt(0.6827 * 0.3173 / 400)


# ---- noise identification and synthetic noise ---------------------------------------------------

@pytest.mark.parametrize("seed,kind", [(1, "white_fm"), (2, "white_pm"), (3, "rw_fm")])
def test_noise_id_matches_allantools(seed, kind):
    # Riley & Greenhall (EFTF 2004) lag-1 method; reference: allantools.ci.autocorr_noise_id
    rng = np.random.default_rng(seed)
    w = rng.standard_normal(3001)
    y = {"white_fm": w[:-1], "white_pm": np.diff(w), "rw_fm": np.cumsum(w[:-1])}[kind]
    for m in (1, 4, 16):
        mine = noise_id_acf(y, m)
        _, alpha_ref, d_ref, _ = ci_ref.autocorr_noise_id(y, m, data_type="freq")
        assert mine[0] == pytest.approx(alpha_ref, rel=1e-9, abs=1e-12) and mine[1] == d_ref


def _theory_within(res, theory_hz, kind="oadev"):
    lo, hi = res.ci_lo[kind], res.ci_hi[kind]
    return (lo <= theory_hz) & (theory_hz <= hi)


def test_white_fm_slope_and_level():
    # white FM: sigma_y(tau) = s / sqrt(tau/tau0) (SP 1065 Table 11, slope -1/2)
    rng = np.random.default_rng(21)
    n, s_hz, tau0 = 8192, 0.05, 0.02
    t = np.arange(n) * tau0
    f = 30000 + s_hz * rng.standard_normal(n)
    res = analyse_stability(t, f, confidence=0.999)
    theory = s_hz / np.sqrt(res.m)
    # 99.9% intervals at each of ~13 taus: family-wise miss probability about 1.3%
    assert np.all(_theory_within(res, theory))
    assert res.oadev_hz[0] == pytest.approx(res.adev_hz[0])
    i = int(np.flatnonzero(res.m == 64)[0])
    slope = math.log(res.oadev_hz[i] / res.oadev_hz[0]) / math.log(64)
    # slope error from the two points' relative errors 1/sqrt(2 edf), 4 sd
    tol = 4 * math.sqrt(1 / (2 * res.edf["oadev"][0]) + 1 / (2 * res.edf["oadev"][i])) / math.log(64)
    assert abs(slope + 0.5) <= tol
    assert all(nt == "white FM" for nt in res.noise_type[:6])
    assert res.ci_lo["oadev"][0] < res.oadev_hz[0] < res.ci_hi["oadev"][0]


def test_random_walk_fm_slope():
    # random walk y = cumsum(w), step sd q: Allan variance q^2 (2m^2 + 1) / (6m) [derived from the
    # definition: the difference of adjacent means is a triangular sum of 2m - 1 steps]; slope +1/2
    rng = np.random.default_rng(22)
    n, q = 8192, 1e-3
    t = np.arange(n) * 0.1
    f = 5000 + q * np.cumsum(rng.standard_normal(n))
    res = analyse_stability(t, f, confidence=0.999)
    theory = q * np.sqrt((2 * res.m ** 2 + 1) / (6 * res.m))
    assert np.all(_theory_within(res, theory))
    assert all(a == -2 for a in res.alpha[:8])
    i, j = int(np.flatnonzero(res.m == 4)[0]), int(np.flatnonzero(res.m == 128)[0])
    slope = math.log(res.oadev_hz[j] / res.oadev_hz[i]) / math.log(32)
    slope_theory = math.log(theory[j] / theory[i]) / math.log(32)
    tol = 4 * math.sqrt(1 / (2 * res.edf["oadev"][i]) + 1 / (2 * res.edf["oadev"][j])) / math.log(32)
    assert slope_theory == pytest.approx(0.5, abs=0.01)
    assert abs(slope - slope_theory) <= tol


# ---- drift ----------------------------------------------------------------------------------------

def test_linear_drift_recovered_within_uncertainty():
    rng = np.random.default_rng(31)
    t = np.arange(20000) * 0.02
    f = 40000 + 0.6 / 60 * t + 0.05 * rng.standard_normal(t.size)
    d = fit_drift(to_uniform(t, f))
    assert abs(d.rate_hz_per_min - 0.6) <= 3 * d.u_rate_hz_per_min  # 3 sigma: fails 0.3% of seeds


def test_drift_uncertainty_covers_with_correlated_noise():
    # AR(1) residuals (phi = 0.8): the AR(1)-aware 1-sigma error should cover the true rate about
    # 68.3% of the time (Santer et al. 2000); binomial sd over 300 trials 0.027, allow 4 sd.
    # The white-noise error must not (it covers far less), or the correction would be pointless.
    rng = np.random.default_rng(32)
    t = np.arange(2000) * 0.1
    hits = hits_white = 0
    trials = 300
    for _ in range(trials):
        e = lfilter([1.0], [1.0, -0.8], rng.standard_normal(t.size))
        d = fit_drift(to_uniform(t, 100 + 0.3 / 60 * t + e))
        hits += abs(d.rate_hz_per_min - 0.3) <= d.u_rate_hz_per_min
        hits_white += abs(d.rate_hz_per_min - 0.3) <= d.u_rate_white_hz_per_min
    assert abs(hits / trials - 0.6827) <= 4 * math.sqrt(0.6827 * 0.3173 / trials)
    assert hits_white / trials < 0.5


def test_remove_drift_whitens_long_taus():
    rng = np.random.default_rng(33)
    t = np.arange(8192) * 0.05
    f = 10000 + 0.05 * rng.standard_normal(t.size) + 0.5 / 60 * t
    raw = analyse_stability(t, f)
    flat = analyse_stability(t, f, remove_drift=True)
    theory = 0.05 / np.sqrt(flat.m)
    # a linear frequency drift D gives sigma_y = D tau / sqrt(2) (SP 1065, from memory): huge at long tau
    assert raw.oadev_hz[-1] > 5 * theory[-1]
    assert np.all((flat.ci_lo["oadev"] / 2 <= theory) & (theory <= 2 * flat.ci_hi["oadev"]))


# ---- warm-up -------------------------------------------------------------------------------------

def test_warmup_of_exponential_settling():
    # f = f0 + A exp(-t/T): rate = -(A/T) exp(-t/T); it falls to the threshold r at
    # t* = T ln(A 60 / (T r)) [derived]. The window-centre estimate lands within one window step.
    A, T, r = 5.0, 100.0, 0.05
    tau0 = 0.1
    t = np.arange(10000) * tau0
    rng = np.random.default_rng(41)
    f = 20000 + A * np.exp(-t / T) + 1e-3 * rng.standard_normal(t.size)
    res = analyse_stability(t, f, settle_hz_per_min=r, window_s=20.0)
    t_star = T * math.log(A * 60 / (T * r))
    w = res.warmup
    assert w.settled
    assert t_star - 0.5 <= w.warmup_s <= t_star + w.window_s / 4 + 0.5


def test_warmup_never_settles_on_steady_ramp():
    t = np.arange(5000) * 0.1
    res = analyse_stability(t, 1000 + t, settle_hz_per_min=1.0)  # 60 Hz/min throughout
    assert not res.warmup.settled and res.warmup.warmup_s is None


# ---- temperature ------------------------------------------------------------------------------------

def test_temperature_coefficient_recovered(tmp_path):
    rng = np.random.default_rng(51)
    t = np.arange(60000) * 0.02
    temp_t = np.arange(0, 1201, 2.0)
    temp = 20 + 3 * np.sin(2 * np.pi * temp_t / 600)
    k = -0.8
    f = 50000 + k * np.interp(t, temp_t, temp) + 0.02 * rng.standard_normal(t.size)
    csv = tmp_path / "temp.csv"
    csv.write_text("time_s,temp_c\n" + "".join(f"{a},{b}\n" for a, b in zip(temp_t, temp)))
    ts, tc = read_temperature_csv(csv)
    tco = temperature_coefficient(to_uniform(t, f), ts, tc, 50000.0)
    assert abs(tco.hz_per_degc - k) <= 3 * tco.u_hz_per_degc
    assert tco.ppm_per_degc == pytest.approx(k / 50000 * 1e6, rel=1e-3)
    assert tco.temp_min_c == pytest.approx(17, abs=0.01) and tco.temp_max_c == pytest.approx(23, abs=0.01)


@pytest.mark.parametrize("text,match", [
    ("when,degrees\n0,1\n1,2\n", "needs time_s and temp_c"),
    ("time_s,temp_c\n0,20\n", "fewer than two"),
    ("time_s,temp_c\n1,20\n0,21\n", "does not increase"),
])
def test_temperature_csv_refusals(tmp_path, text, match):
    p = tmp_path / "t.csv"
    p.write_text(text)
    with pytest.raises(InputError, match=match):
        read_temperature_csv(p)


def test_constant_temperature_refused():
    t = np.arange(100) * 1.0
    with pytest.raises(InputError, match="does not change"):
        temperature_coefficient(to_uniform(t, 1000 + t), [0, 200], [20, 20], 1000.0)


# ---- grid, gaps, jitter -----------------------------------------------------------------------------

def test_gap_in_log_equals_halves_pooled():
    # documented rule: missing rows and unusable frames are NaN on the grid; every estimator
    # pools the terms of the gap-free stretches (checked against the halves analysed apart)
    rng = np.random.default_rng(61)
    tau0 = 0.02
    t = np.arange(3000) * tau0
    f = 8000 + 0.03 * rng.standard_normal(t.size)
    keep = np.ones(t.size, bool)
    keep[1000:1100] = False  # rows missing from the log
    t = t + np.where(np.arange(t.size) >= 1100, 0.37 * tau0, 0.0)  # dropped input: not whole frames
    usable = np.ones(t.size, bool)
    usable[2000:2010] = False  # frames flagged unusable
    res = analyse_stability(t[keep], f[keep], usable[keep])
    assert res.n_missing == 100 and res.n_unusable == 10 and res.n_segments == 3
    parts = [f[:1000], f[1100:2000], f[2010:]]
    for i, m in enumerate(res.m):
        num = den = 0.0
        for p in parts:
            d, n = allan.oadev(p, [m])
            if n[0]:
                num += d[0] ** 2 * n[0]
                den += n[0]
        assert res.oadev_hz[i] == pytest.approx(math.sqrt(num / den), rel=1e-10)
        assert res.n_terms["oadev"][i] == den


def test_short_time_jump_still_separates():
    # a jump of 1.6 steps loses part of a frame: it must become a gap (one empty step), not be bridged
    t = np.concatenate([np.arange(100) * 1.0, 100.6 + np.arange(100) * 1.0])
    s = to_uniform(t, np.ones(200))
    assert s.freq_hz.size == 201 and np.isnan(s.freq_hz[100]) and s.n_missing == 1
    assert list(s.segment_lengths()) == [100, 100]


def test_jitter_tolerated_and_uneven_refused():
    rng = np.random.default_rng(62)
    k = np.arange(100000)
    tau0 = 0.0200013  # a spacing slightly off any round value must not accumulate into slips
    t = 5.0 + (k + rng.uniform(-0.2, 0.2, k.size)) * tau0
    s = to_uniform(t, np.ones(k.size))
    assert s.freq_hz.size == k.size and np.all(np.isfinite(s.freq_hz))
    assert s.tau0_s == pytest.approx(tau0, rel=1e-6)
    assert s.jitter_rms == pytest.approx(0.4 / math.sqrt(12), rel=0.05)  # uniform on +-0.2
    bad = np.arange(100) * 1.0
    bad[50] += 0.4
    with pytest.raises(InputError, match="too uneven"):
        to_uniform(bad, np.ones(100), source="x.csv")


def test_too_few_frames_refused():
    with pytest.raises(InputError, match="too few usable frames"):
        analyse_stability([0.0, 1.0], [1.0, 2.0], source="short.csv")
    with pytest.raises(InputError, match="at least two frames"):
        analyse_stability([0.0], [1.0])


# ---- noise figure for detection thresholds ------------------------------------------------------

def test_noise_at_tau_matches_allantools_and_interpolates():
    rng = np.random.default_rng(71)
    tau0 = 0.02
    t = np.arange(4000) * tau0
    f = 12000 + 0.04 * rng.standard_normal(t.size) + 1e-3 * np.cumsum(rng.standard_normal(t.size))
    _, ref, _, _ = allantools.oadev(f, rate=1 / tau0, data_type="freq", taus=np.array([10, 11]) * tau0)
    assert noise_at_tau_hz(t, f, 10 * tau0) == pytest.approx(ref[0], rel=1e-9)
    tau = 10.4 * tau0
    w = math.log(10.4 / 10) / math.log(11 / 10)
    expect = math.exp((1 - w) * math.log(ref[0]) + w * math.log(ref[1]))
    assert noise_at_tau_hz(t, f, tau) == pytest.approx(expect, rel=1e-9)


@pytest.mark.parametrize("tau", [0.01, 100.0])
def test_noise_at_tau_out_of_range(tau):
    t = np.arange(1000) * 0.02
    with pytest.raises(InputError):
        noise_at_tau_hz(t, np.sin(t), tau)
