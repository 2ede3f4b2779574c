"""``coilshift events``: find where the frequency left its baseline and came back (hand passes,
sweeps, a target left a while) in any recording, without markers."""

from __future__ import annotations

from coilshift.cli.options import (add_false_rate_option, add_force_option, add_json_option, add_out_option,
                                   add_polarity_option, add_quiet_option)

ORDER = 45

HELP = "find target passes in a recording without markers: start, end, peak shift, class"


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "events", help=HELP,
        description=HELP + ". A moving average of the frames minus a straight baseline fitted to the quiet "
                           "frames before it, thresholded at the level whose crossing rate on quiet baseline "
                           "gives the stated false-event rate (see docs/events.md).")
    p.add_argument("log", metavar="RUN_DIR|LOG.csv", help="run folder or CSV with t_s and freq_hz")
    add_false_rate_option(p)
    add_polarity_option(p)
    add_json_option(p, "print one JSON object instead of the table")
    add_out_option(p, "write events.csv, events.json, events.png and report.html to this new folder", metavar="OUT")
    add_force_option(p, "allow OUT to be a non-empty folder")
    add_quiet_option(p, "no progress line on stderr")
    p.set_defaults(func=run)


def run(args) -> int:
    from pathlib import Path

    from coilshift.analysis.events.find import find_events
    from coilshift.analysis.report.events_outputs import events_summary, summary_lines, write_events_outputs
    from coilshift.cli.common import note_done, print_json
    from coilshift.logger.events.detector import DetectorSettings
    from coilshift.logger.progress import make_stages
    from coilshift.logger.runfolder.outputs import building_output_dir

    with make_stages("events", quiet=args.quiet) as stage:  # stderr, on a terminal only
        res = find_events(args.log, DetectorSettings(false_per_hour=args.false_per_hour, polarity=args.polarity),
                          progress=stage)
        if args.out:
            with building_output_dir(args.out, args.force) as build:  # swapped in whole, or not at all
                write_events_outputs(res, build, progress=stage)
            note_done(f"the outputs were written to {args.out}")
    if args.json:
        print_json(events_summary(res))
        return 0
    for line in summary_lines(res):
        print(line)
    if args.out:
        print(f"report: {Path(args.out) / 'report.html'}")
    return 0
