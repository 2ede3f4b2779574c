"""``coilshift simulate``: make a recording of a scripted bench session with a known truth."""

from __future__ import annotations

from coilshift.cli.options import add_force_option, add_json_option, add_out_option, add_quiet_option

ORDER = 80


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "simulate",
        help="synthesise a detector recording from a JSON script (audio + markers + truth)",
        description="Render a scripted bench session through a modelled oscillator and soundcard. "
                    "Writes recording.wav (or .flac), markers.csv and truth.json into a new folder. "
                    "The script format is described in docs/guide.md and coilshift.sim.script.",
    )
    p.add_argument("script", help="simulation script (JSON)")
    add_out_option(p, "output folder (new, or empty)", required=True)
    add_force_option(p, "allow a non-empty output folder")
    add_json_option(p, "print a JSON summary instead of text")
    add_quiet_option(p, "no progress bar")
    p.set_defaults(func=run)


def run(args) -> int:
    from pathlib import Path

    from coilshift.cli.common import note_done, print_json
    from coilshift.logger.progress import make_progress
    from coilshift.logger.runfolder.outputs import building_output_dir
    from coilshift.sim.render import simulate
    from coilshift.sim.script import load_script

    script = load_script(args.script)  # check the script before touching the output folder
    with building_output_dir(args.out, args.force) as build:  # swapped in whole, or not at all
        with make_progress("rendering", quiet=args.quiet) as bar:  # stderr, on a terminal only
            summary = simulate(script, build, progress=bar)
    for key in ("recording", "markers", "truth"):  # where the files are now
        summary[key] = str(Path(args.out) / Path(summary[key]).name)
    note_done(f"the simulation was written to {args.out}")
    if args.json:
        print_json(summary)
        return 0
    print(f"wrote {summary['recording']} ({summary['duration_s']:.1f} s at {summary['sample_rate_hz']:g} Hz, "
          f"{summary['steps']} steps)")
    print(f"      {summary['markers']}")
    print(f"      {summary['truth']}")
    print(f"oscillator {summary['oscillator_freq_hz']:.3f} Hz; the file shows {summary['apparent_freq_hz']:.3f} Hz")
    print("this recording is synthetic: see truth.json for what it contains")
    return 0
