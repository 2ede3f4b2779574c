"""Ferrous / non-ferrous / mixed calls from the sign of significant shifts, with their evidence;
polarity and reference checks."""

from __future__ import annotations

import cmath
import math

import pytest

from scipy import stats

from coilshift.analysis.calibration.classify import (FERROUS, INDETERMINATE, MIXED, NON_FERROUS, check_reference,
                                                     classify_points, reference_checks)
from coilshift.analysis.calibration.steps import Point

MU0 = 4e-7 * math.pi


def _wait_k(radius_m, sigma_s_m, mu_r, freq_hz):
    # REFERENCES section 8 [pub] (Wait 1951): chi for a sphere, with m = 4 pi R^3 k H0, k = chi/3
    mu = mu_r * MU0
    a = cmath.sqrt(1j * 2 * math.pi * freq_hz * mu * sigma_s_m) * radius_m
    th = cmath.tanh(a)
    num = 2 * mu * (th - a) + MU0 * (a * a * th - a + th)
    den = mu * (th - a) - MU0 * (a * a * th - a + th)
    return 1.5 * num / den / 3


def _shift_sign_from_wait(radius_m, sigma, mu_r, freq_hz):
    # [derived] dL = mu0 m h / I with m = 4 pi R^3 k H0 (in phase part): dL has the sign of Re k;
    # df/f = -dL/(2L) for an LC oscillator, so the frequency moves against Re k
    return -math.copysign(1.0, _wait_k(radius_m, sigma, mu_r, freq_hz).real)


def test_wait_limits_reproduced():
    # static permeable limit k = (mu_r - 1)/(mu_r + 2) = 0.970588 for mu_r = 100; conductor at
    # high frequency k -> -1/2 (REFERENCES section 8)
    assert _wait_k(0.005, 1e2, 100.0, 1.0).real == pytest.approx(0.970588, abs=1e-5)
    assert _wait_k(0.01, 3.5e7, 1.0, 1e7).real == pytest.approx(-0.5, abs=0.01)


def _points(target, shifts, err=0.01):
    return [Point(target, float(d), s, err, 400, 1) for d, s in zip((10, 20, 40, 80), shifts)]


def _curve(sign, scale=5.0):
    return [sign * scale * (25 ** 2 / (25 ** 2 + d ** 2)) ** 3 for d in (10, 20, 40, 80)]


def test_ferrous_lowers_and_aluminium_raises_the_frequency():
    # common practice: a ferrous piece lowers an LC detector's frequency, aluminium raises it.
    # The signs here come from Wait's sphere (REFERENCES section 8): mild steel 1 cm ball
    # (sigma 5e6 S/m, mu_r 100) at 1 kHz, aluminium 2 cm ball (3.5e7 S/m) at 20 kHz.
    steel = _shift_sign_from_wait(0.005, 5e6, 100.0, 1e3)
    alu = _shift_sign_from_wait(0.01, 3.5e7, 1.0, 2e4)
    assert steel < 0 < alu
    c = classify_points("steel", _points("steel", _curve(steel)))
    assert c.cls == FERROUS and c.n_negative == c.n_significant > 0 and c.z < 0
    c = classify_points("alu", _points("alu", _curve(alu)))
    assert c.cls == NON_FERROUS and c.n_positive == c.n_significant > 0 and c.z > 0


def test_evidence_is_the_sidak_adjusted_p_of_the_strongest_point():
    # the call's z is shift/stderr of the strongest point; its p-value two-sided normal, Sidak-
    # adjusted over the target's n points: 1 - (1 - p)^n (Sidak 1967), computed here with scipy.stats
    pts = _points("nail", [-0.05, -0.04, -0.01, 0.002], err=0.01)
    c = classify_points("nail", pts)
    p_one = 2 * stats.norm.sf(5.0)
    assert c.cls == FERROUS and c.z == pytest.approx(-5.0)
    assert c.p_value == pytest.approx(1 - (1 - p_one) ** 4, rel=1e-9)
    # -4 sigma is significant too at the 1 % family-wise level (per-point level 0.0025 -> |z| >= 3.02)
    assert c.n_significant == 2


def test_plastic_target_is_indeterminate():
    # a non-conducting, non-permeable target: shifts are noise only (within 1-2 stderr)
    c = classify_points("plastic", _points("plastic", [0.012, -0.008, 0.004, -0.015]))
    assert c.cls == INDETERMINATE and c.n_significant == 0 and "no significant shift" in c.reason
    assert math.isnan(c.z) and not c.significance.seen


def test_one_point_at_three_sigma_is_not_a_detection_among_many():
    # with 8 points, one at |z| = 3 (p = 0.0027) has an adjusted p of 1 - (1 - 0.0027)^8 = 0.021 > 1 %:
    # the per-point rule "3 sigma" would call it; the family-wise test does not
    shifts = [0.03] + [0.0] * 7
    pts = [Point("x", float(d), s, 0.01, 400, 1) for d, s in zip(range(10, 90, 10), shifts)]
    c = classify_points("x", pts)
    assert c.cls == INDETERMINATE
    assert c.significance.p_family == pytest.approx(1 - (1 - 2 * stats.norm.sf(3.0)) ** 8, rel=1e-9)


def test_significant_shifts_of_both_signs_are_mixed():
    # a steel piece whose eddy response wins near the coil and permeable response farther out
    c = classify_points("steel", _points("steel", [2.0, -0.9, -0.2, 0.001]))
    assert c.cls == MIXED and "both signs" in c.reason
    assert (c.n_positive, c.n_negative) == (1, 2)
    # the evidence names the strongest point of each sign
    assert c.z == pytest.approx(200.0) and c.z_other == pytest.approx(-90.0)


def test_inverted_polarity_flips_the_call_and_reference_flags_it():
    pts = _points("nail", _curve(-1.0))
    normal = classify_points("nail", pts, polarity="normal")
    inverted = classify_points("nail", pts, polarity="inverted")
    assert (normal.cls, inverted.cls) == (FERROUS, NON_FERROUS)
    # the user declares the nail ferrous: with inverted polarity that disagrees -> one warning
    warns = check_reference({"nail": inverted}, {"nail": FERROUS}, "inverted")
    assert len(warns) == 1 and "--polarity normal" in warns[0]
    assert check_reference({"nail": normal}, {"nail": FERROUS}, "normal") == []
    assert "not in the run" in check_reference({}, {"coin": NON_FERROUS}, "normal")[0]
    # the same, as rows for the report's polarity table
    rows = reference_checks({"nail": inverted, "coin": classify_points("coin", _points("coin", [0.0] * 4))},
                            {"nail": FERROUS, "coin": NON_FERROUS, "bolt": FERROUS})
    assert [(r.target, r.called, r.agrees) for r in rows] == [("nail", NON_FERROUS, False),
                                                              ("coin", INDETERMINATE, None), ("bolt", None, None)]
