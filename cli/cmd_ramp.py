"""``coilshift ramp``: the shift-vs-distance curve and the detection range from a target slid at a
steady pace from one distance to another (compared with the run's fixed stops when it has some)."""

from __future__ import annotations

from coilshift.cli.options import (COUNT, add_analysis_options, add_force_option, add_json_option,
                                   add_markers_option, add_out_option, add_quiet_option)

ORDER = 42

HELP = "calibrate from a steady slide: shift vs distance and detection range from one stretch"


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "ramp", help=HELP,
        description=HELP + ". The slide is cut into bins, each a point with its error (from the baselines' "
                           "variogram); the points go through the same fits, test and range interval as fixed "
                           "stops (see docs/events.md).")
    p.add_argument("run", metavar="RUN_DIR", help="run folder (its markers give the baseline stretches)")
    p.add_argument("--ramp", action="append", required=True, metavar="START_S,END_S,TARGET,FROM_MM,TO_MM",
                   help="the slide: a markers row with a start and an end distance (repeatable)")
    p.add_argument("--bins", type=COUNT, default=16, metavar="N", help="points the slide is cut into (default 16)")
    add_markers_option(p, "FILE", "markers CSV to use instead of the run's markers.csv")
    add_analysis_options(p)
    add_json_option(p, "print one JSON object instead of the text")
    add_out_option(p, "write ramp.json and ramp_points.csv to this new folder", metavar="OUT")
    add_force_option(p, "allow OUT to be a non-empty folder")
    add_quiet_option(p, "no progress line on stderr")
    p.set_defaults(func=run)


def _lines(r) -> list[str]:
    s = r.spec
    out = [f"ramp {s.target}: {s.from_mm:g} -> {s.to_mm:g} mm over {s.start_s:g}-{s.end_s:g} s, "
           f"{len(r.distance_mm)} points; threshold {r.threshold_hz:.4g} Hz ({r.threshold_source})"]
    for d, y, e in zip(r.distance_mm, r.shift_hz, r.stderr_hz):
        out.append(f"  {d:8.1f} mm  {y:+11.5f} +- {e:.5f} Hz")
    if r.fit is not None:
        out.append(f"  fit: {r.fit.model}, chi2/dof {r.fit.chi2_red:.2f}, "
                   + ("accepted" if r.fit.accepted else "rejected by its chi-squared test"))
    elif r.fit_reason:
        out.append(f"  {r.fit_reason}")
    rg = r.range
    if rg.range_mm is not None:
        ci = f" (95 % interval {rg.ci_mm[0]:.1f}-{rg.ci_mm[1]:.1f})" if rg.ci_mm else ""
        out.append(f"  detection range {rg.range_mm:.1f} mm{ci}, {rg.basis}")
    else:
        out.append(f"  detection range undefined: {rg.reason}")
    if r.fixed_range is not None:
        f = r.fixed_range
        if f.range_mm is not None and r.difference_mm is not None:
            ci = f" (95 % interval {f.ci_mm[0]:.1f}-{f.ci_mm[1]:.1f})" if f.ci_mm else ""
            out.append(f"  fixed stops of {s.target}: {f.range_mm:.1f} mm{ci}; ramp - fixed = {r.difference_mm:+.1f} mm "
                       f"({100 * r.difference_mm / f.range_mm:+.1f} %)")
        else:
            out.append(f"  fixed stops of {s.target}: range undefined ({f.reason})")
    return out


def run(args) -> int:
    import csv
    import io
    import json

    from coilshift.analysis.calibration.ramp import analyse_ramp, parse_ramp, ramp_summary
    from coilshift.analysis.calibration.run import analyse_run
    from coilshift.cli.analysis_args import analysis_kwargs
    from coilshift.cli.common import note_done, print_json
    from coilshift.logger.progress import make_stages
    from coilshift.logger.runfolder.atomic import to_jsonable, write_text_atomic
    from coilshift.logger.runfolder.markers import read_markers
    from coilshift.logger.runfolder.outputs import building_output_dir
    from coilshift.logger.runfolder.reader import read_log

    specs = [parse_ramp(text) for text in args.ramp]
    kwargs = analysis_kwargs(args)
    markers = read_markers(args.markers) if args.markers else read_log(args.run, columns=()).markers
    fixed = None
    results = []
    with make_stages("ramp", quiet=args.quiet) as stage:  # stderr, on a terminal only
        if any(not m.is_baseline for m in markers):
            fixed = analyse_run(args.run, args.markers, progress=lambda text: stage(f"fixed stops: {text}"), **kwargs)
        for spec in specs:
            stage(f"slide of {spec.target}: points, fits and range interval")
            thr = dict(threshold_hz=fixed.threshold_hz, threshold_edf=fixed.threshold_edf) if fixed is not None \
                else dict(threshold_hz=kwargs["threshold_hz"])
            results.append(analyse_ramp(args.run, spec, args.markers, bins=args.bins, k=kwargs["k"],
                                        coil=kwargs["coil"], placement_mm=kwargs["placement_mm"],
                                        n_boot=kwargs["n_boot"], seed=kwargs["seed"], fixed=fixed, **thr))
    summary = {"run": str(args.run), "ramps": [ramp_summary(r) for r in results]}
    if args.out:
        with building_output_dir(args.out, args.force) as build:
            write_text_atomic(build / "ramp.json", json.dumps(to_jsonable(summary), indent=2) + "\n")
            buf = io.StringIO()
            w = csv.writer(buf, lineterminator="\n")
            w.writerow(["target", "distance_mm", "shift_hz", "stderr_hz", "n"])
            for r in results:
                for d, y, e, n in zip(r.distance_mm, r.shift_hz, r.stderr_hz, r.n_frames):
                    w.writerow([r.spec.target, f"{d:.3f}", f"{y:.6f}", f"{e:.6f}", int(n)])
            write_text_atomic(build / "ramp_points.csv", buf.getvalue())
        note_done(f"the outputs were written to {args.out}")
    if args.json:
        print_json(summary)
        return 0
    for r in results:
        for line in _lines(r):
            print(line)
    return 0
