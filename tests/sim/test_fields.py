"""The simulator's truth model of the coil field (sim.fields) against published closed forms and a
direct numerical Biot-Savart sum."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from coilshift.sim.fields import Target, Winding, loop_field_per_amp, mean_field, mean_field_sq


def _biot_savart(a, rho, z):
    # direct numerical Biot-Savart around a unit-current loop of radius a in the plane z = 0:
    # dH = I dl x r / (4 pi |r|^3), integrated with scipy's adaptive quadrature
    def comp(phi, c):
        px, py = a * math.cos(phi), a * math.sin(phi)
        rx, ry, rz = rho - px, -py, z
        dlx, dly = -a * math.sin(phi), a * math.cos(phi)
        r3 = (rx * rx + ry * ry + rz * rz) ** 1.5
        return (dly * rz if c == 0 else dlx * ry - dly * rx) / r3
    return [integrate.quad(comp, 0, 2 * math.pi, args=(c,), epsabs=1e-11, limit=400)[0] / (4 * math.pi)
            for c in (0, 1)]


@pytest.mark.parametrize("rho, z", [(0.01, 0.02), (0.04, 0.003), (0.08, 0.05), (0.3, 0.1), (1e-8, 0.03)])
def test_off_axis_loop_field_against_a_direct_biot_savart_sum(rho, z):
    # the elliptic-integral form (Smythe 1968 section 7.10; Jackson 1999 eq. 5.37) against the
    # numerical line integral, to the quadrature's accuracy
    hr, hz = loop_field_per_amp(0.05, rho, z)
    want_r, want_z = _biot_savart(0.05, rho, z)
    assert float(hr) == pytest.approx(want_r, rel=1e-8, abs=1e-11)
    assert float(hz) == pytest.approx(want_z, rel=1e-8, abs=1e-12)


def test_loop_field_limits():
    a = 0.05
    # centre of the loop: H = I / (2a); on the axis N I a^2 / (2 (a^2 + z^2)^(3/2)) [pub, REFERENCES 8]
    assert float(loop_field_per_amp(a, 0.0, 0.0)[1]) == pytest.approx(1 / (2 * a), rel=1e-12)
    z = np.array([0.01, 0.1, 1.0])
    assert loop_field_per_amp(a, 0.0, z)[1] == pytest.approx(a * a / (2 * (a * a + z * z) ** 1.5), rel=1e-12)
    # far away a dipole of moment m = I pi a^2: on the equator H_z = -m / (4 pi rho^3)
    # (Jackson eq. 5.56), to O((a/rho)^2)
    rho = 5.0
    assert float(loop_field_per_amp(a, rho, 0.0)[1]) == pytest.approx(-(math.pi * a * a) / (4 * math.pi * rho ** 3),
                                                                      rel=1e-3)


def _thick_solenoid_axial(w: Winding, d: float) -> float:
    # on-axis field of a thick solenoid of uniform current density J (Montgomery, Solenoid Magnet
    # Design, 1969): H = (J/2) [z ln((r2 + sqrt(r2^2 + z^2)) / (r1 + sqrt(r1^2 + z^2)))] from
    # z = d to d + l, J = N I / ((r2 - r1) l)
    r1, r2, ln = w.inner_radius_m, w.outer_radius_m, w.length_m
    j = w.turns / ((r2 - r1) * ln)

    def f(z):
        return z * math.log((r2 + math.hypot(r2, z)) / (r1 + math.hypot(r1, z)))
    return 0.5 * j * (f(d + ln) - f(d))


@pytest.mark.parametrize("d", [0.0, 0.02, 0.1, 0.3])
def test_thick_winding_on_axis_against_its_closed_form(d):
    w = Winding.from_design_mm(40, 150, 6, 6)
    assert float(w.field_per_amp(0.0, d)[1]) == pytest.approx(_thick_solenoid_axial(w, d), rel=1e-9)


def test_single_layer_on_axis_against_the_finite_solenoid():
    # (N I / (2 l)) [z2 / sqrt(a^2 + z2^2) - z1 / sqrt(a^2 + z1^2)] (the finite current sheet [pub])
    w = Winding.from_design_mm(30, 100, 40)
    a, ln = 0.05, 0.04
    for d in (0.0, 0.03, 0.2):
        want = 30 / (2 * ln) * ((d + ln) / math.hypot(a, d + ln) - d / math.hypot(a, d))
        assert float(w.field_per_amp(0.0, d)[1]) == pytest.approx(want, rel=1e-9)


@pytest.mark.parametrize("target", [Target("sphere", 0.0125), Target("disc", 0.02, thickness_m=0.004),
                                    Target("washer", 0.02, thickness_m=0.003, hole_radius_m=0.008)])
def test_volume_quadrature_obeys_the_mean_value_theorem(target):
    # h_z is harmonic in the free space around the axis, so its mean over a ball equals its value
    # at the centre (Gauss's mean-value theorem); for a disc or washer the same holds for the
    # cylinder's mean only approximately, so those are checked against scipy's dblquad instead
    w = Winding.from_design_mm(40, 150, 6, 6)
    d = 0.06
    _, hz = mean_field(w, target, d)
    if target.kind == "sphere":
        assert hz == pytest.approx(float(w.field_per_amp(0.0, d)[1]), rel=1e-10)
        return
    r0, r1, h = target.hole_radius_m, target.radius_m, 0.5 * target.thickness_m

    def f(z, r):
        return 2 * math.pi * r * float(w.field_per_amp(r, z)[1])
    val, _ = integrate.dblquad(f, r0, r1, d - h, d + h, epsabs=1e-9)
    assert hz == pytest.approx(val / (math.pi * (r1 ** 2 - r0 ** 2) * 2 * h), rel=1e-8)


def test_point_target_and_divergence_free_field():
    w = Winding.from_design_mm(60, 80, 10, 8)
    assert float(mean_field_sq(w, Target("sphere", 0.0), 0.05)) == pytest.approx(
        float(w.field_per_amp(0.0, 0.05)[1]) ** 2, rel=1e-14)
    # div h = (1/rho) d(rho h_rho)/d rho + d h_z / dz = 0 (Maxwell), by central differences
    rho, z, e = 0.02, 0.03, 1e-6
    dr = ((rho + e) * w.field_per_amp(rho + e, z)[0] - (rho - e) * w.field_per_amp(rho - e, z)[0]) / (2 * e * rho)
    dz = (w.field_per_amp(rho, z + e)[1] - w.field_per_amp(rho, z - e)[1]) / (2 * e)
    assert abs(float(dr + dz)) < 1e-6 * abs(float(dz))
