"""Stability analysis end to end on synthetic records: levels and slopes against theory, labels,
drift removal, warm-up, temperature coefficient, gaps and the noise figure."""

from __future__ import annotations

import math

import numpy as np
import pytest

from coilshift.analysis.stability import allan
from coilshift.analysis.stability.analyse import analyse_stability
from coilshift.analysis.stability.grid import to_uniform
from coilshift.analysis.stability.noise import noise_at_tau_hz
from coilshift.analysis.stability.noise_model import NoiseModel
from coilshift.analysis.stability.tempco import read_temperature_csv, temperature_coefficient
from coilshift.logger.errors import InputError



def _theory_within(res, theory_hz, kind="oadev"):
    lo, hi = res.ci_lo[kind], res.ci_hi[kind]
    return (lo <= theory_hz) & (theory_hz <= hi)


# ---- levels and slopes against theory --------------------------------------------------------------

def test_white_fm_slope_and_level():
    # white FM: sigma_y(tau) = s / sqrt(tau/tau0) (SP 1065 Table 11, slope -1/2)
    rng = np.random.default_rng(21)
    n, s_hz, tau0 = 8192, 0.05, 0.02
    t = np.arange(n) * tau0
    f = 30000 + s_hz * rng.standard_normal(n)
    res = analyse_stability(t, f, confidence=0.999)
    assert res.span.kind == "settled" and res.settling.n_exp == 0  # nothing to settle: the whole log
    theory = s_hz / np.sqrt(res.m)
    # 99.9% intervals at each of ~13 taus: family-wise miss probability about 1.3%
    assert np.all(_theory_within(res, theory))
    assert res.oadev_hz[0] == pytest.approx(res.adev_hz[0])
    i = int(np.flatnonzero(res.m == 64)[0])
    slope = math.log(res.oadev_hz[i] / res.oadev_hz[0]) / math.log(64)
    # slope error from the two points' relative errors 1/sqrt(2 edf), 4 sd
    tol = 4 * math.sqrt(1 / (2 * res.edf["oadev"][0]) + 1 / (2 * res.edf["oadev"][i])) / math.log(64)
    assert abs(slope + 0.5) <= tol
    # labels: white FM where the slope identifies a type (the first taus hold most data), none else
    assert all(lab in ("white FM", None) for lab in res.noise_type)
    assert res.noise_type[:4] == ["white FM"] * 4
    assert res.ci_lo["oadev"][0] < res.oadev_hz[0] < res.ci_hi["oadev"][0]


def test_random_walk_fm_slope():
    # random walk y = cumsum(w), step sd q: Allan variance q^2 (2m^2 + 1) / (6m) [derived from the
    # definition: the difference of adjacent means is a triangular sum of 2m - 1 steps]; slope +1/2
    rng = np.random.default_rng(22)
    n, q = 8192, 1e-3
    t = np.arange(n) * 0.1
    f = 5000 + q * np.cumsum(rng.standard_normal(n))
    res = analyse_stability(t, f, confidence=0.999, whole_log=True)
    theory = q * np.sqrt((2 * res.m ** 2 + 1) / (6 * res.m))
    assert np.all(_theory_within(res, theory))
    assert all(lab in ("random-walk FM", None) for lab in res.noise_type[1:])
    assert res.noise_type[2:5] == ["random-walk FM"] * 3
    i, j = int(np.flatnonzero(res.m == 4)[0]), int(np.flatnonzero(res.m == 128)[0])
    slope = math.log(res.oadev_hz[j] / res.oadev_hz[i]) / math.log(32)
    slope_theory = math.log(theory[j] / theory[i]) / math.log(32)
    tol = 4 * math.sqrt(1 / (2 * res.edf["oadev"][i]) + 1 / (2 * res.edf["oadev"][j])) / math.log(32)
    assert slope_theory == pytest.approx(0.5, abs=0.01)
    assert abs(slope - slope_theory) <= tol


def test_remove_drift_whitens_long_taus():
    rng = np.random.default_rng(33)
    t = np.arange(8192) * 0.05
    f = 10000 + 0.05 * rng.standard_normal(t.size) + 0.5 / 60 * t
    raw = analyse_stability(t, f)
    flat = analyse_stability(t, f, remove_drift=True, confidence=0.999)
    theory = 0.05 / np.sqrt(flat.m)
    # a linear frequency drift D gives sigma_y = D tau / sqrt(2) (SP 1065 section 5.3): huge at long tau
    assert raw.oadev_hz[-1] > 5 * theory[-1]
    # where the slope is labelled at long tau it reads drift (+1), never a noise type
    labelled = [(lab, sl) for lab, sl in zip(raw.noise_type, raw.noise.slope) if lab and sl > 0.75]
    assert labelled and all(lab == "drift" for lab, _ in labelled)
    # after drift removal the white-FM theory lies inside every 99.9 % interval (about 13 taus:
    # family-wise miss probability about 1.3 %), no x0.5-x2 slack
    assert np.all(_theory_within(flat, theory))
    assert abs(flat.drift.rate_hz_per_min - 0.5) <= 3 * flat.drift.u_rate_hz_per_min


def test_remove_drift_refused_when_not_determined():
    # a warm-up longer than the log: no settled drift, so nothing to remove (one clear refusal)
    t = np.arange(3000) * 0.1
    f = 2000 + 3.0 * np.exp(-t / 2000.0) + 0.002 * np.random.default_rng(34).standard_normal(t.size)
    with pytest.raises(InputError, match="remove_drift.*not determined"):
        analyse_stability(t, f, remove_drift=True)


# ---- warm-up -------------------------------------------------------------------------------------

def test_settled_start_of_exponential_settling():
    # f = f0 + A exp(-t/T): rate = -(A/T) exp(-t/T); it falls to the threshold r at
    # t* = T ln(A 60 / (T r)) [derived]. The fit's own estimate must agree within 4 of its
    # stated standard uncertainties (delta method through the fitted a and tau).
    A, T, r = 5.0, 100.0, 0.05
    tau0 = 0.1
    t = np.arange(10000) * tau0
    rng = np.random.default_rng(41)
    f = 20000 + A * np.exp(-t / T) + 1e-3 * rng.standard_normal(t.size)
    res = analyse_stability(t, f, settle_hz_per_min=r)
    t_star = T * math.log(A * 60 / (T * r))
    w = res.warmup
    assert w.settled and res.settling.n_exp == 1
    assert 0 < w.u_warmup_s < 5
    assert abs(w.warmup_s - t_star) <= 4 * w.u_warmup_s
    assert res.span.kind == "settled" and res.span.start_s == pytest.approx(w.t_settled_s, abs=tau0)


def test_never_settles_within_the_log():
    # time constant far beyond the log: the warm-up and the drift cannot be told apart
    t = np.arange(5000) * 0.1
    f = 1000 + 20.0 * np.exp(-t / 5000.0) + 1e-3 * np.random.default_rng(42).standard_normal(t.size)
    res = analyse_stability(t, f)
    assert not res.warmup.settled and res.warmup.warmup_s is None
    assert not res.drift.determined and "cannot be told apart" in res.drift.reason
    assert res.span.kind == "whole" and "warm-up is part of these deviations" in res.span.reason


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
    res = analyse_stability(t, f, temperature=(ts, tc), whole_log=True)
    tco = res.tempco
    assert abs(tco.hz_per_degc - k) <= 3 * tco.u_hz_per_degc  # 3 sigma: fails 0.3% of seeds
    assert tco.ppm_per_degc == pytest.approx(k / 50000 * 1e6, rel=1e-3)
    assert tco.temp_min_c == pytest.approx(17, abs=0.01) and tco.temp_max_c == pytest.approx(23, abs=0.01)


@pytest.mark.parametrize("text,match", [
    ("when,degrees\n0,1\n1,2\n", "needs t_s and temp_c"),
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
    noise = NoiseModel(0.01, 0.0, np.zeros(0), 0)
    with pytest.raises(InputError, match="does not change"):
        temperature_coefficient(to_uniform(t, 1000 + t), [0, 200], [20, 20], 1000.0, noise)


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
    allantools = pytest.importorskip("allantools")  # the reference library, only here
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
