"""``coilshift stability``: warm-up, settled drift, Allan-family stability and tempco of a logged oscillator."""

from __future__ import annotations

import argparse

from coilshift.cli.options import (DRIFT_HZ_PER_MIN, FRACTION, FREQ_HZ, Bounded, add_force_option, add_json_option,
                                   add_old_spellings, add_out_option, add_quiet_option)

ORDER = 60

LOG_TIME_S = Bounded(-1e9, 1e9, unit="s")  # a time on the log's own clock


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "stability",
        help="noise floor and drift of a frequency log (Allan deviation, warm-up, tempco)",
        description="Warm-up as exponential settling plus a linear drift, fitted by generalised least "
                    "squares under the oscillator's own white and random-walk frequency noise; the "
                    "settled start and the settled drift with its uncertainty; Allan, overlapping "
                    "Allan and modified Allan deviation and time deviation of the settled part at "
                    "octave averaging times with chi-squared confidence intervals and the noise type "
                    "where the local slope identifies one; optional temperature coefficient. Unusable "
                    "frames, missing time steps and, in a log whose markers hold target stretches, "
                    "everything outside its baseline stretches are gaps: no statistic term reaches "
                    "across one.",
    )
    p.add_argument("log", metavar="RUN_DIR|LOG.csv", help="run folder or CSV with t_s and freq_hz")
    add_json_option(p, "print one JSON object instead of the table")
    add_out_option(p, "write plots, stability.csv, stability.json and report.html to this new folder",
                   metavar="OUT")
    add_force_option(p, "allow OUT to be a non-empty folder")
    p.add_argument("--temperature", metavar="CSV", help="t_s,temp_c readings on the log's clock: fit Hz/degC")
    p.add_argument("--nominal-hz", type=FREQ_HZ, metavar="HZ",
                   help="frequency the fractional values refer to (default: mean of the log)")
    p.add_argument("--remove-drift", action="store_true",
                   help="compute the deviations after removing the settled drift")
    p.add_argument("--confidence", type=FRACTION, default=0.6827, metavar="P",
                   help="two-sided confidence level of the intervals (default 0.6827, one sigma)")
    p.add_argument("--settled-hz-per-min", type=DRIFT_HZ_PER_MIN, metavar="R",
                   help="settled once the fitted warm-up's rate stays below R Hz/min (default 1 ppm of nominal "
                        "per minute)")
    part = p.add_mutually_exclusive_group()
    part.add_argument("--start-s", type=LOG_TIME_S, metavar="S",
                      help="compute the deviations from this time of the log on (default: the settled start)")
    part.add_argument("--whole-log", action="store_true",
                      help="compute the deviations on the whole log, warm-up included")
    add_quiet_option(p, "no progress line on stderr")
    add_old_spellings(p, "stability")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    import math
    import sys

    from coilshift.analysis.report.stability_text import table_text
    from coilshift.cli.options import option_for
    from coilshift.cli.common import print_json
    from coilshift.logger.runfolder.outputs import building_output_dir
    from coilshift.logger.errors import InputError
    from coilshift.logger.progress import make_stages

    if not 0 < args.confidence < 1:
        raise InputError(f"--confidence: must lie between 0 and 1, got {args.confidence}")
    if args.settled_hz_per_min is not None and not (args.settled_hz_per_min > 0 and math.isfinite(args.settled_hz_per_min)):
        raise InputError(f"--settled-hz-per-min: must be a positive number, got {args.settled_hz_per_min}")
    if args.nominal_hz is not None and not (args.nominal_hz > 0 and math.isfinite(args.nominal_hz)):
        raise InputError(f"--nominal-hz: must be a positive frequency, got {args.nominal_hz}")
    with make_stages("stability", quiet=args.quiet) as stage:  # stderr, on a terminal only
        stage("reading the log")
        res, interrupted = _analyse(args, stage)
        summary = res.to_dict()
        if interrupted:
            summary["log_interrupted"] = True
        if args.out:
            from coilshift.analysis.report.stability_outputs import write_stability_outputs

            with building_output_dir(args.out, args.force) as build:  # swapped in whole, or not at all
                written = write_stability_outputs(res, build, summary, name_of=option_for, progress=stage)
    if args.json:
        print_json(summary)
    else:
        sys.stdout.write(table_text(res, option_for))
        if interrupted:
            sys.stdout.write("note: the log was interrupted (incomplete last line or run not complete)\n")
        if args.out:
            sys.stdout.write(f"wrote {args.out}/: {', '.join(p.name for p in written)}\n")
    return 0


def _analyse(args: argparse.Namespace, stage):
    """Read the log (and temperatures) and analyse it; returns the result and whether the log was
    interrupted. Everything that can fail on the input runs here, before any output exists."""
    from coilshift.analysis.stability.analyse import analyse_stability
    from coilshift.analysis.stability.tempco import read_temperature_csv
    from coilshift.cli.options import FRAME_MS
    from coilshift.logger.runfolder.reader import read_log

    log = read_log(args.log, columns=("flags",))  # only time, frequency and flags are used
    temperature = read_temperature_csv(args.temperature) if args.temperature else None
    tracker = log.meta.get("tracker") if isinstance(log.meta.get("tracker"), dict) else {}
    frame_ms = tracker.get("frame_ms")
    # a frame length outside what --frame-ms accepts is a damaged run.json: not used
    frame_s = float(frame_ms) / 1000.0 if isinstance(frame_ms, (int, float)) and FRAME_MS.inside(frame_ms) else None
    # a calibration log (markers with target stretches) is analysed on its baseline stretches only
    baselines = None
    if any(not m.is_baseline for m in log.markers):
        baselines = [(m.start_s, m.end_s) for m in log.markers if m.is_baseline]
    stage(f"analysing {log.t_s.size} frames: warm-up fit, drift, Allan deviations")
    res = analyse_stability(log.t_s, log.freq_hz, log.usable(), nominal_hz=args.nominal_hz,
                            remove_drift=args.remove_drift, confidence=args.confidence,
                            settle_hz_per_min=args.settled_hz_per_min, start_s=args.start_s, whole_log=args.whole_log,
                            baselines=baselines, temperature=temperature, source=str(args.log),
                            temperature_source=str(args.temperature), frame_s=frame_s)
    return res, log.interrupted
