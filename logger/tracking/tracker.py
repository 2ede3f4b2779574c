"""Frame-by-frame frequency tracker: streaming framing, clipping and gaps around the per-frame stages.

The signal is cut into overlapping frames (default 85 ms every 20 ms); chunks of frames go through
:func:`~coilshift.logger.tracking.analyse.analyse_frames`:

1. **Coarse stage, Hann window** (:mod:`~coilshift.logger.tracking.coarse`): noise floor, mains
   hum exclusion, detection at about 1e-3 false alarms per frame, the fundamental rather than its
   strongest harmonic, Grandke's two-bin offset.
2. **Harmonics** (:mod:`~coilshift.logger.tracking.harmonics`): the tone's harmonic lines and
   their amplitudes; later combined with the fundamental by inverse-variance weights.
3. **Fine stage, rectangular window** (:mod:`~coilshift.logger.tracking.fine`,
   :mod:`~coilshift.logger.tracking.subbin`, :mod:`~coilshift.logger.tracking.leakage`): the
   sub-bin estimator named by ``TrackerSettings.fine_estimator`` (default: the exact-kernel
   Aboutanios-Mulgrew step) on DTFT samples from which the leakage of the tone's image, its
   harmonics, other strong lines and the frame mean has been removed analytically.
4. **Optional refinement** (``refine=True``): IEEE Std 1057 four-parameter sine fit.
5. **Quality** (:mod:`~coilshift.logger.tracking.quality`): noise with the tone left out, SNR, flags.

Frequencies and times are raw: the nominal sample rate, no clock or divider corrections. Pure
NumPy/SciPy, no I/O.
"""

from __future__ import annotations

import math
import os
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import scipy.fft as sfft
from numpy.lib.stride_tricks import sliding_window_view

from coilshift.logger.errors import InputError
from coilshift.logger.runfolder import flags as fl
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.tracking.analyse import analyse_frames
from coilshift.logger.tracking.heap import reuse_freed_memory
from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import CHUNK_FRAMES, TrackerSettings

#: the tracker's public interface in one place (TrackerSettings is defined in ``settings``)
__all__ = ["FrameTracker", "TrackerSettings", "track_array"]


class FrameTracker:
    """Streaming frequency tracker; feed blocks of samples, get finished frames back.

    Frame ``i`` after the start (or after the last gap) covers samples ``start + i*hop_len`` ..
    ``+ frame_len - 1``; its ``t_s`` is the time of the frame centre, ``(first + (frame_len-1)/2)
    / fs``, counted in samples received since the first one at the nominal rate (missing samples
    in a gap are not counted). Results do not depend on how the signal is cut into blocks.

    Per frame: ``freq_hz`` (NaN with NO_TONE when no tone stands out of the noise at a false-alarm
    probability of about 1e-3 per frame), ``amp_dbfs`` (peak amplitude of the fundamental, dB re a
    full-scale sine of peak 1.0), ``snr_db`` and ``flags``.

    ``snr_db`` is the per-sample SNR of the fundamental, ``10 log10(A^2 / (2 s^2))``: tone power
    over the noise power in the whole band 0..fs/2, where ``s^2`` is the white-equivalent noise
    variance from the median of the frame's Hann power spectrum with the tone's harmonics left
    out. It is the ``eta`` of the Cramer-Rao bound (Kay 1993, ex. 3.14). The SNR within one
    Hann-window bin, as a spectrum display shows it, is ``snr_db + 10 log10(frame_len / 3)``.

    Parameters
    ----------
    sample_rate_hz : float
    settings : TrackerSettings, optional
    workers : threads that analyse the chunks of one block side by side (NumPy and the FFT
        release the interpreter lock for most of a chunk's work). The frames come out the same,
        bit for bit, for any number: a frame's result depends only on its own samples. Live
        capture keeps 1 (one block is a few frames); replaying a file uses
        :func:`available_workers`.
    """

    def __init__(self, sample_rate_hz: float, settings: TrackerSettings | None = None, workers: int = 1):
        self.settings = settings if settings is not None else TrackerSettings()
        self.settings.check_rate(sample_rate_hz)
        self.sample_rate_hz = float(sample_rate_hz)
        nominal = int(round(self.settings.frame_ms * self.sample_rate_hz / 1000))
        self.frame_len = int(sfft.next_fast_len(nominal, real=True))
        self.hop_len = max(1, int(round(self.settings.hop_ms * self.sample_rate_hz / 1000)))
        self._plan = Plan(self.sample_rate_hz, self.frame_len, self.settings)
        reuse_freed_memory()  # each chunk's arrays reuse the last chunk's pages
        self._buf = np.zeros(0)
        self._buf_start = 0  # absolute index of _buf[0]
        self._next = 0  # absolute index of the next frame's first sample
        self._received = 0
        self._gap_pending = False
        self._clip_pending = False
        self.workers = max(1, int(workers))
        self._pool: ThreadPoolExecutor | None = None

    def push(self, block, gap_before: bool = False) -> FrameTable:
        """Add samples; return the frames this block completed.

        Parameters
        ----------
        block : array_like of float, 1-D, nominally in [-1, 1]
        gap_before : bool
            Samples were lost before this block: the partial frame is dropped (no frame spans a
            gap) and the next frame gets the GAP flag.
        """
        x = np.asarray(block, dtype=np.float64)
        if x.ndim != 1:
            raise InputError(f"tracker input: expected a 1-D block of samples, got shape {x.shape}")
        # max and min are cheap passes; NaN propagates through them and infinities show up in them
        top = float(x.max()) if x.size else 0.0
        bottom = float(x.min()) if x.size else 0.0
        if not (math.isfinite(top) and math.isfinite(bottom)):
            raise InputError("tracker input: block contains NaN or infinite samples")
        level = self.settings.clip_level
        if gap_before:
            self._clip_pending = False
            self._buf = np.zeros(0)
            self._buf_start = self._received
            self._next = self._received
            self._gap_pending = True
        if x.size == 0:
            return FrameTable.empty()
        if top >= level or bottom <= -level:
            self._clip_pending = True  # some buffered sample is clipped; find it when framing
        # no copy when nothing is buffered: the tail is copied below
        self._buf = np.concatenate([self._buf, x]) if self._buf.size else x
        self._received += x.size
        n, hop = self.frame_len, self.hop_len
        off = self._next - self._buf_start
        avail = self._buf.size - off
        if avail < n:
            if self._buf is x:
                self._buf = x.copy()  # the caller may reuse its block buffer
            return FrameTable.empty()
        count = (avail - n) // hop + 1
        used = self._buf[off:off + (count - 1) * hop + n]
        windows = sliding_window_view(used, n)[::hop]
        # frames holding a clipped sample, from one pass over the samples (not one per frame)
        if self._clip_pending:
            tail = self._buf[off:]  # everything still buffered, not only what these frames use
            hits = np.flatnonzero((tail >= level) | (tail <= -level))
            # the clipped samples may still be buffered for the next frames
            self._clip_pending = hits.size > 0 and hits[-1] >= count * hop
        else:
            hits = np.zeros(0, dtype=np.int64)
        starts_rel = np.arange(count) * hop
        clipped = np.searchsorted(hits, starts_rel) < np.searchsorted(hits, starts_rel + n)
        tables = self._analyse(windows, clipped)
        if self._gap_pending:
            tables[0].flags[0] |= fl.GAP
            self._gap_pending = False
        self._next += count * hop
        drop = self._next - self._buf_start
        self._buf = self._buf[drop:].copy()
        self._buf_start = self._next
        return FrameTable.concat(tables)

    def _analyse(self, windows, clipped) -> list[FrameTable]:
        """The frames of one block, in chunks of at most CHUNK_FRAMES (split evenly over the workers)."""
        count, n, hop = windows.shape[0], self.frame_len, self.hop_len
        size = min(CHUNK_FRAMES, -(-count // self.workers))
        bounds = [(i, min(count, i + size)) for i in range(0, count, size)]

        def one(bound):
            i, j = bound
            freq, amp, snr, flg = analyse_frames(self._plan, windows[i:j], clipped[i:j])
            t_s = (self._next + np.arange(i, j) * hop + (n - 1) / 2) / self.sample_rate_hz
            return FrameTable(t_s=t_s, freq_hz=freq, amp_dbfs=amp, snr_db=snr, flags=flg)

        if self.workers == 1 or len(bounds) == 1:
            return [one(b) for b in bounds]
        if self._pool is None:
            self._pool = ThreadPoolExecutor(self.workers, thread_name_prefix="coilshift-track")
        return list(self._pool.map(one, bounds))

    def close(self) -> None:
        """Stop the worker threads (a later push starts them again)."""
        if self._pool is not None:
            self._pool.shutdown(wait=True)
            self._pool = None

    def finish(self) -> FrameTable:
        """End of input: drop the trailing partial frame and reset; returns the frames still due.

        Frames are emitted as soon as they are complete, so this returns an empty table; the
        trailing samples (fewer than a frame) are never analysed. The tracker can be reused for a
        new signal afterwards (times restart at zero).
        """
        self._buf = np.zeros(0)
        self._buf_start = self._next = self._received = 0
        self._gap_pending = False
        self.close()
        return FrameTable.empty()


def available_workers(limit: int = 2) -> int:
    """Threads worth giving a file replay: the cores this process may run on, at most ``limit``
    (beyond two the per-chunk Python work, which holds the interpreter lock, dominates)."""
    try:
        cores = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):  # not Linux
        cores = os.cpu_count() or 1
    return max(1, min(limit, cores))


def track_array(x, sample_rate_hz: float, settings: TrackerSettings | None = None) -> FrameTable:
    """Track a whole signal at once; identical to pushing it block by block into a :class:`FrameTracker`.

    Parameters
    ----------
    x : array_like of float, 1-D, nominally in [-1, 1]
    sample_rate_hz : float
    settings : TrackerSettings, optional

    Returns
    -------
    FrameTable
    """
    tracker = FrameTracker(sample_rate_hz, settings)
    return FrameTable.concat([tracker.push(x), tracker.finish()])
