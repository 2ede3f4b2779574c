"""The event detector beside a live capture: frames in as the log gets them, finished events out
to the screen and, one whole line each, to ``events.csv`` in the run folder.

``events.csv`` is append-only and crash-safe like the log: a header when the file is new, then one
line per event, written whole, flushed and fsync'ed at once (an event is rare; losing the last one
in a crash would lose the one thing the user was watching for). Its columns are
:data:`EVENT_COLUMNS`. ``coilshift events RUN`` finds the same events afterwards, with the noise
measured on the whole recording rather than learned as it went.
"""

from __future__ import annotations

import math
import os
import threading
from pathlib import Path

import numpy as np

from coilshift.logger.events.detector import DetectorSettings, PassDetector
from coilshift.logger.events.measure import PassEvent
from coilshift.logger.runfolder.flags import UNUSABLE

EVENTS_FILE = "events.csv"
EVENT_COLUMNS = ("start_s", "end_s", "peak_t_s", "peak_shift_hz", "peak_u_hz", "sign", "class",
                 "baseline_before_hz", "baseline_after_hz")
SHOWN = 5  # events listed on the screen


def _cell(x: float, fmt: str) -> str:
    return fmt.format(x) if isinstance(x, (int, float)) and math.isfinite(x) else ""


def event_row(ev: PassEvent) -> str:
    """One events.csv line (without the newline)."""
    return ",".join([_cell(ev.start_s, "{:.3f}"), _cell(ev.end_s, "{:.3f}"), _cell(ev.peak_t_s, "{:.3f}"),
                     _cell(ev.peak_shift_hz, "{:.6f}"), _cell(ev.peak_u_hz, "{:.6f}"), str(ev.sign), ev.kind,
                     _cell(ev.baseline_before_hz, "{:.6f}"), _cell(ev.baseline_after_hz, "{:.6f}")])


def event_text(ev: PassEvent) -> str:
    """One line for the screen."""
    return (f"{ev.start_s:8.1f}-{ev.end_s:.1f} s  {ev.peak_shift_hz:+.4g} Hz +- {1.96 * ev.peak_u_hz:.2g}  "
            f"{ev.kind}")


class LiveEvents:
    """The streaming detector on a capture's frames; thread-safe for one writer and readers."""

    def __init__(self, run_dir: str | os.PathLike, settings: DetectorSettings | None = None):
        self.path = Path(run_dir) / EVENTS_FILE
        self.settings = settings or DetectorSettings()
        self.detector: PassDetector | None = None
        self.found: list[PassEvent] = []
        self._lock = threading.Lock()
        self._t0: list[float] = []

    def tap(self, emit):
        """Wrap a frames consumer (``LogFeed.emit``): frames go on to it, then to the detector."""
        def tapped(frames):
            emit(frames)
            self.push(frames)
        return tapped

    def push(self, frames) -> list[PassEvent]:
        """Frames (a ``FrameTable``) in; the events they finish are written and returned."""
        if len(frames) == 0:
            return []
        t = np.asarray(frames.t_s, float)
        y = np.asarray(frames.freq_hz, float)
        ok = np.isfinite(y) & ((np.asarray(frames.flags, np.int64) & UNUSABLE) == 0)
        if self.detector is None:
            self._t0 += list(t[:2])
            if len(self._t0) < 2 or not self._t0[1] > self._t0[0]:
                self._t0 = self._t0[:1]
                return []
            self.detector = PassDetector(self._t0[1] - self._t0[0], self.settings)
        return self._record(self.detector.push(t, y, ok))

    def finish(self) -> list[PassEvent]:
        """End of the run: the open event and those waiting for their baseline after."""
        return self._record(self.detector.flush()) if self.detector is not None else []

    def lines(self) -> list[str]:
        """The latest events for the screen, newest last."""
        with self._lock:
            return [event_text(ev) for ev in self.found[-SHOWN:]]

    def status(self) -> str:
        """What the detector is doing, in a few words."""
        d = self.detector
        if d is None or not d.ready:
            return f"learning the noise (needs {self.settings.learn_s:g} s of quiet frames)"
        return (f"{len(self.found)} found; level {d.level:.1f} x {d.noise.sigma_hz:.2g} Hz, at most "
                f"{self.settings.false_per_hour:g} false per hour")

    def _record(self, events: list[PassEvent]) -> list[PassEvent]:
        if not events:
            return events
        new = not self.path.exists()
        with open(self.path, "a", encoding="utf-8", newline="") as f:
            text = (",".join(EVENT_COLUMNS) + "\n" if new else "") + "".join(event_row(ev) + "\n" for ev in events)
            f.write(text)
            f.flush()
            os.fsync(f.fileno())
        with self._lock:
            self.found += events
        return events


def with_live_events(engine, feed):
    """Give a capture engine its live event detector, if it asked for one (``engine.events`` a
    :class:`DetectorSettings`): ``engine.events`` becomes a :class:`LiveEvents` that sees every
    frame ``feed`` (its ``LogFeed``) gets and is flushed when the feed finishes; the engine's
    snapshots carry the latest events for the screen. Returns ``feed``."""
    if not isinstance(engine.events, DetectorSettings):
        engine.events = None
        return feed
    live = engine.events = LiveEvents(engine.run_dir, engine.events)
    feed.emit = live.tap(feed.emit)
    finish = feed.finish

    def finish_both():
        finish()
        live.finish()

    feed.finish = finish_both
    snapshot = engine.session.snapshot

    def snapshot_with_events(*args, **kwargs):
        snap = snapshot(*args, **kwargs)
        snap.events, snap.events_status = tuple(live.lines()), live.status()
        return snap

    engine.session.snapshot = snapshot_with_events
    return feed
