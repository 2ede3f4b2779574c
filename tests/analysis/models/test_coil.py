"""Coil models: Wheeler against the exact current sheet and Grover's tables, filament sums, wire, Medhurst."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from coilshift.analysis.models import inductance as ind
from coilshift.analysis.models.coil import (CoilDesign, analyse_coil, capacitance_for_frequency_nf, check_design,
                                     lc_frequency_hz, load_coil, medhurst_capacitance_pf, medhurst_h_factor,
                                     MEDHURST_TABLE)
from coilshift.logger.errors import InputError

INCH = 0.0254


# --- current sheet -------------------------------------------------------------------------------

@pytest.mark.parametrize("l_over_d, k_table", [
    (0.01, 0.034960), (0.10, 0.203324), (0.20, 0.319825), (0.25, 0.365432),
    (0.50, 0.525510), (0.75, 0.623011), (1.00, 0.688423),
])
def test_nagaoka_against_grover_table_36(l_over_d, k_table):
    # Grover, Inductance Calculations, Table 36 [pub], six decimals: half a unit of the last place
    assert ind.nagaoka_coefficient(l_over_d) == pytest.approx(k_table, abs=6e-7)


@pytest.mark.parametrize("l_over_a", [20.0, 50.0, 200.0])
def test_nagaoka_long_solenoid_expansion(l_over_a):
    # Long-coil series K = 1 - 8a/(3 pi l) + a^2/(2 l^2) - a^4/(4 l^4) + ... (Grover; from memory):
    # the truncation error is about the first dropped term a^4/(4 l^4), plus ~1e-11 of rounding in
    # the elliptic integrals for very long coils
    x = 1.0 / l_over_a
    approx = 1.0 - 8.0 * x / (3.0 * math.pi) + x * x / 2.0
    assert ind.nagaoka_coefficient(l_over_a / 2.0) == pytest.approx(approx, abs=1.05 * x ** 4 / 4 + 1e-11)


def test_worked_example_one_inch_coil():
    # REFERENCES section 5 [derived]: 20 turns, D = 1 in, l = 1 in: 6.9032 uH exact, Wheeler 6.8966 uH
    exact_uh = ind.current_sheet_h(20, 0.5 * INCH, 1.0 * INCH) * 1e6
    assert exact_uh == pytest.approx(6.9032, abs=5e-5)
    assert ind.wheeler_single_layer_uh(20, 0.5, 1.0) == pytest.approx(6.8966, abs=5e-5)


@pytest.mark.parametrize("l_over_r", [0.8, 1.0, 1.5, 2.0, 4.0, 10.0, 30.0, 100.0])
def test_wheeler_single_layer_within_one_percent_where_claimed(l_over_r):
    # Wheeler 1928: about 1 % for l > 0.8 r, checked against the exact current sheet (Lorenz/Nagaoka)
    r_in = 1.0
    wheeler = ind.wheeler_single_layer_uh(50, r_in, l_over_r * r_in)
    exact = ind.current_sheet_h(50, r_in * INCH, l_over_r * r_in * INCH) * 1e6
    assert abs(wheeler / exact - 1.0) < 0.01


def test_wheeler_single_layer_leaves_its_range_for_short_coils():
    # Outside the stated range the error does exceed 1 % (so the range check above means something)
    wheeler = ind.wheeler_single_layer_uh(50, 1.0, 0.1)
    exact = ind.current_sheet_h(50, INCH, 0.1 * INCH) * 1e6
    assert abs(wheeler / exact - 1.0) > 0.01


@pytest.mark.parametrize("l_over_d", [0.05, 0.5, 1.0, 3.0])
def test_current_sheet_against_maxwell_filament_sum(l_over_d):
    # Independent route: Maxwell's mutual inductance of coaxial circles summed over thin strips.
    # The strips' self terms use the GMD of a line, e^{-3/2} b = 0.2231 b (Maxwell), so only the
    # discretisation differs: 3000 strips agree to well under 0.1 %.
    a = 0.02
    exact = ind.current_sheet_h(40, a, l_over_d * 2 * a)
    numeric = ind.uniform_section_h(40, a, a, l_over_d * 2 * a, cells=3000)
    assert numeric == pytest.approx(exact, rel=1e-3)


def test_maxwell_mutual_inductance_far_field():
    # Two coaxial loops far apart: M -> mu0 pi a^2 b^2 / (2 d^3) (two dipoles), a textbook limit
    a, b, d = 0.01, 0.02, 2.0
    assert ind.mutual_coaxial_circles_h(a, b, d) == pytest.approx(
        ind.MU0_H_PER_M * math.pi * a * a * b * b / (2 * d ** 3), rel=1e-3)


def test_round_wire_rings_match_rosa_correction():
    # Rosa (1907): L = L_sheet - mu0 a N (A + B), A = 5/4 - ln(2p/d) with pitch p and bare diameter d,
    # B from Rosa's table (N = 20: B = 0.2974, from memory [unconfirmed]). Our rings sum includes the
    # same physics from first principles; the correction is 1.2 % of L here, matched to 0.1 % of L.
    n, a, p, d = 20, 0.5 * INCH, INCH / 20, 0.7e-3
    sheet = ind.current_sheet_h(n, a, n * p)
    rosa = sheet - ind.MU0_H_PER_M * a * n * (1.25 - math.log(2 * p / d) + 0.2974)
    rings = ind.round_wire_rings_h(n, a - 0.4e-3, n * p, 0.0, 0.8e-3, d)
    assert rings == pytest.approx(rosa, rel=1e-3)
    assert sheet / rings - 1 > 0.01


# --- thick windings ------------------------------------------------------------------------------

@pytest.mark.parametrize("l_over_r, c_over_r", [(2 / 3, 0.6), (1.0, 0.6), (0.5, 0.4), (0.9, 0.8)])
def test_wheeler_multilayer_when_terms_comparable(l_over_r, c_over_r):
    # Wheeler 1928: about 1 % when 6r, 9l, 10c are comparable (here within a factor 1.5), against a
    # uniform-current-density Maxwell filament sum
    r = 0.03
    terms = (6 * r, 9 * l_over_r * r, 10 * c_over_r * r)
    assert max(terms) <= 1.5 * min(terms)
    numeric = ind.uniform_section_h(100, r - c_over_r * r / 2, r + c_over_r * r / 2, l_over_r * r) * 1e6
    wheeler = ind.wheeler_multilayer_uh(100, r / INCH, l_over_r * r / INCH, c_over_r * r / INCH)
    assert wheeler == pytest.approx(numeric, rel=0.01)


def _annulus_h(turns, r, c, n=800):
    # A flat current sheet (annulus) as n thin rings: Maxwell mutual terms, line-GMD self terms
    dr = c / n
    radii = r - c / 2 + (np.arange(n) + 0.5) * dr
    return ind.grid_loops_h(radii, 1.0, 1, ind.ring_self_h(radii, ind.rectangle_gmd_m(dr, 0.0))) * (turns / n) ** 2


@pytest.mark.parametrize("c_over_r", [0.3, 0.5, 0.8, 1.1, 1.4])
def test_wheeler_flat_spiral_in_the_range_used(c_over_r):
    # Wheeler 1928 states about 1 % for c > 0.2 r; against a thin annulus we find 2 % in 0.3..1.4 r,
    # the range analyse_coil uses it in (docs/models.md)
    r = 0.02
    wheeler = ind.wheeler_flat_spiral_uh(30, r / INCH, c_over_r * r / INCH)
    assert wheeler == pytest.approx(_annulus_h(30, r, c_over_r * r) * 1e6, rel=0.02)


@pytest.mark.parametrize("section_over_r", [0.05, 0.1, 0.2])
def test_thin_ring_formula_against_filament_sum(section_over_r):
    # Maxwell's GMD ring formula mu0 N^2 a (ln(8a/g) - 2): neglected terms of order (c/a)^2, so
    # under 1 % for sections up to 0.2 a
    r = 0.1
    s = section_over_r * r
    assert ind.thin_ring_coil_h(10, r, s, s) == pytest.approx(ind.uniform_section_h(10, r - s / 2, r + s / 2, s),
                                                             rel=0.01)


def test_round_wire_loop_textbook_formula():
    # A single round-wire loop: L = mu0 a (ln(8a/rho) - 7/4) (uniform current), e.g. a = 0.1 m,
    # rho = 1 mm -> 4 pi 1e-7 * 0.1 * (ln 800 - 1.75) = 0.620102 uH [derived, written out here].
    # Tolerance: mu0 differs from 4 pi 1e-7 by 5.5e-10 relative since the 2019 SI (CODATA 2018)
    a_m, rho_m = 0.1, 1e-3
    textbook_h = 4e-7 * math.pi * a_m * (math.log(8 * a_m / rho_m) - 1.75)
    assert textbook_h * 1e6 == pytest.approx(0.620102, abs=5e-7)
    assert ind.round_wire_rings_h(1, a_m - rho_m, 2 * rho_m, 0.0, 2 * rho_m, 2 * rho_m) == pytest.approx(
        textbook_h, rel=1e-9)


# --- the analysis ------------------------------------------------------------------------------

def test_analyse_single_layer_reports_both_values():
    rep = analyse_coil(CoilDesign(20, 25.4 - 0.87, 25.4, awg=20))
    assert rep.method.startswith("Wheeler 1928 single-layer")
    assert rep.exact_inductance_uh is not None and rep.nagaoka_k is not None
    assert rep.inductance_uh == pytest.approx(rep.exact_inductance_uh, rel=0.01)
    assert "round-wire" in rep.accuracy_note


def test_short_single_layer_uses_current_sheet():
    rep = analyse_coil(CoilDesign(10, 100, 10, awg=20))
    assert rep.in_stated_range is False
    assert rep.inductance_uh == rep.exact_inductance_uh


def test_bundle_loop_uses_thin_ring():
    rep = analyse_coil(CoilDesign(20, 200, 5, depth_mm=5, awg=22))
    assert rep.method.startswith("thin ring")
    assert rep.inductance_uh == pytest.approx(rep.numeric_inductance_uh, rel=0.01)


@pytest.mark.parametrize("design", [
    CoilDesign(200, 50, 90, awg=26),                     # single layer on a 5 cm form
    CoilDesign(200, 50, 10, depth_mm=5, awg=26),         # a 10 x 5 mm multilayer on a 5 cm form
])
def test_common_practice_200_turns_26_awg_on_5_cm(design):
    # Common practice (no published source): about 200 turns of 26 AWG on a ~5 cm form is 4-5 ohm
    assert 4.0 <= analyse_coil(design).resistance_ohm <= 5.0


def test_wire_length_is_turns_times_mean_circumference():
    d = CoilDesign(100, 30, 60, awg=24)
    rep = analyse_coil(d)
    mean_r = 15 + rep.wire_outer_diameter_mm / 2
    per_turn = math.hypot(2 * math.pi * mean_r, 0.6)   # the helix step is the pitch, 0.6 mm
    assert rep.wire_length_m == pytest.approx(100 * per_turn / 1000, rel=1e-12)
    # resistance = length x (IEC 60028 resistivity / area), 20 degC
    assert rep.resistance_ohm == pytest.approx(
        rep.wire_length_m * 0.017241e-6 / (math.pi * (rep.wire_bare_diameter_mm * 1e-3) ** 2 / 4), rel=1e-12)
    hot = analyse_coil(CoilDesign(100, 30, 60, awg=24, temp_c=60))
    assert hot.resistance_ohm / rep.resistance_ohm == pytest.approx(1 + 0.00393 * 40, rel=1e-12)


# Medhurst 1947 (Wireless Engineer 24), H in pF per cm of diameter against l/D, as commonly
# reproduced; written here from memory of that table (REFERENCES section 6 names the paper but not
# the values), not copied from the code's table
MEDHURST_H_QUOTED = ((1.0, 0.46), (1.5, 0.47), (2.0, 0.50), (2.5, 0.56), (3.0, 0.61), (3.5, 0.67),
                     (4.0, 0.72), (4.5, 0.77), (5.0, 0.81))


def test_medhurst_fit_against_table():
    # the table values, and the fitted expression used outside 1..5 within its usual +-10 % of them
    assert len(MEDHURST_TABLE) == len(MEDHURST_H_QUOTED)
    for x, h in MEDHURST_H_QUOTED:
        assert 0.1126 * x + 0.08 + 0.27 / math.sqrt(x) == pytest.approx(h, rel=0.10)
        assert medhurst_h_factor(x) == pytest.approx(h, abs=1e-12)
    # between table rows: linear interpolation, 1.25 -> (0.46 + 0.47) / 2
    assert medhurst_h_factor(1.25) == pytest.approx(0.465, abs=1e-12)


def test_medhurst_capacitance_and_srf():
    # Medhurst: C = H D[cm]; l = D = 10 cm -> 0.46 * 10 = 4.6 pF
    assert medhurst_capacitance_pf(100.0, 100.0) == pytest.approx(4.6)
    rep = analyse_coil(CoilDesign(50, 50, 60, awg=26))
    c = rep.self_capacitance_pf * 1e-12
    assert rep.srf_hz == pytest.approx(1 / (2 * math.pi * math.sqrt(rep.inductance_uh * 1e-6 * c)), rel=1e-12)


def test_lc_frequency():
    # f = 1 / (2 pi sqrt(L C)): 100 uH with 100 nF -> 50 329.2 Hz [derived by hand]
    assert lc_frequency_hz(100e-6, 100e-9) == pytest.approx(50329.2, abs=0.1)
    assert capacitance_for_frequency_nf(100e-6, 50329.2) == pytest.approx(100.0, rel=1e-5)
    # a multilayer coil has no self-capacitance estimate: only the tuning capacitor counts
    rep = analyse_coil(CoilDesign(200, 50, 10, depth_mm=5, awg=26, cap_nf=100))
    assert rep.self_capacitance_pf is None
    assert rep.lc_freq_hz == pytest.approx(1 / (2 * math.pi * math.sqrt(rep.inductance_uh * 1e-6 * 100e-9)),
                                           rel=1e-12)


def _single_layer_l_over_d(l_over_d, cap_nf=None):
    # D = 2 x mean radius = inner diameter + one wire outer diameter; 1 mm wire on a 99 mm former
    return CoilDesign(20, 99.0, 100.0 * l_over_d, wire_diameter_mm=0.9, outer_wire_diameter_mm=1.0,
                      cap_nf=cap_nf)


def test_lc_frequency_includes_the_self_capacitance():
    # Single layer, l = D = 100 mm, 20 turns: Wheeler 1928 L = N^2 r^2 / (9 r + 10 l) uH (inches),
    # Medhurst's self-capacitance H(1) D[cm] = 0.46 x 10 = 4.6 pF (table above) in parallel with
    # a 100 pF capacitor: f = 1 / (2 pi sqrt(L (C + C_self))) (Thomson) [derived here]. Leaving
    # C_self out would raise f by 2.3 %.
    rep = analyse_coil(_single_layer_l_over_d(1.0, cap_nf=0.1))
    r_in, l_in = 50.0 / 25.4, 100.0 / 25.4
    l_h = 20 ** 2 * r_in ** 2 / (9 * r_in + 10 * l_in) * 1e-6
    assert rep.inductance_uh * 1e-6 == pytest.approx(l_h, rel=1e-12)
    assert rep.self_capacitance_pf == pytest.approx(4.6, rel=1e-12)
    expected = 1 / (2 * math.pi * math.sqrt(l_h * (100e-12 + 4.6e-12)))
    assert rep.lc_freq_hz == pytest.approx(expected, rel=1e-9)


@pytest.mark.parametrize("l_over_d, k_table", [(0.25, 0.365432), (0.50, 0.525510), (1.00, 0.688423)])
def test_reported_nagaoka_coefficient_is_grovers(l_over_d, k_table):
    # the coefficient the coil report prints, for the coil's own l/D (D = twice the mean radius),
    # against Grover, Inductance Calculations, Table 36 [pub] to half a unit of the 6th decimal
    rep = analyse_coil(_single_layer_l_over_d(l_over_d))
    assert rep.mean_radius_mm == pytest.approx(50.0)
    assert rep.nagaoka_k == pytest.approx(k_table, abs=6e-7)
    # and the exact inductance is the current sheet mu0 pi a^2 N^2 K / l with that K
    a_m, l_m = 0.05, 0.1 * l_over_d
    assert rep.exact_inductance_uh * 1e-6 == pytest.approx(4e-7 * math.pi * math.pi * a_m ** 2 * 400 * k_table / l_m,
                                                           rel=2e-6)


# --- impossible geometry and files ---------------------------------------------------------------

@pytest.mark.parametrize("design, words", [
    (CoilDesign(-5, 50, 10), "turns"),
    (CoilDesign(0.5, 50, 10), "turns"),
    (CoilDesign(10, 0, 10), "inner_diameter_mm"),
    (CoilDesign(10, 50, 0), "length_mm"),
    (CoilDesign(10, 50, 10, depth_mm=-1), "depth_mm"),
    (CoilDesign(10, 50, 10, depth_mm=0.1, awg=26), "less than one wire"),
    (CoilDesign(100, 50, 10, awg=26), "one layer"),
    (CoilDesign(2000, 50, 10, depth_mm=2, awg=26), "section"),
    (CoilDesign(10, 50, 10, awg=26, wire_diameter_mm=0.4), "not both"),
    (CoilDesign(10, 50, 10, cap_nf=0), "cap_nf"),
    (CoilDesign(10, float("nan"), 10), "inner_diameter_mm"),
])
def test_impossible_geometry_refused(design, words):
    with pytest.raises(InputError, match=words):
        check_design(design)


def test_load_coil_round_trip(tmp_path):
    path = tmp_path / "c.json"
    path.write_text(json.dumps({"name": "probe", "turns": 200, "inner_diameter_mm": 50, "length_mm": 10,
                                "depth_mm": 5, "awg": 26, "cap_nf": 47}))
    d = load_coil(path)
    assert d == CoilDesign(200, 50, 10, depth_mm=5, awg=26, cap_nf=47, name="probe")


@pytest.mark.parametrize("content, words", [
    ('{"turns": 10, "inner_diameter_mm": 50, "length_mm": 10, "colour": "red"}', "unknown key"),
    ('{"turns": 10, "inner_diameter_mm": 50}', "missing"),
    ('{"turns": "ten", "inner_diameter_mm": 50, "length_mm": 10}', "number"),
    ('{"turns": 10, "inner_diameter_mm": 50, "length_mm": -3}', "length_mm"),
    ('[1, 2]', "JSON object"),
    ('{"turns": 10,', "not valid JSON"),
])
def test_load_coil_refuses_bad_files(tmp_path, content, words):
    path = tmp_path / "bad.json"
    path.write_text(content)
    with pytest.raises(InputError, match=words) as exc:
        load_coil(path)
    assert str(path) in str(exc.value)


def test_load_coil_missing_file(tmp_path):
    with pytest.raises(InputError, match="no such coil file"):
        load_coil(tmp_path / "none.json")


# --- limits, winding fit, radii, Q and the skin-depth note (mutation survivors, issue 18) --------

def test_winding_radii_are_former_radius_plus_build():
    # geometry as defined in the module docstring: depth = outer minus inner radius; a single layer's
    # outside is one overall wire diameter above the former
    multi = analyse_coil(CoilDesign(200, 50, 10, depth_mm=5, awg=26))
    assert multi.inner_radius_mm == pytest.approx(25.0, rel=1e-12)
    assert multi.outer_radius_mm == pytest.approx(30.0, rel=1e-12)
    single = analyse_coil(_single_layer_l_over_d(1.0))
    assert single.inner_radius_mm == pytest.approx(49.5, rel=1e-12)
    assert single.outer_radius_mm == pytest.approx(49.5 + 1.0, rel=1e-12)


@pytest.mark.parametrize("field, at_limit, beyond, words", [
    ("inner_diameter_mm", 20000.0, 20000.5, "20 m"), ("length_mm", 20000.0, 20000.5, "20 m"),
    ("depth_mm", 20000.0, 20000.5, "20 m"), ("temp_c", -200.0, -200.5, "temp_c"),
    ("temp_c", 250.0, 250.5, "temp_c"), ("lead_length_mm", 1e6, 1e6 + 0.5, "lead_length_mm"),
])
def test_stated_limits_are_inclusive(field, at_limit, beyond, words):
    # the messages promise "above 20 m", "between -200 and 250 degC", "at most 1 km": the limit itself
    # is a valid value, anything past it is refused (no wire given, so no winding-fit check)
    base = dict(turns=10, inner_diameter_mm=50.0, length_mm=10.0)
    check_design(CoilDesign(**{**base, field: at_limit}))
    with pytest.raises(InputError, match=words):
        check_design(CoilDesign(**{**base, field: beyond}))


def _hex_packed_turns(length_mm, depth_mm, d_mm):
    # densest packing of equal circles fills pi / (2 sqrt 3) = 0.9069 of the plane (Lagrange, Thue):
    # each wire of section pi d^2 / 4 then takes (pi d^2 / 4) / 0.9069 of the winding section
    density = math.pi / (2.0 * math.sqrt(3.0))
    return length_mm * depth_mm / (math.pi * d_mm ** 2 / 4.0 / density)


def _multilayer(turns, length_mm, depth_mm):
    # 0.9 mm bare, 1.0 mm overall wire
    return CoilDesign(turns, 50.0, length_mm, depth_mm=depth_mm, wire_diameter_mm=0.9, outer_wire_diameter_mm=1.0)


def test_multilayer_winding_fit_uses_densest_packing():
    n_max = _hex_packed_turns(10.0, 10.0, 1.0)          # 115.5 turns fit in 10 x 10 mm
    assert n_max == pytest.approx(115.47, abs=0.01)
    check_design(_multilayer(110, 10.0, 10.0))           # below the packing limit
    with pytest.raises(InputError, match="section"):
        check_design(_multilayer(round(1.1 * n_max / 0.97), 10.0, 10.0))   # past it, beyond the 3 % slack


def test_multilayer_of_exactly_one_wire_length_or_depth_is_accepted():
    # "less than one wire" is refused; exactly one overall diameter (1.0 mm) is a valid winding
    check_design(_multilayer(1, 1.0, 5.0))
    check_design(_multilayer(1, 5.0, 1.0))
    with pytest.raises(InputError, match="less than one wire"):
        check_design(_multilayer(1, 0.9, 5.0))


@pytest.mark.parametrize("l_over_d, h_memory", [(0.1, 0.96), (0.2, 0.70), (0.3, 0.60), (0.5, 0.50)])
def test_medhurst_fit_below_the_table_range(l_over_d, h_memory):
    # Medhurst 1947's table for short coils, values from memory [unconfirmed]: outside 1..5 the code
    # uses the fitted expression, which is quoted as +-10 % of the table
    assert medhurst_h_factor(l_over_d) == pytest.approx(h_memory, rel=0.10)


def test_q_bound_is_omega_l_over_dc_resistance():
    # Q = 2 pi f L / R (definition), with L by Wheeler 1928, R = rho l / A with IEC 60028 copper
    # (0.017241 ohm mm^2 / m at 20 degC) and f by Thomson with Medhurst's 4.6 pF, all written here
    rep = analyse_coil(_single_layer_l_over_d(1.0, cap_nf=0.1))
    r_in, l_in = 50.0 / 25.4, 100.0 / 25.4
    l_h = 20 ** 2 * r_in ** 2 / (9 * r_in + 10 * l_in) * 1e-6
    f_hz = 1 / (2 * math.pi * math.sqrt(l_h * (100e-12 + 4.6e-12)))
    wire_m = 20 * math.hypot(2 * math.pi * 50.0, 100.0 / 20) / 1000.0
    r_ohm = 0.017241 * wire_m / (math.pi * 0.9 ** 2 / 4)
    assert rep.q_dc_bound == pytest.approx(2 * math.pi * f_hz * l_h / r_ohm, rel=1e-6)


def test_skin_depth_note_only_when_the_wire_is_thicker_than_two_skin_depths():
    # copper skin depth 1 / sqrt(pi f mu0 sigma), sigma = 58 MS/m: about 0.04 mm at the 3 MHz of this
    # coil with 100 pF (0.9 mm wire is far thicker than 2 delta), about 2 mm at its 1 kHz with 1 mF
    def skin_mm(f_hz):
        return 1e3 / math.sqrt(math.pi * f_hz * 4e-7 * math.pi * 58e6)

    fast = analyse_coil(_single_layer_l_over_d(1.0, cap_nf=0.1))
    slow = analyse_coil(_single_layer_l_over_d(1.0, cap_nf=1e6))
    assert 0.9 > 2 * skin_mm(fast.lc_freq_hz) and 0.9 < 2 * skin_mm(slow.lc_freq_hz)
    assert fast.skin_depth_mm == pytest.approx(skin_mm(fast.lc_freq_hz), rel=3e-3)
    assert any("skin depth" in n for n in fast.notes)
    assert not any("skin depth" in n for n in slow.notes)


@pytest.mark.parametrize("thick_mm, wheeler_kept", [(0.05, True), (1.0, False)])
def test_flat_spiral_of_real_thickness_is_held_to_two_percent(thick_mm, wheeler_kept):
    # 50 turns, c = 20 mm on a 40 mm former: c/r = 0.67, inside Wheeler's flat-spiral range, but the
    # formula is for no thickness. Reference: the simulator's own quadrature of Maxwell's mutual
    # inductance over the section (coilshift.sim.inductance, a code path apart from the analysis).
    # Wheeler is 1.6 % high at 0.05 mm (kept: within its 2 %) and 4.1 % high at 1 mm (replaced).
    from coilshift.sim.inductance import winding_inductance_h

    rep = analyse_coil(CoilDesign(50, 40, thick_mm, depth_mm=20, cap_nf=100))
    truth_uh = winding_inductance_h(50, 0.020, 0.040, thick_mm * 1e-3) * 1e6
    assert rep.inductance_uh == pytest.approx(truth_uh, rel=0.02)
    assert ("Wheeler" in rep.method) == wheeler_kept
    if not wheeler_kept:
        assert rep.inductance_uh == pytest.approx(truth_uh, rel=1e-3)  # the filament sum itself
        assert "more than its 2 %" in rep.accuracy_note and not rep.in_stated_range
        assert rep.wheeler_uh / truth_uh - 1 > 0.03
