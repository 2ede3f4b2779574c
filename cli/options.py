"""Every command-line option that two or more commands share, defined once, and the map from
library setting names to the options that set them.

Library code raises :class:`~coilshift.logger.errors.InputError` messages that name settings
(``clock_ppm``); :func:`option_for` turns a setting into the option a user types
(``--clock-ppm``). A setting whose option is not simply ``--`` plus its name with dashes is listed
in :data:`SETTING_OPTIONS`.

What an option's value means to a command (checks, settings built from it) lives in the
modules beside this one (tracking_args, analysis_args, coil_args); the declarations live here
so every command that takes an option takes the same one.
"""

from __future__ import annotations

import argparse
import math
import re

#: setting name -> the option that sets it, where the rule "--" + name-with-dashes does not hold
SETTING_OPTIONS: dict[str, str] = {
    "out_dir": "-o/--out",
    "sample_rate_hz": "--rate",
    "markers_path": "--markers",
    "max_seconds": "--seconds",
    "targets": "--target",
    "dwell_s": "--dwell",
}


def option_for(setting_name: str) -> str:
    """The command-line option that sets ``setting_name`` (``clock_ppm`` -> ``--clock-ppm``)."""
    return SETTING_OPTIONS.get(setting_name, "--" + setting_name.replace("_", "-"))


# ----- numbers -----------------------------------------------------------------------------------

class Bounded:
    """The ``type`` of every numeric option: a finite number inside the range that makes physical
    sense for that option, else argparse's one-line refusal (exit 2) naming the option.

    Parameters
    ----------
    lo, hi : the range; ``lo_open``/``hi_open`` leave an end out (``> 0`` rather than ``>= 0``)
    integer : whole numbers only (written as such: ``3``, not ``3.0``)
    unit : shown after the range in the message, e.g. ``"Hz"``

    Values far outside the physics (1e300 Hz, 1e-200 ohm) would otherwise overflow inside the
    models or make NumPy print warnings and ``inf``; the bounds are generous around what real
    coils, circuits, soundcards and runs use.
    """

    def __init__(self, lo: float, hi: float, *, lo_open: bool = False, hi_open: bool = False,
                 integer: bool = False, unit: str = ""):
        self.lo, self.hi, self.lo_open, self.hi_open = lo, hi, lo_open, hi_open
        self.integer, self.unit = integer, unit
        self.__name__ = "integer" if integer else "number"  # argparse names the type in some messages

    def describe(self) -> str:
        """The accepted range in words, e.g. ``a number above 0 and at most 1e+10 Hz``."""
        kind = "a whole number" if self.integer else "a number"
        unit = f" {self.unit}" if self.unit else ""
        if not (self.lo_open or self.hi_open):
            return f"{kind} from {self.lo:g} to {self.hi:g}{unit}"
        low = f"above {self.lo:g}" if self.lo_open else f"at least {self.lo:g}"
        high = f"below {self.hi:g}" if self.hi_open else f"at most {self.hi:g}"
        return f"{kind} {low} and {high}{unit}"

    def inside(self, x: float) -> bool:
        above = x > self.lo if self.lo_open else x >= self.lo
        below = x < self.hi if self.hi_open else x <= self.hi
        return math.isfinite(x) and above and below

    def __call__(self, text: str):
        try:
            x = int(text, 10) if self.integer else float(text)
        except (TypeError, ValueError):
            raise argparse.ArgumentTypeError(f"expected {self.describe()}, got {str(text)[:30]!r}") from None
        if not self.inside(x):
            raise argparse.ArgumentTypeError(f"must be {self.describe()}, got {str(text)[:30]!r}")
        return x


#: the ranges of the numeric options (generous: what real benches, circuits and runs use)
FREQ_HZ = Bounded(1e-3, 1e10, unit="Hz")
BAND_HZ = Bounded(0, 1e10, unit="Hz")
SAMPLE_RATE_HZ = Bounded(100, 1e7, unit="Hz")
SECONDS = Bounded(0, 1e8, lo_open=True, unit="s")
FRAME_MS = Bounded(0, 1e6, lo_open=True, unit="ms")
SNR_DB = Bounded(-200, 200, unit="dB")
CLOCK_PPM = Bounded(-1e4, 1e4, unit="ppm")
CHANNEL = Bounded(0, 1023, integer=True)
RATIO = Bounded(1, 1_000_000, integer=True)
ZONE = Bounded(1, 1000, integer=True)
THRESHOLD_HZ = Bounded(0, 1e9, lo_open=True, unit="Hz")
FACTOR = Bounded(0, 1000, lo_open=True)
SETTLE_S = Bounded(0, 1e6, unit="s")
DRIFT_HZ_PER_MIN = Bounded(0, 1e9, lo_open=True, unit="Hz/min")
COUNT = Bounded(0, 1_000_000, integer=True)
REPEATS = Bounded(1, 1000, integer=True)
SEED = Bounded(0, 2**32 - 1, integer=True)
CAP_NF = Bounded(1e-6, 1e9, unit="nF")
OHMS = Bounded(1e-3, 1e12, unit="ohm")
FRACTION = Bounded(0, 1, lo_open=True, hi_open=True)
TURNS = Bounded(0, 1e6, lo_open=True)
LENGTH_MM = Bounded(0, 1e5, lo_open=True, unit="mm")
DEPTH_MM = Bounded(0, 1e5, unit="mm")
DISTANCE_MM = Bounded(0, 1e6, unit="mm")
PLACEMENT_MM = Bounded(0, 1000, unit="mm")
WIRE_MM = Bounded(0, 100, lo_open=True, unit="mm")
TEMP_C = Bounded(-273.15, 1000, unit="degC")
CONDUCTIVITY_S_PER_M = Bounded(0, 1e10, lo_open=True, unit="S/m")
MU_R = Bounded(1e-3, 1e7)
FALSE_PER_HOUR = Bounded(1e-6, 3600, unit="per hour")
TIMER_FREQ_HZ = Bounded(1e-3, 1e7, unit="Hz")  # what a 555 astable can be asked for

_AWG = re.compile(r"^\s*(?:[0-9]{1,2}|0{2,4}|[1-4]/0)\s*(?:awg)?\s*$", re.IGNORECASE)


def awg_text(text: str) -> str:
    """``--awg``: a gauge as written on a reel (``26``, ``00``, ``4/0``); the table decides if it exists."""
    if not _AWG.match(str(text)):
        raise argparse.ArgumentTypeError(f"expected a wire gauge such as 26, 0, 00, 0000 or 4/0, got {str(text)[:20]!r}")
    return str(text).strip()


# Each function below declares one option (or one group of options) for every command that takes
# it; where commands differ today (help text, metavar, default, required), the difference is a
# parameter, so each command keeps exactly the option it had.


# ----- output folder and output form -------------------------------------------------------------

def add_out_option(parser, help: str, *, required: bool = False, metavar: str | None = None,
                   default: str | None = None) -> argparse.Action:
    """``-o/--out``: the folder a command writes (every command that writes one)."""
    return parser.add_argument("-o", "--out", required=required, default=default, metavar=metavar, help=help)


def add_run_folder_option(parser) -> argparse.Action:
    """``-o/--out RUN_DIR``, required: the run folder that track, capture and calibrate create."""
    return add_out_option(parser, "run folder to create (new or empty)", required=True, metavar="RUN_DIR")

def add_force_option(parser, help: str) -> argparse.Action:
    """``--force``: allow (or replace) an output folder that is not empty."""
    return parser.add_argument("--force", action="store_true", help=help)


def add_json_option(parser, help: str) -> argparse.Action:
    """``--json``: one JSON object on stdout instead of the text."""
    return parser.add_argument("--json", action="store_true", help=help)


def add_quiet_option(parser, help: str) -> argparse.Action:
    """``--quiet``: no progress bar (and for some commands no text summary)."""
    return parser.add_argument("--quiet", action="store_true", help=help)


# ----- inputs ------------------------------------------------------------------------------------

def add_markers_option(parser, metavar: str, help: str) -> argparse.Action:
    """``--markers``: a markers CSV used instead of (or as) the run's markers."""
    return parser.add_argument("--markers", metavar=metavar, help=help)


def add_channel_option(parser, help: str) -> argparse.Action:
    """``--channel``: the input channel (or scope voltage column), numbered from 0."""
    return parser.add_argument("--channel", type=CHANNEL, default=0, metavar="C", help=help)


def add_live_input_options(parser, device_help: str, channel_help: str):
    """The ``input`` group of the live commands (capture, calibrate): ``--device``, ``--rate``,
    ``--channel``. Returns the group so a command can add its own input options to it."""
    src = parser.add_argument_group("input")
    src.add_argument("--device", help=device_help)
    src.add_argument("--rate", type=SAMPLE_RATE_HZ, metavar="HZ", help="sample rate (default: the device's default rate)")
    add_channel_option(src, channel_help)
    return src


def add_synthetic_option(parser) -> argparse.Action:
    """``--synthetic SPEC``, hidden: a paced test tone instead of a device (see cli/inputs.py)."""
    return parser.add_argument("--synthetic", metavar="SPEC", help=argparse.SUPPRESS)


# ----- tracking ----------------------------------------------------------------------------------

def add_frame_options(parser, frame_default_ms: float, frame_help: str, hop_default_ms: float,
                      hop_help: str) -> None:
    """``--frame-ms`` and ``--hop-ms``: the tracker's frame length and the time between frames."""
    parser.add_argument("--frame-ms", type=FRAME_MS, default=frame_default_ms, help=frame_help)
    parser.add_argument("--hop-ms", type=FRAME_MS, default=hop_default_ms, help=hop_help)


def add_tracking_options(p) -> None:
    """Tracker, correction and baseline options (values in the oscillator's Hz).

    Checked by :func:`coilshift.cli.tracking_args.check_tracking_options` and turned into settings
    by :func:`coilshift.cli.tracking_args.tracking_from_args`.
    """
    g = p.add_argument_group("tracking")
    g.add_argument("--band", nargs=2, type=BAND_HZ, metavar=("LO_HZ", "HI_HZ"),
                   help="only look for the tone between these oscillator frequencies")
    g.add_argument("--near", type=FREQ_HZ, metavar="HZ", help="follow the strongest tone near this oscillator frequency")
    add_frame_options(g, 85.0, "analysis frame length in ms (default 85)",
                      20.0, "time between frames in ms (default 20)")
    g.add_argument("--refine", action="store_true", help="refine each frame with a sine fit (slower)")
    g.add_argument("--min-snr-db", type=SNR_DB, default=10.0, help="flag frames below this SNR (default 10 dB)")
    c = p.add_argument_group("corrections")
    c.add_argument("--clock-ppm", type=CLOCK_PPM, default=0.0, help="soundcard sample-clock error in ppm (default 0)")
    c.add_argument("--divide", type=RATIO, default=1, help="prescaler ratio between oscillator and input (default 1)")
    c.add_argument("--nyquist-zone", type=ZONE, default=1, help="Nyquist zone of the recorded tone (default 1)")
    c.add_argument("--baseline-s", type=SECONDS, default=2.0,
                   help="baseline = median of the first S seconds, also the re-zero window (default 2)")


# ----- calibration analysis ----------------------------------------------------------------------

def _name_value(text: str, what: str) -> tuple[str, str]:
    name, eq, value = text.partition("=")
    if not eq or not name.strip() or not value.strip():
        raise argparse.ArgumentTypeError(f"{what} must look like NAME=VALUE, got {text!r}")
    return name.strip(), value.strip()


def _target_model(text: str) -> tuple[str, str]:
    return _name_value(text, "--target-model")


def _reference(text: str) -> tuple[str, str]:
    name, kind = _name_value(text, "--reference-target")
    kind = kind.lower().replace("_", "-")
    if kind not in ("ferrous", "non-ferrous"):
        raise argparse.ArgumentTypeError(f"--reference-target kind must be ferrous or non-ferrous, got {kind!r}")
    return name, kind


def add_settle_option(parser, help: str) -> argparse.Action:
    """``--settle-s S``: seconds waited after each move before a stretch is recorded (calibrate)."""
    return parser.add_argument("--settle-s", type=SETTLE_S, default=2.0, metavar="S", help=help)


def add_noise_factor_option(parser, what: str) -> argparse.Action:
    """``--noise-factor K``: the one default threshold rule of every command that sets a detection
    threshold from noise: threshold = K x the Allan deviation at the reading time (``what``)."""
    from coilshift.analysis.calibration.defaults import DEFAULT_K

    return parser.add_argument(
        "--noise-factor", type=FACTOR, default=DEFAULT_K, metavar="K",
        help=f"threshold = K x {what} (default {DEFAULT_K:g}: about 4 standard deviations of a reading "
             "minus its bracketing baselines, ~4e-5 false alarms per reading)")


class Distances(tuple):
    """``--distances``: distances in mm, with the unit they were written in (``unit``)."""

    unit = "mm"


def distance_list(text: str) -> Distances:
    """``--distances LIST``: comma-separated distances from the coil face, in mm unless a unit is
    written (``10,20,40`` = mm; ``1,2,4cm`` or ``1cm,2cm,4cm``; ``0.5,1,2in``). One unit for the
    whole list. Values are returned in mm, with the unit kept for display."""
    from coilshift.logger.capture.guide import UNITS_MM, parse_distances
    from coilshift.logger.errors import InputError

    items = [p.strip() for p in str(text).split(",")]
    units = {next((u for u in UNITS_MM if p.lower().endswith(u)), "") for p in items if p}
    written = units - {""}
    if len(written) > 1:
        raise argparse.ArgumentTypeError(f"one unit for the whole list, got {', '.join(sorted(written))}")
    unit = written.pop() if written else "mm"
    body = ",".join(p[:-len(unit)].strip() if p.lower().endswith(unit) else p for p in items)
    try:
        out = Distances(parse_distances(body, unit))
    except InputError as exc:
        raise argparse.ArgumentTypeError(str(exc).split(": ", 1)[-1]) from None
    out.unit = unit
    return out


def add_distances_option(parser, help: str, *, required: bool = False) -> argparse.Action:
    """``--distances LIST[UNIT]`` (calibrate, target): see :func:`distance_list`."""
    return parser.add_argument("--distances", type=distance_list, required=required, metavar="LIST",
                               help=help + " (comma-separated, mm unless the list ends in cm or in: "
                                           "10,20,40 or 1,2,4cm)")


# ----- old spellings, kept one release as hidden aliases ----------------------------------------

class _OldSpelling(argparse.Action):
    """A hidden old spelling of an option: stores into the new option's ``dest`` (through
    ``convert``) and says on stderr what to type instead."""

    def __init__(self, option_strings, dest, new: str = "", convert=None, **kw):
        self.new, self.convert = new, convert
        super().__init__(option_strings, dest, **kw)

    def __call__(self, parser, namespace, values, option_string=None):
        import sys

        print(f"coilshift: note: {option_string} is now {self.new}; the old spelling goes in the next release",
              file=sys.stderr)
        setattr(namespace, self.dest, self.convert(values) if self.convert else values)


#: old spelling -> (command, the option now, dest, nargs, type, convert)
OLD_SPELLINGS: dict[tuple[str, str], tuple] = {
    ("analyze", "--output"): ("-o/--out", "out", None, None, None),
    ("analyze", "--settle"): ("--trim-s", "trim_s", None, SETTLE_S, None),
    ("calibrate", "--report"): ("--analysis-out", "analysis_out", None, None, None),
    ("calibrate", "--settle"): ("--settle-s", "settle_s", None, SETTLE_S, None),
    ("calibrate", "--unit"): ("a unit at the end of --distances (10,20,40cm)", "old_unit", None, None, None),
    ("stability", "--settle"): ("--settled-hz-per-min", "settled_hz_per_min", None, DRIFT_HZ_PER_MIN, None),
    ("target", "--distances-mm"): ("--distances", "distances", "+", DISTANCE_MM, Distances),
    ("target", "--target"): ("--sphere", "sphere", None, None, None),
    ("target", "--sigmas"): ("--noise-factor (K = SIGMAS x sqrt 2)", "noise_factor", None, FACTOR,
                             lambda s: s * math.sqrt(2.0)),
}


def add_old_spellings(parser, command: str) -> None:
    """Add the hidden old spellings of ``command``'s options (:data:`OLD_SPELLINGS`)."""
    for (cmd, old), (new, dest, nargs, type_, convert) in OLD_SPELLINGS.items():
        if cmd == command:
            parser.add_argument(old, action=_OldSpelling, new=new, convert=convert, dest=dest, nargs=nargs,
                                type=type_, default=argparse.SUPPRESS, help=argparse.SUPPRESS)


def add_threshold_option(parser, help: str, *, type: Bounded = THRESHOLD_HZ) -> argparse.Action:
    """``--threshold-hz X``: the smallest shift counted as a detection."""
    return parser.add_argument("--threshold-hz", type=type, metavar="X", help=help)


def add_coil_file_option(parser, help: str) -> argparse.Action:
    """``--coil FILE``: a coil description (JSON)."""
    return parser.add_argument("--coil", metavar="FILE", help=help)


def add_target_option(parser, help: str, *, metavar: str, action: str | None = None,
                      required: bool = False) -> argparse.Action:
    """``--target``: a target's name (calibrate, repeatable) or its description (target)."""
    return parser.add_argument("--target", action=action, required=required, metavar=metavar, help=help)


def add_polarity_option(parser) -> argparse.Action:
    """``--polarity``: which way the frequency moves for a ferrous target (analyze, calibrate, events)."""
    return parser.add_argument("--polarity", choices=("normal", "inverted"), default="normal",
                               help="normal: frequency down = inductance up = ferrous (LC oscillator read "
                                    "directly); inverted: prescaler/aliasing/other topology")


def add_false_rate_option(parser) -> argparse.Action:
    """``--false-per-hour R``: the event detector's false-event rate on quiet baseline (events, capture)."""
    from coilshift.logger.events.crossings import DEFAULT_FALSE_PER_HOUR

    return parser.add_argument("--false-per-hour", type=FALSE_PER_HOUR, default=DEFAULT_FALSE_PER_HOUR, metavar="R",
                               help="event detector: at most R false events per hour of quiet baseline, on "
                                    f"average (default {DEFAULT_FALSE_PER_HOUR:g}); sets its detection level")


def add_analysis_options(p: argparse.ArgumentParser, trim: bool = True) -> None:
    """Options shared by ``analyze`` and ``calibrate`` (which analyses its run at the end; its
    stretches start settled, so it passes ``trim=False``).

    Turned into keyword arguments of ``analyse_run`` by
    :func:`coilshift.cli.analysis_args.analysis_kwargs`.
    """
    from coilshift.analysis.calibration.defaults import (DEFAULT_BOOTSTRAP, DEFAULT_PLACEMENT_MM, DEFAULT_SEED,
                                                          DEFAULT_SETTLE_S)

    g = p.add_argument_group("analysis")
    add_threshold_option(g, "detection threshold in Hz (default: K x the baselines' Allan deviation at the "
                            "dwell time, --noise-factor)", type=THRESHOLD_HZ)
    add_noise_factor_option(g, "the baselines' Allan deviation at the dwell time")
    if trim:
        g.add_argument("--trim-s", type=SETTLE_S, default=None, metavar="S",
                       help=f"settling seconds dropped at each end of every stretch, never more than a quarter "
                            f"of it (default {DEFAULT_SETTLE_S:g}; 0 for runs made by 'calibrate', which start "
                            "each stretch settled)")
    add_coil_file_option(g, "coil description (JSON): the fits use its finite-winding law; needed for --target-model")
    g.add_argument("--target-model", type=_target_model, action="append", default=[], metavar="NAME=SPEC",
                   help="predicted curve for target NAME, e.g. coin=copper:diameter_mm=20 (repeatable)")
    add_polarity_option(g)
    g.add_argument("--reference-target", type=_reference, action="append", default=[], metavar="NAME=KIND",
                   help="a target of known kind (ferrous|non-ferrous) to check the polarity (repeatable)")
    g.add_argument("--fit-offset", action="store_true",
                   help="also fit an offset between the distance reference (housing face) and the coil plane")
    g.add_argument("--placement-mm", type=PLACEMENT_MM, default=DEFAULT_PLACEMENT_MM, metavar="D",
                   help=f"tolerance +-D of every target placement, mm (default {DEFAULT_PLACEMENT_MM:g}); part of "
                        "the fits' errors and of the range interval")
    g.add_argument("--bootstrap", type=COUNT, default=DEFAULT_BOOTSTRAP, metavar="N",
                   help=f"Monte Carlo draws for the range interval, 0 for none (default {DEFAULT_BOOTSTRAP})")
    g.add_argument("--seed", type=SEED, default=DEFAULT_SEED, help=f"Monte Carlo seed (default {DEFAULT_SEED})")


# ----- coil and circuit models -------------------------------------------------------------------

def add_cap_option(parser, help: str) -> argparse.Action:
    """``--cap-nf C``: a capacitor in nF (the coil's tuning capacitor, the 555's timing capacitor)."""
    return parser.add_argument("--cap-nf", type=CAP_NF, metavar="C", help=help)


def add_freq_option(parser, help: str, *, type: Bounded = FREQ_HZ) -> argparse.Action:
    """``--freq-hz F``: an operating or wanted frequency (``type``: the range that makes sense)."""
    return parser.add_argument("--freq-hz", type=type, metavar="F", help=help)


def add_coil_arguments(p) -> None:
    """The coil options shared by the commands that model a coil (``coil``, ``target``); read back
    by :func:`coilshift.cli.coil_args.design_from_args`."""
    g = p.add_argument_group("coil (a JSON file with --coil, or the options; options override the file)")
    add_coil_file_option(g, "coil description file (JSON; see docs/models.md)")
    g.add_argument("--turns", type=TURNS, metavar="N", help="number of turns")
    g.add_argument("--inner-diameter-mm", type=LENGTH_MM, metavar="D", help="former diameter (inside of the winding)")
    g.add_argument("--length-mm", type=LENGTH_MM, metavar="L", help="axial length of the winding")
    g.add_argument("--depth-mm", type=DEPTH_MM, metavar="T", help="radial build of the winding (0 = single layer)")
    w = g.add_mutually_exclusive_group()
    w.add_argument("--awg", type=awg_text, metavar="G", help="wire gauge (AWG, ASTM B258), e.g. 26 or 00")
    w.add_argument("--wire-diameter-mm", type=WIRE_MM, metavar="W", help="bare wire diameter")
    g.add_argument("--outer-wire-diameter-mm", type=WIRE_MM, metavar="W",
                   help="wire diameter over the enamel (default: approximate build for --insulation)")
    g.add_argument("--insulation", choices=("grade1", "grade2", "none"), help="enamel build (default grade1)")
    g.add_argument("--conductor", choices=("copper", "aluminium"), help="wire metal (default copper)")
    g.add_argument("--temp-c", type=TEMP_C, metavar="T", help="winding temperature, degC (default 20)")
    add_cap_option(g, "tuning capacitor across the coil, nF")
    g.add_argument("--lead-length-mm", type=DISTANCE_MM, metavar="L", help="extra wire for the leads")
