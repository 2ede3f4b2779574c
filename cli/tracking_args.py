"""The tracking options (:func:`coilshift.cli.options.add_tracking_options`) checked and turned
into tracker settings and corrections, for every command that tracks (track, capture, calibrate)."""

from __future__ import annotations

import math


def check_tracking_options(args) -> None:
    """Refuse bad tracking, correction and channel options before any input is opened.

    Shared by every command that takes :func:`~coilshift.cli.options.add_tracking_options`
    (track, capture, calibrate); the checks that need the sample rate stay in
    :func:`tracking_from_args`.
    """
    from coilshift.logger.errors import InputError

    if args.channel < 0:
        raise InputError(f"--channel {args.channel}: channels are numbered from 0")
    for opt, value in (("--frame-ms", args.frame_ms), ("--hop-ms", args.hop_ms), ("--baseline-s", args.baseline_s)):
        if not (math.isfinite(value) and value > 0):
            raise InputError(f"{opt} {value:g}: must be a positive number")
    if not math.isfinite(args.min_snr_db):
        raise InputError(f"--min-snr-db {args.min_snr_db:g}: must be a finite number")
    if args.band is not None:
        lo, hi = args.band
        if not (math.isfinite(lo) and math.isfinite(hi) and 0 <= lo < hi):
            raise InputError(f"--band {lo:g} {hi:g}: give LO_HZ then HI_HZ, with 0 <= LO_HZ < HI_HZ")
    if args.near is not None and not (math.isfinite(args.near) and args.near > 0):
        raise InputError(f"--near {args.near:g}: must be a positive frequency")


def tracking_from_args(args, sample_rate_hz: float):
    """TrackerSettings (band/near moved to the recording's raw Hz) and Corrections from the options."""
    from coilshift.logger.errors import InputError
    from coilshift.logger.pipeline.corrections import Corrections
    from coilshift.logger.tracking.tracker import TrackerSettings

    corr = Corrections(clock_ppm=args.clock_ppm, divide=args.divide, nyquist_zone=args.nyquist_zone)
    band = near = None
    if args.band is not None:
        lo, hi = args.band
        raw = sorted(float(v) for v in corr.freq_to_raw([lo, hi], sample_rate_hz))
        if not all(math.isfinite(v) for v in raw) or raw[0] == raw[1]:
            raise InputError(f"--band {lo:g} {hi:g}: not inside Nyquist zone {args.nyquist_zone} at "
                             f"{sample_rate_hz:g} Hz with divide {args.divide}")
        band = (raw[0], raw[1])
    if args.near is not None:
        near = float(corr.freq_to_raw(args.near, sample_rate_hz))
        if not math.isfinite(near):
            raise InputError(f"--near {args.near:g}: not inside Nyquist zone {args.nyquist_zone} at "
                             f"{sample_rate_hz:g} Hz with divide {args.divide}")
    try:
        settings = TrackerSettings(frame_ms=args.frame_ms, hop_ms=args.hop_ms, band_hz=band, near_hz=near,
                                   refine=args.refine, min_snr_db=args.min_snr_db)
    except ValueError as exc:
        raise InputError(f"tracker options: {exc}") from None
    return settings, corr
