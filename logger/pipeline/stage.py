"""The one post-processing path from raw tracker frames to log rows, for a recording and for a
live capture alike.

In order:

1. :class:`FrameStage` adds the flags the tracker cannot know (a live input's overflows and
   markers), applies the corrections (clock, Nyquist zone, prescaler: true times and oscillator
   frequencies) and the source's amplitude reference offset;
2. :class:`LogFeed` hands the frames to the run writer as they come; rows inside an open baseline
   window (the start of a live run, a re-zero) are written with ``shift_hz`` empty and the
   window's baseline, once known, is recorded in run.json for readers to fill them in, so
   every row's shift is taken against the baseline of its own stretch and a crash loses no
   more than the last second.

A recording's baseline is known before the first row (it is chosen from all frames), so its feed
never opens a window; a live capture's feed opens one at the start and at every re-zero.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from coilshift.logger.errors import InputError
from coilshift.logger.pipeline.baseline import baseline_from_start
from coilshift.logger.runfolder.frames import FrameTable

#: rows per RunWriter.append at most: a bounded line buffer, few system calls
MAX_ROWS_PER_APPEND = 20000


class FrameStage:
    """Raw tracker frames -> the frames of the log (flags, corrections, amplitude reference).

    Parameters
    ----------
    sample_rate_hz : the nominal rate the frames were tracked at
    corrections : :class:`~coilshift.logger.pipeline.corrections.Corrections`, or None (none)
    amp_offset_db : added to ``amp_dbfs`` to give the source's amplitude reference (a scope
        export: dB re 1 V); 0 for a soundcard or an audio file
    """

    def __init__(self, sample_rate_hz: float, corrections=None, amp_offset_db: float = 0.0):
        self.sample_rate_hz = float(sample_rate_hz)
        self.corrections = corrections
        self.amp_offset_db = float(amp_offset_db)

    def apply(self, raw: FrameTable, flags: np.ndarray | None = None) -> FrameTable:
        """A new table: ``raw`` with ``flags`` (a mask per frame) or'ed in, corrected, re-referenced.

        ``raw`` is not changed.
        """
        frames = raw if flags is None else raw.replace(flags=raw.flags | flags)
        if self.corrections is not None:
            frames = self.corrections.apply(frames, self.sample_rate_hz)
        if self.amp_offset_db:
            frames = frames.replace(amp_dbfs=frames.amp_dbfs + self.amp_offset_db)
        return frames


@dataclass
class _Window:
    """An open baseline window: frames from ``from_t`` until ``window_s`` seconds of them are in."""

    window_s: float
    from_t: float = 0.0
    reason: str = "start"
    held: list = field(default_factory=list)  # its frames so far (already queued for the log), for the median


#: run.json note on the rows of a baseline window (their ``shift_hz`` cells are empty in log.csv)
WINDOW_ROWS_NOTE = ("rows from window_start_s to window_start_s + window_s were written before this baseline "
                    "was known: their shift_hz is empty in log.csv; it is freq_hz minus this freq_hz")


def _shift_key(baseline_hz: float):
    return "unknown" if baseline_hz != baseline_hz else baseline_hz  # NaN never equals itself


class LogFeed:
    """Frames -> run writer, rows written as they come, baseline windows decided on the way.

    Parameters
    ----------
    writer : :class:`~coilshift.logger.runfolder.writer.RunWriter`
    window_s : length of a baseline window: the baseline is the median of the usable frames
        of the first ``window_s`` seconds after the window opens (the rule of
        :func:`~coilshift.logger.pipeline.baseline.baseline_from_start`); None when the
        writer's baseline is already known and no window opens at the start
    on_baseline : ``f(freq_hz or None, note)`` told when a window closes (None and a note
        when it held no usable tone)
    on_rows : ``f(rows_written)`` told after rows were appended

    Rows are never held back for a baseline (a crash must not lose a window's worth of them):
    rows inside an open window are written at once with ``shift_hz`` empty, and the window's
    baseline, once known, goes into run.json (``window_start_s``, ``window_s``, ``freq_hz``),
    from which :func:`~coilshift.logger.runfolder.reader.read_log` fills those cells in. Rows
    before a window keep the baseline they had, rows after it carry the new one.
    ``baselines`` lists every window's outcome, for run.json.
    """

    def __init__(self, writer, window_s: float | None = None,
                 on_baseline: Callable[[float | None, str], None] | None = None,
                 on_rows: Callable[[int], None] | None = None):
        self.writer = writer
        self.window_s = window_s
        self.baselines: list[dict] = []
        self.stopped = False  # set after a write failed: rows from then on are dropped
        self._window = _Window(window_s) if window_s is not None else None
        self._pending: list[tuple[FrameTable, float]] = []  # (frames, the baseline of their shift_hz; NaN unknown)
        self._on_baseline = on_baseline or (lambda freq_hz, note: None)
        self._on_rows = on_rows or (lambda rows: None)

    @property
    def window_open(self) -> bool:
        return self._window is not None

    def rezero(self, t_s: float) -> None:
        """Open a baseline window at ``t_s``; one already open starts again there."""
        if self._window is None:
            self._window = _Window(self.window_s, from_t=t_s, reason="rezero")
        else:
            # its rows so far keep the baseline they had (the reader fills them with it)
            self._window.from_t, self._window.reason, self._window.held = t_s, "rezero", []

    def emit(self, frames: FrameTable) -> None:
        """Queue frames for the log; close the open baseline window once frames pass its end."""
        if len(frames) == 0:
            return
        win = self._window
        if win is None:
            self._pending.append((frames, self.writer.baseline_hz))
            return
        end = win.from_t + win.window_s
        before, after = frames.t_s < win.from_t, frames.t_s > end
        inside = ~(before | after)
        if before.any():
            self._pending.append((frames.select(before), self.writer.baseline_hz))
        if inside.any():
            part = frames.select(inside)
            win.held.append(part)
            self._pending.append((part, np.nan))
        if after.any():
            self._close_window(final=False)
            self._pending.append((frames.select(after), self.writer.baseline_hz))

    def flush(self) -> None:
        """Append the queued rows to the log, in time order."""
        if self.stopped:
            self._pending = []
        if not self._pending:
            return
        pending, self._pending = self._pending, []
        for _key, group in itertools.groupby(pending, key=lambda item: _shift_key(item[1])):
            group = list(group)
            frames = group[0][0] if len(group) == 1 else FrameTable.concat([g[0] for g in group])
            for i in range(0, len(frames), MAX_ROWS_PER_APPEND):
                self.writer.append(frames.select(slice(i, i + MAX_ROWS_PER_APPEND)), baseline_hz=group[0][1])
        self._on_rows(self.writer.rows_written)

    def finish(self) -> None:
        """End of the run: close a window that holds rows (with what it has), write everything."""
        if self._window is not None and self._window.held:
            self._close_window(final=True)
        self.flush()

    def _close_window(self, final: bool) -> None:
        """Baseline = median of the window's usable frames, recorded in run.json."""
        win, self._window = self._window, None
        found = None
        if win.held:
            part = FrameTable.concat(win.held)
            try:
                found = baseline_from_start(part.replace(t_s=part.t_s - win.from_t), win.window_s, name="capture")
            except InputError:
                found = None
        self.flush()  # the rows queued so far go out under the run.json they were written for
        if found is None:
            note = (f"no usable tone in the {win.window_s:g} s window from {win.from_t:.2f} s: "
                    f"baseline unchanged" + ("" if final else "; re-zero to set one"))
            self.baselines.append({"at_s": win.from_t, "reason": win.reason, "freq_hz": None, "note": note})
            self._on_baseline(None, note)
            return
        details = dict(found.details)
        details["window_start_s"] = win.from_t
        details["reason"] = win.reason
        if final:
            details["window_cut_short_by_end_of_run"] = True
        details["window_rows"] = WINDOW_ROWS_NOTE
        self.baselines.append({"freq_hz": found.freq_hz, "method": found.method, **details})
        if len(self.baselines) > 1:
            details["history"] = self.baselines[:-1]
        self.writer.set_baseline(found.freq_hz, found.method, persist=not self.stopped, **details)
        self._on_baseline(found.freq_hz, "")
