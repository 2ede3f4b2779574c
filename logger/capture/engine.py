"""Live capture engine: a real-time block source -> bounded queue -> worker (track, correct, log).

The source's real-time callback does nothing but hand each block (with its ADC time and overflow
flag) to :meth:`CaptureEngine._deliver`, which puts it on a bounded queue without waiting and
returns. If the queue is full the block is dropped and its length counted; the worker later
writes a ``gap`` row at the time of the lost stretch and restarts the tracker after it, so every
frame's ``t_s`` stays on the true audio timeline (samples delivered plus samples lost).

The worker frames and tracks the audio and flags frames that overlap an input overflow or follow
a marker; the post-processing shared with batch tracking (:mod:`coilshift.logger.pipeline.stage`)
applies the corrections and the baseline (the median of the first ``baseline_s`` seconds, and of
each re-zero window; rows inside a window are written at once, with ``shift_hz`` left for the
reader to fill in), and appends rows to the run log about four times a second
(:class:`~coilshift.logger.runfolder.writer.RunWriter` flushes every append and fsyncs at least every
``fsync_interval_s``). run.json is written before the first sample and replaced atomically at
the end with the totals. A source error or a source that stops delivering ends the run; the data
logged so far is kept and the reason recorded. Markers, re-zero requests and the live snapshot
are the session's (:mod:`coilshift.logger.capture.session`).

The source is any :class:`~coilshift.logger.sources.protocol.BlockSource` (a soundcard stream,
:class:`~coilshift.logger.sources.paced.PacedSource`, a scripted fake in the tests): ``open(deliver,
fail)`` starts it, ``deliver(block, adc_time_s, overflow)`` is called from its real-time thread,
``close()`` stops it (waited for at most ``close_timeout_s``: a dead device's driver may hang).
"""

from __future__ import annotations

import datetime as _dt
import math
import queue
import threading
import time
from pathlib import Path

import numpy as np

from coilshift.logger.capture.health import LevelMeter, StreamHealth, measured_rates
from coilshift.logger.capture.session import CaptureSession, CaptureSnapshot, with_live_events
from coilshift.logger.capture.timeline import FrameTimeline
from coilshift.logger.errors import InputError, setting
from coilshift.logger.pipeline.runmeta import pending_baseline_meta, run_meta, tracker_meta
from coilshift.logger.pipeline.stage import FrameStage, LogFeed
from coilshift.logger.runfolder.writer import RunWriter
from coilshift.logger.waiting import call_with_timeout

#: the delivered-rate measurement starts this far into the run
RATE_SETTLE_S = 2.0
#: run.json ``start_utc_note`` of a live run
START_NOTE = "time the input stream was opened; the first sample follows within its latency"


class CaptureEngine:
    """Run a live capture from a block source into a run folder.

    Parameters
    ----------
    source : block source (see the module docstring)
    run_dir : folder prepared by :func:`coilshift.logger.runfolder.folders.prepare_run_dir`
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
    track_batch_s : audio goes to the tracker in batches this long (docs/capture.md, Performance)
    tracker_factory : ``f(sample_rate_hz, settings)`` making a streaming tracker; default
        :class:`coilshift.logger.tracking.tracker.FrameTracker`
    claim : a :class:`~coilshift.logger.runfolder.folders.RunClaim` for ``run_dir``, taken
        only once the input is open and the tracker accepts its rate (so a refused start leaves
        an old run in the folder whole) and released at the end; None when the caller has
        prepared ``run_dir`` itself
    close_timeout_s : how long :meth:`stop` waits for the source to close (a dead device's
        driver may never return); after that the stream is abandoned and the run ends anyway
    """

    def __init__(self, source, run_dir: str | Path, settings, corrections=None, *, baseline_s: float = 2.0,
                 save_audio: bool = False, max_seconds: float | None = None, meta: dict | None = None,
                 queue_blocks: int = 4000, append_interval_s: float = 0.25, fsync_interval_s: float = 0.75,
                 stall_timeout_s: float = 3.0, track_batch_s: float = 0.25, tracker_factory=None,
                 claim=None, close_timeout_s: float = 5.0, events=None):
        if baseline_s <= 0:
            raise InputError(f"{setting('baseline_s')} must be > 0, got {baseline_s}")
        if max_seconds is not None and max_seconds <= 0:
            raise InputError(f"{setting('max_seconds')} must be > 0, got {max_seconds}")
        self.source, self.events = source, events  # events: DetectorSettings, then LiveEvents (logger/events)
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
        self.claim = claim
        self.close_timeout_s = float(close_timeout_s)
        self.stream_abandoned = False  # the source did not close within close_timeout_s
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
        self.session = CaptureSession(self.run_dir, position=lambda: self._delivered, time_of=self._time_of)
        self._health = StreamHealth()
        self._ended_by = ""
        self._status = "complete"
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
        self._batch_samples = 1

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
            first_tracker = self._new_tracker()  # a rate the tracker cannot work at fails here
            meta = run_meta(start_utc, start_utc_note=START_NOTE, mode="live capture",
                            source=self.source.describe(), sample_rate_hz=self.sample_rate_hz,
                            tracker=tracker_meta(self.settings),
                            corrections=self.corrections.to_dict() if self.corrections is not None else None,
                            baseline=pending_baseline_meta(self.baseline_s), extra=self.extra_meta)
            self._open_run_folder(meta)
        except BaseException:
            self._close_source()
            raise
        self._feed = with_live_events(self, LogFeed(self.writer, self.baseline_s, on_baseline=self.session.on_baseline,
                                                    on_rows=self._rows_written))
        # a live input is in dBFS already: no amplitude offset
        self._timeline = FrameTimeline(self.sample_rate_hz, self._new_tracker, self._batch_samples,
                                       FrameStage(self.sample_rate_hz, self.corrections), self._feed, self.session,
                                       self._time_of, tracker=first_tracker)
        self._meter = LevelMeter(self.sample_rate_hz, self.settings.clip_level)
        self._last_append = time.monotonic()
        self._last_block_time = time.monotonic()
        self.session.started()
        self._worker = threading.Thread(target=self._work, name="coilshift-capture-worker", daemon=True)
        self._worker.start()

    def _open_run_folder(self, meta: dict) -> None:
        """Take the claimed folder (an old run set aside), write run.json and the log header;
        a failure here puts the old run back."""
        def write_first():
            try:
                if self.save_audio:
                    from coilshift.logger.capture.audiosave import AudioRecorder

                    self.audio = AudioRecorder(self.run_dir, self.sample_rate_hz)
                    meta["audio"] = self.audio.describe()
                self.writer = RunWriter(self.run_dir, meta, fsync_interval_s=self.fsync_interval_s)
            except BaseException:
                if self.audio is not None:
                    self.audio.close()
                raise

        if self.claim is None:
            write_first()
        else:
            self.claim.start_run(write_first)

    def _close_source(self) -> BaseException | None:
        """Close the source, waiting at most ``close_timeout_s``; returns what close() raised."""
        done, error = call_with_timeout(self.source.close, self.close_timeout_s, name="coilshift-source-close")
        if not done or getattr(self.source, "abandoned", False):
            self.stream_abandoned = True
        return error

    def stop(self) -> dict:
        """Stop the source, drain the queue, write the remaining rows and the final run.json.

        Returns the run summary (also stored in run.json under ``totals``). Safe to call twice.
        """
        if self._summary is not None:
            return self._summary
        if not self._started:
            raise RuntimeError("capture was not started")
        close_error = self._close_source()
        self._stop_request.set()
        if self._worker is not None:
            self._worker.join()
        if self._worker_error is not None:
            raise self._worker_error
        if self.stream_abandoned:  # say so in the summary and in run.json
            note = "the input stream would not close (a hung audio driver) and was abandoned"
            self._summary["stream_close"] = note
            self.writer.amend_totals(stream_close=note)
        if close_error is not None:
            raise close_error
        return self._summary  # type: ignore[return-value]

    def wait(self, timeout: float | None = None) -> bool:
        """Wait until the run ends by itself (duration reached or a fault); True if it has."""
        return self.finished.wait(timeout)

    def add_marker(self, label: str, distance_mm: float | None = None) -> float:
        """Start a marked stretch now (see :func:`~coilshift.logger.capture.markers.parse_marker_label`);
        returns its start time in s.

        The open stretch ends where the next one starts (``end`` just closes it) or at the end of
        the run. markers.csv is rewritten atomically each time; the frame at the marker is flagged.
        """
        return self.session.add_marker(label, distance_mm)

    def rezero(self) -> float:
        """Set a new baseline: the median of the next ``baseline_s`` seconds of usable frames;
        returns the time in s. (Rows of the window are written as they come; see LogFeed.)"""
        return self.session.rezero()

    def snapshot(self) -> CaptureSnapshot:
        """A copy of the latest state (frequency, shift, level, SNR, elapsed, faults ...)."""
        return self.session.snapshot(self.elapsed_s, self._queue.qsize() / self._queue.maxsize)

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
    def _new_tracker(self):
        return self._tracker_factory(self.sample_rate_hz, self.settings)

    def _work(self) -> None:
        try:
            self._work_loop()
        except OSError as exc:  # disk full, read-only or vanished folder: stop, keep what is written
            self._status, self._ended_by = "interrupted", "write_error"
            self._message = f"cannot write {exc.filename or self.run_dir}: {exc.strerror or exc}"
            self._feed.stopped = True  # no more rows: the log may end in part of one
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
            if self.claim is not None:
                self.claim.release()  # another command may use the folder now
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
        self._health.counts["device_errors"] += 1
        self._flush_tail()  # everything before the error row goes out first, in time order
        t = self._delivered / self.sample_rate_hz  # raw: the post-processing corrects it
        self._record_fault("device_error", self._time_of(self._delivered), 0, msg)
        self._timeline.post_gap_row(t + 1e-6)  # a row at the end of the audio marks where the input stopped
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
            self._health.counts["overflows"] += 1
            self._record_fault("overflow", self._time_of(start), 0,
                               "input overflow reported by the audio stream")
        if self.audio is not None:
            self.audio.write(block)
        level = self._meter.update(block, start)
        self._timeline.take(block, start, overflow)
        self.session.show_level(*level)

    def _flush_tail(self) -> None:
        """Samples dropped after the last queued block become a gap; the last batch is tracked."""
        lost = self._lost_pending
        if lost:
            self._lost_pending = 0
            self._gap(self._delivered - lost, lost, "queue_overrun", "samples dropped at the end of the run")
        self._timeline.push()

    def _gap(self, gap_start: int, n_lost: int, cause: str, detail: str) -> None:
        """Samples [gap_start, gap_start + n_lost) never reached us: log a gap row, restart the tracker."""
        self._timeline.push()  # audio before the gap belongs to the old tracker
        fs = self.sample_rate_hz
        counts = self._health.counts
        counts["gaps"] += 1
        counts["lost_samples"] += n_lost
        if cause == "queue_overrun":
            counts["queue_overruns"] += 1
        self._record_fault("gap", self._time_of(gap_start), n_lost, f"{detail} ({n_lost} samples, {n_lost / fs:.3f} s)")
        # frames completed before the gap are already out; the tracker's partial frame is dropped
        self._timeline.post_gap_row((gap_start + n_lost / 2) / fs)
        if self.audio is not None:
            self.audio.write_silence(n_lost)
        self._timeline.restart(gap_start + n_lost)

    def _rows_written(self, rows: int) -> None:
        self._last_append = time.monotonic()
        self.session.on_rows(rows)

    def _maybe_append(self) -> None:
        now = time.monotonic()
        if now - self._last_append >= self.append_interval_s:
            self._feed.flush()
            self._last_append = now
        self.session.keep_markers_current(self.elapsed_s)

    def _record_fault(self, kind: str, t_s: float, samples: int, detail: str) -> None:
        self.session.show_faults(self._health.counts, self._health.record(kind, t_s, samples, detail))

    def _finish_run(self) -> None:
        if self._summary is not None:
            return
        fs = self.sample_rate_hz
        if self._ended_by != "duration":
            self._flush_tail()
        if not self._ended_by:
            self._ended_by = "stopped"
        self._timeline.finish()
        self._feed.finish()
        end_n = self._delivered
        if self.max_seconds is not None and self._ended_by == "duration":
            end_n = min(end_n, int(round(self.max_seconds * fs)))
        end_s = self._time_of(end_n)
        markers = self.session.close_markers(end_s)
        if self.audio is not None:
            self.audio.close()
        totals = self._totals(end_s, len(markers))
        if self.audio is not None:
            self.writer.meta["audio"] = self.audio.describe()
        self.writer.close(totals, status=self._status)
        self._summary = {"status": self._status, "run_dir": str(self.run_dir), "rows": self.writer.rows_written,
                         "sample_rate_hz": fs, "baseline_hz": self.writer.baseline_hz, **totals}
        self.session.show_status(self._status, self._message)

    def _totals(self, end_s: float, n_markers: int) -> dict:
        """run.json ``totals`` of the run (the writer adds the rows and flag counts)."""
        totals = {"duration_s": round(end_s, 6), "ended_by": self._ended_by, "message": self._message,
                  "samples": int(self._delivered), **self._health.totals(), "dropped_blocks": self._overrun_blocks,
                  "markers": n_markers, "baselines": self._feed.baselines}
        totals.update(measured_rates(self._arrival_first, self._arrival_last, self._adc_first, self._adc_last,
                                     self.sample_rate_hz))
        return totals
