"""Electrical and magnetic constants of common target materials, with where each value comes from.

Conductivities are at about 20 degC. Real targets vary: alloys, cold work, plating and shape
all move these numbers, steel's permeability most of all. Give ``sigma``/``mu_r`` explicitly in
a target spec when you know better.
"""

from __future__ import annotations

from dataclasses import dataclass

IACS_S_PER_M = 58.0e6  # 100 % IACS: annealed copper, IEC 60028 (1 / 0.017241 ohm mm^2/m)


@dataclass(frozen=True)
class Material:
    """A target material: conductivity (S/m), relative permeability, and the source of both."""

    name: str
    conductivity_s_per_m: float
    mu_r: float
    source: str


MATERIALS: dict[str, Material] = {
    "copper": Material(
        "copper", 1.0 / 0.017241e-6, 1.0,
        "IEC 60028 annealed copper, 0.017241 ohm mm^2/m at 20 degC (100 % IACS) [pub]"),
    "aluminium": Material(
        "aluminium", 1.0 / 0.028264e-6, 1.0,
        "IEC 60889 hard-drawn aluminium, 0.028264 ohm mm^2/m at 20 degC (61 % IACS) [pub]; "
        "cast and wrought alloys are lower (about 30-55 % IACS)"),
    "brass": Material(
        "brass", 0.28 * IACS_S_PER_M, 1.0,
        "cartridge brass C26000, 28 % IACS (ASM Handbook vol. 2 / Copper Development Association "
        "data, from memory) [unconfirmed]"),
    "stainless_steel": Material(
        "stainless_steel", 1.0 / 0.72e-6, 1.0,
        "austenitic 304, resistivity 72 micro-ohm cm at 20 degC (ASM Handbook vol. 1 and producers' "
        "datasheets, from memory) [unconfirmed]; annealed mu_r about 1.0-1.02, cold work raises it"),
    "mild_steel": Material(
        "mild_steel", 1.0 / 0.143e-6, 100.0,
        "low-carbon steel (AISI 1010), resistivity 0.143 micro-ohm m at 20 degC (ASM Handbook vol. 1, "
        "from memory) [unconfirmed]; mu_r = 100 is an assumed low-field effective value (common "
        "practice; real parts range from about 50 to over 1000)"),
    "ferrite": Material(
        "ferrite", 0.1, 2200.0,
        "MnZn power ferrite: initial permeability 2200 and resistivity about 10 ohm m (manufacturer "
        "datasheet values for a common grade, from memory) [unconfirmed]"),
    "gold": Material(
        "gold", 1.0 / 2.44e-8, 1.0,
        "pure gold, 2.44e-8 ohm m at 20 degC (CRC Handbook of Chemistry and Physics, from memory) "
        "[unconfirmed]; jewellery alloys are several times more resistive"),
    "plastic": Material(
        "plastic", 0.0, 1.0,
        "non-metal (plastic, wood, dry stone): no conduction, no magnetisation; no response"),
}

ALIASES = {
    "cu": "copper", "al": "aluminium", "aluminum": "aluminium", "steel": "mild_steel",
    "iron": "mild_steel", "stainless": "stainless_steel", "ss304": "stainless_steel",
    "nonmetal": "plastic", "non_metal": "plastic", "non-metal": "plastic", "au": "gold",
}


def find_material(name: str) -> Material | None:
    """The material for a name or alias (case-insensitive, ``-``/space as ``_``), else None."""
    key = name.strip().lower().replace(" ", "_")
    key = ALIASES.get(key, key)
    key = ALIASES.get(key.replace("_", "-"), key)
    return MATERIALS.get(key)
