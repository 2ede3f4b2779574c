"""run.json of a new run, for a recording and a live capture alike.

:func:`run_meta` builds the entries a run starts with (the run writer adds the format, the
columns and the status in front, and the totals at the end). Entries only one kind of run has
are passed by name and take their fixed place, so both kinds of run.json list their entries in
the same order.
"""

from __future__ import annotations

import datetime as _dt

from coilshift.logger.runfolder.columns import utc_iso

#: every entry run_meta knows, in the order of the file
ORDER = ("created_by", "start_utc", "start_utc_from", "start_utc_note", "mode", "source", "sample_rate_hz",
         "sample_rate_true_hz", "duration_s", "tracker", "corrections", "baseline", "units", "markers",
         "warnings")
#: entries every run has
REQUIRED = ("start_utc", "source", "sample_rate_hz", "tracker", "corrections", "baseline")
#: run.json ``baseline`` of a live run before its first baseline window has closed
METHOD_PENDING = "pending: median of the first seconds"


def run_meta(start_utc: _dt.datetime, *, extra: dict | None = None, **entries) -> dict:
    """The run.json entries of a new run.

    Parameters
    ----------
    start_utc : time of the first sample (or of opening the input), written as ISO 8601 UTC
    extra : entries of the caller's own (the command line, a calibration session), after the
        known ones; one with a known name replaces that entry's value in its place
    **entries : the known entries (see :data:`ORDER`); those in :data:`REQUIRED` must be given:
        ``source`` (the source's ``describe()``), ``sample_rate_hz`` (nominal), ``tracker``
        (:func:`tracker_meta`), ``corrections`` (their ``to_dict()``, or None), ``baseline``
        (:func:`baseline_meta` or :func:`pending_baseline_meta`)

    Returns
    -------
    dict : the entries in :data:`ORDER`, then ``extra``
    """
    unknown = sorted(set(entries) - set(ORDER))
    if unknown:
        raise TypeError(f"run_meta: unknown run.json entries {', '.join(unknown)}")
    missing = [k for k in REQUIRED if k != "start_utc" and k not in entries]
    if missing:
        raise TypeError(f"run_meta: missing run.json entries {', '.join(missing)}")
    given = {"start_utc": utc_iso(start_utc), **entries}
    meta = {k: given[k] for k in ORDER if k in given}
    meta.update(extra or {})
    return meta


def tracker_meta(settings, tracker=None) -> dict:
    """run.json ``tracker``: the settings, and the frame and hop lengths in samples when the
    ``tracker`` that used them is given."""
    out = settings.to_dict() if hasattr(settings, "to_dict") else dict(vars(settings))
    if tracker is not None:
        out.update(frame_len=int(tracker.frame_len), hop_len=int(tracker.hop_len))
    return out


def baseline_meta(baseline) -> dict:
    """run.json ``baseline`` of a :class:`~coilshift.logger.pipeline.baseline.Baseline`."""
    return {"freq_hz": baseline.freq_hz, "method": baseline.method, **baseline.details}


def pending_baseline_meta(window_s: float) -> dict:
    """run.json ``baseline`` while a live run's first baseline window is still open."""
    return {"method": METHOD_PENDING, "window_s": window_s, "pending": True}
