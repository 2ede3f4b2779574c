"""Round winding wire: AWG diameters, enamel build, DC resistance and skin depth.

Sources
-------
- ASTM B258 (American Wire Gauge): d(n) = 0.127 mm * 92 ** ((36 - n) / 39); gauge 0000 is
  written n = -3, 000 is -2, 00 is -1. 36 AWG = 0.0050 in and 0000 AWG = 0.4600 in by definition.
- IEC 60028 (International Standard of Resistance for Copper): annealed copper has
  0.017241 ohm mm^2/m at 20 degC (58 MS/m, 100 % IACS) and a temperature coefficient of
  0.00393 /degC at 20 degC.
- IEC 60889 (hard-drawn aluminium for overhead conductors): 0.028264 ohm mm^2/m at 20 degC,
  0.00403 /degC.
- Enamel build of magnet wire: an APPROXIMATE power-law fit (build_mm = c * d_mm ** 0.575) to the
  maximum overall diameters of IEC 60317-0-1 grade 1 and grade 2 round enamelled wire, recalled
  from memory; good to a few micrometres between 0.1 and 1.5 mm. Use the supplier's datasheet
  (or ``outer_diameter_mm``) when the winding is tight.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from coilshift.logger.errors import InputError

MU0_H_PER_M = 4e-7 * math.pi * 1.00000000055  # CODATA 2018 mu0 = 1.25663706212e-6 H/m

# IEC 60028 / IEC 60889 conductor data: resistivity at 20 degC (ohm mm^2 / m) and alpha20 (/degC)
CONDUCTORS = {
    "copper": (0.017241, 0.00393),
    "aluminium": (0.028264, 0.00403),
}

# Enamel build (increase of diameter) c * d**0.575, approximate (see module docstring)
INSULATION_BUILD_COEF = {"none": 0.0, "grade1": 0.066, "grade2": 0.095}
INSULATION_BUILD_EXPONENT = 0.575

_AWG_WORDS = {"0000": -3, "4/0": -3, "000": -2, "3/0": -2, "00": -1, "2/0": -1, "0": 0, "1/0": 0}


def parse_awg(value) -> int:
    """AWG number from an int or a string such as ``"26"``, ``"00"`` or ``"4/0"``.

    Gauges 0000..0 map to -3..0 (ASTM B258 numbering). Accepts -3..56.
    """
    text = str(value).strip().upper().removesuffix("AWG").strip()
    if text in _AWG_WORDS:
        return _AWG_WORDS[text]
    numeric = isinstance(value, (int, float)) and not isinstance(value, bool)
    # a gauge is written 0..56 (or 00, 000, 0000): "00000", "1e1" or "nan" name no wire
    if not (numeric or (text.lstrip("-").isdigit() and len(text.lstrip("-")) <= 2)):
        raise InputError(f"AWG {value!r}: not a wire gauge (use e.g. 26, 0, 00, 4/0)")
    n = float(value) if numeric else float(text)
    if not math.isfinite(n) or n != int(n) or not -3 <= n <= 56:
        raise InputError(f"AWG {value!r}: gauge must be a whole number from 0000 (-3) to 56")
    return int(n)


def awg_diameter_mm(awg) -> float:
    """Bare diameter of an AWG gauge in mm.

    ASTM B258: d = 0.127 mm * 92 ** ((36 - n) / 39), with 0000 = -3, 000 = -2, 00 = -1.
    """
    n = parse_awg(awg)
    return 0.127 * 92.0 ** ((36 - n) / 39.0)


def insulation_build_mm(bare_diameter_mm: float, grade: str = "grade1") -> float:
    """Approximate increase of diameter from the enamel coat of magnet wire, in mm.

    An approximate fit (c * d ** 0.575, c = 0.066 for grade 1, 0.095 for grade 2) to the
    maximum overall diameters of IEC 60317-0-1, recalled from memory; ``"none"`` for bare or
    litz-free estimates. Check the supplier's datasheet for tight windings.
    """
    try:
        coef = INSULATION_BUILD_COEF[grade]
    except KeyError:
        raise InputError(f"insulation {grade!r}: use one of {', '.join(INSULATION_BUILD_COEF)}") from None
    return coef * bare_diameter_mm ** INSULATION_BUILD_EXPONENT


def resistivity_ohm_m(temp_c: float = 20.0, conductor: str = "copper") -> float:
    """Resistivity in ohm m at ``temp_c``: rho20 * (1 + alpha20 (T - 20)) (IEC 60028 / IEC 60889)."""
    try:
        rho20_mm2, alpha = CONDUCTORS[conductor]
    except KeyError:
        raise InputError(f"conductor {conductor!r}: use one of {', '.join(CONDUCTORS)}") from None
    factor = 1.0 + alpha * (temp_c - 20.0)
    if factor <= 0:
        raise InputError(f"temperature {temp_c} degC: outside the linear resistance law")
    return rho20_mm2 * 1e-6 * factor


def resistance_per_m_ohm(diameter_mm: float, temp_c: float = 20.0, conductor: str = "copper") -> float:
    """DC resistance per metre of a round wire of bare diameter ``diameter_mm``."""
    area_m2 = math.pi * (diameter_mm * 1e-3) ** 2 / 4.0
    return resistivity_ohm_m(temp_c, conductor) / area_m2


def skin_depth_mm(freq_hz: float, temp_c: float = 20.0, conductor: str = "copper") -> float:
    """Skin depth delta = sqrt(2 rho / (omega mu0)) in mm (non-magnetic conductor)."""
    rho = resistivity_ohm_m(temp_c, conductor)
    return 1e3 * math.sqrt(2.0 * rho / (2.0 * math.pi * freq_hz * MU0_H_PER_M))


@dataclass(frozen=True)
class WireSpec:
    """A round winding wire: bare and overall diameter, conductor, where the numbers came from."""

    bare_diameter_mm: float
    outer_diameter_mm: float
    conductor: str = "copper"
    awg: int | None = None
    insulation: str = "grade1"

    @property
    def area_mm2(self) -> float:
        return math.pi * self.bare_diameter_mm ** 2 / 4.0

    def resistance_per_m_ohm(self, temp_c: float = 20.0) -> float:
        return resistance_per_m_ohm(self.bare_diameter_mm, temp_c, self.conductor)


def wire_spec(awg=None, wire_diameter_mm: float | None = None, insulation: str = "grade1",
              outer_diameter_mm: float | None = None, conductor: str = "copper") -> WireSpec:
    """Resolve a wire from an AWG gauge or a bare diameter (exactly one of them)."""
    if (awg is None) == (wire_diameter_mm is None):
        raise InputError("wire: give either an AWG gauge or a bare diameter in mm, not both or neither")
    n = None
    if awg is not None:
        n = parse_awg(awg)
        bare = awg_diameter_mm(n)
    else:
        bare = float(wire_diameter_mm)
        if not (math.isfinite(bare) and 0.005 <= bare <= 20.0):
            raise InputError(f"wire diameter {wire_diameter_mm} mm: must be between 0.005 and 20 mm")
    if outer_diameter_mm is None:
        outer = bare + insulation_build_mm(bare, insulation)
    else:
        outer = float(outer_diameter_mm)
        if not (math.isfinite(outer) and bare <= outer <= 100.0):  # 100 mm: the option's range
            raise InputError(f"wire outer diameter {outer_diameter_mm} mm: must be at least the bare "
                             f"diameter ({bare:.4g} mm) and at most 100 mm")
    resistivity_ohm_m(20.0, conductor)  # validates the conductor name
    return WireSpec(bare, outer, conductor, n, insulation)
