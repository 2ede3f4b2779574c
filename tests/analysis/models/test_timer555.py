"""555 astable formulas against the datasheet's own constants and example, and the part pickers."""

from __future__ import annotations

import math

import pytest

from coilshift.analysis.models import timer555 as t5
from coilshift.logger.errors import InputError

# The datasheets round ln 2 to 0.693 and 1/ln 2 to 1.44: their relative rounding bounds how
# closely the exact-ln2 results can match numbers recomputed with the printed constants.
ROUND_0693 = abs(0.693 / math.log(2) - 1)       # 1.6e-4
ROUND_144 = abs(1.44 * math.log(2) - 1)         # 1.9e-3


def test_datasheet_example_two_resistor():
    # NE555 datasheet astable example: RA = 3.9 kohm, RB = 3 kohm, C = 0.01 uF (component values
    # recalled from memory [unconfirmed]); recomputed with the published formulas
    # t_H = 0.693 (RA + RB) C = 47.8 us, t_L = 0.693 RB C = 20.8 us, f = 1.44 / ((RA + 2 RB) C) = 14.5 kHz
    t = t5.astable_two_resistor(3900, 3000, 10)
    assert t.t_high_s == pytest.approx(0.693 * 6900 * 1e-8, rel=ROUND_0693 * 1.01)
    assert t.t_low_s == pytest.approx(0.693 * 3000 * 1e-8, rel=ROUND_0693 * 1.01)
    assert t.freq_hz == pytest.approx(1.44 / (9900 * 1e-8), rel=ROUND_144 * 1.01)
    assert t.duty == pytest.approx(6900 / 9900, rel=1e-12)


@pytest.mark.parametrize("r1, r2, c_nf", [(1e3, 10e3, 100), (47e3, 4.7e3, 1), (10e3, 220e3, 2.2)])
def test_two_resistor_against_published_formula(r1, r2, c_nf):
    # NE555 datasheets: f = 1.44 / ((R1 + 2 R2) C)
    assert t5.astable_two_resistor(r1, r2, c_nf).freq_hz == pytest.approx(
        1.44 / ((r1 + 2 * r2) * c_nf * 1e-9), rel=ROUND_144 * 1.01)


@pytest.mark.parametrize("r, c_nf", [(10e3, 10), (4.7e3, 100), (1e6, 1)])
def test_one_resistor_against_application_note(r, c_nf):
    # CMOS 555 application notes: f = 1 / (1.386 R C), 50 % duty (1.386 rounds 2 ln 2 by 2e-4)
    t = t5.astable_one_resistor(r, c_nf)
    assert t.freq_hz == pytest.approx(1 / (1.386 * r * c_nf * 1e-9), rel=2.2e-4)
    assert t.duty == 0.5


@pytest.mark.parametrize("freq_hz, cap_nf, duty", [(10e3, 10, 0.6), (1e3, 100, 0.9), (50e3, 1, 0.55)])
def test_design_inverts_the_formula(freq_hz, cap_nf, duty):
    t = t5.design_two_resistor(freq_hz, cap_nf, duty, series=None)
    assert t.freq_hz == pytest.approx(freq_hz, rel=1e-12)
    assert t.duty == pytest.approx(duty, rel=1e-12)
    one = t5.design_one_resistor(freq_hz, cap_nf, series=None)
    assert one.freq_hz == pytest.approx(freq_hz, rel=1e-12)


def test_rounded_design_stays_close():
    # With E24 parts (about 10 % apart) the best pair lands within a few per cent of the target
    t = t5.design_two_resistor(10e3, 15, 0.6, "E24")
    assert t.r1_ohm in {m * 1e3 for m in t5.E_SERIES["E24"]} | {m * 1e4 for m in t5.E_SERIES["E24"]}
    assert abs(t.freq_hz / 10e3 - 1) < 0.02


@pytest.mark.parametrize("value, series, expected", [
    (4600, "E12", 4700), (1.04e3, "E24", 1.0e3), (1.06e3, "E24", 1.1e3), (9.6e3, "E12", 10e3), (2.0, "E6", 2.2),
])
def test_nearest_standard_values(value, series, expected):
    # IEC 60063 E6/E12/E24 series
    assert t5.nearest_standard(value, series) == pytest.approx(expected)


def test_e_series_sizes():
    # IEC 60063: the En series has n values per decade
    for name, values in t5.E_SERIES.items():
        assert len(values) == int(name[1:])


@pytest.mark.parametrize("call", [
    lambda: t5.design_two_resistor(10e3, 10, 0.5),
    lambda: t5.design_two_resistor(10e3, 10, 1.0),
    lambda: t5.astable_two_resistor(-1, 1e3, 10),
    lambda: t5.astable_one_resistor(1e3, 0),
    lambda: t5.nearest_standard(100, "E7"),
])
def test_bad_inputs(call):
    with pytest.raises(InputError):
        call()


def test_resistor_warnings():
    assert t5.resistor_warnings(t5.astable_two_resistor(100, 2e6, 1))
    assert not t5.resistor_warnings(t5.astable_two_resistor(10e3, 10e3, 1))


# IEC 60063 E6 mantissas, written out here: 1.0 1.5 2.2 3.3 4.7 6.8
E6_QUOTED = (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)


def _nearest_e6(value):
    # nearest in the log sense (the E series are geometric), searched over three decades
    cands = [m * 10.0 ** e for e in range(-3, 7) for m in E6_QUOTED]
    return min(cands, key=lambda x: abs(math.log(x / value)))


@pytest.mark.parametrize("freq_hz, r_ohm, expected_nf", [
    (10e3, 10e3, 15.0),    # 1.44 / (1e4 x 1e4) = 14.4 nF -> 15 nF (half or twice would be 6.8 or 33)
    (100e3, 10e3, 1.5),    # 1.44 nF -> 1.5 nF
    (1e3, 47e3, 33.0),     # 30.6 nF -> 33 nF
])
def test_suggest_cap_nf_follows_the_datasheet_formula(freq_hz, r_ohm, expected_nf):
    # NE555 datasheet f = 1.44 / ((R1 + 2 R2) C) [pub] solved for C with R1 + 2 R2 = target R,
    # rounded to the nearest E6 value; the rounding of 1.44 (0.19 %) cannot change the E6 pick here
    c_nf = 1.44 / (freq_hz * r_ohm) * 1e9
    assert _nearest_e6(c_nf) == pytest.approx(expected_nf)
    assert t5.suggest_cap_nf(freq_hz, r_ohm) == pytest.approx(expected_nf, rel=1e-9)


def test_e_series_are_iec_60063():
    # IEC 60063 preferred numbers, written out here (E6, E12, E24)
    e12 = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)
    e24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
           3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1)
    for name, ref in (("E6", E6_QUOTED), ("E12", e12), ("E24", e24)):
        assert tuple(t5.E_SERIES[name]) == ref
        # every value is its own nearest standard value, in any decade
        for v in ref:
            assert t5.nearest_standard(v * 1e3, name) == pytest.approx(v * 1e3, rel=1e-12)


def test_suggest_cap_default_resistance_is_10_kohm():
    # the default target R1 + 2 R2 is 10 kohm (docstring): 10 kHz -> 1.44 / (1e4 x 1e4) = 14.4 -> 15 nF
    assert t5.suggest_cap_nf(10e3) == pytest.approx(15.0)


def test_duty_of_exactly_one_half_is_refused_for_two_resistors():
    # R1 = (2 duty - 1)(R1 + 2 R2) is zero at 50 %: the two-resistor circuit cannot make it
    with pytest.raises(InputError, match="above 0.5"):
        t5.design_two_resistor(1000.0, 10.0, duty=0.5)


def test_duty_of_one_is_refused_as_a_duty_not_as_a_zero_resistor():
    # R2 = (1 - duty)(R1 + 2 R2) vanishes at 100 %: the message must name the duty the user gave
    with pytest.raises(InputError, match="duty 1.0 must be above 0.5 and below 1"):
        t5.design_two_resistor(1000.0, 10.0, duty=1.0)


@pytest.mark.parametrize("value, series, expected", [
    (1.02e3, "E24", (910.0, 1000.0, 1100.0)),       # across the decade below
    (9.3e3, "E24", (8200.0, 9100.0, 10000.0)),      # across the decade above
    (4600.0, "E12", (3900.0, 4700.0, 5600.0)),
    (1.4, "E6", (1.0, 1.5, 2.2)),
])
def test_design_tries_the_standard_values_either_side(value, series, expected):
    # IEC 60063 values written out here (E6 above; E12 3.9 4.7 5.6; E24 8.2 9.1 | 1.0 1.1): the
    # two-resistor design tries the nearest standard value and the one on each side of it
    assert t5._neighbours(value, series) == pytest.approx(list(expected), rel=1e-12)
