"""The coil options (:func:`coilshift.cli.options.add_coil_arguments`) read back as a checked
coil design; shared by the commands that model a coil (coil, target)."""

from __future__ import annotations

# option dest -> CoilDesign field
_COIL_OPTIONS = ("turns", "inner_diameter_mm", "length_mm", "depth_mm", "awg", "wire_diameter_mm",
                 "outer_wire_diameter_mm", "insulation", "conductor", "temp_c", "cap_nf", "lead_length_mm")


def design_from_args(args):
    """A checked CoilDesign from --coil FILE and/or the coil options."""
    from coilshift.analysis.models.coil import CoilDesign, check_design, load_coil
    from coilshift.logger.errors import InputError

    given = {k: getattr(args, k) for k in _COIL_OPTIONS if getattr(args, k, None) is not None}
    if args.coil:
        base = load_coil(args.coil).to_dict()
        if "awg" in given:
            base.pop("wire_diameter_mm", None)
        if "wire_diameter_mm" in given:
            base.pop("awg", None)
        base.update(given)
        where = f"{args.coil} (with command-line options)" if given else args.coil
    else:
        missing = [k for k in ("turns", "inner_diameter_mm", "length_mm") if k not in given]
        if missing:
            opts = ", ".join("--" + k.replace("_", "-") for k in missing)
            raise InputError(f"coil: give --coil FILE or {opts}")
        base, where = given, "coil options"
    design = CoilDesign(**base)
    check_design(design, where)
    return design
