"""``coilshift capture``: live capture from a soundcard input into a run folder, with a live readout."""

from __future__ import annotations

import argparse
import io
import json
import os
import sys
import textwrap
from pathlib import Path

ORDER = 20

WIRING_CAUTION = (
    "CAUTION - wiring an oscillator to a line input: a line input takes only about 1-2 V peak. "
    "Bring the signal down with a resistive divider to stay within that, put a DC-blocking "
    "capacitor in series, and never connect the input to a circuit tied to the mains without "
    "proper isolation (a battery-powered oscillator, or an isolating transformer or probe). "
    "Work on mains-powered equipment follows your local electrical codes; leave it to, or have "
    "it checked by, a licensed electrician. A wrong connection can damage the soundcard, the "
    "computer, and you."
)

_STATE_KEY = "wiring_caution_shown"


class _KeepEpilog(argparse.HelpFormatter):
    """Wrap the description as usual but keep the epilog's paragraphs (the caution stands apart)."""

    def add_text(self, text):
        if text and "CAUTION" in text:
            paragraphs = [textwrap.fill(" ".join(p.split()), width=78) for p in text.split("\n\n")]
            self._add_item(lambda t: t + "\n", ["\n\n".join(paragraphs)])
        else:
            super().add_text(text)


def register(subparsers) -> None:
    from coilshift.logger.capture.view import KEY_MARKER, KEY_QUIT, KEY_REZERO

    p = subparsers.add_parser(
        "capture",
        help="live capture from a soundcard input: track, log shifts, live readout",
        description="Capture an oscillator from a soundcard input, track its frequency live and "
                    "write a run folder (log.csv, run.json, markers.csv; the same format as "
                    "'track'), flushed to disk at least once a second so a crash keeps the data. "
                    "A live panel shows frequency, shift, level, SNR and faults; keys re-zero the "
                    "baseline, add markers and quit.",
        epilog=f"keys in the live panel: {KEY_REZERO} re-zero the baseline, {KEY_MARKER} add a marker "
               f"(label 'baseline', 'end', or a target and its distance in mm, e.g. 'coin 50'), "
               f"{KEY_QUIT} quit (Ctrl-C also ends the run cleanly).\n\n" + WIRING_CAUTION,
        formatter_class=_KeepEpilog,
    )
    p.add_argument("-o", "--out", required=True, metavar="RUN_DIR", help="run folder to create (new or empty)")
    p.add_argument("--force", action="store_true", help="replace the run files in an existing folder")
    src = p.add_argument_group("input")
    src.add_argument("--device", help="input device: index or part of its name (see 'coilshift devices'); "
                                      "default: the system default input")
    src.add_argument("--rate", type=float, metavar="HZ", help="sample rate (default: the device's default rate)")
    src.add_argument("--channel", type=int, default=0, metavar="C", help="input channel to track, from 0 (default 0)")
    src.add_argument("--seconds", type=float, metavar="S", help="stop after S seconds (default: until you quit)")
    src.add_argument("--save-audio", action="store_true",
                     help="also save the raw input as audio.wav (32-bit float WAV) to re-track later")
    src.add_argument("--synthetic", metavar="SPEC", help=argparse.SUPPRESS)  # paced test tone: F[,F2@T2...]
    add_tracking_options(p)
    out = p.add_argument_group("display")
    out.add_argument("--no-view", action="store_true", help="no live readout (only the final summary)")
    out.add_argument("--plot", action="store_true", help="also show a live plot window (needs a display)")
    out.add_argument("--json", action="store_true", help="print the final summary as one JSON object")
    p.set_defaults(func=run)


def add_tracking_options(p) -> None:
    """Tracker, correction and baseline options (values in the oscillator's Hz)."""
    g = p.add_argument_group("tracking")
    g.add_argument("--band", nargs=2, type=float, metavar=("LO_HZ", "HI_HZ"),
                   help="only look for the tone between these oscillator frequencies")
    g.add_argument("--near", type=float, metavar="HZ", help="follow the strongest tone near this oscillator frequency")
    g.add_argument("--frame-ms", type=float, default=85.0, help="analysis frame length in ms (default 85)")
    g.add_argument("--hop-ms", type=float, default=20.0, help="time between frames in ms (default 20)")
    g.add_argument("--refine", action="store_true", help="refine each frame with a sine fit (slower)")
    g.add_argument("--min-snr-db", type=float, default=10.0, help="flag frames below this SNR (default 10 dB)")
    c = p.add_argument_group("corrections")
    c.add_argument("--clock-ppm", type=float, default=0.0, help="soundcard sample-clock error in ppm (default 0)")
    c.add_argument("--divide", type=int, default=1, help="prescaler ratio between oscillator and input (default 1)")
    c.add_argument("--nyquist-zone", type=int, default=1, help="Nyquist zone of the recorded tone (default 1)")
    c.add_argument("--baseline-s", type=float, default=2.0,
                   help="baseline = median of the first S seconds, also the re-zero window (default 2)")


def check_tracking_options(args) -> None:
    """Refuse bad tracking, correction and channel options before any input is opened.

    Shared by every command that takes :func:`add_tracking_options` (track, capture, calibrate);
    the checks that need the sample rate stay in :func:`tracking_from_args`.
    """
    import math

    from coilshift.logger.errors import InputError

    if args.channel < 0:
        raise InputError(f"--channel {args.channel}: channels are numbered from 0")
    for opt, value in (("--frame-ms", args.frame_ms), ("--hop-ms", args.hop_ms), ("--baseline-s", args.baseline_s)):
        if not (math.isfinite(value) and value > 0):
            raise InputError(f"{opt} {value:g}: must be a positive number")
    if not math.isfinite(args.min_snr_db):
        raise InputError(f"--min-snr-db {args.min_snr_db:g}: must be a finite number")
    if args.band is not None:
        lo, hi = args.band
        if not (math.isfinite(lo) and math.isfinite(hi) and 0 <= lo < hi):
            raise InputError(f"--band {lo:g} {hi:g}: give LO_HZ then HI_HZ, with 0 <= LO_HZ < HI_HZ")
    if args.near is not None and not (math.isfinite(args.near) and args.near > 0):
        raise InputError(f"--near {args.near:g}: must be a positive frequency")


def tracking_from_args(args, sample_rate_hz: float):
    """TrackerSettings (band/near moved to the recording's raw Hz) and Corrections from the options."""
    import math

    from coilshift.logger.pipeline.corrections import Corrections
    from coilshift.logger.errors import InputError
    from coilshift.logger.tracking.tracker import TrackerSettings

    corr = Corrections(clock_ppm=args.clock_ppm, divide=args.divide, nyquist_zone=args.nyquist_zone)
    band = near = None
    if args.band is not None:
        lo, hi = args.band
        raw = sorted(float(v) for v in corr.freq_to_raw([lo, hi], sample_rate_hz))
        if not all(math.isfinite(v) for v in raw) or raw[0] == raw[1]:
            raise InputError(f"--band {lo:g} {hi:g}: not inside Nyquist zone {args.nyquist_zone} at "
                             f"{sample_rate_hz:g} Hz with divide {args.divide}")
        band = (raw[0], raw[1])
    if args.near is not None:
        near = float(corr.freq_to_raw(args.near, sample_rate_hz))
        if not math.isfinite(near):
            raise InputError(f"--near {args.near:g}: not inside Nyquist zone {args.nyquist_zone} at "
                             f"{sample_rate_hz:g} Hz with divide {args.divide}")
    try:
        settings = TrackerSettings(frame_ms=args.frame_ms, hop_ms=args.hop_ms, band_hz=band, near_hz=near,
                                   refine=args.refine, min_snr_db=args.min_snr_db)
    except ValueError as exc:
        raise InputError(f"tracker options: {exc}") from None
    return settings, corr


def state_path() -> Path:
    """Small per-user state file (remembers that the wiring caution has been shown)."""
    base = os.environ.get("XDG_CONFIG_HOME") or os.path.join(os.path.expanduser("~"), ".config")
    return Path(base) / "coilshift" / "state.json"


def show_caution_once(err=None) -> bool:
    """Print the wiring caution the first time capture runs for this user; True if printed."""
    from coilshift.logger.runfolder.atomic import write_json_atomic

    err = err or sys.stderr
    path = state_path()
    try:
        state = json.loads(path.read_text(encoding="utf-8"))
        if not isinstance(state, dict):
            state = {}
    except (OSError, ValueError):
        state = {}
    if state.get(_STATE_KEY):
        return False
    err.write(textwrap.fill(WIRING_CAUTION, width=78) + "\n(shown once; see also 'coilshift capture --help')\n\n")
    err.flush()
    state[_STATE_KEY] = True
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        write_json_atomic(path, state)
    except OSError:
        pass  # an unwritable config folder only means the caution shows again next time
    return True


def _synthetic_source(spec: str, rate: float | None, seconds: float | None):
    """A paced synthetic tone: 'F' or 'F,F2@T2,F3@T3' (Hz, step times in s)."""
    from coilshift.logger.capture.engine import PacedSource
    from coilshift.logger.errors import InputError
    from coilshift.logger.sources.synthetic import ToneSource

    steps = []
    try:
        for i, part in enumerate(spec.split(",")):
            f, _, t = part.partition("@")
            steps.append((float(t) if t else 0.0 if i == 0 else float("nan"), float(f)))
    except ValueError:
        raise InputError(f"--synthetic {spec}: expected F or F,F2@T2,...") from None
    if any(t != t for t, _ in steps):
        raise InputError(f"--synthetic {spec}: every step after the first needs @T")
    fs = rate or 48000.0
    duration = (seconds + 5.0) if seconds else 1e7
    return PacedSource(ToneSource(steps, duration, fs, amplitude=0.5, snr_db=50.0, seed=1), block_frames=512)


def _has_termios() -> bool:
    try:  # single-key input needs a POSIX terminal; elsewhere the plain readout is used
        import termios  # noqa: F401
        import tty  # noqa: F401
    except ImportError:
        return False
    return True


def run(args) -> int:
    import signal

    from coilshift.cli.common import print_json
    from coilshift.logger.capture.engine import CaptureEngine
    from coilshift.logger.errors import InputError
    from coilshift.logger.capture.view import LivePlot, PlainLines, TerminalPanel, status_line
    from coilshift.logger.runfolder.writer import prepare_run_dir

    if args.seconds is not None and not args.seconds > 0:
        raise InputError(f"--seconds {args.seconds:g}: must be > 0")
    if args.rate is not None and not args.rate > 0:
        raise InputError(f"--rate {args.rate:g}: must be > 0")
    check_tracking_options(args)
    if args.synthetic:
        source = _synthetic_source(args.synthetic, args.rate, args.seconds)
    else:
        from coilshift.logger.sources.soundcard import SoundcardSource

        source = SoundcardSource(args.device, args.rate, args.channel)
    settings, corr = tracking_from_args(args, source.sample_rate_hz)
    for line in corr.warnings():  # e.g. an even Nyquist zone inverts the apparent shift
        print(f"coilshift: {line}", file=sys.stderr)
    interactive = not args.no_view and sys.stdout.isatty() and sys.stdin.isatty() and _has_termios()
    existed = Path(args.out).exists()
    run_dir = prepare_run_dir(args.out, args.force)
    engine = CaptureEngine(source, run_dir, settings, corr, baseline_s=args.baseline_s, save_audio=args.save_audio,
                           max_seconds=args.seconds,
                           meta={"command": "capture", "options": {k: v for k, v in vars(args).items()
                                                                  if k not in ("func", "command")}})
    try:
        if show_caution_once() and interactive:
            # the live panel clears the screen: let the caution be read first
            try:
                input("Press Enter to start the capture (Ctrl-C to cancel) ")
            except (EOFError, KeyboardInterrupt):
                print()
                raise InputError(f"{run_dir}: capture cancelled before it started; nothing written") from None
        if args.force:  # audio of an earlier run in this folder
            for old in list(run_dir.glob("audio.wav")) + list(run_dir.glob("audio-[0-9][0-9][0-9].wav")):
                old.unlink()
        engine.start()
    except BaseException:
        if not existed:
            try:
                run_dir.rmdir()  # nothing was captured: leave no empty folder behind
            except OSError:
                pass
        raise
    desc = source.describe()
    title = (f"coilshift capture  {desc.get('device_name', 'synthetic tone')}  "
             f"{engine.sample_rate_hz:g} Hz  ch {args.channel}  -> {run_dir}")

    def _term(signum, frame):  # SIGTERM ends the run like Ctrl-C
        raise KeyboardInterrupt

    old_term = signal.signal(signal.SIGTERM, _term)
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
    except KeyboardInterrupt:
        how = "interrupt"
    finally:
        signal.signal(signal.SIGTERM, old_term)
        try:
            summary = engine.stop()
        finally:
            if plot is not None:
                plot.close()
    if args.json:
        print_json(summary)
    else:
        snap = engine.snapshot()
        print(status_line(snap))
        print(f"{summary['status']}: {summary['rows']} rows, {summary['duration_s']:.1f} s in {run_dir} "
              f"(ended by {'you' if how in ('quit', 'interrupt') else summary['ended_by']}); "
              f"faults: {summary['overflows']} overflows, {summary['gaps']} gaps "
              f"({summary['lost_samples']} samples lost), {summary['device_errors']} device errors")
    if summary["status"] == "device_error":
        print(f"coilshift: error: input stopped: {summary['message']}; the log up to then is kept in {run_dir}",
              file=sys.stderr)
        return 1
    if summary["status"] != "complete":
        print(f"coilshift: error: capture failed: {summary['message']}; the log up to then is kept in {run_dir}",
              file=sys.stderr)
        return 3
    return 0
