"""``coilshift demo``: the whole job on simulated bench recordings, no detector or soundcard needed."""

from __future__ import annotations

from coilshift.cli.options import add_force_option, add_json_option, add_out_option, add_quiet_option

ORDER = 5
DEFAULT_DIR = "coilshift-demo"


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "demo",
        help="run the whole job on simulated recordings (no hardware needed) and write a report",
        description="Simulate a bench session qualifying a new search coil against an old one "
                    "(five test pieces, five distances, a stability run), track the recordings, "
                    "analyse them and write a report. All data are synthetic.",
    )
    add_out_option(p, f"output folder (default: ./{DEFAULT_DIR}, or ./{DEFAULT_DIR}-2, -3 ... if taken)",
                   default=None, metavar="DIR")
    add_force_option(p, "allow DIR to be a non-empty folder")
    add_json_option(p, "print the summary as one JSON object")
    add_quiet_option(p, "no progress on stderr")
    p.set_defaults(func=run)


def _free_dir():
    from pathlib import Path

    base = Path(DEFAULT_DIR)
    if not base.exists() or (base.is_dir() and not any(base.iterdir())):
        return base
    for i in range(2, 1000):
        p = Path(f"{DEFAULT_DIR}-{i}")
        if not p.exists():
            return p
    return base  # every name taken: new_output_dir refuses with a clear message


def _build(out, force: bool, say, progress, run_demo) -> dict:
    """Run the demo in a folder built aside and swapped in whole (an interrupted demo leaves
    ``out`` as it was). The demo runs inside the build folder, so the paths its files record
    (a run's recording, a result's run folder) are relative to the demo folder and stay right
    after the swap."""
    import os
    from pathlib import Path

    from coilshift.logger.runfolder.outputs import building_output_dir

    here = os.getcwd()
    with building_output_dir(out, force) as build:
        os.chdir(build)
        try:
            summary = run_demo(".", True, say, progress)
        finally:
            os.chdir(here)
    for key in ("report", "calibration_report"):
        summary[key] = str(Path(out) / summary[key])
    return summary


def run(args) -> int:
    import sys

    from coilshift.cli.common import note_done, print_json
    from coilshift.logger.progress import make_stages
    from coilshift.sim.demo import CAUTION, run_demo, summary_table
    from coilshift.sim.demo_report import drift_text

    out = args.out if args.out is not None else _free_dir()
    quiet = args.json or args.quiet
    with make_stages("demo", quiet=quiet) as stage:
        # a terminal gets one line redrawn in place, with the steps inside each stage; a pipe or a
        # log file gets one plain line as each stage begins; --json and --quiet get nothing
        if stage.enabled:
            say, progress = stage, stage
        else:
            say, progress = (lambda s: None) if quiet else (lambda s: print(s, file=sys.stderr, flush=True)), None
        summary = _build(out, args.force, say, progress, run_demo)
    note_done(f"the demo was written to {out}")
    if args.json:
        print_json(summary)
        return 0
    print(summary_table(summary))
    print()
    st = summary["stability"]
    if st["oadev_hz_at_1s"] is not None:
        print(f"B-200 stability: Allan deviation {1000 * st['oadev_hz_at_1s']:.2f} mHz at 1 s, "
              f"settled drift {drift_text(st)}")
    print("all recordings are synthetic (made by the simulator); see the report's note")
    print(CAUTION)
    print(f"report: {summary['report']}")
    return 0
