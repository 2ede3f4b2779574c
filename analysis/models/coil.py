"""Search-coil design: inductance, wire length and resistance, self-capacitance, LC frequency.

A coil is described by a :class:`CoilDesign` (from options or a small JSON file, see
``load_coil``) and analysed by :func:`analyse_coil` into a :class:`CoilReport`.

Geometry (all lengths in mm)
----------------------------
- ``inner_diameter_mm``: diameter of the former (inside of the winding);
- ``length_mm``: axial length of the winding;
- ``depth_mm``: radial build of the winding (outer minus inner radius); 0 for a single layer.

Method, picked from the geometry (r = mean radius, l = length, c = depth):

- ``depth_mm == 0``: single-layer solenoid, Wheeler (1928) L = N^2 r^2 / (9 r + 10 l) [uH, in],
  about 1 % for l > 0.8 r; shorter coils use the exact current-sheet value (Lorenz / Nagaoka),
  which is always reported beside it;
- section small against the radius (l and c both <= 0.2 r): thin ring, L = mu0 N^2 r
  [ln(8 r / g) - 2] with g = 0.2235 (l + c) (Maxwell's geometric mean distance) -- the usual
  bundle-wound search loop;
- flat (l <= c / 4, or less than two wire diameters): Wheeler flat spiral N^2 r^2 / (8 r + 11 c),
  used for 0.3 r <= c <= 1.4 r;
- otherwise: Wheeler multilayer 0.8 N^2 r^2 / (6 r + 9 l + 10 c), used when the three terms
  are comparable (largest <= 1.5 x smallest).

Outside those ranges ``inductance_uh`` is the numerical uniform-current-density value (a
Maxwell filament sum), which is reported for every thick winding; ``wheeler_uh`` is always
given, and a round-wire filament sum when the wire is known. ``method`` names what was used.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, fields

import numpy as np

from coilshift.logger.errors import InputError
from coilshift.logger.textfile import read_json

from coilshift.analysis.models import wire as wiremod
from coilshift.analysis.models.winding import winding_inductance

# Medhurst (1947) self-capacitance factor H (pF per cm of coil diameter) against l/D for a
# single-layer coil, table values as quoted from Wireless Engineer 24 (1947) 35-43 and 80-92.
MEDHURST_TABLE = (
    (1.0, 0.46), (1.5, 0.47), (2.0, 0.50), (2.5, 0.56), (3.0, 0.61),
    (3.5, 0.67), (4.0, 0.72), (4.5, 0.77), (5.0, 0.81),
)

JSON_KEYS = ("name", "turns", "inner_diameter_mm", "length_mm", "depth_mm", "awg", "wire_diameter_mm",
             "outer_wire_diameter_mm", "insulation", "conductor", "temp_c", "cap_nf", "lead_length_mm")


@dataclass
class CoilDesign:
    """What a builder knows about a coil (lengths in mm).

    Attributes
    ----------
    turns : number of turns (>= 1)
    inner_diameter_mm : former diameter (inside of the winding)
    length_mm : axial length of the winding
    depth_mm : radial build of the winding; 0 = single layer
    awg, wire_diameter_mm : the wire, by AWG gauge or bare diameter (at most one)
    temp_c : winding temperature for the resistance
    cap_nf : tuning capacitor across the coil, for the LC frequency
    outer_wire_diameter_mm : overall diameter with enamel (default: approximate build for ``insulation``)
    insulation : enamel build "grade1" (default), "grade2" or "none"
    conductor : "copper" (IEC 60028) or "aluminium" (IEC 60889)
    lead_length_mm : extra wire for the two leads, added to the winding length
    name : a label
    """

    turns: float
    inner_diameter_mm: float
    length_mm: float
    depth_mm: float = 0.0
    awg: int | str | None = None
    wire_diameter_mm: float | None = None
    temp_c: float = 20.0
    cap_nf: float | None = None
    outer_wire_diameter_mm: float | None = None
    insulation: str = "grade1"
    conductor: str = "copper"
    lead_length_mm: float = 0.0
    name: str = ""

    def to_dict(self) -> dict:
        return {k: v for k, v in asdict(self).items() if v is not None}


@dataclass
class CoilReport:
    """Results of :func:`analyse_coil`. Inductances in uH, lengths in mm unless named."""

    design: CoilDesign
    method: str
    accuracy_note: str
    inductance_uh: float
    mean_radius_mm: float
    in_stated_range: bool
    wheeler_uh: float
    exact_inductance_uh: float | None = None
    nagaoka_k: float | None = None
    numeric_inductance_uh: float | None = None
    round_wire_inductance_uh: float | None = None
    wire_bare_diameter_mm: float | None = None
    wire_outer_diameter_mm: float | None = None
    wire_length_m: float = 0.0
    resistance_ohm: float | None = None
    resistance_per_km_ohm: float | None = None
    self_capacitance_pf: float | None = None
    srf_hz: float | None = None
    lc_freq_hz: float | None = None
    skin_depth_mm: float | None = None
    q_dc_bound: float | None = None
    notes: list[str] = field(default_factory=list)

    @property
    def inductance_h(self) -> float:
        return self.inductance_uh * 1e-6

    @property
    def outer_radius_mm(self) -> float:
        d = self.design
        if d.depth_mm > 0:
            return d.inner_diameter_mm / 2.0 + d.depth_mm
        return d.inner_diameter_mm / 2.0 + (self.wire_outer_diameter_mm or 0.0)

    @property
    def inner_radius_mm(self) -> float:
        return self.design.inner_diameter_mm / 2.0

    def to_dict(self) -> dict:
        out = {f.name: getattr(self, f.name) for f in fields(self) if f.name != "design"}
        out["design"] = self.design.to_dict()
        return out


#: tuning capacitors, lead lengths and turns a description may give (the options' ranges)
CAP_RANGE_NF = (1e-6, 1e9)
MAX_LEAD_MM = 1e6
MAX_TURNS = 1e6


def _positive(value, what: str, where: str, allow_zero: bool = False) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{where}: {what} must be a number, got {value!r}") from None
    if not math.isfinite(x) or x < 0 or (x == 0 and not allow_zero):
        raise InputError(f"{where}: {what} must be {'zero or more' if allow_zero else 'positive'}, got {value!r}")
    return x


def check_design(design: CoilDesign, where: str = "coil") -> wiremod.WireSpec | None:
    """Refuse impossible geometry with an InputError naming ``where``; return the resolved wire."""
    turns = _positive(design.turns, "turns", where)
    if not 1 <= turns <= MAX_TURNS:
        raise InputError(f"{where}: turns must be from 1 to {MAX_TURNS:g}, got {design.turns!r}")
    inner = _positive(design.inner_diameter_mm, "inner_diameter_mm", where)
    length = _positive(design.length_mm, "length_mm", where)
    depth = _positive(design.depth_mm, "depth_mm", where, allow_zero=True)
    if inner > 20000 or length > 20000 or depth > 20000:
        raise InputError(f"{where}: dimensions above 20 m are not a coil this tool models")
    temp = float(design.temp_c)
    if not (math.isfinite(temp) and -200.0 <= temp <= 250.0):
        raise InputError(f"{where}: temp_c must be between -200 and 250 degC, got {design.temp_c!r}")
    if design.cap_nf is not None:
        cap = _positive(design.cap_nf, "cap_nf", where)
        if not CAP_RANGE_NF[0] <= cap <= CAP_RANGE_NF[1]:  # 1 fF to 1 F: the --cap-nf option's range
            raise InputError(f"{where}: cap_nf must be from {CAP_RANGE_NF[0]:g} to {CAP_RANGE_NF[1]:g} nF, "
                             f"got {design.cap_nf!r}")
    if _positive(design.lead_length_mm, "lead_length_mm", where, allow_zero=True) > MAX_LEAD_MM:
        raise InputError(f"{where}: lead_length_mm must be at most {MAX_LEAD_MM:g} (1 km), "
                         f"got {design.lead_length_mm!r}")
    if design.awg is None and design.wire_diameter_mm is None:
        if design.outer_wire_diameter_mm is not None:
            raise InputError(f"{where}: outer_wire_diameter_mm needs awg or wire_diameter_mm")
        return None
    if design.awg is not None and design.wire_diameter_mm is not None:
        raise InputError(f"{where}: give awg or wire_diameter_mm, not both")
    try:
        wire = wiremod.wire_spec(design.awg, design.wire_diameter_mm, design.insulation,
                                 design.outer_wire_diameter_mm, design.conductor)
    except InputError as exc:
        raise InputError(f"{where}: {exc}") from None
    d = wire.outer_diameter_mm
    slack = 0.97  # the enamel build is approximate; allow 3 %
    if depth == 0:
        if turns * d * slack > length:
            raise InputError(f"{where}: {turns:g} turns of {d:.3f} mm wire need at least {turns * d:.1f} mm "
                             f"of winding length in one layer (length_mm is {length:g}); give depth_mm "
                             f"for a multilayer winding")
    else:
        if depth < d * slack:
            raise InputError(f"{where}: depth_mm {depth:g} is less than one wire ({d:.3f} mm); use "
                             f"depth_mm 0 for a single layer")
        if length < d * slack:
            raise InputError(f"{where}: length_mm {length:g} is less than one wire ({d:.3f} mm)")
        # densest packing of round wires: sqrt(3)/2 d^2 of section per turn
        need = turns * d * d * math.sqrt(3.0) / 2.0
        if need * slack > length * depth:
            raise InputError(f"{where}: {turns:g} turns of {d:.3f} mm wire need at least {need:.1f} mm^2 of "
                             f"winding section; {length:g} x {depth:g} mm holds {length * depth:.1f} mm^2")
    return wire


def load_coil(path) -> CoilDesign:
    """Read a coil description from a JSON file (one object; keys as in :class:`CoilDesign`).

    Required: ``turns``, ``inner_diameter_mm``, ``length_mm``. Optional: ``depth_mm`` (0),
    ``awg`` or ``wire_diameter_mm``, ``outer_wire_diameter_mm``, ``insulation``, ``conductor``,
    ``temp_c`` (20), ``cap_nf``, ``lead_length_mm`` (0), ``name``. Unknown keys and impossible
    geometry raise InputError naming the file.
    """
    return design_from_dict(read_json(path, "coil file"), str(path))


def design_from_dict(obj, where: str = "coil") -> CoilDesign:
    """A :class:`CoilDesign` from a dict with the JSON keys; checks keys and geometry."""
    if not isinstance(obj, dict):
        raise InputError(f"{where}: expected a JSON object with the coil's keys")
    unknown = sorted(set(obj) - set(JSON_KEYS))
    if unknown:
        raise InputError(f"{where}: unknown key(s) {', '.join(unknown)} (known: {', '.join(JSON_KEYS)})")
    missing = [k for k in ("turns", "inner_diameter_mm", "length_mm") if obj.get(k) is None]
    if missing:
        raise InputError(f"{where}: missing key(s) {', '.join(missing)}")
    kwargs = {k: v for k, v in obj.items() if v is not None}
    for key in ("insulation", "conductor", "name"):
        if key in kwargs and not isinstance(kwargs[key], str):
            raise InputError(f"{where}: {key} must be a string")
    for key in set(kwargs) - {"insulation", "conductor", "name", "awg"}:
        if isinstance(kwargs[key], bool) or not isinstance(kwargs[key], (int, float)):
            raise InputError(f"{where}: {key} must be a number, got {kwargs[key]!r}")
    design = CoilDesign(**kwargs)
    check_design(design, where)
    return design


def medhurst_h_factor(length_over_diameter: float) -> float:
    """Medhurst's self-capacitance factor H (pF per cm of diameter) for a single-layer coil.

    Interpolates Medhurst's table (1947) for 1 <= l/D <= 5; outside it uses the fit
    H = 0.1126 l/D + 0.08 + 0.27 / sqrt(l/D) usually quoted with it (approximate, +-10 %).
    """
    x = float(length_over_diameter)
    xs = [p[0] for p in MEDHURST_TABLE]
    if xs[0] <= x <= xs[-1]:
        return float(np.interp(x, xs, [p[1] for p in MEDHURST_TABLE]))
    return 0.1126 * x + 0.08 + 0.27 / math.sqrt(x)


def medhurst_capacitance_pf(mean_diameter_mm: float, length_mm: float) -> float:
    """Self-capacitance C = H(l/D) * D[cm] pF of a single-layer solenoid (Medhurst 1947).

    R. G. Medhurst, "H.F. resistance and self-capacitance of single-layer solenoids",
    Wireless Engineer 24 (1947) 35-43 and 80-92. For an isolated coil; a nearby ground, a
    former of high permittivity or a spaced winding change it.
    """
    return medhurst_h_factor(length_mm / mean_diameter_mm) * mean_diameter_mm / 10.0


def lc_frequency_hz(inductance_h, capacitance_f):
    """Resonant frequency f = 1 / (2 pi sqrt(L C)) (Thomson's formula)."""
    return 1.0 / (2.0 * math.pi * math.sqrt(inductance_h * capacitance_f))


def capacitance_for_frequency_nf(inductance_h: float, freq_hz: float) -> float:
    """Tuning capacitance C = 1 / ((2 pi f)^2 L) in nF for a wanted LC frequency."""
    return 1e9 / ((2.0 * math.pi * freq_hz) ** 2 * inductance_h)


def analyse_coil(design: CoilDesign) -> CoilReport:
    """Inductance, wire length, resistance, self-capacitance and LC frequency of a coil.

    Parameters
    ----------
    design : CoilDesign

    Returns
    -------
    CoilReport
        ``inductance_uh`` by the method named in ``method`` (Wheeler 1928 formulas, or the
        thin-ring GMD formula for bundle-wound loops), ``exact_inductance_uh`` (current sheet,
        single-layer coils), ``numeric_inductance_uh`` (uniform-current-density filament sum,
        thick windings), DC ``resistance_ohm`` at ``temp_c`` (IEC 60028), Medhurst's
        ``self_capacitance_pf`` and ``srf_hz`` (single-layer coils), ``lc_freq_hz`` with
        ``cap_nf`` (plus the self-capacitance when known).
    """
    wire = check_design(design)
    notes: list[str] = []
    inner_r = design.inner_diameter_mm / 2.0
    if design.depth_mm == 0:
        mean_r = inner_r + (wire.outer_diameter_mm / 2.0 if wire else 0.0)
        if wire is None:
            notes.append("no wire given: mean radius taken as the former radius")
    else:
        mean_r = inner_r + design.depth_mm / 2.0
    lv = winding_inductance(design, mean_r, wire)
    wire_length_m, resistance, per_km = _wire_length_and_resistance(design, mean_r, wire, notes)
    cself, srf, lc, skin, q = _frequencies(design, lv.inductance_uh, mean_r, wire, resistance, notes)
    return CoilReport(
        design=design, method=lv.method, accuracy_note=lv.note, inductance_uh=float(lv.inductance_uh),
        mean_radius_mm=mean_r, in_stated_range=bool(lv.in_range), wheeler_uh=float(lv.wheeler_uh),
        exact_inductance_uh=lv.exact_uh, nagaoka_k=lv.nagaoka_k, numeric_inductance_uh=lv.numeric_uh,
        round_wire_inductance_uh=lv.round_wire_uh,
        wire_bare_diameter_mm=wire.bare_diameter_mm if wire else None,
        wire_outer_diameter_mm=wire.outer_diameter_mm if wire else None,
        wire_length_m=wire_length_m, resistance_ohm=resistance, resistance_per_km_ohm=per_km,
        self_capacitance_pf=cself, srf_hz=srf, lc_freq_hz=lc, skin_depth_mm=skin, q_dc_bound=q,
        notes=notes,
    )


def _wire_length_and_resistance(design: CoilDesign, mean_r: float, wire, notes: list[str]):
    """Wire length (m), DC resistance (ohm) and resistance per km; appends a note without a wire."""
    n = float(design.turns)
    # wire length: turns x mean circumference, each turn a helix step of the pitch in one layer
    pitch = design.length_mm / n if design.depth_mm == 0 else 0.0
    turn_mm = math.hypot(2.0 * math.pi * mean_r, pitch)
    wire_length_m = (n * turn_mm + design.lead_length_mm) / 1000.0
    resistance = per_km = None
    if wire is not None:
        per_m = wire.resistance_per_m_ohm(design.temp_c)
        resistance = per_m * wire_length_m
        per_km = per_m * 1000.0
    else:
        notes.append("no wire given: resistance not computed")
    return wire_length_m, resistance, per_km


def _frequencies(design: CoilDesign, inductance_uh: float, mean_r: float, wire, resistance, notes: list[str]):
    """Self-capacitance (pF) and SRF of a single layer; LC frequency, skin depth and Q with ``cap_nf``."""
    cself = srf = None
    if design.depth_mm == 0:
        cself = medhurst_capacitance_pf(2.0 * mean_r, design.length_mm)
        srf = lc_frequency_hz(inductance_uh * 1e-6, cself * 1e-12)
        notes.append("self-capacitance by Medhurst (1947) for an isolated single-layer coil; "
                     "the SRF from it is a lumped estimate")
    lc = skin = q = None
    if design.cap_nf is not None:
        c_total = design.cap_nf * 1e-9 + (cself or 0.0) * 1e-12
        lc = lc_frequency_hz(inductance_uh * 1e-6, c_total)
        if wire is not None:
            skin = wiremod.skin_depth_mm(lc, design.temp_c, wire.conductor)
            q = 2.0 * math.pi * lc * inductance_uh * 1e-6 / resistance
            if wire.bare_diameter_mm > 2.0 * skin:
                notes.append(f"wire diameter exceeds twice the skin depth ({skin:.3g} mm) at {lc:.4g} Hz: "
                             f"AC resistance is higher than the DC value")
        if srf is not None and lc > 0.3 * srf:
            notes.append("operating frequency is above 0.3 x SRF: the effective inductance rises")
    return cself, srf, lc, skin, q


def as_report(coil) -> CoilReport:
    """Accept a CoilDesign or a CoilReport and return the report."""
    if isinstance(coil, CoilReport):
        return coil
    if isinstance(coil, CoilDesign):
        return analyse_coil(coil)
    raise TypeError(f"expected CoilDesign or CoilReport, got {type(coil).__name__}")
