"""Wire tables: AWG diameters (ASTM B258), copper resistance (IEC 60028), enamel build, skin depth."""

from __future__ import annotations

import math

import pytest

from coilshift.analysis.models import wire
from coilshift.logger.errors import InputError

INCH_MM = 25.4


@pytest.mark.parametrize("gauge, inches", [
    (36, 0.0050),   # ASTM B258 defines 36 AWG as 0.0050 in
    (-3, 0.4600),   # ... and 0000 AWG (written -3) as 0.4600 in
    ("0000", 0.4600),
    ("4/0", 0.4600),
])
def test_awg_definition_points(gauge, inches):
    # ASTM B258: the two defining gauges of the geometric series
    assert wire.awg_diameter_mm(gauge) == pytest.approx(inches * INCH_MM, rel=1e-12)


def test_awg_26_reference_value():
    # REFERENCES section 6 [pub]: 26 AWG is 0.40487 mm and 0.12876 mm^2. Recomputing the ASTM B258
    # formula gives 0.404892 mm; the listed value carries about 5e-5 relative rounding, so 1e-4.
    d = wire.awg_diameter_mm(26)
    assert d == pytest.approx(0.40487, rel=1e-4)
    assert math.pi * d * d / 4 == pytest.approx(0.12876, rel=2e-4)


@pytest.mark.parametrize("gauge, diameter_mm", [
    (10, 2.588), (12, 2.053), (14, 1.628), (18, 1.024), (20, 0.812),
    (22, 0.644), (24, 0.511), (30, 0.255), (40, 0.0799),
])
def test_awg_known_table_values(gauge, diameter_mm):
    # Common AWG table values in mm, from memory [unconfirmed], given to 3-4 significant figures:
    # allow half a unit of the last digit plus the table's own rounding.
    assert wire.awg_diameter_mm(gauge) == pytest.approx(diameter_mm, abs=6e-4)


def test_six_gauges_halve_the_diameter():
    # Common practice: every 6 gauges halve the diameter (92^(6/39) = 2.005), 3 gauges halve the area
    for n in range(0, 40):
        assert wire.awg_diameter_mm(n) / wire.awg_diameter_mm(n + 6) == pytest.approx(2.0, rel=5e-3)


def test_26_awg_copper_resistance_per_km():
    # REFERENCES section 6 [derived from IEC 60028]: 26 AWG copper is 133.9 ohm/km at 20 degC
    r = wire.resistance_per_m_ohm(wire.awg_diameter_mm(26), 20.0) * 1000.0
    assert r == pytest.approx(133.9, abs=0.05)


def test_copper_temperature_law():
    # IEC 60028: alpha20 = 0.00393 /degC, so at 75 degC the resistance is 1 + 0.00393 * 55 times
    assert wire.resistivity_ohm_m(75.0) / wire.resistivity_ohm_m(20.0) == pytest.approx(1.21615, rel=1e-9)
    # and 100 % IACS: 58 MS/m (1 / 0.017241 ohm mm^2/m = 58.0013 MS/m; 0.017241 is 1/58 rounded)
    assert 1.0 / wire.resistivity_ohm_m(20.0) == pytest.approx(58.0e6, rel=5e-5)


def test_aluminium_is_61_percent_iacs():
    # IEC 60889 hard-drawn aluminium: 0.028264 ohm mm^2/m, i.e. 61.0 % IACS
    assert wire.resistivity_ohm_m(20.0, "copper") / wire.resistivity_ohm_m(20.0, "aluminium") == \
        pytest.approx(0.610, abs=5e-4)


@pytest.mark.parametrize("bare_mm, grade1_max, grade2_max", [
    (0.10, 0.117, 0.125), (0.20, 0.226, 0.239), (0.40, 0.439, 0.456), (0.50, 0.548, 0.566), (1.00, 1.062, 1.093),
])
def test_enamel_build_near_iec_60317_maximum_overall_diameters(bare_mm, grade1_max, grade2_max):
    # IEC 60317-0-1 maximum overall diameters, recalled from memory [unconfirmed]; the fit is
    # approximate by design: within 6 micrometres
    assert bare_mm + wire.insulation_build_mm(bare_mm, "grade1") == pytest.approx(grade1_max, abs=0.006)
    assert bare_mm + wire.insulation_build_mm(bare_mm, "grade2") == pytest.approx(grade2_max, abs=0.006)


@pytest.mark.parametrize("freq_hz, delta_mm", [(50.0, 9.35), (10e3, 0.661), (1e6, 0.0661)])
def test_copper_skin_depth(freq_hz, delta_mm):
    # delta = 1 / sqrt(pi f mu0 sigma) with sigma = 58 MS/m [derived]: 9.35 mm at 50 Hz,
    # 0.661 mm at 10 kHz (the textbook "about 0.66 mm at 10 kHz", common practice)
    assert wire.skin_depth_mm(freq_hz) == pytest.approx(delta_mm, rel=2e-3)


@pytest.mark.parametrize("text, n", [("26", 26), ("00", -1), ("000", -2), ("2/0", -1), ("0", 0), (" 30 AWG", 30)])
def test_parse_awg(text, n):
    assert wire.parse_awg(text) == n


@pytest.mark.parametrize("bad", ["57", "-4", "26.5", "thick", ""])
def test_parse_awg_rejects(bad):
    with pytest.raises(InputError):
        wire.parse_awg(bad)


def test_wire_spec_needs_exactly_one_size():
    with pytest.raises(InputError):
        wire.wire_spec()
    with pytest.raises(InputError):
        wire.wire_spec(awg=26, wire_diameter_mm=0.4)
    with pytest.raises(InputError):
        wire.wire_spec(wire_diameter_mm=0.4, outer_diameter_mm=0.3)
    spec = wire.wire_spec(wire_diameter_mm=0.4, outer_diameter_mm=0.45)
    assert spec.outer_diameter_mm == 0.45 and spec.awg is None


# --- names, limits, defaults (mutation survivors, issue 18) ----------------------------------------

def test_mu0_is_codata_2018():
    # CODATA 2018: mu0 = 1.25663706212(19) x 10^-6 H/m (value from memory, 0.15 ppb uncertainty);
    # 4 pi x 10^-7 alone is 0.55 ppb off
    assert wire.MU0_H_PER_M == pytest.approx(1.25663706212e-6, rel=2e-10, abs=0)


@pytest.mark.parametrize("text, n", [("4/0", -3), ("3/0", -2), ("1/0", 0), ("0000", -3), (56, 56), (-3, -3),
                                     ("56", 56)])
def test_parse_awg_slash_names_and_the_ends_of_the_range(text, n):
    # ASTM B258 naming: 4/0 = 0000, 3/0 = 000, 1/0 = 0; gauges run 0000 .. 56 (the module's range)
    assert wire.parse_awg(text) == n


def test_resistance_defaults_to_20_degc():
    # IEC 60028: 0.017241 ohm mm^2/m at 20 degC; a 1 mm wire (0.785398 mm^2) has 0.021952 ohm/m
    per_m = 0.017241 / (math.pi / 4)
    assert wire.resistance_per_m_ohm(1.0) == pytest.approx(per_m, rel=1e-12)
    spec = wire.wire_spec(wire_diameter_mm=1.0)
    assert spec.resistance_per_m_ohm() == pytest.approx(per_m, rel=1e-12)
    assert spec.area_mm2 == pytest.approx(math.pi / 4, rel=1e-12)
    assert wire.wire_spec(wire_diameter_mm=0.5).area_mm2 == pytest.approx(0.19634954, rel=1e-8)  # pi 0.5^2 / 4


def test_wire_spec_outer_diameter_adds_the_enamel():
    # bare 0.40 mm grade 1: IEC 60317-0-1 maximum overall 0.439 mm (from memory, as above) within the
    # fit's 6 micrometres; bare wire ("none") has no build
    assert wire.wire_spec(wire_diameter_mm=0.40).outer_diameter_mm == pytest.approx(0.439, abs=0.006)
    bare = wire.wire_spec(wire_diameter_mm=0.40, insulation="none")
    assert bare.outer_diameter_mm == 0.40


def test_bare_diameter_limits_are_inclusive():
    # the message promises "between 0.005 and 20 mm": both ends are wires, anything past them is not
    for d in (0.005, 20.0):
        assert wire.wire_spec(wire_diameter_mm=d).bare_diameter_mm == d
    for d in (0.0049, 20.01):
        with pytest.raises(InputError, match="between 0.005 and 20 mm"):
            wire.wire_spec(wire_diameter_mm=d)
