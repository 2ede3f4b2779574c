"""``coilshift track``: track a recording (WAV/FLAC/... or scope CSV export) into a run folder."""

from __future__ import annotations

import sys

from coilshift.cli.options import (add_channel_option, add_force_option, add_json_option, add_markers_option,
                                   add_quiet_option, add_run_folder_option, add_tracking_options)

ORDER = 30


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "track",
        help="track a recording or scope export into a run folder (log.csv, run.json)",
        description="Track the oscillator frequency in a recording and write a run folder: log.csv "
                    "(one row per frame: time, frequency, shift, level, SNR, flags; docs/recording.md lists "
                    "the columns), run.json (source, tracker "
                    "settings, corrections, baseline and how it was set) and a copy of the markers. "
                    "Audio files (WAV 8/16/24/32-bit PCM or float, FLAC, AIFF, ...) and oscilloscope CSV "
                    "exports (a time column and voltage columns; preamble lines are skipped) are streamed, "
                    "so recordings of any length fit in memory. For a scope export, amp_dbfs is dB re "
                    "1 V peak. Frequencies given to --band and --near are the oscillator's (after "
                    "--divide, --nyquist-zone and --clock-ppm). A recording with no tone is refused and "
                    "nothing is written.",
    )
    p.add_argument("input", metavar="INPUT", help="recording: WAV/FLAC/AIFF/OGG file or scope CSV/TXT export")
    add_run_folder_option(p)
    add_force_option(p, "replace the run files in an existing folder")
    add_markers_option(p, "CSV", "markers CSV (start_s,end_s,target,distance_mm); its baseline rows set the baseline")
    add_channel_option(p, "channel to track, numbered from 0 (for a scope export: the voltage column, from 0)")
    add_tracking_options(p)
    add_json_option(p, "print the summary as one JSON object on stdout")
    add_quiet_option(p, "no progress bar and no text summary (warnings still shown)")
    p.set_defaults(func=run)


def warn(lines) -> None:
    """Warnings go to stderr, one line each."""
    for line in lines:
        print(f"coilshift: {line}", file=sys.stderr)


def run(args) -> int:
    from coilshift.cli.common import note_done, print_json
    from coilshift.cli.tracking_args import check_tracking_options, tracking_from_args
    from coilshift.logger.pipeline.batch import track_source
    from coilshift.logger.progress import make_progress
    from coilshift.logger.sources import open_source

    check_tracking_options(args)
    source = open_source(args.input, channel=args.channel)
    settings, corrections = tracking_from_args(args, source.sample_rate_hz)
    early = corrections.warnings()
    warn(early)  # the inverted-sign warning comes before the work, not buried after it
    with make_progress("tracking", quiet=args.quiet) as bar:
        summary = track_source(source, settings, corrections, args.out, markers=args.markers,
                               baseline_s=args.baseline_s, force=args.force, progress=bar)
    note_done(f"the run was written to {summary['run_dir']}")
    warn(w for w in summary["warnings"] if w not in early)
    if args.json:
        print_json(summary)
    elif not args.quiet:
        print(human_summary(summary, args.input))
    return 0


def human_summary(s: dict, input_name: str) -> str:
    counts = ", ".join(f"{k} {v}" for k, v in s["flag_counts"].items()) or "none"
    rate = f"{s['sample_rate_hz']:g} Hz"
    if s["sample_rate_true_hz"] != s["sample_rate_hz"]:
        rate += f" (true {s['sample_rate_true_hz']:.3f} Hz)"
    how = s["baseline_method"]
    if s.get("baseline_window_s") is not None:
        how = f"median of the first {s['baseline_window_s']:g} s"
    return "\n".join([
        f"tracked {input_name} -> {s['run_dir']}",
        f"  {s['frames']} frames ({s['tone_frames']} with a tone) over {s['duration_s']:.3f} s at {rate}",
        f"  baseline {s['baseline_hz']:.4f} Hz ({how})",
        f"  median {s['freq_median_hz']:.4f} Hz; shift {s['shift_min_hz']:+.4f} .. {s['shift_max_hz']:+.4f} Hz",
        f"  flags: {counts}",
    ])
