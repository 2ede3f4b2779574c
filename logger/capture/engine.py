"""Live capture engine: a real-time block source -> bounded queue -> worker (track, correct, log).

The source's real-time callback does nothing but hand each block (with its ADC time and overflow
flag) to :meth:`CaptureEngine._deliver`, which puts it on a bounded queue without waiting and
returns. If the queue is full the block is dropped and its length counted; the worker later
writes a ``gap`` row at the time of the lost stretch and restarts the tracker after it, so every
frame's ``t_s`` stays on the true audio timeline (samples delivered plus samples lost).

The worker frames and tracks the audio, applies the corrections, flags frames that overlap an
input overflow or follow a marker, holds the first ``baseline_s`` seconds of frames until the
baseline (their median) is known, and appends rows to the run log about four times a second
(:class:`~coilshift.logger.runfolder.writer.RunWriter` flushes every append and fsyncs at least every
``fsync_interval_s``). run.json is written before the first sample and replaced atomically at
the end with the totals. A source error or a source that stops delivering ends the run; the data
logged so far is kept and the reason recorded.

Any object with this interface is a block source (a soundcard stream, :class:`PacedSource`, a
scripted fake in the tests):

``open(deliver, fail)``
    start streaming; call ``deliver(block, adc_time_s, overflow)`` from the real-time thread for
    every block (1-D float array, the chosen channel, owned by the receiver), ``fail(message)``
    on a fatal stream error. Returns once streaming has started.
``close()``
    stop streaming; no ``deliver`` call may follow its return.
``sample_rate_hz``
    the rate the stream actually runs at (valid after ``open``).
``describe() -> dict``
    what the stream actually delivered (device, rate, latency, ...), for run.json.
"""

from __future__ import annotations

import datetime as _dt
import math
import queue
import re
import threading
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np

from coilshift.logger.runfolder import flags as _flags
from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.markers import BASELINE, Marker, markers_to_csv
from coilshift.logger.pipeline.baseline import baseline_from_start
from coilshift.logger.runfolder.writer import RunWriter, utc_iso, write_markers_copy

#: frames whose frequency is not trusted for a baseline
_NOT_FOR_BASELINE = _flags.UNUSABLE | _flags.LOW_SNR | _flags.OVERFLOW
#: level meter: the peak reading falls this fast after a louder block (dB per second)
PEAK_FALL_DB_PER_S = 20.0
#: a clipping warning stays on this long after the last clipped block
CLIP_HOLD_S = 1.0
#: the delivered-rate measurement starts this far into the run
RATE_SETTLE_S = 2.0
#: at most this many fault events are listed in run.json (all are counted)
_MAX_FAULTS_LISTED = 1000


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

    def to_dict(self) -> dict:
        return asdict(self)


@dataclass
class _BaselineWindow:
    """Frames held from ``from_t`` until ``window_s`` seconds of them are in (see _emit)."""

    window_s: float
    from_t: float = 0.0
    reason: str = "start"
    held: list = field(default_factory=list)


_LABEL_RE = re.compile(r"^(?P<target>.+?)[\s@]+(?P<dist>[0-9]+(?:\.[0-9]*)?)\s*(?:mm)?$", re.IGNORECASE)


def parse_marker_label(label: str, distance_mm: float | None = None) -> tuple[str, float]:
    """Split a live marker label into (target, distance_mm).

    ``baseline`` -> (``baseline``, NaN); ``end`` -> (``end``, NaN) closes the open stretch;
    ``coin 50``, ``coin@50``, ``coin 50mm`` -> (``coin``, 50.0); ``distance_mm`` overrides.
    Raises :class:`InputError` for a target without a distance or a bad name.
    """
    text = " ".join(str(label).split())
    if not text:
        raise InputError("marker: empty label")
    if text.lower() in (BASELINE, "end"):
        return text.lower(), math.nan
    if distance_mm is not None:
        target, dist = text, float(distance_mm)
    else:
        m = _LABEL_RE.match(text)
        if not m:
            raise InputError(f"marker {text!r}: give 'baseline', 'end' or a target and its distance in mm, "
                             "e.g. 'coin 50'")
        target, dist = m.group("target").strip(), float(m.group("dist"))
    if "," in target or '"' in target:
        raise InputError(f"marker {text!r}: no commas or quotes in a target name")
    if not math.isfinite(dist) or dist < 0:
        raise InputError(f"marker {text!r}: distance must be >= 0 mm")
    return target, dist


class CaptureEngine:
    """Run a live capture from a block source into a run folder.

    Parameters
    ----------
    source : block source (see the module docstring)
    run_dir : folder prepared by :func:`coilshift.logger.runfolder.writer.prepare_run_dir`
    settings : :class:`coilshift.logger.tracking.tracker.TrackerSettings`
    corrections : :class:`coilshift.logger.pipeline.corrections.Corrections` or None (no correction)
    baseline_s : the baseline is the median frequency of the first ``baseline_s`` seconds of
        usable frames; those frames are held and written once it is known. Also the window of
        :meth:`rezero`.
    save_audio : also write the raw input to ``audio.wav`` (lost samples as zeros)
    max_seconds : end the run after this much audio (None: until :meth:`stop`)
    meta : extra run.json entries (e.g. the command line)
    queue_blocks : size of the bounded block queue between the callback and the worker
    append_interval_s : rows are appended (and so flushed) at least this often
    fsync_interval_s : handed to the run writer
    stall_timeout_s : a source that delivers nothing for this long has failed (at least 10 s
        are allowed for the first block)
    track_batch_s : audio is handed to the tracker in batches of about this length
    tracker_factory : ``f(sample_rate_hz, settings)`` making a streaming tracker; default
        :class:`coilshift.logger.tracking.tracker.FrameTracker`
    """

    def __init__(self, source, run_dir: str | Path, settings, corrections=None, *, baseline_s: float = 2.0,
                 save_audio: bool = False, max_seconds: float | None = None, meta: dict | None = None,
                 queue_blocks: int = 4000, append_interval_s: float = 0.25, fsync_interval_s: float = 0.75,
                 stall_timeout_s: float = 3.0, track_batch_s: float = 0.05, tracker_factory=None):
        if baseline_s <= 0:
            raise InputError(f"--baseline-s must be > 0, got {baseline_s}")
        if max_seconds is not None and max_seconds <= 0:
            raise InputError(f"--seconds must be > 0, got {max_seconds}")
        self.source = source
        self.run_dir = Path(run_dir)
        self.settings = settings
        self.corrections = corrections
        self.baseline_s = float(baseline_s)
        self.save_audio = save_audio
        self.max_seconds = max_seconds
        self.extra_meta = dict(meta or {})
        self.append_interval_s = append_interval_s
        self.fsync_interval_s = fsync_interval_s
        self.stall_timeout_s = stall_timeout_s
        self._tracker_factory = tracker_factory
        self.track_batch_s = track_batch_s
        self.sample_rate_hz = math.nan
        self.writer: RunWriter | None = None
        self.audio = None
        self.finished = threading.Event()  # set when the run has ended by itself (duration, fault)
        self._queue: queue.Queue = queue.Queue(maxsize=max(2, int(queue_blocks)))
        # counters owned by the real-time callback (plain ints: single writer, atomic reads)
        self._delivered = 0  # samples on the timeline, delivered or lost
        self._lost_pending = 0
        self._overrun_blocks = 0
        self._fail_message: str | None = None
        self._stop_request = threading.Event()
        self._lock = threading.Lock()  # guards markers, re-zero requests and the snapshot
        self._snap = CaptureSnapshot()
        self._markers: list[Marker] = []
        self._open_marker: tuple[str, float, float] | None = None  # (target, distance_mm, start_s)
        self._marker_times: list[int] = []  # sample indices still to flag
        self._rezero_requests: list[int] = []
        self._faults: list[dict] = []
        self._counts = {"overflows": 0, "gaps": 0, "lost_samples": 0, "device_errors": 0, "queue_overruns": 0}
        self._ended_by = ""
        self._status = "complete"
        self._write_failed = False
        self._message = ""
        self._worker: threading.Thread | None = None
        self._worker_error: BaseException | None = None
        self._summary: dict | None = None
        self._started = False
        self._arrival_first: tuple[int, float] | None = None  # (samples so far, host clock) per block
        self._arrival_last: tuple[int, float] | None = None
        self._rate_settle_samples = 1 << 62  # set once the stream rate is known
        self._adc_first: tuple[int, float] | None = None
        self._adc_last: tuple[int, float] | None = None
        self._baselines: list[dict] = []
        self._peak_hold = 0.0
        self._batch: list[np.ndarray] = []
        self._batch_n = 0
        self._batch_samples = 1
        self._clip_until = -1

    # ------------------------------------------------------------------ public API
    @property
    def elapsed_s(self) -> float:
        """Audio time since the start (samples delivered or lost / sample rate), on the log's t_s scale."""
        return self._time_of(self._delivered)

    def _time_of(self, n_samples: int) -> float:
        # the log's time scale: sample count at the stream's rate, clock-corrected like the frames
        if not self.sample_rate_hz > 0:
            return 0.0
        t = n_samples / self.sample_rate_hz
        return float(self.corrections.time_to_true(t)) if self.corrections is not None else t

    def start(self) -> None:
        """Open the source, write run.json, start the worker. Raises InputError if the source fails to open."""
        if self._started:
            raise RuntimeError("capture already started")
        self._started = True
        start_utc = _dt.datetime.now(_dt.timezone.utc)
        self.source.open(self._deliver, self._fail)
        try:
            self.sample_rate_hz = float(self.source.sample_rate_hz)
            self._batch_samples = max(1, int(self.track_batch_s * self.sample_rate_hz))
            self._rate_settle_samples = int(RATE_SETTLE_S * self.sample_rate_hz)
            if self._tracker_factory is None:
                from coilshift.logger.tracking.tracker import FrameTracker

                self._tracker_factory = FrameTracker
            self._new_tracker(0)
            meta = {
                "start_utc": utc_iso(start_utc),
                "start_utc_note": "time the input stream was opened; the first sample follows within its latency",
                "mode": "live capture",
                "source": self.source.describe(),
                "sample_rate_hz": self.sample_rate_hz,
                "tracker": self.settings.to_dict(),
                "corrections": self.corrections.to_dict() if self.corrections is not None else None,
                "baseline": {"method": "pending: median of the first seconds", "window_s": self.baseline_s,
                             "pending": True},
                **self.extra_meta,
            }
            if self.save_audio:
                from coilshift.logger.capture.audiosave import AudioRecorder

                self.audio = AudioRecorder(self.run_dir, self.sample_rate_hz)
                meta["audio"] = self.audio.describe()
            self.writer = RunWriter(self.run_dir, meta, fsync_interval_s=self.fsync_interval_s)
        except BaseException:
            self.source.close()
            raise
        self._window: _BaselineWindow | None = _BaselineWindow(self.baseline_s)
        self._pending_out: list[FrameTable] = []
        self._last_append = time.monotonic()
        self._last_block_time = time.monotonic()
        self._last_markers_write = time.monotonic()
        with self._lock:
            self._snap.status = "running"
        self._worker = threading.Thread(target=self._work, name="coilshift-capture-worker", daemon=True)
        self._worker.start()

    def stop(self) -> dict:
        """Stop the source, drain the queue, write the remaining rows and the final run.json.

        Returns the run summary (also stored in run.json under ``totals``). Safe to call twice.
        """
        if self._summary is not None:
            return self._summary
        if not self._started:
            raise RuntimeError("capture was not started")
        try:
            self.source.close()
        finally:
            self._stop_request.set()
            if self._worker is not None:
                self._worker.join()
        if self._worker_error is not None:
            raise self._worker_error
        return self._summary  # type: ignore[return-value]

    def wait(self, timeout: float | None = None) -> bool:
        """Wait until the run ends by itself (duration reached or a fault); True if it has."""
        return self.finished.wait(timeout)

    def add_marker(self, label: str, distance_mm: float | None = None) -> float:
        """Start a marked stretch now (see :func:`parse_marker_label`); returns its start time in s.

        The open stretch ends where the next one starts (``end`` just closes it) or at the end of
        the run. markers.csv is rewritten atomically each time; the frame at the marker is flagged.
        """
        target, dist = parse_marker_label(label, distance_mm)
        with self._lock:
            n = self._delivered
            t = self._time_of(n)
            self._close_open_marker(t)
            if target != "end":
                self._open_marker = (target, dist, t)
            self._marker_times.append(n)
            self._write_markers_locked(t)
            self._snap.markers = len(self._markers) + (self._open_marker is not None)
            self._snap.open_marker = self._describe_open()
        return t

    def rezero(self) -> float:
        """Set a new baseline: the median of the next ``baseline_s`` seconds of usable frames.

        Rows of that window are held and written with the new baseline. Returns the time in s.
        """
        with self._lock:
            n = self._delivered
            self._rezero_requests.append(n)
            self._snap.baseline_pending = True
        return self._time_of(n)

    def snapshot(self) -> CaptureSnapshot:
        """A copy of the latest state (frequency, shift, level, SNR, elapsed, faults ...)."""
        with self._lock:
            snap = CaptureSnapshot(**asdict(self._snap))
        snap.elapsed_s = self.elapsed_s
        snap.queue_fill = self._queue.qsize() / self._queue.maxsize
        return snap

    # ------------------------------------------------------------------ real-time side
    def _deliver(self, block: np.ndarray, adc_time_s: float, overflow: bool) -> None:
        # runs in the audio thread: no printing, no file access, no waiting
        n = block.shape[0]
        start = self._delivered
        self._delivered = start + n
        self._arrival_last = (start + n, time.monotonic())
        if self._arrival_first is None and start >= self._rate_settle_samples:
            # start-up bursts (buffers filled before the first callback) would bias the rate
            self._arrival_first = self._arrival_last
        try:
            self._queue.put_nowait((block, adc_time_s, overflow, start, self._lost_pending))
            self._lost_pending = 0
        except queue.Full:
            self._lost_pending += n
            self._overrun_blocks += 1

    def _fail(self, message: str) -> None:
        if self._fail_message is None:
            self._fail_message = str(message)

    # ------------------------------------------------------------------ worker
    def _new_tracker(self, offset_samples: int) -> None:
        self._tracker = self._tracker_factory(self.sample_rate_hz, self.settings)
        self._seg_offset = offset_samples
        self._overflow_spans: list[tuple[int, int]] = []

    def _work(self) -> None:
        try:
            self._work_loop()
        except OSError as exc:  # disk full, read-only or vanished folder: stop, keep what is written
            self._status, self._ended_by = "interrupted", "write_error"
            self._message = f"cannot write {exc.filename or self.run_dir}: {exc.strerror or exc}"
            self._write_failed = True  # no more rows: the log may end in part of one
            try:
                self._finish_run()  # run.json says interrupted when the disk still takes it
            except BaseException:
                self._worker_error = exc  # the CLI reports the write error in one line
        except BaseException as exc:  # never leave the run without its final run.json
            self._worker_error = exc
            self._status, self._ended_by, self._message = "failed", "internal_error", f"{type(exc).__name__}: {exc}"
            try:
                self._finish_run()
            except BaseException:
                pass
        finally:
            self.finished.set()

    def _work_loop(self) -> None:
        limit = None if self.max_seconds is None else int(round(self.max_seconds * self.sample_rate_hz))
        processed_to = 0  # timeline index up to which audio has been taken
        while True:
            if self._stop_request.is_set() and self._queue.empty():
                break
            try:
                block, adc, overflow, start, lost = self._queue.get(timeout=0.05)
            except queue.Empty:
                if self._check_source_health():
                    break
                self._maybe_append()
                continue
            self._last_block_time = time.monotonic()
            if self.finished.is_set():
                continue  # run already ended (duration reached): discard until stop()
            if lost:
                self._gap(start - lost, lost, "queue_overrun", "the worker fell behind; samples dropped")
            if limit is not None and start + block.shape[0] >= limit:
                block = block[: max(0, limit - start)]
            self._take(block, adc, overflow, start)
            processed_to = start + block.shape[0]
            self._maybe_append()
            if limit is not None and processed_to >= limit:
                self._ended_by = "duration"
                self.finished.set()
        self._finish_run()

    def _check_source_health(self) -> bool:
        """True when the source has failed or stalled: the run ends with the data kept."""
        msg = self._fail_message
        if msg is None and getattr(self.source, "exhausted", False):
            # a finite source (a replayed recording) has simply run out: a normal end
            if not self._ended_by:
                self._ended_by = "source_end"
                self.finished.set()
            return False
        if msg is None and not self._stop_request.is_set() and not self.finished.is_set():
            idle = time.monotonic() - self._last_block_time
            # some devices take seconds to deliver their first block
            limit = self.stall_timeout_s if self._arrival_last is not None else max(10.0, self.stall_timeout_s)
            if idle > limit:
                msg = f"no audio for {idle:.1f} s (device removed or stream stopped)"
        if msg is None or self._ended_by:
            return False
        self._counts["device_errors"] += 1
        self._flush_tail()  # everything before the error row goes out first, in time order
        t = self._delivered / self.sample_rate_hz  # raw; _post corrects it
        self._record_fault("device_error", self._time_of(self._delivered), 0, msg)
        # a row at the end of the audio marks where the input stopped
        self._post(FrameTable(np.array([t + 1e-6]), [np.nan], [np.nan], [np.nan],
                              np.array([_flags.GAP], dtype=np.int64)), raw_time=True)
        self._status, self._ended_by, self._message = "device_error", "device_error", msg
        self.finished.set()
        return True

    def _take(self, block: np.ndarray, adc: float, overflow: bool, start: int) -> None:
        n = block.shape[0]
        if n == 0:
            return
        if adc and math.isfinite(adc) and adc > 0:
            if self._adc_first is None:
                self._adc_first = (start, float(adc))
            self._adc_last = (start, float(adc))
        if overflow:
            self._counts["overflows"] += 1
            self._record_fault("overflow", self._time_of(start), 0,
                               "input overflow reported by the audio stream")
            self._overflow_spans.append((start - 1, start + n))
        if self.audio is not None:
            self.audio.write(block)
        peak = float(np.max(np.abs(block)))
        # meter ballistics: instant rise, fall of PEAK_FALL_DB_PER_S; a clip stays lit CLIP_HOLD_S
        dur = n / self.sample_rate_hz
        self._peak_hold = max(peak, self._peak_hold * 10 ** (-PEAK_FALL_DB_PER_S * dur / 20))
        if peak >= self.settings.clip_level:
            self._clip_until = start + n + int(CLIP_HOLD_S * self.sample_rate_hz)
        # the tracker works on batches: one call per block would cost several times the CPU
        self._batch.append(block)
        self._batch_n += n
        if self._batch_n >= self._batch_samples:
            self._push_batch()
        with self._lock:
            s = self._snap
            s.peak_dbfs = 20 * math.log10(self._peak_hold) if self._peak_hold > 0 else -math.inf
            s.clipping = start + n <= self._clip_until

    def _flush_tail(self) -> None:
        """Samples dropped after the last queued block become a gap; the last batch is tracked."""
        lost = self._lost_pending
        if lost:
            self._lost_pending = 0
            self._gap(self._delivered - lost, lost, "queue_overrun", "samples dropped at the end of the run")
        self._push_batch()

    def _push_batch(self) -> None:
        if not self._batch:
            return
        x = np.concatenate(self._batch).astype(np.float64) if len(self._batch) > 1 else \
            np.asarray(self._batch[0], dtype=np.float64)
        self._batch, self._batch_n = [], 0
        self._post(self._tracker.push(x))

    def _gap(self, gap_start: int, n_lost: int, cause: str, detail: str) -> None:
        """Samples [gap_start, gap_start + n_lost) never reached us: log a gap row, restart the tracker."""
        self._push_batch()  # audio before the gap belongs to the old tracker
        fs = self.sample_rate_hz
        self._counts["gaps"] += 1
        self._counts["lost_samples"] += n_lost
        if cause == "queue_overrun":
            self._counts["queue_overruns"] += 1
        self._record_fault("gap", self._time_of(gap_start), n_lost, f"{detail} ({n_lost} samples, {n_lost / fs:.3f} s)")
        # frames completed before the gap are already out; the tracker's partial frame is dropped
        self._post(FrameTable(np.array([(gap_start + n_lost / 2) / fs]), [np.nan], [np.nan], [np.nan],
                              np.array([_flags.GAP], dtype=np.int64)), raw_time=True)
        if self.audio is not None:
            self.audio.write_silence(n_lost)
        self._new_tracker(gap_start + n_lost)

    def _post(self, frames: FrameTable, raw_time: bool = False) -> None:
        """Place frames on the timeline, add flags, correct them, then baseline/hold/emit.

        ``raw_time``: the frames' t_s already count from the start of the run (gap rows).
        """
        if len(frames) == 0:
            return
        fs = self.sample_rate_hz
        offset = 0.0 if raw_time else self._seg_offset / fs
        frames = FrameTable(frames.t_s + offset, frames.freq_hz, frames.amp_dbfs, frames.snr_db,
                            frames.flags.copy())
        if not raw_time:
            half = self._tracker.frame_len / 2
            centres = frames.t_s * fs
            if self._overflow_spans:
                for lo, hi in self._overflow_spans:
                    hit = (centres + half > lo) & (centres - half < hi)
                    frames.flags[hit] |= _flags.OVERFLOW
                newest = centres[-1] - half
                self._overflow_spans = [(lo, hi) for lo, hi in self._overflow_spans if hi > newest]
        with self._lock:
            marks, self._marker_times = self._marker_times, []
            rezeros, self._rezero_requests = self._rezero_requests, []
        if marks:  # marker sample index against the frames' raw centre times
            keep = []
            for n in marks:
                i = np.searchsorted(frames.t_s, n / fs)
                if i < len(frames):
                    frames.flags[i] |= _flags.MARKER
                else:
                    keep.append(n)
            if keep:
                with self._lock:
                    self._marker_times = keep + self._marker_times
        if self.corrections is not None:
            frames = self.corrections.apply(frames, fs)
        for n in rezeros:
            self._start_rezero(self._time_of(n))
        self._emit(frames)
        last = len(frames) - 1
        with self._lock:
            s = self._snap
            s.freq_hz = float(frames.freq_hz[last])
            base = self.writer.baseline_hz if self.writer is not None else math.nan
            s.baseline_hz = base
            s.shift_hz = s.freq_hz - base
            s.amp_dbfs = float(frames.amp_dbfs[last])
            s.snr_db = float(frames.snr_db[last])
            s.frame_flags = int(frames.flags[last])

    def _start_rezero(self, t: float) -> None:
        if self._window is None:
            self._window = _BaselineWindow(self.baseline_s, from_t=t, reason="rezero")
        else:  # a window already open: it restarts here, the frames held so far keep waiting
            self._window.from_t, self._window.reason = t, "rezero"

    def _emit(self, frames: FrameTable) -> None:
        """Queue frames for the log, holding those of an open baseline window until it closes."""
        win = self._window
        if win is None:
            self._pending_out.append(frames)
            return
        win.held.append(frames)
        if frames.t_s[-1] < win.from_t + win.window_s:
            return
        self._close_window(final=False)

    def _close_window(self, final: bool) -> None:
        """Baseline = median of the window's usable frames (the same rule as a recording's
        baseline, :func:`~coilshift.logger.pipeline.baseline.baseline_from_start`); then release the rows."""
        win, self._window = self._window, None
        held = FrameTable.concat(win.held)
        inside = held.t_s >= win.from_t
        part = held.select(inside)
        shifted = FrameTable(part.t_s - win.from_t, part.freq_hz, part.amp_dbfs, part.snr_db, part.flags)
        try:
            found = baseline_from_start(shifted, win.window_s, name="capture")
        except InputError:
            found = None
        self._pending_out.append(held.select(~inside))
        self._flush_pending()  # rows before the window keep the baseline they had
        if found is None:
            self._pending_out.append(part)
            note = (f"no usable tone in the {win.window_s:g} s window from {win.from_t:.2f} s: "
                    f"baseline unchanged" + ("" if final else "; re-zero to set one"))
            self._baselines.append({"at_s": win.from_t, "reason": win.reason, "freq_hz": None, "note": note})
            with self._lock:
                self._snap.baseline_pending = bool(self._rezero_requests)
                self._snap.message = note
            return
        details = dict(found.details)
        details["window_start_s"] = win.from_t
        details["reason"] = win.reason
        if final:
            details["window_cut_short_by_end_of_run"] = True
        self._baselines.append({"freq_hz": found.freq_hz, "method": found.method, **details})
        if len(self._baselines) > 1:
            details["history"] = self._baselines[:-1]
        self.writer.set_baseline(found.freq_hz, found.method, **details)
        self._pending_out.append(part)  # the window's own rows carry the new baseline
        self._flush_pending()
        with self._lock:
            self._snap.baseline_pending = bool(self._rezero_requests)
            self._snap.baseline_hz = found.freq_hz

    def _flush_pending(self) -> None:
        if self._write_failed:
            self._pending_out = []
        if not self._pending_out:
            return
        frames = FrameTable.concat(self._pending_out)
        self._pending_out = []
        self.writer.append(frames)
        self._last_append = time.monotonic()
        with self._lock:
            self._snap.rows = self.writer.rows_written

    def _maybe_append(self) -> None:
        now = time.monotonic()
        if now - self._last_append >= self.append_interval_s:
            self._flush_pending()
            self._last_append = now
        if self._open_marker is not None and now - self._last_markers_write >= 2.0:
            with self._lock:
                self._write_markers_locked(self.elapsed_s)

    def _record_fault(self, kind: str, t_s: float, samples: int, detail: str) -> None:
        if len(self._faults) < _MAX_FAULTS_LISTED:
            self._faults.append({"kind": kind, "t_s": round(t_s, 6), "samples": int(samples), "detail": detail})
        with self._lock:
            s = self._snap
            s.overflows = self._counts["overflows"]
            s.gaps = self._counts["gaps"]
            s.lost_samples = self._counts["lost_samples"]
            s.device_errors = self._counts["device_errors"]
            s.faults = s.overflows + s.gaps + s.device_errors
            s.last_fault = f"{kind} at {t_s:.2f} s: {detail}"

    def _finish_run(self) -> None:
        if self._summary is not None:
            return
        fs = self.sample_rate_hz
        if self._ended_by != "duration":
            self._flush_tail()
        if not self._ended_by:
            self._ended_by = "stopped"
        self._push_batch()
        self._post(self._tracker.finish())
        if self._window is not None and self._window.held:
            self._close_window(final=True)
        self._flush_pending()
        end_n = self._delivered
        if self.max_seconds is not None and self._ended_by == "duration":
            end_n = min(end_n, int(round(self.max_seconds * fs)))
        end_s = self._time_of(end_n)
        with self._lock:
            self._close_open_marker(end_s)
            if self._markers:
                self._write_markers_locked(end_s)
        if self.audio is not None:
            self.audio.close()
        totals = {
            "duration_s": round(end_s, 6),
            "ended_by": self._ended_by,
            "message": self._message,
            "samples": int(self._delivered),
            "overflows": self._counts["overflows"],
            "gaps": self._counts["gaps"],
            "queue_overruns": self._counts["queue_overruns"],
            "dropped_blocks": self._overrun_blocks,
            "lost_samples": self._counts["lost_samples"],
            "device_errors": self._counts["device_errors"],
            "faults": self._faults,
            "markers": len(self._markers),
            "baselines": self._baselines,
        }
        totals.update(self._measured_rates())
        if self.audio is not None:
            self.writer.meta["audio"] = self.audio.describe()
        self.writer.close(totals, status=self._status)
        self._summary = {"status": self._status, "run_dir": str(self.run_dir), "rows": self.writer.rows_written,
                         "sample_rate_hz": fs, "baseline_hz": self.writer.baseline_hz, **totals}
        with self._lock:
            self._snap.status = self._status
            self._snap.message = self._message

    def _measured_rates(self) -> dict:
        """The rate the stream really delivered, against the computer's clock (runs over 5 s).

        From block arrival times: uncertain by about the callback jitter (one buffer) divided by
        the run length. From the stream's ADC timestamps when they are plausible (some drivers
        and sound servers report unrelated values; those are left out).
        """
        out: dict = {}
        a, b = self._arrival_first, self._arrival_last
        if a and b and b[1] - a[1] > 5.0:
            out["delivered_rate_hz"] = (b[0] - a[0]) / (b[1] - a[1])
            out["delivered_rate_note"] = (f"samples per second of the computer clock over {b[1] - a[1]:.1f} s; "
                                          f"uncertain by about one buffer / run length")
        a, b = self._adc_first, self._adc_last
        if a and b and b[1] - a[1] > 5.0:
            rate = (b[0] - a[0]) / (b[1] - a[1])
            if abs(rate / self.sample_rate_hz - 1) < 0.01:
                out["adc_clock_rate_hz"] = rate
        return out

    # ------------------------------------------------------------------ markers
    def _close_open_marker(self, t: float) -> None:
        if self._open_marker is None:
            return
        target, dist, start = self._open_marker
        self._open_marker = None
        if t > start:
            self._markers.append(Marker(start, t, target, math.nan if target == BASELINE else dist))

    def _describe_open(self) -> str:
        if self._open_marker is None:
            return ""
        target, dist, start = self._open_marker
        return target if target == BASELINE else f"{target} @ {dist:g} mm"

    def _write_markers_locked(self, now_s: float) -> None:
        rows = list(self._markers)
        if self._open_marker is not None:
            target, dist, start = self._open_marker
            if now_s > start:
                rows.append(Marker(start, now_s, target, math.nan if target == BASELINE else dist))
        if rows:
            write_markers_copy(self.run_dir, markers_to_csv(rows))
        self._last_markers_write = time.monotonic()


class PacedSource:
    """Turn any block iterator (a recording, a synthetic tone) into a real-time source.

    A thread hands the blocks to ``deliver`` at the pace of the sample clock, like a soundcard
    would, so the capture engine runs exactly as it does live. Used by tests and demos.

    Parameters
    ----------
    source : object with ``sample_rate_hz``, ``blocks(block_frames)`` and optionally ``describe()``
    block_frames : samples per delivered block
    speed : 1.0 for real time; larger values deliver faster (tests)
    """

    def __init__(self, source, block_frames: int = 1024, speed: float = 1.0):
        self.inner = source
        self.sample_rate_hz = float(source.sample_rate_hz)
        self.block_frames = int(block_frames)
        self.speed = float(speed)
        self._thread: threading.Thread | None = None
        self._halt = threading.Event()
        self.delivered_samples = 0
        self.exhausted = False

    def open(self, deliver, fail) -> None:
        self._deliver, self._fail = deliver, fail
        self._thread = threading.Thread(target=self._run, name="coilshift-paced-source", daemon=True)
        self._thread.start()

    def _run(self) -> None:
        t0 = time.monotonic()
        try:
            for block in self.inner.blocks(self.block_frames):
                if self._halt.is_set():
                    return
                self.delivered_samples += len(block)
                due = t0 + self.delivered_samples / self.sample_rate_hz / self.speed
                delay = due - time.monotonic()
                if delay > 0 and self._halt.wait(delay):
                    return
                self._deliver(np.asarray(block, dtype=np.float32), time.monotonic(), False)
        except Exception as exc:  # reading the inner source failed: report it like a device error
            self._fail(f"source failed: {exc}")
            return
        self.exhausted = True

    def close(self) -> None:
        self._halt.set()
        if self._thread is not None:
            self._thread.join()

    def describe(self) -> dict:
        inner = self.inner.describe() if hasattr(self.inner, "describe") else {}
        return {"kind": "paced", "sample_rate_hz": self.sample_rate_hz, "block_frames": self.block_frames,
                "speed": self.speed, "inner": inner}
