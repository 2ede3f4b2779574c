"""``coilshift coil``: inductance, wire, resistance, self-capacitance and LC frequency of a coil."""

from __future__ import annotations

ORDER = 60

# option dest -> CoilDesign field
_COIL_OPTIONS = ("turns", "inner_diameter_mm", "length_mm", "depth_mm", "awg", "wire_diameter_mm",
                 "outer_wire_diameter_mm", "insulation", "conductor", "temp_c", "cap_nf", "lead_length_mm")


def add_coil_arguments(p) -> None:
    """The coil options shared by the commands that model a coil (``coil``, ``target``)."""
    g = p.add_argument_group("coil (a JSON file with --coil, or the options; options override the file)")
    g.add_argument("--coil", metavar="FILE", help="coil description file (JSON; see docs/models.md)")
    g.add_argument("--turns", type=float, metavar="N", help="number of turns")
    g.add_argument("--inner-diameter-mm", type=float, metavar="D", help="former diameter (inside of the winding)")
    g.add_argument("--length-mm", type=float, metavar="L", help="axial length of the winding")
    g.add_argument("--depth-mm", type=float, metavar="T", help="radial build of the winding (0 = single layer)")
    w = g.add_mutually_exclusive_group()
    w.add_argument("--awg", metavar="G", help="wire gauge (AWG, ASTM B258), e.g. 26 or 00")
    w.add_argument("--wire-diameter-mm", type=float, metavar="W", help="bare wire diameter")
    g.add_argument("--outer-wire-diameter-mm", type=float, metavar="W",
                   help="wire diameter over the enamel (default: approximate build for --insulation)")
    g.add_argument("--insulation", choices=("grade1", "grade2", "none"), help="enamel build (default grade1)")
    g.add_argument("--conductor", choices=("copper", "aluminium"), help="wire metal (default copper)")
    g.add_argument("--temp-c", type=float, metavar="T", help="winding temperature, degC (default 20)")
    g.add_argument("--cap-nf", type=float, metavar="C", help="tuning capacitor across the coil, nF")
    g.add_argument("--lead-length-mm", type=float, metavar="L", help="extra wire for the leads")


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


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "coil", help="predict a coil's inductance, resistance and LC frequency",
        description="Predict a search coil's inductance (Wheeler 1928 with the exact current-sheet, "
                    "thin-ring or numerical value where they fit better), wire length, DC resistance "
                    "(IEC 60028 copper), self-capacitance (Medhurst 1947) and the LC frequency with a "
                    "tuning capacitor.")
    add_coil_arguments(p)
    p.add_argument("--for-freq-hz", type=float, metavar="F",
                   help="also give the tuning capacitor for this LC frequency")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(func=run)


def _fmt(x, unit: str, digits: int = 5) -> str:
    return "-" if x is None else f"{x:.{digits}g} {unit}"


def run(args) -> int:
    import math

    from coilshift.analysis.models.coil import analyse_coil, capacitance_for_frequency_nf
    from coilshift.cli.common import print_json
    from coilshift.logger.errors import InputError

    design = design_from_args(args)
    rep = analyse_coil(design)
    tune_nf = None
    if args.for_freq_hz is not None:
        if not (math.isfinite(args.for_freq_hz) and args.for_freq_hz > 0):
            raise InputError(f"--for-freq-hz {args.for_freq_hz}: must be positive")
        tune_nf = capacitance_for_frequency_nf(rep.inductance_h, args.for_freq_hz)
        if rep.self_capacitance_pf is not None:
            tune_nf -= rep.self_capacitance_pf * 1e-3
        if tune_nf <= 0:
            raise InputError(f"--for-freq-hz {args.for_freq_hz:g}: above the coil's self-resonance")
    if args.json:
        out = rep.to_dict()
        if tune_nf is not None:
            out["tuning_cap_nf"] = tune_nf
            out["tuning_for_freq_hz"] = args.for_freq_hz
        print_json(out)
        return 0
    lines = [
        f"coil {design.name or ''}".rstrip(),
        f"  method             {rep.method}",
        f"  inductance         {_fmt(rep.inductance_uh, 'uH')}",
        f"  accuracy           {rep.accuracy_note}",
        f"  Wheeler            {_fmt(rep.wheeler_uh, 'uH')}",
    ]
    if rep.exact_inductance_uh is not None:
        lines.append(f"  current sheet      {_fmt(rep.exact_inductance_uh, 'uH')} (Nagaoka K = {rep.nagaoka_k:.6f})")
    if rep.numeric_inductance_uh is not None:
        lines.append(f"  numeric (uniform)  {_fmt(rep.numeric_inductance_uh, 'uH')}")
    if rep.round_wire_inductance_uh is not None:
        lines.append(f"  round-wire rings   {_fmt(rep.round_wire_inductance_uh, 'uH')}")
    lines += [
        f"  mean radius        {_fmt(rep.mean_radius_mm, 'mm')}",
        "  wire               " + ("not given (--awg or --wire-diameter-mm)" if rep.wire_bare_diameter_mm is None
                                     else f"{_fmt(rep.wire_bare_diameter_mm, 'mm bare')}, "
                                          f"{_fmt(rep.wire_outer_diameter_mm, 'mm over enamel')}"
                                          + ("" if design.outer_wire_diameter_mm else " (approximate build)")),
        f"  wire length        {_fmt(rep.wire_length_m, 'm')}",
        "  DC resistance      " + ("-" if rep.resistance_ohm is None else
                                     f"{_fmt(rep.resistance_ohm, 'ohm')} at {design.temp_c:g} degC "
                                     f"({_fmt(rep.resistance_per_km_ohm, 'ohm/km')})"),
        f"  self-capacitance   {_fmt(rep.self_capacitance_pf, 'pF')} (Medhurst 1947)",
        f"  self-resonance     {_fmt(rep.srf_hz, 'Hz')}",
        f"  LC frequency       {_fmt(rep.lc_freq_hz, 'Hz')}"
        + (f" with {design.cap_nf:g} nF" if design.cap_nf is not None else " (give --cap-nf)"),
    ]
    if rep.q_dc_bound is not None:
        lines.append(f"  Q (DC-resistance bound) {rep.q_dc_bound:.3g}; skin depth {rep.skin_depth_mm:.3g} mm")
    if tune_nf is not None:
        lines.append(f"  tuning capacitor   {tune_nf:.5g} nF for {args.for_freq_hz:g} Hz")
    lines += [f"  note: {n}" for n in rep.notes]
    print("\n".join(lines))
    return 0
