"""``coilshift clock-error``: the soundcard's sample-clock error from a recorded reference tone."""

from __future__ import annotations

from coilshift.cli.options import FREQ_HZ, add_channel_option, add_frame_options, add_json_option, add_quiet_option

ORDER = 35


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "clock-error",
        help="measure the soundcard clock error (ppm) from a recording of a reference tone",
        description="Record a tone of accurately known frequency (a GPS-disciplined or crystal "
                    "generator far better than the soundcard's clock) through the same input, then run "
                    "this on the recording. The tone is tracked at the nominal sample rate; its median "
                    "frequency gives the clock error ppm = (reference / measured - 1) * 1e6, to pass as "
                    "--clock-ppm to track and capture.",
    )
    p.add_argument("input", metavar="INPUT", help="recording of the reference tone (audio file or scope CSV)")
    p.add_argument("--reference-hz", type=FREQ_HZ, required=True, metavar="HZ",
                   help="the reference tone's true frequency")
    add_channel_option(p, "channel to use, numbered from 0")
    add_frame_options(p, 200.0, "analysis frame in ms (default 200: long frames suit a steady tone)",
                      100.0, "time between frames in ms (default 100)")
    add_json_option(p, "print the result as one JSON object on stdout")
    add_quiet_option(p, "no progress bar")
    p.set_defaults(func=run)


def run(args) -> int:
    from coilshift.cli.common import print_json
    from coilshift.logger.errors import InputError
    from coilshift.logger.pipeline.batch import measure_clock
    from coilshift.logger.progress import make_progress
    from coilshift.logger.sources import open_source
    from coilshift.logger.tracking.tracker import TrackerSettings

    import math

    if not (math.isfinite(args.reference_hz) and args.reference_hz > 0):
        raise InputError(f"--reference-hz {args.reference_hz:g}: must be a positive frequency")
    for opt, value in (("--frame-ms", args.frame_ms), ("--hop-ms", args.hop_ms)):
        if not (math.isfinite(value) and value > 0):
            raise InputError(f"{opt} {value:g}: must be a positive number")
    if args.channel < 0:
        raise InputError(f"--channel {args.channel}: channels are numbered from 0")
    source = open_source(args.input, channel=args.channel)
    if args.reference_hz >= source.sample_rate_hz / 2:
        raise InputError(f"--reference-hz {args.reference_hz:g}: not below half the sample rate "
                         f"({source.sample_rate_hz / 2:g} Hz)")
    # near the reference: another line in the recording (hum, a second source) must not be picked
    settings = TrackerSettings(frame_ms=args.frame_ms, hop_ms=args.hop_ms, near_hz=args.reference_hz,
                               refine=True)
    with make_progress("measuring", quiet=args.quiet) as bar:
        result = measure_clock(source, args.reference_hz, settings, progress=bar)
    result["input"] = str(args.input)
    if args.json:
        print_json(result)
        return 0
    print(f"clock error {result['clock_ppm']:+.2f} ppm (standard error {result['clock_ppm_stderr']:.2f} ppm)")
    print(f"  the {result['reference_hz']:g} Hz reference reads {result['measured_hz']:.5f} Hz at the nominal "
          f"{result['sample_rate_hz']:g} Hz; true sample rate {result['sample_rate_true_hz']:.3f} Hz")
    print(f"  {result['frames_used']} of {result['frames']} frames used, {result['duration_s']:.1f} s")
    print(f"  use: --clock-ppm {result['clock_ppm']:.2f}")
    return 0
