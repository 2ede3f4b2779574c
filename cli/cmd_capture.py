"""``coilshift capture``: live capture from a soundcard input into a run folder, with a live readout."""

from __future__ import annotations

import io
import sys
from pathlib import Path

from coilshift.cli.cautions import WIRING_CAUTION, CautionApart
from coilshift.cli.options import (SECONDS, add_false_rate_option, add_force_option, add_json_option,
                                   add_live_input_options, add_run_folder_option, add_synthetic_option,
                                   add_tracking_options)

ORDER = 20



def _event_settings(args):
    """The live event detector's settings (logger/events)."""
    from coilshift.logger.events.detector import DetectorSettings

    return DetectorSettings(false_per_hour=args.false_per_hour)

def register(subparsers) -> None:
    from coilshift.logger.capture.view import KEY_BASELINE, KEY_MARKER, KEY_QUIT, KEY_REZERO

    p = subparsers.add_parser(
        "capture",
        help="live capture from a soundcard input: track, log shifts, live readout",
        description="Capture an oscillator from a soundcard input, track its frequency live and "
                    "write a run folder (log.csv, run.json, markers.csv; the same format as "
                    "'track'), flushed to disk at least once a second so a crash keeps the data. "
                    "A live panel shows frequency, shift, level, SNR and faults; keys re-zero the "
                    "baseline, add markers and quit.",
        epilog=f"keys in the live panel: {KEY_REZERO} re-zero the baseline, {KEY_MARKER} add a marker, timed "
               f"when you press it (label 'baseline', 'end', or a target and its distance in mm, e.g. "
               f"'coin 50'), {KEY_BASELINE} start a target-free baseline stretch at once, {KEY_QUIT} quit "
               f"(Ctrl-C also ends the run cleanly). A run is analysable ('coilshift analyze') when every "
               f"target stretch has a baseline stretch before and after it.\n\n" + WIRING_CAUTION,
        formatter_class=CautionApart,
    )
    add_run_folder_option(p)
    add_force_option(p, "replace the run files in an existing folder")
    src = add_live_input_options(p, device_help="input device: index or part of its name (see 'coilshift "
                                                "devices'); default: the system default input",
                                 channel_help="input channel to track, from 0 (default 0)")
    src.add_argument("--seconds", type=SECONDS, metavar="S", help="stop after S seconds (default: until you quit)")
    src.add_argument("--save-audio", action="store_true",
                     help="also save the raw input as audio.wav (32-bit float WAV) to re-track later")
    add_synthetic_option(src)  # paced test tone: F[,F2@T2...]
    add_tracking_options(p)
    add_false_rate_option(p.add_argument_group("events (found live, listed on screen, written to events.csv)"))
    out = p.add_argument_group("display")
    out.add_argument("--no-view", action="store_true", help="no live readout (only the final summary)")
    out.add_argument("--plot", action="store_true", help="also show a live plot window (needs a display)")
    add_json_option(out, "print the final summary as one JSON object")
    p.set_defaults(func=run)


def _has_termios() -> bool:
    try:  # single-key input needs a POSIX terminal; elsewhere the plain readout is used
        import termios  # noqa: F401
        import tty  # noqa: F401
    except ImportError:
        return False
    return True


def run(args) -> int:
    from coilshift.cli.inputs import live_source
    from coilshift.cli.tracking_args import check_tracking_options, tracking_from_args
    from coilshift.logger.errors import InputError

    if args.seconds is not None and not args.seconds > 0:
        raise InputError(f"--seconds {args.seconds:g}: must be > 0")
    if args.rate is not None and not args.rate > 0:
        raise InputError(f"--rate {args.rate:g}: must be > 0")
    check_tracking_options(args)
    source = live_source(args, args.seconds)
    settings, corr = tracking_from_args(args, source.sample_rate_hz)
    for line in corr.warnings():  # e.g. an even Nyquist zone inverts the apparent shift
        print(f"coilshift: {line}", file=sys.stderr)
    interactive = not args.no_view and sys.stdout.isatty() and sys.stdin.isatty() and _has_termios()
    engine, run_dir = _start(args, source, settings, corr, interactive)
    how, summary = _watch(args, engine, source, run_dir, interactive)
    from coilshift.cli.common import note_done

    note_done(f"the run in {run_dir} is {summary['status']}")
    if how == "hangup":  # the terminal is gone: say what can still be said, then end quietly
        try:
            return _finish(args, engine, summary, how, run_dir)
        except (OSError, ValueError):
            return 0
    return _finish(args, engine, summary, how, run_dir)


#: files of an earlier capture that a forced one replaces besides the log (its saved audio)
AUDIO_FILES = ("audio.wav", "audio-[0-9][0-9][0-9].wav")


def _start(args, source, settings, corr, interactive: bool):
    """Start the engine on a claimed run folder. Nothing in the folder changes until the input
    is open and the tracker accepts it: a refused start (a rate the tracker cannot use, Ctrl-C
    at the first-run caution) leaves an old run there whole. Returns ``(engine, run_dir)``."""
    from coilshift.cli.cautions import show_caution_once
    from coilshift.logger.capture.engine import CaptureEngine
    from coilshift.logger.errors import InputError
    from coilshift.logger.runfolder.folders import RunClaim

    claim = RunClaim(args.out, args.force, also=AUDIO_FILES)
    claim.check()
    claim.hold()  # another command writing there is refused now, before the device is opened
    run_dir = claim.run_dir
    engine = CaptureEngine(source, run_dir, settings, corr, baseline_s=args.baseline_s, save_audio=args.save_audio,
                           max_seconds=args.seconds, claim=claim, events=_event_settings(args),
                           meta={"command": "capture", "options": {k: v for k, v in vars(args).items()
                                                                  if k not in ("func", "command")}})
    if show_caution_once() and interactive:
        # the live panel clears the screen: let the caution be read first
        try:
            input("Press Enter to start the capture (Ctrl-C to cancel) ")
        except (EOFError, KeyboardInterrupt):
            print()
            raise InputError(f"{run_dir}: capture cancelled before it started; nothing written") from None
    engine.start()
    return engine, run_dir


def _watch(args, engine, source, run_dir, interactive: bool):
    """Show the running capture (live panel, a plain line a second, or nothing) until it ends,
    then stop the engine. Returns how it ended (``"ended"``, ``"quit"``, ``"interrupt"``) and the
    engine's summary."""
    from coilshift.logger.capture.view import LivePlot, PlainLines, TerminalPanel

    desc = source.describe()
    title = (f"coilshift capture  {desc.get('device_name', 'synthetic tone')}  "
             f"{engine.sample_rate_hz:g} Hz  ch {args.channel}  -> {run_dir}")

    plot = None
    how = "ended"
    said = io.StringIO()  # a message about the plot window: shown in the panel, or on stderr
    try:
        if args.plot:
            plot = LivePlot.open(err=said if interactive else sys.stderr)
        if args.no_view:
            while not engine.wait(0.1 if plot is None else 0.05):
                if plot is not None:
                    plot.update(engine.snapshot())
        elif interactive:
            how = TerminalPanel(engine, title, note=said.getvalue().strip().removeprefix("coilshift: ")).run(plot)
        else:  # not a terminal: a plain line a second (on stderr when stdout carries the JSON)
            stream = sys.stderr if args.json else sys.stdout
            stream.write(title + "\n")
            PlainLines(engine, out=stream).run(plot)
    except BaseException as exc:  # Ctrl-C; SIGTERM and SIGHUP too (cli.main makes them the same)
        how = _how_interrupted(exc)
        if how is None:
            raise
    finally:
        try:
            summary = engine.stop()
        finally:
            if plot is not None:
                plot.close()
    return how, summary


def _how_interrupted(exc: BaseException) -> str | None:
    """``"interrupt"`` for Ctrl-C or SIGTERM, ``"hangup"`` for SIGHUP, None for anything else.

    A closed terminal sends SIGHUP; restoring the live panel's terminal then fails too, so the
    KeyboardInterrupt may arrive as the context of a terminal error.
    """
    import errno

    seen = exc
    while seen is not None:
        if isinstance(seen, KeyboardInterrupt):
            return "hangup" if getattr(seen, "name", "") == "SIGHUP" else "interrupt"
        seen = seen.__context__
    # the terminal went away without a SIGHUP (its reads and writes fail): end as for one
    try:
        from termios import error as tty_error
    except ImportError:  # no POSIX terminal: only OSError can say so
        tty_error = OSError
    code = exc.errno if isinstance(exc, OSError) else exc.args[0] if isinstance(exc, tty_error) and exc.args else None
    return "hangup" if code in (errno.EIO, errno.ENXIO) else None


def _baseline_advice(run_dir) -> None:
    """Say so when the run's markers hold target stretches but no baseline: it cannot be analysed."""
    from coilshift.logger.errors import InputError
    from coilshift.logger.runfolder.markers import read_markers

    path = Path(run_dir) / "markers.csv"
    try:
        marks = read_markers(path) if path.is_file() else []
    except (InputError, OSError):
        return
    if any(not m.is_baseline for m in marks) and not any(m.is_baseline for m in marks):
        print(f"coilshift: note: {path} marks targets but no baseline stretch; 'coilshift analyze' needs a "
              "target-free stretch before and after each target (key b in the live panel, or add 'baseline' "
              "rows to markers.csv)", file=sys.stderr)


def _finish(args, engine, summary: dict, how: str, run_dir) -> int:
    """Print the final summary and say why the run ended; the exit code (0 complete, 1 device
    error, 3 any other failure)."""
    from coilshift.cli.common import print_json
    from coilshift.logger.capture.view import status_line

    if args.json:
        print_json(summary)
    else:
        snap = engine.snapshot()
        print(status_line(snap))
        print(f"{summary['status']}: {summary['rows']} rows, {summary['duration_s']:.1f} s in {run_dir} "
              f"(ended by {'you' if how in ('quit', 'interrupt', 'hangup') else summary['ended_by']}); "
              f"faults: {summary['overflows']} overflows, {summary['gaps']} gaps "
              f"({summary['lost_samples']} samples lost), {summary['device_errors']} device errors")
    _baseline_advice(run_dir)
    if summary["status"] == "device_error":
        hung = f"; {summary['stream_close']}" if summary.get("stream_close") else ""
        print(f"coilshift: error: input stopped: {summary['message']}{hung}; the log up to then is kept in "
              f"{run_dir}", file=sys.stderr)
        return 1
    if summary["status"] != "complete":
        print(f"coilshift: error: capture failed: {summary['message']}; the log up to then is kept in {run_dir}",
              file=sys.stderr)
        return 3
    return 0
