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
    "settle_s": "--settle",
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
                   default: str | None = None, long: str = "--out") -> argparse.Action:
    """``-o/--out`` (``long="--output"`` for analyze): the folder a command writes."""
    return parser.add_argument("-o", long, required=required, default=default, metavar=metavar, help=help)



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


def add_settle_option(parser, help: str, *, metavar: str, type: Bounded = SETTLE_S, default: float | None = None,
                      dest: str | None = None) -> argparse.Action:
    """``--settle``: settling seconds (calibrate, analyze) or the warm-up drift limit (stability)."""
    return parser.add_argument("--settle", type=type, default=default, metavar=metavar, dest=dest, help=help)


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


def add_analysis_options(p: argparse.ArgumentParser, settle: bool = True) -> None:
    """Options shared by ``analyze`` and ``calibrate`` (which analyses its run at the end and has
    its own ``--settle``, applied while recording, so it passes ``settle=False``).

    Turned into keyword arguments of ``analyse_run`` by
    :func:`coilshift.cli.analysis_args.analysis_kwargs`.
    """
    from coilshift.analysis.calibration.defaults import (DEFAULT_BOOTSTRAP, DEFAULT_K, DEFAULT_PLACEMENT_MM,
                                                          DEFAULT_SEED, DEFAULT_SETTLE_S)

    g = p.add_argument_group("analysis")
    add_threshold_option(g, "detection threshold in Hz (default: K x the baselines' Allan deviation at the dwell)",
                         type=THRESHOLD_HZ)
    g.add_argument("--noise-factor", type=FACTOR, default=DEFAULT_K, metavar="K",
                   help=f"threshold = K x noise at the dwell time (default {DEFAULT_K:g}: about 4 standard "
                        "deviations of a bracketed reading, ~4e-5 false alarms per reading)")
    if settle:
        add_settle_option(g, f"settling seconds dropped at each end of every stretch, never more than a quarter "
                             f"of it (default {DEFAULT_SETTLE_S:g}; 0 for runs made by 'calibrate', which start "
                             "each stretch settled)",
                          type=SETTLE_S, default=None, metavar="S", dest="analysis_settle_s")
    add_coil_file_option(g, "coil description (JSON): the fits use its finite-winding law; needed for --target-model")
    g.add_argument("--target-model", type=_target_model, action="append", default=[], metavar="NAME=SPEC",
                   help="predicted curve for target NAME, e.g. coin=copper:diameter_mm=20 (repeatable)")
    g.add_argument("--polarity", choices=("normal", "inverted"), default="normal",
                   help="normal: frequency down = inductance up = ferrous (LC oscillator read directly); "
                        "inverted: prescaler/aliasing/other topology")
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
