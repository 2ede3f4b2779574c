"""Live audio on the run's sample timeline -> tracked frames placed on it -> post-processing.

The tracker sees continuous audio only: after a gap (samples lost) it restarts, and its frame
times, which count from its own first sample, are moved by the samples before it, so every
frame's ``t_s`` stays on the true audio timeline. Frames that overlap a reported input overflow
or come first after a marker are flagged here, before the shared post-processing
(:class:`~coilshift.logger.pipeline.stage.FrameStage`, then
:class:`~coilshift.logger.pipeline.stage.LogFeed`).
"""

from __future__ import annotations

import numpy as np

from coilshift.logger.runfolder import flags as _flags
from coilshift.logger.runfolder.frames import FrameTable


class FrameTimeline:
    """Track live audio in batches and hand the frames, on the run's timeline, to the log.

    Parameters
    ----------
    sample_rate_hz : the stream's rate
    new_tracker : ``f() -> tracker`` with ``push(x)``, ``finish()`` and ``frame_len``
    batch_samples : audio is tracked in batches of about this many samples
    stage : :class:`~coilshift.logger.pipeline.stage.FrameStage`
    feed : :class:`~coilshift.logger.pipeline.stage.LogFeed`
    session : :class:`~coilshift.logger.capture.session.CaptureSession` (markers, re-zero
        requests, the live snapshot)
    time_of : ``f(samples) -> s`` on the log's time scale
    tracker : the first tracker, if made already (default: ``new_tracker()``)
    """

    def __init__(self, sample_rate_hz: float, new_tracker, batch_samples: int, stage, feed, session, time_of,
                 tracker=None):
        self.sample_rate_hz = float(sample_rate_hz)
        self._new_tracker = new_tracker
        self.batch_samples = int(batch_samples)
        self.stage, self.feed, self.session = stage, feed, session
        self._time_of = time_of
        self._batch: list[np.ndarray] = []
        self._batch_n = 0
        self.tracker = tracker if tracker is not None else new_tracker()
        self._seg_offset = 0
        self._overflow_spans: list[tuple[int, int]] = []

    def restart(self, offset_samples: int) -> None:
        """A new tracker whose first sample is ``offset_samples`` into the run (after a gap)."""
        self.tracker = self._new_tracker()
        self._seg_offset = offset_samples
        self._overflow_spans: list[tuple[int, int]] = []

    def take(self, block: np.ndarray, start: int, overflow: bool) -> None:
        """Audio ``block`` starting at sample ``start``; ``overflow`` if the stream reported one."""
        if overflow:
            self._overflow_spans.append((start - 1, start + block.shape[0]))
        # the tracker works on batches: one call per block would cost several times the CPU
        self._batch.append(block)
        self._batch_n += block.shape[0]
        if self._batch_n >= self.batch_samples:
            self.push()

    def push(self) -> None:
        """Track the batched audio now."""
        if not self._batch:
            return
        x = np.concatenate(self._batch).astype(np.float64) if len(self._batch) > 1 else \
            np.asarray(self._batch[0], dtype=np.float64)
        self._batch, self._batch_n = [], 0
        self._post(self.tracker.push(x))

    def finish(self) -> None:
        """End of the audio: track what is batched, then the tracker's last frames."""
        self.push()
        self._post(self.tracker.finish())

    def post_gap_row(self, t_s: float) -> None:
        """A ``gap`` row at ``t_s`` (raw seconds from the start of the run)."""
        self._post(FrameTable.blank([t_s], [_flags.GAP]), raw_time=True)

    def _post(self, frames: FrameTable, raw_time: bool = False) -> None:
        """Place frames on the timeline, flag overflows and markers, then the shared post-processing.

        ``raw_time``: the frames' t_s already count from the start of the run (gap rows).
        """
        if len(frames) == 0:
            return
        if not raw_time:
            frames = frames.replace(t_s=frames.t_s + self._seg_offset / self.sample_rate_hz)
        extra = self._overflow_flags(frames.t_s) if not raw_time else np.zeros(len(frames), dtype=np.int64)
        marks, rezeros = self.session.take_requests()
        if marks:
            extra |= self._marker_flags(frames.t_s, marks)
        frames = self.stage.apply(frames, extra)
        for n in rezeros:
            self.feed.rezero(self._time_of(n))
        self.feed.emit(frames)
        last = len(frames) - 1
        self.session.show_frame(float(frames.freq_hz[last]), self.feed.writer.baseline_hz,
                                float(frames.amp_dbfs[last]), float(frames.snr_db[last]), int(frames.flags[last]),
                                int(np.count_nonzero(frames.flags & _flags.NO_TONE)))

    def _overflow_flags(self, t_s: np.ndarray) -> np.ndarray:
        """OVERFLOW on the frames (raw centre times ``t_s``) that overlap a reported overflow."""
        out = np.zeros(len(t_s), dtype=np.int64)
        if self._overflow_spans:
            half = self.tracker.frame_len / 2
            centres = t_s * self.sample_rate_hz
            for lo, hi in self._overflow_spans:
                out[(centres + half > lo) & (centres - half < hi)] |= _flags.OVERFLOW
            newest = centres[-1] - half
            self._overflow_spans = [(lo, hi) for lo, hi in self._overflow_spans if hi > newest]
        return out

    def _marker_flags(self, t_s: np.ndarray, marks: list[int]) -> np.ndarray:
        """MARKER on the first frame (raw centre times ``t_s``) at or after each marker's sample."""
        out = np.zeros(len(t_s), dtype=np.int64)
        keep = []
        for n in marks:
            i = np.searchsorted(t_s, n / self.sample_rate_hz)
            if i < len(t_s):
                out[i] |= _flags.MARKER
            else:
                keep.append(n)
        self.session.put_back_marks(keep)  # their frame comes with a later batch
        return out
