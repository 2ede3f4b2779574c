"""``coilshift astable``: 555-timer astable frequency from parts, or parts for a frequency."""

from __future__ import annotations

from coilshift.cli.options import FRACTION, OHMS, TIMER_FREQ_HZ, add_cap_option, add_freq_option, add_json_option

ORDER = 62


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "astable", help="555 astable: frequency from R and C, or R for a wanted frequency",
        description="Two-resistor 555 astable (datasheet formulas) or the one-resistor CMOS circuit. "
                    "Give --r1-ohm/--r2-ohm (or --r-ohm with --one-resistor) and --cap-nf for the "
                    "timing, or --freq-hz (and optionally --cap-nf, --duty) for suggested parts.")
    p.add_argument("--one-resistor", action="store_true",
                   help="one resistor from the output to C (CMOS 555, rail-to-rail output), 50 %% duty")
    p.add_argument("--r1-ohm", type=OHMS, metavar="R", help="two-resistor circuit: supply to discharge")
    p.add_argument("--r2-ohm", type=OHMS, metavar="R", help="two-resistor circuit: discharge to C")
    p.add_argument("--r-ohm", type=OHMS, metavar="R", help="one-resistor circuit: output to C")
    add_cap_option(p, "timing capacitor, nF")
    add_freq_option(p, "wanted frequency: suggest parts", type=TIMER_FREQ_HZ)
    p.add_argument("--duty", type=FRACTION, default=0.6, help="wanted duty cycle, two-resistor circuit (default 0.6)")
    p.add_argument("--series", default="E24", choices=("E6", "E12", "E24", "none"),
                   help="round resistors to this IEC 60063 series (default E24)")
    add_json_option(p, "print one JSON object")
    p.set_defaults(func=run)


def run(args) -> int:
    from coilshift.analysis.models import timer555 as t5
    from coilshift.cli.common import print_json
    from coilshift.logger.errors import InputError

    series = None if args.series == "none" else args.series
    if args.freq_hz is not None:
        if any(v is not None for v in (args.r1_ohm, args.r2_ohm, args.r_ohm)):
            raise InputError("astable: give --freq-hz (to choose parts) or the resistors (to get the timing)")
        cap = args.cap_nf if args.cap_nf is not None else t5.suggest_cap_nf(args.freq_hz)
        timing = (t5.design_one_resistor(args.freq_hz, cap, series) if args.one_resistor
                  else t5.design_two_resistor(args.freq_hz, cap, args.duty, series))
    elif args.one_resistor:
        if args.r_ohm is None or args.cap_nf is None:
            raise InputError("astable: the one-resistor circuit needs --r-ohm and --cap-nf (or --freq-hz)")
        timing = t5.astable_one_resistor(args.r_ohm, args.cap_nf)
    else:
        if args.r1_ohm is None or args.r2_ohm is None or args.cap_nf is None:
            raise InputError("astable: give --r1-ohm, --r2-ohm and --cap-nf, or --freq-hz")
        timing = t5.astable_two_resistor(args.r1_ohm, args.r2_ohm, args.cap_nf)
    warnings = t5.resistor_warnings(timing)
    if args.json:
        print_json({**timing.to_dict(), "wanted_freq_hz": args.freq_hz, "warnings": warnings})
        return 0
    parts = (f"R = {timing.r1_ohm:.4g} ohm" if timing.r2_ohm is None
             else f"R1 = {timing.r1_ohm:.4g} ohm, R2 = {timing.r2_ohm:.4g} ohm")
    print(f"555 astable ({timing.config.replace('_', '-')}): {parts}, C = {timing.cap_nf:.4g} nF")
    print(f"  frequency {timing.freq_hz:.6g} Hz, high {timing.t_high_s * 1e6:.5g} us, "
          f"low {timing.t_low_s * 1e6:.5g} us, duty {timing.duty * 100:.1f} %")
    if args.freq_hz is not None:
        print(f"  wanted {args.freq_hz:g} Hz: off by {(timing.freq_hz / args.freq_hz - 1) * 100:+.2f} % "
              f"after rounding; the 555's own tolerance is a few per cent (trim with R2)")
    for w in warnings:
        print(f"  caution: {w}")
    return 0
