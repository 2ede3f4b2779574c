"""``coilshift target``: predicted frequency shift and detection range for a small sphere."""

from __future__ import annotations

from coilshift.cli.options import (CONDUCTIVITY_S_PER_M, LENGTH_MM, MU_R, SECONDS, THRESHOLD_HZ, add_coil_arguments,
                                   add_distances_option, add_force_option, add_freq_option, add_json_option,
                                   add_noise_factor_option, add_old_spellings, add_out_option, add_threshold_option)

ORDER = 61


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "target", help="predict the shift a small metal sphere causes vs distance",
        description="Predict the frequency shift of the coil's LC oscillator caused by a small "
                    "sphere on the coil axis (Wait 1951 sphere response, reciprocity), and the "
                    "detection range for a threshold. Distances are from the coil face to the "
                    "target centre.")
    add_coil_arguments(p)
    t = p.add_argument_group("target (a sphere)")
    t.add_argument("--sphere", metavar="SPEC",
                   help="the sphere, e.g. 'steel:diameter_mm=12' or 'sigma=3.5e7,mu_r=1,diameter_mm=20'")
    t.add_argument("--material", metavar="NAME", help="material name (see docs/models.md)")
    t.add_argument("--conductivity-s-per-m", type=CONDUCTIVITY_S_PER_M, metavar="S", help="conductivity, S/m")
    t.add_argument("--mu-r", type=MU_R, metavar="M", help="relative permeability")
    t.add_argument("--diameter-mm", type=LENGTH_MM, metavar="D", help="sphere diameter")
    add_freq_option(p, "operating frequency (default: the coil's LC frequency with --cap-nf)")
    add_distances_option(p, "distances to tabulate (default: 0.2 to 4 coil radii)")
    th = p.add_mutually_exclusive_group()
    add_threshold_option(th, "smallest detectable |shift|, Hz")
    th.add_argument("--noise-hz", type=THRESHOLD_HZ, metavar="S",
                    help="the oscillator's Allan deviation (Hz) at the reading time: threshold = K x S "
                         "(--noise-factor)")
    th.add_argument("--noise-log", metavar="RUN",
                    help="take that Allan deviation from a target-free frequency log at --tau-s")
    p.add_argument("--tau-s", type=SECONDS, default=1.0, help="reading (averaging) time for --noise-log (default 1 s)")
    add_noise_factor_option(p, "the Allan deviation at the reading time (--noise-hz, or --noise-log at --tau-s)")
    add_out_option(p, "write prediction.csv, prediction.json and shift_vs_distance.png to a new folder",
                   metavar="DIR")
    add_force_option(p, "allow --out to be a folder that is not empty")
    add_json_option(p, "print one JSON object")
    add_old_spellings(p, "target")
    p.set_defaults(func=run)


def target_from_args(args):
    """A TargetSpec from --sphere SPEC or the --material/--conductivity/--mu-r/--diameter options."""
    from coilshift.analysis.models.materials import find_material
    from coilshift.analysis.models.target import make_target, parse_target_spec
    from coilshift.logger.errors import InputError

    loose = (args.material, args.conductivity_s_per_m, args.mu_r, args.diameter_mm)
    if args.sphere:
        if any(v is not None for v in loose):
            raise InputError("target: give --sphere SPEC or the --material/--diameter-mm options, not both")
        return parse_target_spec(args.sphere)
    if args.diameter_mm is None:
        raise InputError("target: give --sphere SPEC, or --diameter-mm with --material or "
                         "--conductivity-s-per-m and --mu-r")
    name, sigma, mu_r = "custom", args.conductivity_s_per_m, args.mu_r
    if args.material:
        mat = find_material(args.material)
        if mat is None:
            from coilshift.analysis.models.materials import MATERIALS

            raise InputError(f"--material {args.material!r}: unknown (known: {', '.join(MATERIALS)})")
        name = mat.name
        sigma = mat.conductivity_s_per_m if sigma is None else sigma
        mu_r = mat.mu_r if mu_r is None else mu_r
    elif sigma is None or mu_r is None:
        raise InputError("target: without --material give both --conductivity-s-per-m and --mu-r")
    return make_target(name, args.diameter_mm, sigma, mu_r, "target options")


def threshold_from_args(args) -> float | None:
    """The detection threshold in Hz: given, or K x the Allan deviation at tau (the rule of analyze)."""
    import math

    from coilshift.logger.errors import InputError

    if args.threshold_hz is not None:
        if not (math.isfinite(args.threshold_hz) and args.threshold_hz > 0):
            raise InputError(f"--threshold-hz {args.threshold_hz}: must be positive")
        return args.threshold_hz
    if args.noise_hz is None and args.noise_log is None:
        return None
    if not (math.isfinite(args.noise_factor) and args.noise_factor > 0):
        raise InputError(f"--noise-factor {args.noise_factor}: must be positive")
    if args.noise_hz is not None:
        noise = args.noise_hz
    else:
        import numpy as np

        from coilshift.logger.runfolder.reader import read_log
        from coilshift.analysis.stability.noise import noise_at_tau_hz

        if not (math.isfinite(args.tau_s) and args.tau_s > 0):
            raise InputError(f"--tau-s {args.tau_s}: must be positive")
        log = read_log(args.noise_log, columns=("flags",))  # time, frequency and flags are all it needs
        # frames the tracker flagged unusable (gap, no tone, out of band) are gaps, as in stability
        noise = noise_at_tau_hz(log.t_s, np.where(log.usable(), log.freq_hz, np.nan), args.tau_s)
    if not (math.isfinite(noise) and noise > 0):
        raise InputError(f"{args.noise_log or '--noise-hz'}: no usable noise figure ({noise})")
    # the same rule as the calibration analysis (analysis.calibration.detection): K x ADEV(tau)
    return args.noise_factor * noise


def run(args) -> int:
    import numpy as np

    from coilshift.analysis.models.coil import analyse_coil
    from coilshift.analysis.models.target import (closed_form_range_mm, induction_number, predicted_range_mm,
                                           predicted_response)
    from coilshift.cli.coil_args import design_from_args
    from coilshift.cli.common import print_json

    rep = analyse_coil(design_from_args(args))
    target = target_from_args(args)
    if args.distances is not None:
        distances = np.asarray(args.distances, float)
    else:
        a = rep.mean_radius_mm
        distances = np.unique(np.round(a * np.geomspace(0.2, 4.0, 12), 1))
    pred = predicted_response(rep, target, distances, args.freq_hz)
    out = {
        "coil": {"method": rep.method, "inductance_uh": rep.inductance_uh,
                 "mean_radius_mm": rep.mean_radius_mm, "turns": rep.design.turns},
        "target": target.to_dict(),
        "induction_number": float(induction_number(target, pred.freq_hz)),
        **pred.to_dict(),
    }
    threshold = threshold_from_args(args)
    if threshold is not None:
        out["threshold_hz"] = threshold
        out["range_mm"] = predicted_range_mm(rep, target, pred.freq_hz, threshold)
        out["range_closed_form_mm"] = closed_form_range_mm(rep, target, pred.freq_hz, threshold)
    if args.out:
        out["outputs"] = _write_outputs(args, rep, target, pred, out)
    if args.json:
        print_json(out)
        return 0
    k = pred.response
    trend = "falls (ferrous-like)" if k.real > 0 else "rises (conductor-like)" if k.real < 0 else "does not move"
    lines = [
        f"target {target.name}: sphere {target.diameter_mm:g} mm, sigma {target.conductivity_s_per_m:.4g} S/m, "
        f"mu_r {target.mu_r:g}",
        f"coil: {rep.method}, {rep.inductance_uh:.5g} uH, mean radius {rep.mean_radius_mm:.4g} mm; "
        f"operating at {pred.freq_hz:.6g} Hz",
        f"response k = {k.real:+.5f} {k.imag:+.5f}i (induction number {out['induction_number']:.4g}); "
        f"frequency {trend}",
        "",
        f"{'distance_mm':>12} {'shift_hz':>14} {'delta_L_uH':>14} {'delta_R_ohm':>14}",
    ]
    for z, s, dl, dr in zip(pred.distance_mm, pred.shift_hz, pred.delta_l_uh, pred.delta_r_ohm):
        lines.append(f"{z:12.4g} {s:+14.5g} {dl:+14.5g} {dr:14.5g}")
    if threshold is not None:
        lines += ["",
                  f"range for |shift| >= {threshold:.4g} Hz: {out['range_mm']:.4g} mm (full winding); "
                  f"{out['range_closed_form_mm']:.4g} mm (single-loop closed form)",
                  "A bench model on the coil axis; soil, orientation and shape change real ranges. "
                  "Before digging, follow local rules and locate buried services."]
    lines += [f"note: {n}" for n in pred.notes]
    if args.out:
        lines.append(f"wrote {', '.join(out['outputs'])} in {args.out}")
    print("\n".join(lines))
    return 0


def _write_outputs(args, rep, target, pred, summary) -> list[str]:
    """prediction.csv (the table), prediction.json (the summary) and the plot, in a new folder."""
    from coilshift.logger.runfolder.outputs import building_output_dir

    with building_output_dir(args.out, args.force) as folder:  # swapped in whole, or not at all
        return _write_into(folder, rep, target, pred, summary)


def _write_into(folder, rep, target, pred, summary) -> list[str]:
    import numpy as np

    from coilshift.analysis.report.plots_models import plot_predicted_shift
    from coilshift.analysis.models.target import closed_form_amplitude_hz, predicted_shift_hz
    from coilshift.cli.common import to_jsonable
    from coilshift.logger.runfolder.atomic import write_json_atomic, write_text_atomic

    rows = ["distance_mm,shift_hz,delta_l_uh,delta_r_ohm,delta_inv_q"]
    for z, s, dl, dr, dq in zip(pred.distance_mm, pred.shift_hz, pred.delta_l_uh, pred.delta_r_ohm,
                                pred.delta_inv_q):
        rows.append(f"{z:.6g},{s:.9g},{dl:.9g},{dr:.9g},{dq:.9g}")
    write_text_atomic(folder / "prediction.csv", "\n".join(rows) + "\n")
    a = rep.mean_radius_mm
    top = max(5.0 * a, float(np.max(pred.distance_mm)) if pred.distance_mm.size else 0.0,
              summary.get("range_mm") or 0.0)
    grid = np.geomspace(0.05 * a, top * 1.2, 200)
    curve = predicted_shift_hz(rep, target, grid, pred.freq_hz)
    closed = closed_form_amplitude_hz(rep, target, pred.freq_hz) * (a * a / (a * a + grid * grid)) ** 3
    plot_predicted_shift(grid, curve, folder / "shift_vs_distance.png",
                         title=f"{target.name} sphere {target.diameter_mm:g} mm, coil {rep.inductance_uh:.4g} uH "
                               f"at {pred.freq_hz:.5g} Hz",
                         points_mm=pred.distance_mm, points_hz=pred.shift_hz, closed_form_hz=closed,
                         threshold_hz=summary.get("threshold_hz"), range_mm=summary.get("range_mm"))
    names = ["prediction.csv", "prediction.json", "shift_vs_distance.png"]
    write_json_atomic(folder / "prediction.json", to_jsonable({**summary, "outputs": names}))
    return names
