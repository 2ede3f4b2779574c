"""The simulated bench's search coil: a script's coil description checked, its winding, its true
inductance and the LC oscillator's frequency, all from the simulator's own models.

Written apart from :mod:`coilshift.analysis.models.coil` (no import from the analysis side), so
that the tone, the targets' responses and ``truth.json`` share one inductance that the analysis'
formulas are checked against rather than copied from:

* the winding (:class:`coilshift.sim.fields.Winding`): uniform current over the section; a single
  layer is a current sheet at the wire centres, half a wire outside the former;
* L by the quadrature of Maxwell's mutual inductance over the section
  (:func:`coilshift.sim.inductance.winding_inductance_h`), computed once per winding in a process;
* f = 1 / (2 pi sqrt(L C)) (Thomson's formula) with C the script's ``cap_nf`` alone: the coil's
  self-capacitance is left out (the simulator has no model of its own for it). f moves by half
  the ratio of the two capacitances, so a winding capacitance of tens of pF beside a tuning
  capacitor of hundreds of nF (the demo's coils) is below 1e-4; a script with a capacitor of
  only some pF gets a frequency that a real coil would not reach.

The keys are those of a coil file (``turns``, ``inner_diameter_mm``, ``length_mm``, ``depth_mm``,
``awg`` or ``wire_diameter_mm``, ``outer_wire_diameter_mm``, ``insulation``, ``conductor``,
``temp_c``, ``cap_nf``, ``lead_length_mm``, ``name``); the simulator uses the geometry, the wire's
diameter and ``cap_nf``, and checks the rest only for sense.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

from coilshift.logger.errors import InputError
from coilshift.sim.fields import Winding
from coilshift.sim.inductance import winding_inductance_h

COIL_KEYS = ("name", "turns", "inner_diameter_mm", "length_mm", "depth_mm", "awg", "wire_diameter_mm",
             "outer_wire_diameter_mm", "insulation", "conductor", "temp_c", "cap_nf", "lead_length_mm")
TEXT_KEYS = {"name": None, "insulation": ("grade1", "grade2", "none"), "conductor": ("copper", "aluminium")}
#: a coil description's limits: turns, dimensions (mm), tuning capacitor (nF: 1 fF to 1 F), leads (mm)
MAX_TURNS = 1e6
MAX_SIZE_MM = 20000.0
CAP_RANGE_NF = (1e-6, 1e9)
MAX_LEAD_MM = 1e6
#: the enamel build is not modelled: the fit checks allow 3 %
FIT_SLACK = 0.97
#: ASTM B258 writes the gauges 0000, 000, 00, 0 as -3..0
_AWG_WORDS = {"0000": -3, "4/0": -3, "000": -2, "3/0": -2, "00": -1, "2/0": -1, "0": 0, "1/0": 0}


@dataclass(frozen=True)
class BenchCoil:
    """A checked coil: its winding (metres), wire diameter (mm, 0 when none is named) and capacitor."""

    winding: Winding
    wire_mm: float
    cap_nf: float | None

    @property
    def inductance_h(self) -> float:
        """The winding's own inductance (H), uniform current density (:mod:`coilshift.sim.inductance`)."""
        w = self.winding
        return _inductance_h(w.turns, w.inner_radius_m, w.outer_radius_m, w.length_m)

    @property
    def lc_freq_hz(self) -> float | None:
        """1 / (2 pi sqrt(L C)) with C = ``cap_nf`` (no self-capacitance); None without ``cap_nf``."""
        if self.cap_nf is None:
            return None
        return 1.0 / (2.0 * math.pi * math.sqrt(self.inductance_h * self.cap_nf * 1e-9))


@lru_cache(maxsize=64)
def _inductance_h(turns: float, inner_radius_m: float, outer_radius_m: float, length_m: float) -> float:
    # the quadrature takes tens of milliseconds; a script asks for its coil's L several times
    return winding_inductance_h(turns, inner_radius_m, outer_radius_m, length_m)


def bench_coil(coil, where: str) -> BenchCoil:
    """Check a script's coil description and build the bench's coil; one-line InputError naming ``where``."""
    if not isinstance(coil, dict):
        raise InputError(f"{where}: expected a JSON object with the coil's keys")
    unknown = sorted(set(coil) - set(COIL_KEYS))
    if unknown:
        raise InputError(f"{where}: unknown key(s) {', '.join(unknown)} (known: {', '.join(COIL_KEYS)})")
    missing = [k for k in ("turns", "inner_diameter_mm", "length_mm") if coil.get(k) is None]
    if missing:
        raise InputError(f"{where}: missing key(s) {', '.join(missing)}")
    for key, allowed in TEXT_KEYS.items():
        v = coil.get(key)
        if v is not None and (not isinstance(v, str) or (allowed and v.strip().lower() not in allowed)):
            raise InputError(f"{where}: {key} must be " + (f"one of {', '.join(allowed)}" if allowed else "a string"))
    num = _numbers(coil, where)
    turns, inner, length, depth = num["turns"], num["inner_diameter_mm"], num["length_mm"], num["depth_mm"]
    if not 1 <= turns <= MAX_TURNS:
        raise InputError(f"{where}: turns must be from 1 to {MAX_TURNS:g}, got {coil['turns']!r}")
    if max(inner, length, depth) > MAX_SIZE_MM:
        raise InputError(f"{where}: dimensions above 20 m are not a coil this tool models")
    if not -200.0 <= num["temp_c"] <= 250.0:
        raise InputError(f"{where}: temp_c must be between -200 and 250 degC, got {coil['temp_c']!r}")
    if num["cap_nf"] is not None and not CAP_RANGE_NF[0] <= num["cap_nf"] <= CAP_RANGE_NF[1]:
        raise InputError(f"{where}: cap_nf must be from {CAP_RANGE_NF[0]:g} to {CAP_RANGE_NF[1]:g} nF, "
                         f"got {coil['cap_nf']!r}")
    if num["lead_length_mm"] > MAX_LEAD_MM:
        raise InputError(f"{where}: lead_length_mm must be at most {MAX_LEAD_MM:g} (1 km), "
                         f"got {coil['lead_length_mm']!r}")
    wire_mm = _wire_mm(coil, num, where)
    if wire_mm:
        _check_fit(turns, length, depth, wire_mm, where)
    r_in = 0.5e-3 * inner
    if depth == 0:
        r_in += 0.5e-3 * wire_mm  # a single layer's current sheet sits at the wire centres
    return BenchCoil(Winding(turns, r_in, r_in + 1e-3 * depth, 1e-3 * length), wire_mm, num["cap_nf"])


def _numbers(coil: dict, where: str) -> dict:
    """The numeric keys as floats (defaults for the optional ones; None for an absent cap_nf)."""
    out = {"depth_mm": 0.0, "temp_c": 20.0, "lead_length_mm": 0.0, "cap_nf": None,
           "wire_diameter_mm": None, "outer_wire_diameter_mm": None}
    for key in ("turns", "inner_diameter_mm", "length_mm", *out):
        v = coil.get(key)
        if v is None:
            continue
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            raise InputError(f"{where}: {key} must be a number, got {v!r}")
        x = float(v)
        if not math.isfinite(x):
            raise InputError(f"{where}: {key} must be a finite number, got {v!r}")
        if key in ("depth_mm", "lead_length_mm") and x < 0:
            raise InputError(f"{where}: {key} must be zero or more, got {v!r}")
        if key not in ("depth_mm", "lead_length_mm", "temp_c") and x <= 0:
            raise InputError(f"{where}: {key} must be positive, got {v!r}")
        out[key] = x
    return out


def _wire_mm(coil: dict, num: dict, where: str) -> float:
    """The wire's diameter (mm): the overall one when given, else the bare one (``wire_diameter_mm``
    or the gauge by ASTM B258, d = 0.127 mm x 92^((36 - n)/39)); 0 when the coil names no wire."""
    awg, bare = coil.get("awg"), num["wire_diameter_mm"]
    if awg is None and bare is None:
        if num["outer_wire_diameter_mm"] is not None:
            raise InputError(f"{where}: outer_wire_diameter_mm needs awg or wire_diameter_mm")
        return 0.0
    if awg is not None and bare is not None:
        raise InputError(f"{where}: give awg or wire_diameter_mm, not both")
    if awg is not None:
        bare = 0.127 * 92.0 ** ((36.0 - _gauge(awg, where)) / 39.0)
    elif not 0.005 <= bare <= 20.0:
        raise InputError(f"{where}: wire_diameter_mm must be between 0.005 and 20 mm, got {coil['wire_diameter_mm']!r}")
    outer = num["outer_wire_diameter_mm"]
    if outer is not None and outer < bare:
        raise InputError(f"{where}: outer_wire_diameter_mm {outer:g} is less than the bare wire ({bare:.3f} mm)")
    return bare if outer is None else outer


def _gauge(value, where: str) -> int:
    """An AWG number from 26, "26", "26 AWG", "00" or "2/0" (ASTM B258: -3..56)."""
    text = str(value).strip().upper().removesuffix("AWG").strip()
    if text in _AWG_WORDS:
        return _AWG_WORDS[text]
    # a gauge is written with one or two digits (or the words above): "00000" or "nan" is no wire
    numeric = isinstance(value, (int, float)) and not isinstance(value, bool)
    if not (numeric or (text.isdigit() and len(text) <= 2)):
        raise InputError(f"{where}: AWG {value!r}: not a wire gauge (use e.g. 26, 0, 00, 4/0)")
    n = float(value) if numeric else float(text)
    if not (math.isfinite(n) and n == int(n) and -3 <= n <= 56):
        raise InputError(f"{where}: AWG {value!r}: gauge must be a whole number from 0000 (-3) to 56")
    return int(n)


def _check_fit(turns: float, length: float, depth: float, d: float, where: str) -> None:
    """The turns must fit the winding: one layer side by side, or round wires packed densest
    (sqrt(3)/2 d^2 of section per turn; common practice)."""
    if depth == 0:
        if turns * d * FIT_SLACK > length:
            raise InputError(f"{where}: {turns:g} turns of {d:.3f} mm wire need at least {turns * d:.1f} mm "
                             f"of winding length in one layer (length_mm is {length:g}); give depth_mm "
                             f"for a multilayer winding")
        return
    if depth < d * FIT_SLACK:
        raise InputError(f"{where}: depth_mm {depth:g} is less than one wire ({d:.3f} mm); use "
                         f"depth_mm 0 for a single layer")
    if length < d * FIT_SLACK:
        raise InputError(f"{where}: length_mm {length:g} is less than one wire ({d:.3f} mm)")
    need = turns * d * d * math.sqrt(3.0) / 2.0
    if need * FIT_SLACK > length * depth:
        raise InputError(f"{where}: {turns:g} turns of {d:.3f} mm wire need at least {need:.1f} mm^2 of "
                         f"winding section; {length:g} x {depth:g} mm holds {length * depth:.1f} mm^2")
