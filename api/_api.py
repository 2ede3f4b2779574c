"""The functions behind ``import coilshift`` (see the package docstring and docs/api.md)."""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import pandas as pd

PathLike = str | os.PathLike


@dataclass(frozen=True)
class Run:
    """A run folder (or a log CSV) read back.

    Attributes
    ----------
    log : one row per frame: ``t_s``, ``freq_hz``, ``shift_hz``, ``amp_dbfs``, ``snr_db``, ``flags``
        (whichever the log has), plus ``usable`` (the frame's frequency may be used)
    markers : one row per marked stretch: ``start_s``, ``end_s``, ``target``, ``distance_mm``
        (target ``baseline`` for target-free stretches)
    meta : run.json as a dict ({} for a bare CSV)
    baseline_hz : the run's baseline frequency
    interrupted : the log ended mid-line or run.json does not say complete
    source : the path read
    """

    log: pd.DataFrame
    markers: pd.DataFrame
    meta: dict = field(default_factory=dict)
    baseline_hz: float = float("nan")
    interrupted: bool = False
    source: str = ""


def read_run(path: PathLike) -> Run:
    """Read a run folder (log.csv, run.json, markers.csv) or a log CSV.

    Raises :class:`coilshift.InputError` (one readable line) for a missing or malformed file.
    """
    from coilshift.logger.runfolder.reader import read_log

    log = read_log(path)
    table = log.table.copy()
    table["usable"] = log.usable()
    markers = pd.DataFrame([(m.start_s, m.end_s, m.target, m.distance_mm) for m in log.markers],
                           columns=["start_s", "end_s", "target", "distance_mm"])
    return Run(table, markers, dict(log.meta), float(log.baseline_hz), bool(log.interrupted), str(log.source))


def track_file(recording: PathLike, out_dir: PathLike, *, markers: PathLike | None = None,
               channel: int = 0, near_hz: float | None = None, band_hz: tuple[float, float] | None = None,
               frame_ms: float = 85.0, hop_ms: float = 20.0, baseline_s: float = 2.0,
               force: bool = False) -> Run:
    """Track a recording (audio file or scope CSV) into the run folder ``out_dir`` and read it back.

    The same as ``coilshift track RECORDING -o OUT_DIR`` with ``--markers``, ``--channel``,
    ``--near``, ``--band``, ``--frame-ms``, ``--hop-ms``, ``--baseline-s`` and ``--force``
    (frequencies in the oscillator's Hz; no prescaler, zone or clock correction here).
    """
    from coilshift.logger.pipeline.batch import track_source
    from coilshift.logger.pipeline.corrections import Corrections
    from coilshift.logger.sources import open_source
    from coilshift.logger.tracking.tracker import TrackerSettings

    source = open_source(recording, channel=channel)
    settings = TrackerSettings(frame_ms=frame_ms, hop_ms=hop_ms, near_hz=near_hz,
                               band_hz=None if band_hz is None else tuple(band_hz))
    track_source(source, settings, Corrections(), out_dir, markers=markers, baseline_s=baseline_s, force=force)
    return read_run(out_dir)


def analyse_calibration(run: PathLike, markers: PathLike | None = None, **options):
    """Analyse a calibration run: the same as ``coilshift analyze RUN``.

    ``options`` are those of :func:`coilshift.analysis.calibration.run.analyse_run`
    (``threshold_hz``, ``k`` = ``--noise-factor``, ``settle_s`` = ``--trim-s``, ``placement_mm``,
    ``n_boot`` = ``--bootstrap``, ``seed``, ``polarity``, ...). Returns the
    :class:`~coilshift.analysis.calibration.run.CalibrationResult` (a dataclass: ``targets`` with
    their points, fits, ranges and calls; ``noise_hz``, ``threshold_hz``, ``warnings``...).
    """
    from coilshift.analysis.calibration.run import analyse_run

    return analyse_run(run, markers, **options)


def calibration_table(result) -> pd.DataFrame:
    """One row per target and distance: shift (Hz and ppm of the baseline), its standard error,
    frames, and the target's call and range."""
    rows = []
    for t in result.targets:
        for p in t.points:
            rows.append({"target": t.target, "distance_mm": p.distance_mm, "shift_hz": p.shift_hz,
                         "stderr_hz": p.stderr_hz, "shift_ppm": 1e6 * p.shift_hz / result.baseline_hz,
                         "frames": p.n, "repeats": p.repeats, "call": t.cls, "range_mm": t.range.range_mm})
    return pd.DataFrame(rows, columns=["target", "distance_mm", "shift_hz", "stderr_hz", "shift_ppm", "frames",
                                       "repeats", "call", "range_mm"])


def analyse_stability(run: PathLike, **options):
    """Stability of a logged oscillator: the same as ``coilshift stability RUN``.

    ``options`` are those of :func:`coilshift.analysis.stability.analyse.analyse_stability`
    (``nominal_hz``, ``remove_drift``, ``confidence``, ``settle_hz_per_min`` =
    ``--settled-hz-per-min``, ``start_s``, ``whole_log``). A calibration log is analysed on its
    baseline stretches only, as the command does. Returns the
    :class:`~coilshift.analysis.stability.result.StabilityResult` dataclass.
    """
    from coilshift.analysis.stability.analyse import analyse_stability as _analyse
    from coilshift.logger.runfolder.reader import read_log

    log = read_log(run, columns=("flags",))
    baselines = None
    if any(not m.is_baseline for m in log.markers):
        baselines = [(m.start_s, m.end_s) for m in log.markers if m.is_baseline]
    frame_ms = (log.meta.get("tracker") or {}).get("frame_ms") if isinstance(log.meta.get("tracker"), dict) else None
    frame_s = float(frame_ms) / 1000.0 if isinstance(frame_ms, (int, float)) and frame_ms > 0 else None
    return _analyse(log.t_s, log.freq_hz, log.usable(), baselines=baselines, source=str(run), frame_s=frame_s,
                    **options)


def stability_table(result) -> pd.DataFrame:
    """One row per averaging time: the deviations, the OADEV interval and the noise type."""
    return pd.DataFrame({"tau_s": result.tau_s, "adev_hz": result.adev_hz, "oadev_hz": result.oadev_hz,
                         "oadev_lo_hz": result.ci_lo["oadev"], "oadev_hi_hz": result.ci_hi["oadev"],
                         "mdev_hz": result.mdev_hz, "tdev_s": result.tdev_s,
                         "noise_type": [x or "" for x in result.noise.label]})
