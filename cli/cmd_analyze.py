"""``coilshift analyze``: calibration runs -> shift curves, detection ranges, ferrous calls, report."""

from __future__ import annotations

from coilshift.cli.options import (add_analysis_options, add_force_option, add_json_option, add_markers_option,
                                   add_old_spellings, add_out_option, add_quiet_option)

ORDER = 40

HELP = "analyse calibration runs: shift vs distance, detection range, ferrous or not, report"


def register(subparsers) -> None:
    p = subparsers.add_parser("analyze", aliases=["analyse"], help=HELP,
                              description=HELP + ". Several runs are compared side by side.")
    p.add_argument("runs", nargs="+", metavar="RUN_DIR", help="run folder(s) (or log CSV files with --markers)")
    add_markers_option(p, "FILE", "markers CSV to use instead of the run's markers.csv (one run only)")
    add_analysis_options(p)
    add_json_option(p, "print one JSON object instead of the text summary")
    add_out_option(p, "write tables, plots and report.html to this new folder", metavar="OUT")
    add_force_option(p, "allow OUT to be a non-empty folder")
    add_quiet_option(p, "no progress line on stderr")
    add_old_spellings(p, "analyze")
    p.set_defaults(func=run)


def run(args) -> int:
    from coilshift.cli.analysis_args import analyse_and_report, analysis_kwargs
    from coilshift.logger.errors import InputError

    if args.markers and len(args.runs) > 1:
        raise InputError(f"{args.markers}: --markers applies to one run; give each run its own markers.csv")
    analyse_and_report("analyze", args.runs, args.markers, analysis_kwargs(args), args, quiet=args.quiet)
    return 0
