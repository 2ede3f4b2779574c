"""The one post-processing path from raw tracker frames to log rows, for a recording and for a
live capture alike.

In order:

1. :class:`FrameStage` adds the flags the tracker cannot know (a live input's overflows and
   markers), applies the corrections (clock, Nyquist zone, prescaler: true times and oscillator
   frequencies) and the source's amplitude reference offset;
2. :class:`LogFeed` hands the frames to the run writer, holding the rows of an open baseline
   window (the start of a live run, a re-zero) until their baseline is known, so every row's
   ``shift_hz`` is taken against the baseline of its own stretch.

A recording's baseline is known before the first row (it is chosen from all frames), so its feed
never opens a window; a live capture's feed opens one at the start and at every re-zero.
"""

from __future__ import annotations

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
    """Frames held from ``from_t`` until ``window_s`` seconds of them are in."""

    window_s: float
    from_t: float = 0.0
    reason: str = "start"
    held: list = field(default_factory=list)


class LogFeed:
    """Frames -> run writer, holding the rows of an open baseline window until it closes.

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

    Rows are written in time order; those before a window keep the baseline they had.
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
        self._pending: list[FrameTable] = []
        self._on_baseline = on_baseline or (lambda freq_hz, note: None)
        self._on_rows = on_rows or (lambda rows: None)

    @property
    def window_open(self) -> bool:
        return self._window is not None

    def rezero(self, t_s: float) -> None:
        """Open a baseline window at ``t_s``; one already open restarts there (its rows keep waiting)."""
        if self._window is None:
            self._window = _Window(self.window_s, from_t=t_s, reason="rezero")
        else:
            self._window.from_t, self._window.reason = t_s, "rezero"

    def emit(self, frames: FrameTable) -> None:
        """Queue frames for the log, holding those of an open baseline window until it closes."""
        if len(frames) == 0:
            return
        win = self._window
        if win is None:
            self._pending.append(frames)
            return
        win.held.append(frames)
        if frames.t_s[-1] < win.from_t + win.window_s:
            return
        self._close_window(final=False)

    def flush(self) -> None:
        """Append the queued rows (not those held by an open window) to the log."""
        if self.stopped:
            self._pending = []
        if not self._pending:
            return
        frames = self._pending[0] if len(self._pending) == 1 else FrameTable.concat(self._pending)
        self._pending = []
        for i in range(0, len(frames), MAX_ROWS_PER_APPEND):
            self.writer.append(frames.select(slice(i, i + MAX_ROWS_PER_APPEND)))
        self._on_rows(self.writer.rows_written)

    def finish(self) -> None:
        """End of the run: close a window that still holds rows (with what it has), write everything."""
        if self._window is not None and self._window.held:
            self._close_window(final=True)
        self.flush()

    def _close_window(self, final: bool) -> None:
        """Baseline = median of the window's usable frames; then release the rows."""
        win, self._window = self._window, None
        held = FrameTable.concat(win.held)
        inside = held.t_s >= win.from_t
        part = held.select(inside)
        try:
            found = baseline_from_start(part.replace(t_s=part.t_s - win.from_t), win.window_s, name="capture")
        except InputError:
            found = None
        self._pending.append(held.select(~inside))
        self.flush()  # rows before the window keep the baseline they had
        if found is None:
            self._pending.append(part)
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
        self.baselines.append({"freq_hz": found.freq_hz, "method": found.method, **details})
        if len(self.baselines) > 1:
            details["history"] = self.baselines[:-1]
        self.writer.set_baseline(found.freq_hz, found.method, **details)
        self._pending.append(part)  # the window's own rows carry the new baseline
        self.flush()
        self._on_baseline(found.freq_hz, "")
