"""``coilshift coil``: inductance, wire, resistance, self-capacitance and LC frequency of a coil."""

from __future__ import annotations

from coilshift.cli.options import FREQ_HZ, add_coil_arguments, add_json_option

ORDER = 60


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "coil", help="predict a coil's inductance, resistance and LC frequency",
        description="Predict a search coil's inductance (Wheeler 1928 with the exact current-sheet, "
                    "thin-ring or numerical value where they fit better), wire length, DC resistance "
                    "(IEC 60028 copper), self-capacitance (Medhurst 1947) and the LC frequency with a "
                    "tuning capacitor.")
    add_coil_arguments(p)
    p.add_argument("--for-freq-hz", type=FREQ_HZ, metavar="F",
                   help="also give the tuning capacitor for this LC frequency")
    add_json_option(p, "print one JSON object")
    p.set_defaults(func=run)


def _fmt(x, unit: str, digits: int = 5) -> str:
    return "-" if x is None else f"{x:.{digits}g} {unit}"


def run(args) -> int:
    import math

    from coilshift.analysis.models.coil import analyse_coil, capacitance_for_frequency_nf
    from coilshift.cli.coil_args import design_from_args
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
