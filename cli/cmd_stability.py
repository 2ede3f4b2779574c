"""``coilshift stability``: Allan-family stability, drift, warm-up and tempco of a logged oscillator."""

from __future__ import annotations

import argparse

from coilshift.cli.options import add_force_option, add_json_option, add_out_option, add_settle_option

ORDER = 60


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "stability",
        help="noise floor and drift of a frequency log (Allan deviation, warm-up, tempco)",
        description="Allan, overlapping Allan and modified Allan deviation and time deviation at "
                    "octave averaging times with chi-squared confidence intervals and the dominant "
                    "noise type; linear drift with its uncertainty; warm-up time; optional "
                    "temperature coefficient. Unusable frames and missing time steps are gaps: "
                    "no statistic term reaches across one.",
    )
    p.add_argument("log", metavar="RUN_DIR|LOG.csv", help="run folder or CSV with t_s and freq_hz")
    add_json_option(p, "print one JSON object instead of the table")
    add_out_option(p, "write plots, stability.csv and stability.json to this new folder", metavar="OUT")
    add_force_option(p, "allow OUT to be a non-empty folder")
    p.add_argument("--temperature", metavar="CSV", help="time_s,temp_c readings on the log's clock: fit Hz/degC")
    p.add_argument("--nominal-hz", type=float, metavar="HZ",
                   help="frequency the fractional values refer to (default: mean of the log)")
    p.add_argument("--remove-drift", action="store_true",
                   help="compute the deviations on the residual after removing the linear drift")
    p.add_argument("--confidence", type=float, default=0.6827, metavar="P",
                   help="two-sided confidence level of the intervals (default 0.6827, one sigma)")
    add_settle_option(p, "warm-up ends when |drift rate| stays below this (default 1 ppm of nominal per minute)",
                      metavar="HZ_PER_MIN")
    p.add_argument("--window", type=float, metavar="S",
                   help="window for the local drift rate (default min(60 s, record/5))")
    p.set_defaults(func=run)


def _table_text(res) -> str:
    lines = []
    d = res.drift
    lines.append(f"log: {res.source}")
    lines.append(f"frames {res.n_frames}, used {res.n_used}, unusable {res.n_unusable}, missing steps "
                 f"{res.n_missing}, gap-free segments {res.n_segments}; tau0 {res.tau0_s:.6g} s "
                 f"(time jitter {res.jitter_rms:.3f} tau0 rms); record {res.duration_s:.6g} s")
    lines.append(f"mean {res.mean_hz:.6f} Hz; fractional values relative to {res.nominal_hz:.6f} Hz"
                 + ("; linear drift removed before the deviations" if res.detrended else ""))
    lines.append(f"intervals: {100 * res.confidence:.2f}% chi-squared from equivalent degrees of freedom")
    lines.append("")
    head = (f"{'tau_s':>10} {'ADEV_Hz':>11} {'OADEV_Hz':>11} {'OADEV interval Hz':>25} "
            f"{'MDEV_Hz':>11} {'TDEV_s':>11} {'OADEV_y':>10} {'terms':>7}  noise")
    lines.append(head)
    inside = res.within_frame()
    for i, tau in enumerate(res.tau_s):
        mark = "*" if inside[i] else " "
        ci = f"{res.ci_lo['oadev'][i]:.4g} .. {res.ci_hi['oadev'][i]:.4g}"
        lines.append(f"{tau:>9.4g}{mark} {res.adev_hz[i]:>11.4g} {res.oadev_hz[i]:>11.4g} {ci:>25} "
                     f"{res.mdev_hz[i]:>11.4g} {res.tdev_s[i]:>11.4g} {res.oadev_hz[i] / res.nominal_hz:>10.3g} "
                     f"{res.n_terms['oadev'][i]:>7d}  {res.noise_type[i]}")
    if inside.any():
        lines.append(f"* shorter than the tracker frame ({1000 * res.frame_s:.4g} ms): overlapping frames "
                     "share samples, so these rows show the tracker's smoothing, not the oscillator")
    lines.append("")
    lines.append(f"drift {d.rate_hz_per_min:+.5g} ± {d.u_rate_hz_per_min:.2g} Hz/min (1 sigma, residuals "
                 f"treated as AR(1): lag-1 r = {d.residual_lag1:.2f}, n_eff = {d.n_eff:.0f}; "
                 f"white-noise error would be {d.u_rate_white_hz_per_min:.2g}); "
                 f"residual rms {d.residual_rms_hz:.4g} Hz")
    w = res.warmup
    if w.settled:
        lines.append(f"warm-up: drift rate below {w.threshold_hz_per_min:.3g} Hz/min "
                     f"({w.window_s:.3g} s windows) from {w.warmup_s:.4g} s after start")
    elif w.rate_hz_per_min.size:
        lines.append(f"warm-up: drift rate never stayed below {w.threshold_hz_per_min:.3g} Hz/min "
                     f"({w.window_s:.3g} s windows); the last window still drifts "
                     f"{w.rate_hz_per_min[-1]:+.3g} ± {w.u_rate_hz_per_min[-1]:.2g} Hz/min (set --settle to judge "
                     "against your own limit)")
    else:
        lines.append("warm-up: no window had enough usable frames to judge")
    if res.tempco is not None:
        tc = res.tempco
        lines.append(f"temperature coefficient {tc.hz_per_degc:+.5g} ± {tc.u_hz_per_degc:.2g} Hz/degC "
                     f"({tc.ppm_per_degc:+.4g} ppm/degC) over {tc.temp_min_c:.2f}..{tc.temp_max_c:.2f} degC, "
                     f"R^2 {tc.r_squared:.3f}")
    slow = [n for n in res.noise_type[-2:] if "random-walk" in n or "flicker FM" in n]
    if slow and not res.detrended:
        lines.append("note: slow noise or drift dominates the long averaging times; the drift "
                     "uncertainty is then a lower bound")
    return "\n".join(lines) + "\n"


def run(args: argparse.Namespace) -> int:
    import math
    import sys

    from coilshift.logger.runfolder.reader import read_log
    from coilshift.analysis.stability.analyse import analyse_stability
    from coilshift.analysis.stability.tempco import read_temperature_csv
    from coilshift.cli.common import print_json
    from coilshift.logger.runfolder.folders import new_output_dir
    from coilshift.logger.errors import InputError

    if not 0 < args.confidence < 1:
        raise InputError(f"--confidence: must lie between 0 and 1, got {args.confidence}")
    if args.settle is not None and not (args.settle > 0 and math.isfinite(args.settle)):
        raise InputError(f"--settle: must be a positive number, got {args.settle}")
    if args.window is not None and not (args.window > 0 and math.isfinite(args.window)):
        raise InputError(f"--window: must be a positive number of seconds, got {args.window}")
    if args.nominal_hz is not None and not (args.nominal_hz > 0 and math.isfinite(args.nominal_hz)):
        raise InputError(f"--nominal-hz: must be a positive frequency, got {args.nominal_hz}")
    log = read_log(args.log, columns=("flags",))  # only time, frequency and flags are used
    temperature = read_temperature_csv(args.temperature) if args.temperature else None
    tracker = log.meta.get("tracker") if isinstance(log.meta.get("tracker"), dict) else {}
    frame_ms = tracker.get("frame_ms")
    frame_s = float(frame_ms) / 1000.0 if isinstance(frame_ms, (int, float)) and frame_ms > 0 else None
    # everything that can fail on the input runs before any output exists
    res = analyse_stability(log.t_s, log.freq_hz, log.usable(), nominal_hz=args.nominal_hz,
                            remove_drift=args.remove_drift, confidence=args.confidence,
                            settle_hz_per_min=args.settle, window_s=args.window,
                            temperature=temperature, source=str(args.log),
                            temperature_source=str(args.temperature), frame_s=frame_s)
    summary = res.to_dict()
    if log.interrupted:
        summary["log_interrupted"] = True
    if args.out:
        from coilshift.analysis.report.stability_outputs import write_stability_outputs

        written = write_stability_outputs(res, new_output_dir(args.out, args.force), summary)
    if args.json:
        print_json(summary)
    else:
        sys.stdout.write(_table_text(res))
        if log.interrupted:
            sys.stdout.write("note: the log was interrupted (incomplete last line or run not complete)\n")
        if args.out:
            sys.stdout.write(f"wrote {args.out}/: {', '.join(p.name for p in written)}\n")
    return 0
