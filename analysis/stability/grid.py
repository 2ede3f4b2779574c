"""Frames onto a uniform time grid, NaN for gaps: the input every stability estimator needs.

Gaps and timing
    Frames are counted off in steps of the median spacing. A jump of 1.5 steps or more is a
    gap: its missing steps become NaN (at least one) and the stretch after it keeps its own time
    origin. tau0 is the least-squares slope of frame time on step number pooled within the
    gap-free stretches. Each frame sits on its step; frame times may jitter by up to a quarter of tau0 (their RMS offset
    is reported) but a log whose times stray further, or put two frames on one step, is
    refused rather than silently resampled. Grid steps without a frame, and frames flagged
    unusable (no tone, out of band, gap), are NaN. The estimators keep only terms whose
    samples are all present, so nothing is bridged across a gap.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from coilshift.logger.errors import InputError

MAX_JITTER = 0.25  # frame-time offset from the grid tolerated, as a fraction of tau0
MAX_GRID = 200_000_000  # refuse grids that would not fit in memory


@dataclass
class UniformSeries:
    """Frequency samples on a uniform time grid, NaN where no usable frame fell.

    Attributes
    ----------
    t0_s : time of the first grid step
    tau0_s : grid spacing (least-squares fit of frame time on step number)
    freq_hz : frequency per grid step (NaN = gap)
    n_frames : frames in the input
    n_unusable : frames dropped as unusable (flagged or empty frequency)
    n_missing : grid steps no frame fell on (time gaps)
    jitter_rms : RMS offset of frame times from their grid steps, in units of tau0
    """

    t0_s: float
    tau0_s: float
    freq_hz: np.ndarray
    n_frames: int
    n_unusable: int
    n_missing: int
    jitter_rms: float

    @property
    def t_s(self) -> np.ndarray:
        return self.t0_s + self.tau0_s * np.arange(self.freq_hz.size)

    @property
    def n_used(self) -> int:
        return int(np.isfinite(self.freq_hz).sum())

    def segment_lengths(self) -> np.ndarray:
        """Lengths of the contiguous gap-free stretches, in samples."""
        ok = np.isfinite(self.freq_hz).astype(np.int8)
        edges = np.diff(np.concatenate(([0], ok, [0])))
        return np.flatnonzero(edges == -1) - np.flatnonzero(edges == 1)


def to_uniform(t_s, freq_hz, usable=None, source: str = "log") -> UniformSeries:
    """Place frames on a uniform grid (spacing fitted to the frame times); gaps become NaN.

    Parameters
    ----------
    t_s : frame times, increasing, seconds
    freq_hz : frame frequencies (NaN allowed)
    usable : optional boolean mask of usable frames (others become gaps)
    source : name used in error messages

    Raises
    ------
    InputError : fewer than two frames, or frame times too uneven for a uniform grid
    """
    t = np.asarray(t_s, float)
    f = np.asarray(freq_hz, float)
    if t.shape != f.shape or t.ndim != 1:
        raise InputError(f"{source}: t_s and freq_hz differ in length")
    if t.size < 2:
        raise InputError(f"{source}: needs at least two frames for a stability analysis")
    dt = np.diff(t)
    if not np.all(np.isfinite(t)) or np.any(dt <= 0):
        raise InputError(f"{source}: frame times must be finite and increasing")
    # count grid steps frame to frame with the median spacing (robust to local jitter)
    step = np.rint(dt / float(np.median(dt))).astype(np.int64)
    if np.any(step < 1):
        i = int(np.argmax(step < 1))
        raise InputError(f"{source}: frame times too uneven for a uniform grid (frames at {t[i]:.6g} and "
                         f"{t[i + 1]:.6g} s are closer than half the median spacing); resample the log first")
    # a jump of 1.5 steps or more is a gap; dropped input rarely loses a whole number of frames,
    # so each gap-free stretch keeps its own time origin, and tau0 is the least-squares slope of
    # time on step number pooled within the stretches (a spacing a little off the median then
    # cannot accumulate into whole-step errors over a long record)
    seg = np.concatenate(([0], np.cumsum(step >= 2)))
    k_in = np.arange(t.size) - np.searchsorted(seg, seg, side="left")  # step number within its stretch
    cnt = np.bincount(seg).astype(float)
    kc = k_in - (np.bincount(seg, k_in) / cnt)[seg]
    del k_in  # long logs: free each frame-sized array once it is used (10 M frames = 80 MB each)
    tc = t - (np.bincount(seg, t) / cnt)[seg]
    den = float(np.sum(kc * kc))
    tau0 = float(np.sum(kc * tc) / den) if den > 0 else float(np.median(dt))
    off = tc / tau0
    del tc
    off -= kc
    del kc
    worst = float(np.max(np.abs(off)))
    if worst > MAX_JITTER:
        i = int(np.argmax(np.abs(off)))
        raise InputError(f"{source}: frame times too uneven for a uniform grid (frame at {t[i]:.6g} s is "
                         f"{off[i]:+.2f} steps of {tau0:.6g} s off); resample the log to even spacing first")
    jitter_rms = float(np.sqrt(np.mean(off ** 2)))
    del off
    # whole steps across each gap with the refined tau0, at least one empty step so no term bridges it
    gap = step >= 2
    step = np.ones(dt.size, np.int64)
    step[gap] = np.maximum(np.rint(dt[gap] / tau0).astype(np.int64), 2)
    del dt
    k = np.concatenate(([0], np.cumsum(step)))
    first = seg == 0
    t_origin = float(np.mean(t[first] - tau0 * k[first]))
    n = int(k[-1]) + 1
    if n > MAX_GRID:
        raise InputError(f"{source}: {n} grid steps of {tau0:.6g} s is too many to analyse")
    ok = np.isfinite(f)
    if usable is not None:
        ok &= np.asarray(usable, bool)
    grid = np.full(n, np.nan)
    grid[k[ok]] = f[ok]
    return UniformSeries(t0_s=t_origin, tau0_s=tau0, freq_hz=grid, n_frames=int(t.size),
                         n_unusable=int((~ok).sum()), n_missing=int(n - t.size),
                         jitter_rms=jitter_rms)
