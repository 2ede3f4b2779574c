"""``coilshift calibrate``: a guided calibration run from a live input, analysed at the end."""

from __future__ import annotations

import argparse
import sys

from coilshift.cli.cautions import WIRING_CAUTION, CautionApart
from coilshift.cli.options import (REPEATS, SECONDS, add_analysis_options, add_distances_option, add_force_option,
                                   add_json_option, add_live_input_options, add_old_spellings, add_run_folder_option,
                                   add_settle_option, add_synthetic_option, add_target_option, add_tracking_options)

ORDER = 25

HELP = "guided calibration: prompts you through target positions and baselines while capturing live"


def register(subparsers) -> None:
    from coilshift.logger.capture.guide import KEYS_HELP

    p = subparsers.add_parser(
        "calibrate", help=HELP,
        description="Capture a calibration run live: a first target-free baseline, then for every target and "
                    "distance you place the target and press Enter, the stretch is recorded after a settling "
                    "time while the live frequency and shift are shown, then the measured shift, its standard "
                    "error and whether it is significant; you remove the target, press Enter, and a baseline is "
                    "recorded; so every position has a baseline before and after it. markers.csv is written as "
                    "you go. The run is analysed at the end (as 'coilshift analyze' would).",
        epilog=KEYS_HELP + "\n\n" + WIRING_CAUTION, formatter_class=CautionApart)
    add_run_folder_option(p)
    add_force_option(p, "replace the run files in an existing folder (and allow a non-empty --analysis-out folder)")
    s = p.add_argument_group("session")
    add_target_option(s, "a target to calibrate (repeat for several), e.g. --target 'steel washer'",
                      metavar="NAME", action="append", required=True)
    add_distances_option(s, "distances from the coil face, e.g. 10,20,40,80", required=True)
    s.add_argument("--dwell", type=SECONDS, default=10.0, metavar="S",
                   help="seconds recorded per stretch (default 10; the first baseline lasts 2.5 times as long)")
    add_settle_option(s, "seconds waited after each move before recording (default 2)")
    s.add_argument("--repeats", type=REPEATS, default=1, metavar="N", help="run the whole sequence N times (default 1)")
    src = add_live_input_options(p, device_help="input device: index or part of its name (see 'coilshift devices')",
                                 channel_help="input channel, from 0 (default 0)")
    add_synthetic_option(src)  # paced test tone, as in capture
    add_tracking_options(p)
    add_analysis_options(p, trim=False)
    out = p.add_argument_group("output")
    out.add_argument("--analysis-out", metavar="OUT",
                     help="also write the analysis (tables, plots, report.html) to this new folder")
    add_json_option(out, "print the analysis as one JSON object (prompts go to stderr)")
    add_old_spellings(p, "calibrate")
    p.set_defaults(func=run)


def _ask_on(stream):
    def ask(prompt: str) -> str:
        stream.write(prompt)
        stream.flush()
        line = sys.stdin.readline()
        if not line:
            raise EOFError
        if not sys.stdin.isatty():  # piped answers are not echoed: end the prompt's line ourselves
            stream.write("\n")
        return line.rstrip("\n")
    return ask


#: said once before the first prompt
KEYS_HELP_SHORT = "at each prompt: Enter = go on, s = skip a position, r = record the last target again, q = end"


class _live_line:
    """The live readout of a recording stretch: one line rewritten in place on a terminal, a
    line every few seconds otherwise."""

    def __init__(self, stream):
        self.stream, self.tty = stream, stream.isatty()
        self.open, self.last = False, 0.0

    def show(self, text: str) -> None:
        import time

        if self.tty:
            self.stream.write("\r" + text + "\x1b[K")
            self.open = True
        elif time.monotonic() - self.last >= 2.0:
            self.stream.write(text + "\n")
            self.last = time.monotonic()
        self.stream.flush()

    def end(self) -> str:
        """What to write before a normal line: ends the rewritten line."""
        was, self.open = self.open, False
        return "\n" if was else ""


def _distances(args) -> tuple[list[float], str]:
    """``--distances`` in mm and the unit to show them in (the old ``--unit`` rescales a list
    written without one)."""
    from coilshift.logger.capture.guide import UNITS_MM
    from coilshift.logger.errors import InputError

    mm, unit = list(args.distances), args.distances.unit
    old = getattr(args, "old_unit", None)
    if old is not None:
        if old not in UNITS_MM:
            raise InputError(f"--unit {old}: use one of {', '.join(UNITS_MM)}")
        mm, unit = [d * UNITS_MM[old] / UNITS_MM[unit] for d in mm], old
    if max(mm) > 1e6:  # beyond a kilometre a distance is a typing error, not a bench
        raise InputError(f"--distances: at most 1 km ({1e6:g} mm) from the coil")
    return mm, unit


def run(args) -> int:
    import math
    from pathlib import Path

    from coilshift.cli.analysis_args import analysis_kwargs
    from coilshift.cli.cautions import show_caution
    from coilshift.cli.inputs import live_source
    from coilshift.cli.tracking_args import check_tracking_options, tracking_from_args
    from coilshift.logger.capture.engine import CaptureEngine
    from coilshift.logger.errors import InputError
    from coilshift.logger.capture.guide import CalibrationGuide, plan_session
    from coilshift.logger.runfolder.markers import markers_to_csv
    from coilshift.logger.runfolder.folders import RunClaim, refuse_existing
    from coilshift.logger.runfolder.writer import write_markers_copy

    # every check that can fail does so before the device is opened or a folder created
    check_tracking_options(args)
    distances, unit = _distances(args)
    plan = plan_session(args.target, distances, args.repeats, args.dwell)
    if not (math.isfinite(args.settle_s) and args.settle_s >= 0):
        raise InputError(f"--settle-s {args.settle_s:g}: must be zero or positive seconds")
    kwargs = analysis_kwargs(args)
    if args.analysis_out and Path(args.analysis_out).resolve() == Path(args.out).resolve():
        raise InputError(f"{args.analysis_out}: the --analysis-out folder must differ from the run folder")
    for folder in filter(None, (args.out, args.analysis_out)):  # refused now, not after the session
        refuse_existing(folder, args.force)  # the usual one-line refusal; changes nothing
    claim = RunClaim(args.out, args.force)
    claim.hold()  # another command writing the run folder is refused now
    talk = sys.stderr if args.json else sys.stdout
    source = live_source(args, None)
    settings, corr = tracking_from_args(args, source.sample_rate_hz)
    show_caution(sys.stderr)
    # the folder (and an old run in it) is touched only once the input is open and tracked
    run_dir = claim.run_dir
    session = {"targets": list(args.target),
               "distances_mm": distances, "unit": unit, "dwell_s": args.dwell, "settle_s": args.settle_s,
               "repeats": args.repeats}
    engine = CaptureEngine(source, run_dir, settings, corr, baseline_s=min(args.baseline_s, plan[0].dwell_s),
                           claim=claim, meta={"command": "coilshift " + " ".join(sys.argv[1:]) if sys.argv else "calibrate",
                                 "calibration": session})
    engine.start()
    from coilshift.cli.readback import make_readback

    live = _live_line(talk)
    ask = _ask_on(talk)
    guide = CalibrationGuide(engine, plan, settle_s=args.settle_s, ask=lambda prompt: ask(live.end() + prompt),
                             say=lambda msg: print(live.end() + msg, file=talk, flush=True), unit=unit,
                             readback=make_readback(run_dir), show=live.show)
    print(KEYS_HELP_SHORT, file=talk, flush=True)
    interrupted = False
    try:
        result = guide.run()
    except KeyboardInterrupt:
        interrupted = True
        result = guide.result
    finally:
        summary = engine.stop()
    if result.markers:
        # the engine kept markers.csv current during the run; the guide's list is the final word
        write_markers_copy(run_dir, markers_to_csv(result.markers))
    for line in result.summary_lines(unit):
        print(line, file=talk)
    state = "complete" if result.completed else f"ended early ({'interrupted' if interrupted else result.reason})"
    print(f"session {state}: {len(result.markers)} stretch(es) recorded in {run_dir}; capture "
          f"{summary['status']}, {summary['rows']} rows", file=talk)
    if summary["status"] not in ("complete",):
        print(f"coilshift: error: capture {summary['status']}: {summary.get('message', '')}; "
              f"the log up to then is kept in {run_dir}", file=sys.stderr)
    n_targets = sum(1 for m in result.markers if not m.is_baseline)
    if n_targets == 0:
        print("coilshift: no target stretch was recorded, nothing to analyse", file=sys.stderr)
        return 130 if interrupted else 1
    _analyse_session(run_dir, kwargs, args)
    if interrupted:
        return 130
    return 0 if summary["status"] == "complete" else 1


def _analyse_session(run_dir, kwargs: dict, args) -> None:
    """Analyse the recorded session, write its outputs, print the results (a stage line meanwhile)."""
    from coilshift.cli.analysis_args import analyse_and_report

    # run.json has the "calibration" entry: the analysis knows the stretches start settled
    outputs = argparse.Namespace(out=args.analysis_out, force=args.force, json=args.json)
    analyse_and_report("calibrate", [run_dir], None, kwargs, outputs)
