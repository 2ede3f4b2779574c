"""The simulator's own table of target materials (conductivity at about 20 degC, relative
permeability), each with its source; a script may override either with ``sigma`` / ``mu_r``.

Kept apart from the analysis' table on purpose: the simulated bench is what the analysis is
checked against. The published constants are the same facts, so the values agree where both
name the same source.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class BenchMaterial:
    """A material on the simulated bench: sigma (S/m), mu_r, and where the numbers come from."""

    name: str
    sigma_s_per_m: float
    mu_r: float
    source: str


_TABLE = (
    BenchMaterial("copper", 1.0 / 0.017241e-6, 1.0,
                  "IEC 60028 annealed copper, 0.017241 ohm mm^2/m at 20 degC [pub]"),
    BenchMaterial("aluminium", 1.0 / 0.028264e-6, 1.0,
                  "IEC 60889 hard-drawn aluminium, 0.028264 ohm mm^2/m at 20 degC [pub]"),
    BenchMaterial("brass", 0.28 * 58.0e6, 1.0,
                  "cartridge brass C26000, 28 % IACS (ASM Handbook vol. 2, from memory) [unconfirmed]"),
    BenchMaterial("stainless_steel", 1.0 / 0.72e-6, 1.0,
                  "austenitic 304, 0.72 micro-ohm m, annealed (ASM Handbook vol. 1, from memory) [unconfirmed]"),
    BenchMaterial("mild_steel", 1.0 / 0.143e-6, 100.0,
                  "AISI 1010, 0.143 micro-ohm m (ASM Handbook vol. 1, from memory) [unconfirmed]; "
                  "mu_r 100 an assumed low-field value (common practice)"),
    BenchMaterial("ferrite", 0.1, 2200.0,
                  "MnZn power ferrite, initial permeability 2200, about 10 ohm m (datasheet values of a "
                  "common grade, from memory) [unconfirmed]"),
    BenchMaterial("gold", 1.0 / 2.44e-8, 1.0,
                  "pure gold, 2.44e-8 ohm m (CRC Handbook, from memory) [unconfirmed]"),
    BenchMaterial("plastic", 0.0, 1.0, "non-metal: no conduction, no magnetisation"),
)
BENCH_MATERIALS: dict[str, BenchMaterial] = {m.name: m for m in _TABLE}

_ALIASES = {"cu": "copper", "al": "aluminium", "aluminum": "aluminium", "steel": "mild_steel",
            "iron": "mild_steel", "stainless": "stainless_steel", "ss304": "stainless_steel",
            "nonmetal": "plastic", "non_metal": "plastic", "au": "gold"}


def bench_material(name: str) -> BenchMaterial | None:
    """The material for a name or alias (case-insensitive; spaces and ``-`` read as ``_``), else None."""
    key = name.strip().lower().replace(" ", "_").replace("-", "_")
    return BENCH_MATERIALS.get(_ALIASES.get(key, key))
