"""The finite-winding law used in the curve fits, against the loop formula and an independent
volume integration of the field (sim.fields)."""

from __future__ import annotations

import numpy as np
import pytest

from coilshift.analysis.models.coil import CoilDesign, analyse_coil
from coilshift.analysis.models.target import coil_axial_field_per_amp
from coilshift.analysis.models.windinglaw import coil_axial_field_slope_per_amp, winding_shape


def test_thin_loop_gives_the_single_loop_law():
    # a single layer 1 um long is a loop (at its middle, 0.5 um behind the face; the rest is
    # O((l/a)^2) = 4e-10): h^2/h(0)^2 = (a^2/(a^2+z^2))^3 (REFERENCES section 8 [pub])
    coil = analyse_coil(CoilDesign(5, 100, 0.001))
    a = coil.mean_radius_mm
    z = np.array([0.0, 10.0, 50.0, 200.0])
    zc = z + 0.0005
    want = (a * a / (a * a + zc * zc)) ** 3 / (a * a / (a * a + 0.0005 ** 2)) ** 3
    assert winding_shape(coil, z) == pytest.approx(want, rel=1e-8)


def test_slope_is_the_derivative_of_the_field():
    # against a central difference of coil_axial_field_per_amp (step 1 um: truncation ~1e-9)
    coil = analyse_coil(CoilDesign(60, 80, 10, depth_mm=8))
    z = np.array([0.0, 5.0, 30.0, 120.0])
    h = 1e-3
    num = (coil_axial_field_per_amp(coil, z + h) - coil_axial_field_per_amp(coil, np.maximum(z - h, 0.0))) \
        / ((z + h - np.maximum(z - h, 0.0)) * 1e-3)
    assert coil_axial_field_slope_per_amp(coil, z[1:]) == pytest.approx(num[1:], rel=1e-6)


@pytest.mark.parametrize("diameter_mm", [10.0, 25.0])
def test_finite_sphere_term_against_the_volume_mean(diameter_mm):
    # the second-order term h^2 + (3/10) a^2 h'^2 (docs/models.md) against the full volume mean of
    # |h|^2 over the sphere by quadrature of the Biot-Savart field (sim.fields, written apart from
    # the models); the neglected terms are O((a/L)^4) with L ~ the coil radius (~80 mm here):
    # (12.5/80)^4 = 6e-4, while the term itself is about 1 %
    from coilshift.sim.fields import Target, Winding, mean_field_sq

    coil = analyse_coil(CoilDesign(40, 150, 6, depth_mm=6))
    w = Winding.from_design_mm(40, 150, 6, 6)
    d = np.array([20.0, 40.0, 70.0, 110.0, 160.0])
    h0 = w.field_per_amp(0.0, 0.0)[1]
    truth = mean_field_sq(w, Target("sphere", diameter_mm * 5e-4), d * 1e-3) / h0 ** 2
    point = winding_shape(coil, d)
    ours = winding_shape(coil, d, diameter_mm)
    assert ours == pytest.approx(truth, rel=(diameter_mm / 2 / 80.0) ** 4)
    # and the term matters: without it the error is far larger
    assert np.max(np.abs(point / truth - 1)) > 10 * np.max(np.abs(ours / truth - 1))
