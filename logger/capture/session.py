"""What a live capture shares between the user's side and its worker thread: markers, re-zero
requests and the snapshot a live readout shows.

The user's side (a terminal panel, the calibration guide) calls :meth:`CaptureSession.add_marker`,
:meth:`CaptureSession.rezero` and :meth:`CaptureSession.snapshot`; the worker takes the requests
with :meth:`CaptureSession.take_requests` and reports what it did through the ``show_*`` and
``on_*`` methods. One lock guards it all; nothing here waits for anything but that lock.
"""

from __future__ import annotations

import math
import threading
import time
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Callable

from coilshift.logger.capture.markers import LiveMarkers, parse_marker_label
from coilshift.logger.events.live import with_live_events  # noqa: F401  (the capture engine imports it here)
from coilshift.logger.runfolder.markers import Marker

#: while a stretch is open, markers.csv is rewritten at least this often (s)
MARKERS_REWRITE_S = 2.0


@dataclass
class CaptureSnapshot:
    """The latest state of a running capture, for a live readout (all values may be NaN early on)."""

    elapsed_s: float = 0.0
    freq_hz: float = math.nan
    shift_hz: float = math.nan
    baseline_hz: float = math.nan
    baseline_pending: bool = True
    amp_dbfs: float = math.nan
    snr_db: float = math.nan
    peak_dbfs: float = -math.inf
    clipping: bool = False
    frame_flags: int = 0
    no_tone_frames: int = 0
    overflows: int = 0
    gaps: int = 0
    lost_samples: int = 0
    device_errors: int = 0
    faults: int = 0
    last_fault: str = ""
    rows: int = 0
    markers: int = 0
    open_marker: str = ""
    queue_fill: float = 0.0
    status: str = "starting"
    message: str = ""
    events: tuple = ()  # the latest events found live, one line each (logger/events/live.py)
    events_status: str = ""

    def to_dict(self) -> dict:
        return asdict(self)


class CaptureSession:
    """Markers, re-zero requests and the live snapshot of one capture.

    Parameters
    ----------
    run_dir : the run folder (markers.csv is kept there)
    position : ``f() -> int``, samples on the run's timeline so far (delivered or lost)
    time_of : ``f(samples) -> float``, that position on the log's time scale (s)
    """

    def __init__(self, run_dir: str | Path, position: Callable[[], int], time_of: Callable[[int], float]):
        self._lock = threading.Lock()
        self._snap = CaptureSnapshot()
        self._markers = LiveMarkers(run_dir)
        self._marker_times: list[int] = []  # sample positions of markers whose frame is still to flag
        self._rezero_requests: list[int] = []
        self._position, self._time_of = position, time_of

    # ------------------------------------------------------------------ user side
    def position_now(self) -> int:
        """The run's sample position now: pass it to :meth:`add_marker` as ``at`` to time a marker
        at the moment a key was pressed rather than when its label was typed."""
        with self._lock:
            return self._position()

    def add_marker(self, label: str, distance_mm: float | None = None, at: int | None = None) -> float:
        """Start a marked stretch now, or at the earlier sample position ``at`` (see
        :func:`parse_marker_label`); returns its start time in s."""
        target, dist = parse_marker_label(label, distance_mm)
        with self._lock:
            n = self._position() if at is None else min(max(int(at), 0), self._position())
            t = max(self._time_of(n), self._markers.latest_s())
            self._markers.start(target, dist, t)
            self._marker_times.append(n)
            self._markers.write(t)
            self._snap.markers = len(self._markers)
            self._snap.open_marker = self._markers.describe_open()
        return t

    def rezero(self) -> float:
        """Ask for a new baseline from now on; returns the time in s."""
        with self._lock:
            n = self._position()
            self._rezero_requests.append(n)
            self._snap.baseline_pending = True
        return self._time_of(n)

    def snapshot(self, elapsed_s: float, queue_fill: float) -> CaptureSnapshot:
        """A copy of the latest state, with the elapsed time and queue fill of now."""
        with self._lock:
            snap = CaptureSnapshot(**asdict(self._snap))
        snap.elapsed_s = elapsed_s
        snap.queue_fill = queue_fill
        return snap

    # ------------------------------------------------------------------ worker side
    def started(self) -> None:
        with self._lock:
            self._snap.status = "running"
        self._markers.last_write = time.monotonic()

    def take_requests(self) -> tuple[list[int], list[int]]:
        """The sample positions of the markers and re-zero requests made since the last call."""
        with self._lock:
            marks, self._marker_times = self._marker_times, []
            rezeros, self._rezero_requests = self._rezero_requests, []
        return marks, rezeros

    def put_back_marks(self, marks: list[int]) -> None:
        """Markers whose frame has not been tracked yet: flag them with later frames."""
        if marks:
            with self._lock:
                self._marker_times = marks + self._marker_times

    def keep_markers_current(self, now_s: float) -> None:
        """Rewrite markers.csv now and then while a stretch is open (its end moves on)."""
        if self._markers.is_open and time.monotonic() - self._markers.last_write >= MARKERS_REWRITE_S:
            with self._lock:
                self._markers.write(now_s)

    def close_markers(self, end_s: float) -> list[Marker]:
        """End of the run: close the open stretch, write markers.csv; returns the stretches."""
        with self._lock:
            self._markers.close_open(end_s)
            if self._markers.closed:
                self._markers.write(end_s)
            return list(self._markers.closed)

    def show_frame(self, freq_hz: float, baseline_hz: float, amp_dbfs: float, snr_db: float, flags: int,
                   no_tone_frames: int = 0) -> None:
        """The latest frame; ``no_tone_frames``: how many frames since the last call had no tone."""
        with self._lock:
            s = self._snap
            s.freq_hz = freq_hz
            s.baseline_hz = baseline_hz
            s.shift_hz = freq_hz - baseline_hz
            s.amp_dbfs = amp_dbfs
            s.snr_db = snr_db
            s.frame_flags = flags
            s.no_tone_frames += no_tone_frames

    def show_level(self, peak_dbfs: float, clipping: bool) -> None:
        with self._lock:
            self._snap.peak_dbfs = peak_dbfs
            self._snap.clipping = clipping

    def show_faults(self, counts: dict, last_fault: str) -> None:
        with self._lock:
            s = self._snap
            s.overflows = counts["overflows"]
            s.gaps = counts["gaps"]
            s.lost_samples = counts["lost_samples"]
            s.device_errors = counts["device_errors"]
            s.faults = s.overflows + s.gaps + s.device_errors
            s.last_fault = last_fault

    def show_status(self, status: str, message: str) -> None:
        with self._lock:
            self._snap.status = status
            self._snap.message = message

    def on_rows(self, rows_written: int) -> None:
        with self._lock:
            self._snap.rows = rows_written

    def on_baseline(self, freq_hz: float | None, note: str) -> None:
        """A baseline window closed: with a new baseline, or (None) with a note why not."""
        with self._lock:
            self._snap.baseline_pending = bool(self._rezero_requests)
            if freq_hz is None:
                self._snap.message = note
            else:
                self._snap.baseline_hz = freq_hz
