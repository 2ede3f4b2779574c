"""Sphere response (Wait 1951) against its limits and an independent Bessel-function solution; shift model."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.special import spherical_in, spherical_jn

from coilshift.analysis.models.coil import CoilDesign, analyse_coil
from coilshift.analysis.models.inductance import MU0_H_PER_M
from coilshift.analysis.models.materials import MATERIALS
from coilshift.analysis.models.target import (TargetSpec, closed_form_amplitude_hz, closed_form_range_mm,
                                       coil_axial_field_per_amp, induction_number, make_target,
                                       parse_target_spec,
                                       predicted_range_mm, predicted_response, predicted_shift_hz,
                                       sphere_response)
from coilshift.logger.errors import InputError


def _alpha(t: TargetSpec, f):
    return np.sqrt(1j * 2 * np.pi * f * t.mu_r * MU0_H_PER_M * t.conductivity_s_per_m) * t.radius_m


def _bessel_response(t: TargetSpec, f):
    # Independent route (the boundary-value solution, as in Smythe and Wait 1951): inside the sphere the vector potential goes as
    # the modified spherical Bessel function i1(alpha r / R); matching B_r and H_theta at r = R to the
    # uniform field plus a dipole gives k = (2 - g) / (2 (1 + g)), g = (1 + alpha i1'/i1) / mu_r.
    # Evaluated with scipy.special.spherical_in (complex argument).
    a = _alpha(t, f)
    g = (1 + a * spherical_in(1, a, derivative=True) / spherical_in(1, a)) / t.mu_r
    return (2 - g) / (2 * (1 + g))


def test_static_permeable_sphere():
    # REFERENCES section 8 [derived]: sigma = 0, mu_r = 100 -> (mu_r - 1)/(mu_r + 2) = 0.970588
    t = make_target("ferrite-like", 10, 0.0, 100.0)
    for f in (0.0, 1e3, 1e6):
        k = sphere_response(t, f)
        assert k.real == pytest.approx(0.970588, abs=5e-7)
        assert k.imag == 0


@pytest.mark.parametrize("mu_r", [1.0, 2.0, 1000.0, 0.5])
def test_low_frequency_limit_any_permeability(mu_r):
    # Clausius-Mossotti form of the static sphere: (mu_r - 1)/(mu_r + 2) (textbook magnetostatics)
    t = make_target("x", 10, 1e6, mu_r)
    assert sphere_response(t, 1e-9) == pytest.approx((mu_r - 1) / (mu_r + 2), abs=1e-9)


@pytest.mark.parametrize("freq_hz", [1e7, 1e8, 1e9])
def test_high_induction_number_conductor(freq_hz):
    # REFERENCES section 8 [derived]: a non-magnetic conductor tends to -1/2. With tanh a -> 1 the
    # Wait formula reduces to k = -(1 - 3/a + 3/a^2) / 2 (derived from its large-a form), so the
    # approach to -1/2 is 1.5/|a|.
    t = MATERIALS["copper"]
    cu = make_target("cu", 20, t.conductivity_s_per_m, 1.0)
    a = _alpha(cu, freq_hz)
    k = sphere_response(cu, freq_hz)
    assert k == pytest.approx(-(1 - 3 / a + 3 / a ** 2) / 2, abs=1e-12)
    assert abs(k + 0.5) < 1.51 / abs(a)


def test_low_frequency_conductor_goes_as_alpha_squared():
    # Series of Wait's formula for mu_r = 1 (docs/models.md): k = -a^2/30 + a^4/315 + O(a^6), with
    # a^2 = i w mu0 sigma R^2: the leading term is in quadrature (loss), the in-phase part is
    # -(w mu0 sigma R^2)^2 / 315.
    cu = make_target("cu", 2, 5.8e7, 1.0)
    for f in (1e-2, 1.0, 10.0):
        a2 = _alpha(cu, f) ** 2
        k = sphere_response(cu, f)
        assert k / a2 == pytest.approx(-1 / 30, rel=10 * abs(a2))
        assert k.real / abs(a2) ** 2 == pytest.approx(-1 / 315, rel=10 * abs(a2))


@pytest.mark.parametrize("material", ["copper", "aluminium", "brass", "stainless_steel", "mild_steel", "ferrite"])
@pytest.mark.parametrize("diameter_mm", [2.0, 12.0, 40.0])
def test_wait_formula_matches_bessel_solution(material, diameter_mm):
    # Wait's closed form (REFERENCES section 8) against the spherical-Bessel boundary-value solution,
    # over frequencies that cover both the series branch (|a|^2 < 0.5) and the direct formula
    m = MATERIALS[material]
    t = make_target(material, diameter_mm, m.conductivity_s_per_m, m.mu_r)
    f = np.geomspace(0.1, 1e6, 40)
    f = f[np.abs(_alpha(t, f)) < 300]   # i1(a) overflows double precision near Re a ~ 700
    ours = sphere_response(t, f)
    ref = _bessel_response(t, f)
    assert np.allclose(ours, ref, rtol=1e-8, atol=1e-12)


def test_sign_convention_against_landau_lifshitz():
    # Landau & Lifshitz, Electrodynamics of Continuous Media, section 59 problem 1 (from memory),
    # time dependence e^{-iwt}: k = -(1/2)[1 - 3/(kR)^2 + 3 cot(kR)/(kR)], kR = (1 + i) R/delta.
    # Our e^{iwt} result must be its complex conjugate: loss shows as Im k < 0.
    cu = make_target("cu", 20, 5.8e7, 1.0)
    for f in (10.0, 1e3, 1e5):
        delta = math.sqrt(2 / (2 * math.pi * f * MU0_H_PER_M * 5.8e7))
        x = (1 + 1j) * cu.radius_m / delta
        ll = -0.5 * (1 - 3 / x ** 2 + 3 / (x * np.tan(x)))
        k = sphere_response(cu, f)
        assert k == pytest.approx(np.conj(ll), rel=1e-9)
        assert k.imag < 0


def test_ferrous_lowers_and_conductor_raises_the_frequency():
    # Common practice: ferrous targets pull an LC oscillator's frequency down, non-ferrous
    # conductors push it up; austenitic stainless (mu_r ~ 1) behaves as a poor conductor.
    coil = CoilDesign(20, 200, 5, depth_mm=5, awg=22, cap_nf=100)   # a bundle-wound loop, ~35 kHz
    z = [20.0, 60.0, 150.0]
    steel = parse_target_spec("steel:diameter_mm=12")
    ferrite = parse_target_spec("ferrite:diameter_mm=12")
    assert np.all(predicted_shift_hz(coil, steel, z, 1e3) < 0)
    assert np.all(predicted_shift_hz(coil, ferrite, z) < 0)
    for name in ("copper", "aluminium", "brass", "stainless", "gold"):
        assert np.all(predicted_shift_hz(coil, parse_target_spec(f"{name}:diameter_mm=12"), z) > 0), name
    assert np.all(predicted_shift_hz(coil, parse_target_spec("plastic:diameter_mm=50"), z) == 0)


def test_steel_crosses_over_at_high_frequency():
    # A permeable conductor reaches the conductor limit -1/2 only once |a| >> mu_r: the in-phase
    # response of mild steel changes sign with frequency (the ferrous/non-ferrous ambiguity)
    st = parse_target_spec("steel:diameter_mm=12")
    assert sphere_response(st, 10.0).real > 0
    assert sphere_response(st, 1e8).real < 0


def test_axial_field_of_a_thin_loop():
    # On-axis field of a loop, N I a^2 / (2 (a^2 + z^2)^(3/2)) [pub], for a single-layer coil 1 um long
    coil = analyse_coil(CoilDesign(5, 100, 0.001))
    a = 0.05
    z = np.array([0.0, 10.0, 50.0, 300.0])
    expected = 5 * a * a / (2 * (a * a + (z * 1e-3) ** 2) ** 1.5)
    assert np.allclose(coil_axial_field_per_amp(coil, z), expected, rtol=1e-4)


def test_axial_field_of_a_thick_winding_by_quadrature():
    # The Gauss-Legendre integration over the depth against scipy's adaptive quadrature of the
    # loop formula over radius and length (uniform current density)
    d = CoilDesign(100, 40, 10, depth_mm=10)
    rep = analyse_coil(d)
    r0, r1, l = 0.020, 0.030, 0.010
    for z_mm in (0.0, 5.0, 40.0):
        z = z_mm * 1e-3
        val, _ = integrate.dblquad(lambda zz, r: r * r / (2 * (r * r + zz * zz) ** 1.5), r0, r1, z, z + l)
        expected = 100 * val / ((r1 - r0) * l)
        assert coil_axial_field_per_amp(rep, z_mm) == pytest.approx(expected, rel=1e-8)


def test_reciprocity_and_the_sixth_power_law():
    # REFERENCES section 8: dL = mu0 m h / I with m = 4 pi R^3 k h I, so for a thin loop
    # df = -f dL/(2L) = A (a^2/(a^2+z^2))^3 exactly, and df(2z)/df(z) -> 1/64 far away.
    coil = analyse_coil(CoilDesign(10, 100, 0.001, cap_nf=100))
    cu = parse_target_spec("copper:diameter_mm=5")
    z = np.array([0.0, 25.0, 50.0, 100.0])
    a = coil.mean_radius_mm
    amp = closed_form_amplitude_hz(coil, cu)
    assert np.allclose(predicted_shift_hz(coil, cu, z), amp * (a * a / (a * a + z * z)) ** 3, rtol=1e-4)
    far = predicted_shift_hz(coil, cu, [5000.0, 10000.0])
    assert far[1] / far[0] == pytest.approx(1 / 64, rel=1e-3)


def _kappa_spherical_jn(t: TargetSpec, f):
    # Independent of the code (Wait 1951; Smythe, Static and Dynamic Electricity, ch. 10): inside,
    # H = curl curl (r j_1(k r) cos theta), k^2 = -i w mu sigma (e^{iwt}); matching B_r and H_theta
    # at r = R to the uniform field plus a dipole gives kappa = (2 mu_r P - Q) / (2 (mu_r P + Q)),
    # P = j_1(kR), Q = d(r j_1(k r))/dr at R = P + kR j_1'(kR); scipy.special.spherical_jn.
    x = np.sqrt(-1j * 2 * np.pi * f * t.mu_r * MU0_H_PER_M * t.conductivity_s_per_m) * t.radius_m
    p = spherical_jn(1, x)
    q = p + x * spherical_jn(1, x, derivative=True)
    return (2 * t.mu_r * p - q) / (2 * (t.mu_r * p + q))


@pytest.mark.parametrize("spec", ["copper:diameter_mm=10", "steel:diameter_mm=10", "ferrite:diameter_mm=20",
                                  "sigma=1e7,mu_r=5,diameter_mm=30"])
def test_whole_prediction_of_a_thin_loop_from_published_pieces(spec):
    # A loop of mean radius a = 50 mm, 10 turns (1 um long; the rest is O(1 um^2)): h = N a^2 / (2 (a^2 + z^2)^(3/2)) per
    # ampere on the axis (Biot-Savart, REFERENCES 8 [pub]); dL = mu0 4 pi R^3 kappa h^2
    # (reciprocity, REFERENCES 8 [derived]) with kappa from the Bessel functions above;
    # df = -f Re(dL) / (2L) and dR = -w Im(dL). L is the coil's own current-sheet value (checked
    # against Grover's Table 36 in test_coil.py).
    coil = analyse_coil(CoilDesign(10, 100, 0.001, cap_nf=100))
    t = parse_target_spec(spec)
    f = coil.lc_freq_hz
    z = np.array([0.0, 20.0, 50.0, 120.0])
    a, zc = 0.05, (z + 0.0005) * 1e-3   # the 1 um sheet's turns sit half a micrometre behind the face
    h = 10 * a * a / (2 * (a * a + zc ** 2) ** 1.5)
    kappa = _kappa_spherical_jn(t, f)
    dl = MU0_H_PER_M * 4 * math.pi * t.radius_m ** 3 * kappa * h * h
    pred = predicted_response(coil, t, z)
    assert pred.shift_hz == pytest.approx(-f * dl.real / (2 * coil.inductance_h), rel=1e-6)
    # the added loss: sign from the lag of a lossy sphere (Im kappa < 0 with e^{iwt}), size w |Im dL|
    assert np.all(pred.delta_r_ohm > 0)
    assert pred.delta_r_ohm == pytest.approx(-2 * math.pi * f * dl.imag, rel=1e-6)
    assert pred.delta_inv_q == pytest.approx(pred.delta_r_ohm / (2 * math.pi * f * coil.inductance_h), rel=1e-12)


def test_sphere_response_at_a_stated_induction_number():
    # |a| = R sqrt(w mu sigma) = 2 for a non-magnetic sphere and 3 for mu_r = 50: the code's kappa
    # against the spherical_jn boundary-value solution computed here
    for mu_r, a_abs in ((1.0, 2.0), (50.0, 3.0)):
        r = 0.01
        sigma = a_abs ** 2 / (2 * math.pi * 1e3 * mu_r * MU0_H_PER_M * r * r)
        t = make_target("x", 2e3 * r, sigma, mu_r)
        assert float(induction_number(t, 1e3)) == pytest.approx(a_abs, rel=1e-12)
        assert sphere_response(t, 1e3) == pytest.approx(complex(_kappa_spherical_jn(t, 1e3)), rel=1e-10)


def test_whole_shift_against_the_simulators_truth():
    # The 200-turn 50 mm multilayer with a 10 mm steel ball against coilshift.sim's independent truth
    # (its own inductance quadrature, Biot-Savart field and sphere; tests/sim/test_truth.py). The
    # analysis uses its uniform-density filament sum for this coil: within 1e-4 by its cell grid.
    from coilshift.sim.response import build_responses
    from coilshift.sim.script import parse_script

    design = {"turns": 200, "inner_diameter_mm": 50, "length_mm": 10, "depth_mm": 5, "awg": 26, "cap_nf": 100}
    coil = analyse_coil(CoilDesign(**design))
    script = parse_script({"oscillator": {"coil": design},
                           "targets": {"st": {"material": "mild_steel", "diameter_mm": 10},
                                       "cu": {"material": "copper", "diameter_mm": 20}},
                           "session": {"steps": [{"target": "baseline", "hold_s": 1}]}}, "t")
    truth = build_responses(script)
    z = np.array([0.0, 30.0, 100.0])
    for key, spec in (("st", "steel:diameter_mm=10"), ("cu", "copper:diameter_mm=20")):
        want = truth[key].shift_hz(z)
        assert predicted_shift_hz(coil, parse_target_spec(spec), z, script.oscillator.freq_hz) == \
            pytest.approx(want, rel=1e-4)


def test_range_numeric_and_closed_form():
    loop = analyse_coil(CoilDesign(10, 100, 0.001, cap_nf=100))
    cu = parse_target_spec("copper:diameter_mm=20")
    for thr in (0.1, 1.0):
        z = predicted_range_mm(loop, cu, None, thr)
        assert abs(predicted_shift_hz(loop, cu, z)) == pytest.approx(thr, rel=1e-6)
        # thin loop: the numeric root and the closed form a sqrt((|A|/T)^(1/3) - 1) agree
        assert z == pytest.approx(closed_form_range_mm(loop, cu, None, thr), rel=1e-4)
    assert predicted_range_mm(loop, cu, None, 1e9) == 0.0
    assert closed_form_range_mm(loop, cu, None, 1e9) == 0.0


@pytest.mark.parametrize("text, name, d, sigma, mu_r", [
    ("steel:diameter_mm=12", "mild_steel", 12, MATERIALS["mild_steel"].conductivity_s_per_m, 100),
    ("copper:diameter_mm=20,name=coin", "coin", 20, MATERIALS["copper"].conductivity_s_per_m, 1),
    ("sigma=3.5e7,mu_r=1,diameter_mm=20", "custom", 20, 3.5e7, 1),
    ("Aluminum:d_mm=5,mu_r=1.0", "aluminium", 5, MATERIALS["aluminium"].conductivity_s_per_m, 1),
    ("plastic:diameter_mm=30", "plastic", 30, 0.0, 1),
])
def test_parse_target_spec(text, name, d, sigma, mu_r):
    t = parse_target_spec(text)
    assert (t.name, t.diameter_mm, t.conductivity_s_per_m, t.mu_r) == (name, d, pytest.approx(sigma), mu_r)


@pytest.mark.parametrize("text", ["", "unobtainium:diameter_mm=3", "copper", "copper:diameter_mm=-2",
                                  "sigma=1e7,diameter_mm=5", "copper:diameter_mm=5,colour=red",
                                  "copper:diameter_mm=five", "sigma=-1,mu_r=1,diameter_mm=3"])
def test_parse_target_spec_refuses(text):
    with pytest.raises(InputError):
        parse_target_spec(text)


def test_materials_cite_their_sources():
    # IEC 60028: annealed copper 58 MS/m (1/0.017241 ohm mm^2/m)
    assert MATERIALS["copper"].conductivity_s_per_m == pytest.approx(58.0e6, rel=5e-5)
    for m in MATERIALS.values():
        assert m.source and m.mu_r > 0 and m.conductivity_s_per_m >= 0


def test_needs_an_operating_frequency():
    with pytest.raises(InputError, match="frequency"):
        predicted_shift_hz(CoilDesign(10, 100, 1.0), parse_target_spec("copper:diameter_mm=5"), [10.0])
