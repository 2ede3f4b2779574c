"""The inductance of a winding: the formula picked from its geometry, and the others beside it.

The choice (single-layer Wheeler or the exact current sheet, thin ring, flat spiral, multilayer
Wheeler or the numeric filament sum) and its ranges are described in :mod:`.coil`; the formulas
themselves live in :mod:`.inductance`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from coilshift.analysis.models import inductance as ind

if TYPE_CHECKING:
    from coilshift.analysis.models.coil import CoilDesign


#: Wheeler's flat spiral is used only while within this fraction of the filament sum over the real
#: section (its accuracy for a winding of no thickness, docs/models.md)
FLAT_SPIRAL_AGREEMENT = 0.02


def pick_method(design: CoilDesign, mean_r_mm: float, wire) -> str:
    """``single_layer``, ``thin_ring``, ``flat_spiral`` or ``multilayer`` from the winding's shape."""
    l, c = design.length_mm, design.depth_mm
    if c == 0:
        return "single_layer"
    if max(l, c) <= 0.2 * mean_r_mm:
        return "thin_ring"
    if l <= 0.25 * c or (wire is not None and l < 2.0 * wire.outer_diameter_mm):
        return "flat_spiral"
    return "multilayer"


@dataclass
class WindingInductance:
    """The inductance by the chosen method, with the values of the others and the accuracy note."""

    inductance_uh: float
    method: str
    note: str
    in_range: bool
    wheeler_uh: float
    exact_uh: float | None = None
    nagaoka_k: float | None = None
    numeric_uh: float | None = None
    round_wire_uh: float | None = None


def winding_inductance(design: CoilDesign, mean_r_mm: float, wire) -> WindingInductance:
    """Pick the method from the geometry (see :mod:`.coil`) and compute the inductance.

    Parameters
    ----------
    design : the coil (its geometry already checked)
    mean_r_mm : mean radius of the winding, mm
    wire : the resolved ``WireSpec``, or None when no wire is given

    Returns
    -------
    WindingInductance
        inductances in uH: the chosen one, Wheeler's, the exact current sheet (single layer),
        the numeric filament sum (thick windings) and the round-wire sum (wire known)
    """
    method_key = pick_method(design, mean_r_mm, wire)
    if method_key == "single_layer":
        lv = _single_layer(design, mean_r_mm)
    else:
        lv = _thick_winding(design, mean_r_mm, method_key)
    n = float(design.turns)
    if wire is not None and n <= 20000:
        inner_r = design.inner_diameter_mm / 2.0
        lv.round_wire_uh = ind.round_wire_rings_h(n, inner_r * 1e-3, design.length_mm * 1e-3,
                                                  design.depth_mm * 1e-3, wire.outer_diameter_mm * 1e-3,
                                                  wire.bare_diameter_mm * 1e-3) * 1e6
    return lv


def _single_layer(design: CoilDesign, mean_r_mm: float) -> WindingInductance:
    """Wheeler's single-layer formula in its stated range l > 0.8 r, else the exact current sheet."""
    n = float(design.turns)
    wheeler = ind.wheeler_single_layer_uh(n, mean_r_mm / 25.4, design.length_mm / 25.4)
    in_range = design.length_mm > 0.8 * mean_r_mm
    exact = ind.current_sheet_h(n, mean_r_mm * 1e-3, design.length_mm * 1e-3) * 1e6
    nagaoka = ind.nagaoka_coefficient(design.length_mm / (2.0 * mean_r_mm))
    if in_range:
        inductance, method = wheeler, "Wheeler 1928 single-layer solenoid"
        note = "about 1 % for l > 0.8 r (Wheeler 1928)"
    else:
        inductance, method = exact, "current sheet (Lorenz; Nagaoka 1909)"
        note = (f"l/r = {design.length_mm / mean_r_mm:.2f} is outside Wheeler's stated range l > 0.8 r, so "
                f"the exact current-sheet value is used (Wheeler: {wheeler:.4g} uH)")
    note += ("; exact_inductance_uh is the current sheet; neither includes the round-wire "
             "corrections (Rosa), see round_wire_inductance_uh")
    return WindingInductance(inductance, method, note, in_range, wheeler, exact_uh=exact, nagaoka_k=nagaoka)


def _thick_winding(design: CoilDesign, mean_r_mm: float, method_key: str) -> WindingInductance:
    """Thin ring, flat spiral or multilayer, each with the numeric filament sum beside it."""
    n = float(design.turns)
    r_in, l_in, c_in = mean_r_mm / 25.4, design.length_mm / 25.4, design.depth_mm / 25.4
    inner_r = design.inner_diameter_mm / 2.0
    wheeler = ind.wheeler_multilayer_uh(n, r_in, l_in, c_in)
    terms = (6.0 * r_in, 9.0 * l_in, 10.0 * c_in)
    numeric = ind.uniform_section_h(n, inner_r * 1e-3, (inner_r + design.depth_mm) * 1e-3,
                                    design.length_mm * 1e-3) * 1e6
    numeric_method = "uniform-current-density filament sum (Maxwell)"
    if method_key == "thin_ring":
        inductance = ind.thin_ring_coil_h(n, mean_r_mm * 1e-3, design.length_mm * 1e-3,
                                          design.depth_mm * 1e-3) * 1e6
        in_range = True
        method = "thin ring, Maxwell GMD (Rosa & Grover 1912)"
        note = ("section <= 0.2 r: neglected terms of order (section/r)^2, under about 1 %; "
                f"Wheeler multilayer would give {wheeler:.4g} uH (its terms are not comparable)")
    elif method_key == "flat_spiral":
        wheeler = ind.wheeler_flat_spiral_uh(n, r_in, c_in)
        # Wheeler states about 1 % for c > 0.2 r; against a numerical thin-annulus sum we find
        # within 2 % only for 0.3 r <= c <= 1.4 r (docs/models.md), so that is the range used.
        # The formula is for a winding of no thickness: a thick one (l up to c/4 comes here) can
        # be further off, so it is also held to 2 % of the filament sum over the real section
        in_range = 0.3 * mean_r_mm <= design.depth_mm <= 1.4 * mean_r_mm
        near = abs(wheeler / numeric - 1.0) <= FLAT_SPIRAL_AGREEMENT
        if in_range and near:
            inductance, method = wheeler, "Wheeler 1928 flat spiral"
            note = "about 1-2 % for 0.3 r <= c <= 1.4 r (Wheeler 1928; checked numerically)"
        elif in_range:
            in_range = False
            inductance, method = numeric, numeric_method
            note = (f"Wheeler's flat spiral ({wheeler:.4g} uH) is {100 * (wheeler / numeric - 1):+.1f} % from the "
                    f"filament sum over this {design.length_mm:g} mm thick section, more than its 2 %, so the "
                    "numeric value is used")
        else:
            inductance, method = numeric, numeric_method
            note = (f"c/r = {design.depth_mm / mean_r_mm:.2f} is outside the range where Wheeler's flat "
                    f"spiral holds (0.3..1.4), so the numeric value is used (Wheeler: {wheeler:.4g} uH)")
    else:
        # "about 1 % when the three terms are comparable": numerically within 1 % up to a ratio 1.5
        in_range = max(terms) <= 1.5 * min(terms)
        if in_range:
            inductance, method = wheeler, "Wheeler 1928 multilayer"
            note = "about 1 % when 6r, 9l and 10c are comparable (Wheeler 1928)"
        else:
            inductance, method = numeric, numeric_method
            note = (f"6r, 9l, 10c = {terms[0]:.3g}, {terms[1]:.3g}, {terms[2]:.3g} in are not comparable, "
                    f"outside Wheeler's stated accuracy, so the numeric value is used "
                    f"(Wheeler: {wheeler:.4g} uH)")
    note += f"; numeric_inductance_uh is a {numeric_method}"
    return WindingInductance(inductance, method, note, in_range, wheeler, numeric_uh=numeric)
