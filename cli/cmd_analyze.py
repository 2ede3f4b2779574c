"""``coilshift analyze``: calibration runs -> shift curves, detection ranges, ferrous calls, report."""

from __future__ import annotations

import argparse
import math

ORDER = 40

HELP = "analyse calibration runs: shift vs distance, detection range, ferrous or not, report"


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


def add_analysis_options(p: argparse.ArgumentParser, settle: bool = True) -> None:
    """Options shared by ``analyze`` and ``calibrate`` (which analyses its run at the end and has
    its own ``--settle``, applied while recording, so it passes ``settle=False``)."""
    from coilshift.analysis.calibration.defaults import DEFAULT_BOOTSTRAP, DEFAULT_K, DEFAULT_SEED, DEFAULT_SETTLE_S

    g = p.add_argument_group("analysis")
    g.add_argument("--threshold-hz", type=_positive, metavar="X",
                   help="detection threshold in Hz (default: K x the baselines' Allan deviation at the dwell)")
    g.add_argument("--noise-factor", type=_positive, default=DEFAULT_K, metavar="K",
                   help=f"threshold = K x noise at the dwell time (default {DEFAULT_K:g}: about 4 standard "
                        "deviations of a bracketed reading, ~4e-5 false alarms per reading)")
    if settle:
        g.add_argument("--settle", type=_non_negative, default=None, metavar="S",
                       dest="analysis_settle_s",
                       help=f"settling seconds dropped at each end of every stretch, never more than a quarter "
                            f"of it (default {DEFAULT_SETTLE_S:g}; 0 for runs made by 'calibrate', which start "
                            "each stretch settled)")
    g.add_argument("--coil", metavar="FILE", help="coil description (JSON): fixes R in the fit; needed for "
                                                  "--target-model")
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


def register(subparsers) -> None:
    p = subparsers.add_parser("analyze", help=HELP, description=HELP + ". Several runs are compared side by side.")
    p.add_argument("runs", nargs="+", metavar="RUN_DIR", help="run folder(s) (or log CSV files with --markers)")
    p.add_argument("--markers", metavar="FILE", help="markers CSV to use instead of the run's markers.csv "
                                                     "(one run only)")
    add_analysis_options(p)
    p.add_argument("--json", action="store_true", help="print one JSON object instead of the text summary")
    p.add_argument("-o", "--output", metavar="OUT", help="write tables, plots and report.html to this new folder")
    p.add_argument("--force", action="store_true", help="allow OUT to be a non-empty folder")
    p.set_defaults(func=run)


def analysis_kwargs(args) -> dict:
    """Turn the shared analysis options into keyword arguments of ``analyse_run``."""
    from coilshift.analysis.models.coil import analyse_coil, load_coil
    from coilshift.logger.errors import InputError

    coil = analyse_coil(load_coil(args.coil)) if args.coil else None
    models = {}
    if args.target_model:
        from coilshift.analysis.models.target import parse_target_spec

        if coil is None:
            raise InputError("--target-model needs --coil FILE (the prediction depends on the coil)")
        for name, spec in args.target_model:
            models[name] = parse_target_spec(spec)
    if args.bootstrap < 0:
        raise InputError(f"--bootstrap must be 0 or more, got {args.bootstrap}")
    return {"settle_s": getattr(args, "analysis_settle_s", None), "threshold_hz": args.threshold_hz, "k": args.noise_factor, "coil": coil,
            "target_models": models, "polarity": args.polarity, "reference": dict(args.reference_target),
            "fit_offset": args.fit_offset, "n_boot": args.bootstrap, "seed": args.seed}


def report_results(results, args) -> None:
    """Print the summary (text or JSON) and write the output folder when asked."""
    import sys

    from coilshift.analysis.calibration.run import result_summary
    from coilshift.analysis.calibration.compare import compare_runs, unique_names
    from coilshift.analysis.report.calibration_report import summary_lines, write_outputs
    from coilshift.cli.common import new_output_dir, print_json

    out = None
    if args.output:
        out = new_output_dir(args.output, args.force)
        write_outputs(results, out)
    if args.json:
        if len(results) == 1:
            print_json(result_summary(results[0]))
        else:
            names = unique_names(results)
            print_json({"runs": [{"run": n, **result_summary(r)} for n, r in zip(names, results)],
                        "comparison": [row.to_dict() for row in compare_runs(results, names)]})
        return
    for r in results:
        for line in summary_lines(r):
            print(line)
    if len(results) > 1:
        names = unique_names(results)
        print("ranges compared (mm):")
        for row in compare_runs(results, names):
            cells = ", ".join(f"{n}: " + ("-" if n not in row.range_mm else "undefined" if row.range_mm[n] is None
                                          else f"{row.range_mm[n]:.1f}") for n in names)
            print(f"  {row.target}: {cells}")
    if out is not None:
        print(f"report: {out / 'report.html'}", file=sys.stderr if args.json else sys.stdout)


def run(args) -> int:
    from coilshift.analysis.calibration.run import analyse_run
    from coilshift.logger.errors import InputError

    if args.markers and len(args.runs) > 1:
        raise InputError(f"{args.markers}: --markers applies to one run; give each run its own markers.csv")
    kwargs = analysis_kwargs(args)
    results = [analyse_run(path, args.markers, **kwargs) for path in args.runs]
    report_results(results, args)
    return 0
