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
    return parser.add_argument("--channel", type=int, default=0, metavar="C", help=help)


def add_live_input_options(parser, device_help: str, channel_help: str):
    """The ``input`` group of the live commands (capture, calibrate): ``--device``, ``--rate``,
    ``--channel``. Returns the group so a command can add its own input options to it."""
    src = parser.add_argument_group("input")
    src.add_argument("--device", help=device_help)
    src.add_argument("--rate", type=float, metavar="HZ", help="sample rate (default: the device's default rate)")
    add_channel_option(src, channel_help)
    return src


def add_synthetic_option(parser) -> argparse.Action:
    """``--synthetic SPEC``, hidden: a paced test tone instead of a device (see cli/inputs.py)."""
    return parser.add_argument("--synthetic", metavar="SPEC", help=argparse.SUPPRESS)


# ----- tracking ----------------------------------------------------------------------------------

def add_frame_options(parser, frame_default_ms: float, frame_help: str, hop_default_ms: float,
                      hop_help: str) -> None:
    """``--frame-ms`` and ``--hop-ms``: the tracker's frame length and the time between frames."""
    parser.add_argument("--frame-ms", type=float, default=frame_default_ms, help=frame_help)
    parser.add_argument("--hop-ms", type=float, default=hop_default_ms, help=hop_help)


def add_tracking_options(p) -> None:
    """Tracker, correction and baseline options (values in the oscillator's Hz).

    Checked by :func:`coilshift.cli.tracking_args.check_tracking_options` and turned into settings
    by :func:`coilshift.cli.tracking_args.tracking_from_args`.
    """
    g = p.add_argument_group("tracking")
    g.add_argument("--band", nargs=2, type=float, metavar=("LO_HZ", "HI_HZ"),
                   help="only look for the tone between these oscillator frequencies")
    g.add_argument("--near", type=float, metavar="HZ", help="follow the strongest tone near this oscillator frequency")
    add_frame_options(g, 85.0, "analysis frame length in ms (default 85)",
                      20.0, "time between frames in ms (default 20)")
    g.add_argument("--refine", action="store_true", help="refine each frame with a sine fit (slower)")
    g.add_argument("--min-snr-db", type=float, default=10.0, help="flag frames below this SNR (default 10 dB)")
    c = p.add_argument_group("corrections")
    c.add_argument("--clock-ppm", type=float, default=0.0, help="soundcard sample-clock error in ppm (default 0)")
    c.add_argument("--divide", type=int, default=1, help="prescaler ratio between oscillator and input (default 1)")
    c.add_argument("--nyquist-zone", type=int, default=1, help="Nyquist zone of the recorded tone (default 1)")
    c.add_argument("--baseline-s", type=float, default=2.0,
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


def _positive(text: str) -> float:
    try:
        x = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None
    if not (math.isfinite(x) and x > 0):
        raise argparse.ArgumentTypeError(f"must be a positive number, got {text!r}")
    return x


def _non_negative(text: str) -> float:
    try:
        x = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None
    if not (math.isfinite(x) and x >= 0):
        raise argparse.ArgumentTypeError(f"must be zero or a positive number, got {text!r}")
    return x


def add_settle_option(parser, help: str, *, metavar: str, type=float, default: float | None = None,
                      dest: str | None = None) -> argparse.Action:
    """``--settle``: settling seconds (calibrate, analyze) or the warm-up drift limit (stability)."""
    return parser.add_argument("--settle", type=type, default=default, metavar=metavar, dest=dest, help=help)


def add_threshold_option(parser, help: str, *, type=float) -> argparse.Action:
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
    from coilshift.analysis.calibration.defaults import DEFAULT_BOOTSTRAP, DEFAULT_K, DEFAULT_SEED, DEFAULT_SETTLE_S

    g = p.add_argument_group("analysis")
    add_threshold_option(g, "detection threshold in Hz (default: K x the baselines' Allan deviation at the dwell)",
                         type=_positive)
    g.add_argument("--noise-factor", type=_positive, default=DEFAULT_K, metavar="K",
                   help=f"threshold = K x noise at the dwell time (default {DEFAULT_K:g}: about 4 standard "
                        "deviations of a bracketed reading, ~4e-5 false alarms per reading)")
    if settle:
        add_settle_option(g, f"settling seconds dropped at each end of every stretch, never more than a quarter "
                             f"of it (default {DEFAULT_SETTLE_S:g}; 0 for runs made by 'calibrate', which start "
                             "each stretch settled)",
                          type=_non_negative, default=None, metavar="S", dest="analysis_settle_s")
    add_coil_file_option(g, "coil description (JSON): fixes R in the fit; needed for --target-model")
    g.add_argument("--target-model", type=_target_model, action="append", default=[], metavar="NAME=SPEC",
                   help="predicted curve for target NAME, e.g. coin=copper:diameter_mm=20 (repeatable)")
    g.add_argument("--polarity", choices=("normal", "inverted"), default="normal",
                   help="normal: frequency down = inductance up = ferrous (LC oscillator read directly); "
                        "inverted: prescaler/aliasing/other topology")
    g.add_argument("--reference-target", type=_reference, action="append", default=[], metavar="NAME=KIND",
                   help="a target of known kind (ferrous|non-ferrous) to check the polarity (repeatable)")
    g.add_argument("--fit-offset", action="store_true",
                   help="also fit an offset between the distance reference (housing face) and the coil plane")
    g.add_argument("--bootstrap", type=int, default=DEFAULT_BOOTSTRAP, metavar="N",
                   help=f"bootstrap replicates for the range interval (default {DEFAULT_BOOTSTRAP})")
    g.add_argument("--seed", type=int, default=DEFAULT_SEED, help=f"bootstrap seed (default {DEFAULT_SEED})")


# ----- coil and circuit models -------------------------------------------------------------------

def add_cap_option(parser, help: str) -> argparse.Action:
    """``--cap-nf C``: a capacitor in nF (the coil's tuning capacitor, the 555's timing capacitor)."""
    return parser.add_argument("--cap-nf", type=float, metavar="C", help=help)


def add_freq_option(parser, help: str) -> argparse.Action:
    """``--freq-hz F``: an operating or wanted frequency."""
    return parser.add_argument("--freq-hz", type=float, metavar="F", help=help)


def add_coil_arguments(p) -> None:
    """The coil options shared by the commands that model a coil (``coil``, ``target``); read back
    by :func:`coilshift.cli.coil_args.design_from_args`."""
    g = p.add_argument_group("coil (a JSON file with --coil, or the options; options override the file)")
    add_coil_file_option(g, "coil description file (JSON; see docs/models.md)")
    g.add_argument("--turns", type=float, metavar="N", help="number of turns")
    g.add_argument("--inner-diameter-mm", type=float, metavar="D", help="former diameter (inside of the winding)")
    g.add_argument("--length-mm", type=float, metavar="L", help="axial length of the winding")
    g.add_argument("--depth-mm", type=float, metavar="T", help="radial build of the winding (0 = single layer)")
    w = g.add_mutually_exclusive_group()
    w.add_argument("--awg", metavar="G", help="wire gauge (AWG, ASTM B258), e.g. 26 or 00")
    w.add_argument("--wire-diameter-mm", type=float, metavar="W", help="bare wire diameter")
    g.add_argument("--outer-wire-diameter-mm", type=float, metavar="W",
                   help="wire diameter over the enamel (default: approximate build for --insulation)")
    g.add_argument("--insulation", choices=("grade1", "grade2", "none"), help="enamel build (default grade1)")
    g.add_argument("--conductor", choices=("copper", "aluminium"), help="wire metal (default copper)")
    g.add_argument("--temp-c", type=float, metavar="T", help="winding temperature, degC (default 20)")
    add_cap_option(g, "tuning capacitor across the coil, nF")
    g.add_argument("--lead-length-mm", type=float, metavar="L", help="extra wire for the leads")
