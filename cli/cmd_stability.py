"""``coilshift stability``: Allan-family stability, drift, warm-up and tempco of a logged oscillator."""

from __future__ import annotations

import argparse

ORDER = 60

PLOT_SIGMA = "sigma_tau.png"
PLOT_DRIFT = "drift.png"
TABLE = "stability.csv"
SUMMARY = "stability.json"


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
    p.add_argument("--json", action="store_true", help="print one JSON object instead of the table")
    p.add_argument("-o", "--out", metavar="OUT", help="write plots, stability.csv and stability.json to this new folder")
    p.add_argument("--force", action="store_true", help="allow OUT to be a non-empty folder")
    p.add_argument("--temperature", metavar="CSV", help="time_s,temp_c readings on the log's clock: fit Hz/degC")
    p.add_argument("--nominal-hz", type=float, metavar="HZ",
                   help="frequency the fractional values refer to (default: mean of the log)")
    p.add_argument("--remove-drift", action="store_true",
                   help="compute the deviations on the residual after removing the linear drift")
    p.add_argument("--confidence", type=float, default=0.6827, metavar="P",
                   help="two-sided confidence level of the intervals (default 0.6827, one sigma)")
    p.add_argument("--settle", type=float, metavar="HZ_PER_MIN",
                   help="warm-up ends when |drift rate| stays below this (default 1 ppm of nominal per minute)")
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


def _csv_text(res) -> str:
    import pandas as pd

    cols = {"tau_s": res.tau_s, "m": res.m}
    for k in ("adev", "oadev", "mdev", "tdev"):
        unit = "s" if k == "tdev" else "hz"
        cols[f"{k}_{unit}"] = getattr(res, f"{k}_{unit}")
        cols[f"{k}_lo_{unit}"] = res.ci_lo[k]
        cols[f"{k}_hi_{unit}"] = res.ci_hi[k]
        cols[f"{k}_edf"] = res.edf[k]
        cols[f"{k}_n_terms"] = res.n_terms[k]
    for k in ("adev", "oadev", "mdev"):
        cols[f"{k}_frac"] = res.frac(k)
    cols["within_frame"] = res.within_frame()
    cols["noise_alpha"] = res.alpha
    cols["noise_type"] = res.noise_type
    cols["noise_method"] = res.noise_method
    return pd.DataFrame(cols).to_csv(index=False, float_format="%.10g", lineterminator="\n")


def run(args: argparse.Namespace) -> int:
    import json
    import math
    import sys

    from coilshift.logger.runfolder.reader import read_log
    from coilshift.analysis.stability.analyse import analyse_stability, read_temperature_csv
    from coilshift.cli.common import new_output_dir, print_json, to_jsonable
    from coilshift.logger.runfolder.atomic import write_text_atomic
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
        from coilshift.analysis.report.plots_stability import plot_drift, plot_sigma_tau

        out = new_output_dir(args.out, args.force)
        plot_sigma_tau(res, out / PLOT_SIGMA)
        plot_drift(res, out / PLOT_DRIFT)
        write_text_atomic(out / TABLE, _csv_text(res))
        write_text_atomic(out / SUMMARY, json.dumps(to_jsonable(summary), indent=2, allow_nan=False) + "\n")
    if args.json:
        print_json(summary)
    else:
        sys.stdout.write(_table_text(res))
        if log.interrupted:
            sys.stdout.write("note: the log was interrupted (incomplete last line or run not complete)\n")
        if args.out:
            sys.stdout.write(f"wrote {args.out}/: {PLOT_SIGMA}, {PLOT_DRIFT}, {TABLE}, {SUMMARY}\n")
    return 0
