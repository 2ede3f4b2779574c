"""The calibration-analysis options (:func:`coilshift.cli.options.add_analysis_options`) turned
into ``analyse_run`` arguments, and the results printed and written; shared by analyze and
calibrate."""

from __future__ import annotations


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
    return {"settle_s": getattr(args, "trim_s", None), "threshold_hz": args.threshold_hz, "k": args.noise_factor, "coil": coil,
            "target_models": models, "polarity": args.polarity, "reference": dict(args.reference_target),
            "fit_offset": args.fit_offset, "n_boot": args.bootstrap, "seed": args.seed,
            "placement_mm": args.placement_mm}


def analyse_and_report(label: str, paths, markers, kwargs: dict, outputs, quiet: bool = False) -> list:
    """Analyse each run (``analyse_run`` with ``kwargs``), write ``outputs.out`` when asked and print
    the results, a stage line on stderr meanwhile (a terminal only) cleared before the printing."""
    from pathlib import Path

    from coilshift.analysis.calibration.run import analyse_run
    from coilshift.logger.progress import make_stages

    n = len(paths)
    results = []
    with make_stages(label, quiet=quiet) as stage:
        for i, path in enumerate(paths, 1):
            where = f"run {i} of {n} ({Path(path).name})" if n > 1 else Path(path).name
            results.append(analyse_run(path, markers, progress=lambda text, w=where: stage(f"{w}: {text}"), **kwargs))
        write_results(results, outputs, progress=stage)
    print_results(results, outputs)
    return results


def write_results(results, args, progress=None) -> None:
    """Write the output folder ``args.out`` (built aside, swapped in whole) when asked;
    ``progress`` (a stage line) hears what is being written."""
    from coilshift.analysis.report.calibration_outputs import write_outputs
    from coilshift.cli.common import note_done
    from coilshift.logger.runfolder.outputs import building_output_dir

    if args.out:
        with building_output_dir(args.out, args.force) as build:  # swapped in whole, or not at all
            write_outputs(results, build, progress=progress)
        note_done(f"the outputs were written to {args.out}")


def print_results(results, args) -> None:
    """Print the summary of the analysed runs: one JSON object with ``args.json``, else text."""
    import sys
    from pathlib import Path

    from coilshift.analysis.calibration.compare import compare_runs, unique_names
    from coilshift.analysis.calibration.summary import result_summary
    from coilshift.analysis.report.calibration_outputs import summary_lines
    from coilshift.cli.common import print_json

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
    if args.out:
        print(f"report: {Path(args.out) / 'report.html'}", file=sys.stderr if args.json else sys.stdout)
