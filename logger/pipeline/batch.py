"""From a recording to a run folder: stream -> track -> correct -> baseline -> write.

The audio is streamed block by block (memory bounded by the block size whatever the length
of the recording); the tracker's frames are small (a 2-hour file at a 20 ms hop is ~360 000
frames, ~15 MB) and are collected whole. Only then is anything written: that way the baseline is
known before the first row (so ``shift_hz`` is right in every row), a recording with no tone is
refused without leaving a useless folder behind, and a failure while writing removes what this
command created instead of leaving a half run that looks complete.

The frames go through the same post-processing as a live capture's
(:mod:`coilshift.logger.pipeline.stage`) and their run.json is built by the same builder
(:mod:`coilshift.logger.pipeline.runmeta`).
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Callable

import numpy as np

from coilshift.logger.errors import InputError, setting
from coilshift.logger.pipeline.baseline import Baseline, baseline_from_markers, baseline_from_start
from coilshift.logger.pipeline.corrections import Corrections, clock_ppm_from_tone, level_warnings
from coilshift.logger.pipeline.prefetch import read_ahead
from coilshift.logger.pipeline.runmeta import baseline_meta, run_meta, tracker_meta
from coilshift.logger.pipeline.stage import FrameStage, LogFeed
from coilshift.logger.runfolder import columns as _columns
from coilshift.logger.runfolder import flags as _flags
from coilshift.logger.runfolder.folders import MARKERS_NAME, RunClaim
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.markers import Marker, check_within, markers_to_csv, read_markers
from coilshift.logger.runfolder.writer import RunWriter, write_markers_copy

ProgressFn = Callable[[float, float], None]

#: seconds of audio handed to the tracker at a time when replaying a file
REPLAY_BLOCK_S = 8


def source_name(source) -> str:
    """The name to put in front of an error about ``source`` (its path, or its kind)."""
    return str(getattr(source, "name", None) or source.describe().get("kind", "source"))


def run_tracker(source, settings, progress: ProgressFn | None = None) -> tuple[FrameTable, object]:
    """Stream ``source`` through a :class:`~coilshift.logger.tracking.tracker.FrameTracker`.

    Returns the raw frames (nominal-rate times and frequencies) and the tracker (for its
    ``frame_len``/``hop_len``). Raises InputError when the recording is shorter than one frame.
    """
    from coilshift.logger.tracking.tracker import FrameTracker, available_workers

    fs = float(source.sample_rate_hz)
    name = source_name(source)
    try:
        tracker = FrameTracker(fs, settings, workers=available_workers())
    except InputError as exc:  # e.g. a sample rate too low for the frame: the recording's fault
        raise InputError(f"{name}: {exc}") from None
    if source.n_frames < tracker.frame_len:
        raise InputError(f"{source_name(source)}: the recording is {1e3 * source.duration_s:.1f} ms long, "
                         f"shorter than one analysis frame ({1e3 * tracker.frame_len / fs:.1f} ms)")
    # about 8 s per block: each push has a fixed cost, and 8 s of float64 is only ~3 MB at 48 kHz
    block_frames = max(int(tracker.frame_len), REPLAY_BLOCK_S * int(fs))
    parts: list[FrameTable] = []
    done = 0
    total_s = source.duration_s
    blocks = read_ahead(source.blocks(block_frames))  # the next block decodes while this one is tracked
    try:
        for block in blocks:
            try:
                parts.append(tracker.push(block))
            except InputError as exc:  # NaN or infinite samples in a float recording
                raise InputError(f"{name}: {exc} (in the block starting at {done / fs:.3f} s)") from None
            done += len(block)
            if progress is not None:
                progress(done / fs, total_s)
        parts.append(tracker.finish())
    finally:
        blocks.close()  # stops the reader (and closes the file) when tracking failed
        tracker.close()
    return FrameTable.concat(parts), tracker


def _load_markers(markers) -> tuple[list[Marker], str]:
    if markers is None:
        return [], "markers"
    if isinstance(markers, (str, os.PathLike)):
        return read_markers(markers), str(markers)
    return list(markers), "markers"


def _choose_baseline(frames: FrameTable, markers: list[Marker], baseline_s: float, name: str,
                     markers_name: str, warnings: list[str]) -> Baseline:
    if markers:
        if any(m.is_baseline for m in markers):
            return baseline_from_markers(frames, markers, markers_name)
        warnings.append(f"warning: {markers_name} has no baseline rows; baseline taken from the "
                        f"first {baseline_s:g} s instead")
    return baseline_from_start(frames, baseline_s, name)


def _flag_counts(flags: np.ndarray) -> dict[str, int]:
    return {word: int(np.count_nonzero(flags & bit)) for bit, word in _flags.NAMES.items()
            if np.any(flags & bit)}


def track_source(source, settings, corrections: Corrections | None, run_dir: str | os.PathLike,
                 markers=None, baseline_s: float = 2.0, force: bool = False,
                 progress: ProgressFn | None = None) -> dict:
    """Track a recording and write a run folder (log.csv, run.json, markers.csv).

    Parameters
    ----------
    source : an opened source (:func:`coilshift.logger.sources.open_source`, or
        :class:`coilshift.logger.sources.synthetic.ToneSource`)
    settings : :class:`coilshift.logger.tracking.tracker.TrackerSettings` (band and near frequency in the
        recording's raw Hz; see :meth:`Corrections.freq_to_raw`)
    corrections : clock, Nyquist-zone and prescaler corrections (None = none)
    run_dir : folder to create; an existing non-empty folder is refused unless ``force``
    markers : None, a markers CSV path, or a list of :class:`~coilshift.logger.runfolder.markers.Marker`
        (times in seconds of the corrected time axis); validated against the recording's length
    baseline_s : window for the default baseline (median of the first ``baseline_s`` seconds);
        ignored when the markers have baseline rows
    progress : ``progress(done_s, total_s)`` called as audio is consumed

    Returns
    -------
    dict : ``run_dir``, ``frames``, ``tone_frames``, ``duration_s``, ``sample_rate_hz``
        (nominal), ``sample_rate_true_hz``, ``baseline_hz``, ``baseline_method``,
        ``freq_median_hz``, ``shift_min_hz``, ``shift_max_hz``, ``flag_counts``, ``warnings``,
        ``start_utc``, ``start_utc_from``.

    Raises
    ------
    InputError : bad recording or markers, a recording without a tone, an existing folder.
    """
    run_dir = Path(run_dir)
    claim = RunClaim(run_dir, force)
    claim.check()  # before hours of tracking rather than after
    claim.hold()  # and no other coilshift command writes into it meanwhile
    try:
        return _track_into(claim, source, settings, corrections, markers, baseline_s, progress)
    finally:
        claim.release()


def _track_into(claim, source, settings, corrections, markers, baseline_s: float, progress) -> dict:
    """:func:`track_source`, with the run folder claimed (and, if it exists, locked)."""
    corrections = corrections or Corrections()
    run_dir = claim.run_dir
    name = source_name(source)
    if not baseline_s > 0:
        raise InputError(f"baseline window ({setting('baseline_s')}) must be positive, got {baseline_s:g} s")
    marker_list, markers_name = _load_markers(markers)
    fs = float(source.sample_rate_hz)
    duration_s = float(corrections.time_to_true(source.duration_s))
    if marker_list:
        check_within(marker_list, duration_s, markers_name)

    raw, tracker = run_tracker(source, settings, progress)
    warnings = list(getattr(source, "warnings", []))  # e.g. a WAV header its writer never finished
    warnings += corrections.warnings(raw, fs)
    warnings += level_warnings(raw)
    frames = FrameStage(fs, corrections, source.amp_offset_db).apply(raw)
    has_tone = _tone_frames(frames, name)
    base = _choose_baseline(frames, marker_list, baseline_s, name, markers_name, warnings)

    start, start_how = source.start_time(duration_s)
    meta = run_meta(start, created_by="coilshift track", start_utc_from=start_how, source=source.describe(),
                    sample_rate_hz=fs, sample_rate_true_hz=corrections.true_sample_rate_hz(fs),
                    duration_s=duration_s, tracker=tracker_meta(settings, tracker),
                    corrections=corrections.to_dict(), baseline=baseline_meta(base),
                    units=_columns.units(amp_dbfs=source.amp_reference),
                    markers={"file": MARKERS_NAME, "count": len(marker_list)} if marker_list else None,
                    warnings=warnings)
    totals = {"frames": len(frames), "tone_frames": int(has_tone.sum()), "duration_s": duration_s}
    _write_run(claim, meta, frames, marker_list, totals)
    return _summary(run_dir, frames, has_tone, base, meta, source, corrections)


def _tone_frames(frames: FrameTable, name: str) -> np.ndarray:
    """Mask of the frames with a tone; refuses a recording that has none."""
    has_tone = np.isfinite(frames.freq_hz) & ((frames.flags & (_flags.NO_TONE | _flags.OUT_OF_BAND)) == 0)
    if not has_tone.any():
        if np.any(frames.flags & _flags.OUT_OF_BAND):
            raise InputError(f"{name}: no tone inside the requested band in any of {len(frames)} frames")
        raise InputError(f"{name}: no tone found in any of {len(frames)} frames (silence or noise only; "
                         f"check the channel and the input level)")
    return has_tone


def _write_run(claim: RunClaim, meta: dict, frames: FrameTable, marker_list: list[Marker], totals: dict) -> None:
    """Write the run folder all or nothing (an old run replaced under force comes back on failure)."""
    with claim.replacing() as folder:
        writer = RunWriter(folder, meta)
        try:
            feed = LogFeed(writer)  # the baseline is in meta already: no window to wait for
            feed.emit(frames)
            feed.finish()
            if marker_list:
                write_markers_copy(folder, markers_to_csv(marker_list))
            writer.close(totals, status="complete")
        except BaseException:
            try:
                writer.close(totals, status="failed")
            except Exception:
                pass
            raise


def _summary(run_dir: Path, frames: FrameTable, has_tone: np.ndarray, base: Baseline, meta: dict, source,
             corrections: Corrections) -> dict:
    fs = meta["sample_rate_hz"]
    shift = frames.freq_hz[has_tone] - base.freq_hz
    return {
        "run_dir": str(run_dir),
        "frames": len(frames),
        "tone_frames": int(has_tone.sum()),
        "duration_s": meta["duration_s"],
        "sample_rate_hz": fs,
        "sample_rate_true_hz": corrections.true_sample_rate_hz(fs),
        "baseline_hz": base.freq_hz,
        "baseline_method": base.method,
        "baseline_window_s": base.details.get("window_s"),
        "freq_median_hz": float(np.median(frames.freq_hz[has_tone])),
        "shift_min_hz": float(shift.min()),
        "shift_max_hz": float(shift.max()),
        "flag_counts": _flag_counts(frames.flags),
        "warnings": meta["warnings"],
        "start_utc": meta["start_utc"],
        "start_utc_from": meta["start_utc_from"],
        "amplitude_reference": source.amp_reference,
    }


def measure_clock(source, reference_hz: float, settings, progress: ProgressFn | None = None,
                  max_ppm: float = 5000.0) -> dict:
    """Soundcard clock error from a recording of a reference tone of known frequency.

    The recording is tracked at the nominal sample rate; the median of the usable frame
    frequencies is the measured tone, and :func:`~coilshift.logger.pipeline.corrections.clock_ppm_from_tone`
    turns it into ppm. The uncertainty is the median's standard error,
    ``1.2533 sigma / sqrt(n_eff)`` (Gaussian efficiency of the median), with sigma from the
    MAD and ``n_eff = n hop / frame`` because overlapping frames are not independent.
    The reference must itself be far more accurate than the card (e.g. a disciplined generator).

    Raises InputError when no tone is found or the result exceeds ``max_ppm`` (then the tone is
    not the stated reference, or the nominal sample rate is wrong).
    """
    raw, tracker = run_tracker(source, settings, progress)
    ok = np.isfinite(raw.freq_hz) & ((raw.flags & (_flags.UNUSABLE | _flags.LOW_SNR)) == 0)
    name = source_name(source)
    if not ok.any():
        raise InputError(f"{name}: no clean tone found to measure the clock against")
    f = raw.freq_hz[ok]
    measured = float(np.median(f))
    ppm = clock_ppm_from_tone(measured, reference_hz)
    if abs(ppm) > max_ppm:
        raise InputError(f"{name}: the tone reads {measured:.4f} Hz, {ppm:+.0f} ppm from the stated "
                         f"{reference_hz:g} Hz reference: not a recording of that reference, or a "
                         f"wrong nominal sample rate")
    sigma = 1.4826 * float(np.median(np.abs(f - measured)))
    n_eff = max(1.0, len(f) * tracker.hop_len / tracker.frame_len)
    se_hz = 1.2533 * sigma / np.sqrt(n_eff)
    # d(ppm)/d(measured) = -reference / measured^2 * 1e6
    se_ppm = se_hz * reference_hz / measured ** 2 * 1e6
    return {
        "clock_ppm": ppm,
        "clock_ppm_stderr": se_ppm,
        "measured_hz": measured,
        "measured_stderr_hz": se_hz,
        "reference_hz": float(reference_hz),
        "frames_used": int(len(f)),
        "frames": len(raw),
        "sample_rate_hz": float(source.sample_rate_hz),
        "sample_rate_true_hz": float(source.sample_rate_hz) * (1.0 + ppm * 1e-6),
        "duration_s": float(source.duration_s),
    }
