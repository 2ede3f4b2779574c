"""Target responses used by the simulator, against the published loop-field result and the models."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import brentq

from coilshift.sim.response import (FERROUS, INDETERMINATE, NON_FERROUS, Response, build_responses,
                                    dipole_range_mm, dipole_shift_hz)
from coilshift.sim.script import parse_script
from sim_helpers import script_dict


def _loop_field(z_mm, a_mm, turns=1.0, amps=1.0):
    # Source: on-axis field of a circular loop (Biot-Savart), H = N I a^2 / (2 (a^2 + z^2)^(3/2))
    # (REFERENCES section 8 [pub])
    return turns * amps * a_mm ** 2 / (2 * (a_mm ** 2 + z_mm ** 2) ** 1.5)


@pytest.mark.parametrize("a_hz,r_mm", [(-12.0, 60.0), (7.5, 100.0)])
def test_dipole_shift_is_square_of_loop_field(a_hz, r_mm):
    # by reciprocity dL ~ h^2 (REFERENCES section 8 [derived]): the shift at d is A (h(d)/h(0))^2
    d = np.array([0.0, 10.0, 45.0, 150.0, 600.0])
    want = a_hz * (_loop_field(d, r_mm) / _loop_field(0.0, r_mm)) ** 2
    assert np.allclose(dipole_shift_hz(d, a_hz, r_mm), want, rtol=1e-12)


def test_dipole_range_closed_form_matches_root():
    for a_hz, r_mm, thr in [(-28.0, 60.0, 0.5), (16.0, 60.0, 0.2), (3.0, 100.0, 0.01)]:
        root = brentq(lambda d: abs(a_hz) * (_loop_field(d, r_mm) / _loop_field(0, r_mm)) ** 2 - thr, 0, 1e5)
        assert dipole_range_mm(thr, a_hz, r_mm) == pytest.approx(root, rel=1e-9)
    assert np.isnan(dipole_range_mm(1.0, 0.5, 60.0))


def test_physical_ranges_match_models():
    # the simulator's numeric root against the models' own range solver (an independent implementation)
    from coilshift.analysis.models.coil import analyse_coil, design_from_dict
    from coilshift.analysis.models.target import parse_target_spec, predicted_range_mm

    coil = {"turns": 40, "inner_diameter_mm": 150, "length_mm": 6, "depth_mm": 6, "awg": 26, "cap_nf": 220}
    d = script_dict(oscillator={"coil": coil},
                    targets={"steel": {"material": "mild_steel", "diameter_mm": 25},
                             "alu": {"material": "aluminium", "diameter_mm": 25},
                             "nylon": {"material": "plastic", "diameter_mm": 30}},
                    session={"steps": [{"target": "baseline", "hold_s": 1}]})
    d["oscillator"].pop("freq_hz")
    responses = build_responses(parse_script(d, "t"))
    report = analyse_coil(design_from_dict(coil))
    for name, spec in (("steel", "steel:diameter_mm=25"), ("alu", "aluminium:diameter_mm=25")):
        want = predicted_range_mm(report, parse_target_spec(spec), report.lc_freq_hz, threshold_hz=0.1)
        assert responses[name].range_mm(0.1) == pytest.approx(want, rel=1e-4)
    assert np.isnan(responses["nylon"].range_mm(0.1))
    # frequency falls for steel, rises for aluminium, nothing for plastic (common practice)
    assert responses["steel"].expected_class(20.0, 0.02) == FERROUS
    assert responses["alu"].expected_class(20.0, 0.02) == NON_FERROUS
    assert responses["nylon"].expected_class(20.0, 0.02) == INDETERMINATE


def test_expected_class_uses_floor():
    r = Response("x", lambda d: dipole_shift_hz(d, 0.3, 50.0),
                 {"model": "dipole", "peak_shift_hz": 0.3, "coil_radius_mm": 50.0})
    assert r.expected_class(0.0, 0.1) == NON_FERROUS
    assert r.expected_class(100.0, 0.1) == INDETERMINATE  # 0.3 (1/5)^3 = 0.0024 Hz
