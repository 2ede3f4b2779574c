"""The streaming event detector: frames in, finished events out, one block at a time.

Each frame's statistic ``z = d / sigma`` (:mod:`.statistic`) is compared with the level ``u`` set
from the false-event rate (:mod:`.crossings`). An event starts where ``|z|`` exceeds ``u``; its
start is moved back to where ``|z|`` last stood below ``start_level``; the baseline line is frozen
at its value at the trigger while the event lasts; the event ends where the deviation from that line
has stayed within ``end_level`` of its own standard deviation for ``hold_s`` (that standard
deviation grows as the frozen line is carried forward: slope error, wander; from the variogram). It
is reported once the baseline window after it has been recorded (or when the input ends), measured
by :mod:`.measure`; a new excursion inside that window continues the same event (the tail of a slow
pass is not a second event).

The noise of the statistic is given (the batch analysis measures it on the whole recording first) or
learned: from the first ``learn_s`` of usable frames (robustly: median absolute deviation), then
kept up to date from every quiet frame. The variogram for the peaks' uncertainties is accumulated
from the quiet frames as they leave the detector's buffer.

The same class runs in the live capture (blocks of a few frames) and in the batch analysis (blocks
of thousands); its results do not depend on the block size.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from coilshift.logger.events.crossings import DEFAULT_FALSE_PER_HOUR, level_for_rate
from coilshift.logger.events.measure import PassEvent, measure_event
from coilshift.logger.events.statistic import NoiseLevel, Windows, deviation, noise_of_statistic, smoothed
from coilshift.logger.events.variogram import Variogram, lag_set


@dataclass(frozen=True)
class DetectorSettings:
    """What the detector does (seconds unless named otherwise).

    false_per_hour : stated false-event rate on quiet baseline (sets the level ``u``)
    smooth_s, gap_s, fit_s : the statistic's moving average, guard and baseline-fit lengths
    start_level : an event's start is moved back to where ``|z|`` last stood below this (sigmas)
    end_level : an event ends where the deviation stays within this many of its standard
        deviations (which grows as the frozen baseline is carried forward)...
    hold_s : ... for this long
    side_s : the baseline windows before and after an event
    learn_s : quiet frames learned from before detecting, when the noise is not given
    max_event_s : an event longer than this is ended there (a target left in place)
    polarity : ``normal`` (frequency down = ferrous) or ``inverted``
    """

    false_per_hour: float = DEFAULT_FALSE_PER_HOUR
    smooth_s: float = 0.5
    gap_s: float = 0.5
    fit_s: float = 5.0
    start_level: float = 1.0
    end_level: float = 2.0
    hold_s: float = 0.5
    side_s: float = 2.0
    learn_s: float = 20.0
    max_event_s: float = 600.0
    polarity: str = "normal"


_QUIET, _EVENT = 0, 1
SLOPE_BLOCKS = 8
#: sqrt(pi / 2): a median's standard error over a mean's for normal data (its efficiency 2/pi)
ROBUST_SD_FACTOR = math.sqrt(math.pi / 2.0)


def robust_slope(t_s: np.ndarray, y_hz: np.ndarray) -> float:
    """Slope of frames robust to a minority of them being off: the Theil-Sen estimator (the median
    of the pairwise slopes; Theil 1950, *Proc. KNAW* 53; Sen 1968, *JASA* 63, 1379-1389) over
    the medians of :data:`SLOPE_BLOCKS` consecutive blocks of frames."""
    blocks = np.array_split(np.arange(t_s.size), min(SLOPE_BLOCKS, t_s.size))
    tb = np.array([np.median(t_s[b]) for b in blocks if b.size])
    yb = np.array([np.median(y_hz[b]) for b in blocks if b.size])
    i, j = np.triu_indices(tb.size, 1)
    dt = tb[j] - tb[i]
    good = dt > 0
    return float(np.median((yb[j] - yb[i])[good] / dt[good])) if np.any(good) else 0.0
TRIM_FRAMES = 256
SIGMA_FLOOR = 1e-9  # relative to the frequency: far below any oscillator's noise, above rounding
TOLERANCE_S = 60.0  # the frozen baseline's standard deviation is computed this far after a trigger
SLOPE_FITS = 4  # the slope carried through an event comes from this many fit lengths


def run_lengths(flags: np.ndarray, carry: int = 0) -> np.ndarray:
    """Length of the run of True ending at each position; a leading run continues ``carry``."""
    idx = np.arange(flags.size)
    last_false = np.maximum.accumulate(np.where(flags, -1, idx)) if flags.size else idx
    runs = idx - last_false
    runs = np.where(last_false < 0, runs + carry, runs)
    return np.where(flags, runs, 0)


class PassDetector:
    """Streaming detector of events (see the module docstring).

    Parameters
    ----------
    hop_s : frame spacing (s)
    settings : :class:`DetectorSettings`
    noise : the statistic's noise, when known; None: learned (live)
    variogram : the frames' variogram for the uncertainties, when known; None: accumulated
    """

    def __init__(self, hop_s: float, settings: DetectorSettings | None = None, noise: NoiseLevel | None = None,
                 variogram: Variogram | None = None):
        if not (hop_s > 0 and math.isfinite(hop_s)):
            raise ValueError("the frame spacing must be positive")
        self.hop_s = float(hop_s)
        self.settings = s = settings or DetectorSettings()
        self.win = Windows.from_seconds(hop_s, s.smooth_s, s.gap_s, s.fit_s)
        self.hold = max(int(round(s.hold_s / hop_s)), 1)
        self.side = max(int(round(s.side_s / hop_s)), 1)
        self.learn_n = max(int(round(s.learn_s / hop_s)), 20)
        self.max_event = max(int(round(s.max_event_s / hop_s)), self.hold + 1)
        self.fixed_noise = noise is not None
        self.noise = noise
        self.level = self._level(noise) if noise is not None else math.nan
        self.variogram = variogram if variogram is not None else Variogram(lag_set(hop_s))
        self.accumulate = variogram is None
        self.max_lag = int(self.variogram.lags.max())
        self._t = np.zeros(0)
        self._y = np.zeros(0)
        self._ok = np.zeros(0, bool)
        self._quiet = np.zeros(0, bool)
        self._z = np.zeros(0)
        self._base = 0  # global index of buffer frame 0
        self._done = 0  # buffer frames whose z is known
        self._state = _QUIET
        self._start = 0  # global index of the open event's first frame
        self._trigger = 0
        self._frozen = None  # (t_at, y_at, slope) of the baseline during the open event
        self._tol = (np.zeros(1), np.ones(1))  # its extrapolation's standard deviation after the trigger
        self._run = 0  # frames in a row below end_level (open event)
        # events waiting for their baseline window after: (start, end, due) global indices, and
        # the frozen line, its tolerance and the trigger, should the event go on
        self._pending: list[tuple] = []
        self._last_end = 0  # global index just after the last event
        self._fit_floor = 0  # the baseline lines use no frame before this global index
        self._learn: list[np.ndarray] = []
        self._sum = np.zeros(4)  # quiet d: count, sum d^2, lag-1 pairs, sum d_i d_{i-1}
        self._last_d = math.nan
        self.frames_seen = 0
        self.quiet_frames = 0

    # ----- public -------------------------------------------------------------------------------

    @property
    def ready(self) -> bool:
        """The noise is known and events can be found."""
        return self.noise is not None and math.isfinite(self.level)

    def push(self, t_s, freq_hz, usable=None) -> list[PassEvent]:
        """Add frames (times, frequencies, usable mask); return the events finished by them."""
        t = np.asarray(t_s, float)
        y = np.asarray(freq_hz, float)
        ok = np.isfinite(y) if usable is None else (np.asarray(usable, bool) & np.isfinite(y))
        if t.size == 0:
            return []
        self.frames_seen += t.size
        self._t = np.concatenate([self._t, t])
        self._y = np.concatenate([self._y, np.where(ok, y, 0.0)])
        self._ok = np.concatenate([self._ok, ok])
        self._quiet = np.concatenate([self._quiet, np.ones(t.size, bool)])
        self._z = np.concatenate([self._z, np.full(t.size, math.nan)])
        out = self._scan()
        out += self._due(final=False)
        self._trim()
        return out

    def flush(self) -> list[PassEvent]:
        """End of input: close the open event and report every pending one."""
        n = self._t.size
        if self._state == _EVENT:
            self._close(self._base + n)
        return self._due(final=True)

    # ----- scanning -----------------------------------------------------------------------------

    def _level(self, noise: NoiseLevel) -> float:
        if not (noise.sigma_hz > 0 and math.isfinite(noise.sigma_hz)):
            return math.nan
        return level_for_rate(self.settings.false_per_hour, noise.rho1, self.hop_s)

    def _sigma(self) -> float:
        """The statistic's standard deviation for the threshold, never below :data:`SIGMA_FLOOR`
        of the frequency (a noiseless input, e.g. a synthetic tone, would make rounding an event)."""
        if self.noise is None:
            return math.nan
        floor = SIGMA_FLOOR * float(np.abs(self._y[-1])) if self._y.size else 0.0
        return max(self.noise.sigma_for_threshold(), floor)

    def _scan(self) -> list[PassEvent]:
        out: list[PassEvent] = []
        n = self._t.size
        j = self._done
        while j < n:
            if self._state == _QUIET:
                j, ev = self._scan_quiet(j, n)
                out += ev
            else:
                j = self._scan_event(j, n)
        self._done = n
        return out

    def _fitmask(self) -> np.ndarray:
        """Frames the baseline lines may use: usable, quiet, after the last longest event."""
        fit = self._ok & self._quiet
        fit[:max(self._fit_floor - self._base, 0)] = False
        return fit

    def _scan_quiet(self, j: int, n: int) -> tuple[int, list[PassEvent]]:
        fit = self._fitmask()
        d, lines, _ = deviation(self._t, self._y, self._ok, fit, j, n, self.win)
        if not self.ready:
            self._learn_from(d)
            if not self.ready:
                return n, []
        z = d / self._sigma()
        hit = np.flatnonzero(np.abs(z) > self.level)
        k = int(hit[0]) if hit.size else z.size
        self._z[j:j + k] = z[:k]
        self._note_quiet(d[:k])
        if not hit.size:
            return n, []
        trig = j + k
        self._z[trig] = z[k]
        if self._pending and self._pending[-1][2] > self._base + trig and self._pending[-1][7]:
            # a new excursion inside the last event's baseline window after it: the same event goes on
            _, pe, _, frozen, tol, ptrig, ps, _ = self._pending.pop()
            self._state, self._run = _EVENT, 0
            self._start, self._trigger, self._frozen, self._tol = ps, ptrig, frozen, tol
            self._quiet[max(pe - self._base, 0):trig + 1] = False
            return trig + 1, []
        floor = max(self._last_end - self._base, 0)  # never back into the event before
        back = np.flatnonzero(~(np.abs(self._z[floor:trig]) >= self.settings.start_level))
        start = floor + int(back[-1]) + 1 if back.size else floor
        self._state, self._run = _EVENT, 0
        self._start, self._trigger = self._base + start, self._base + trig
        self._frozen, self._tol = self._freeze(trig, fit, lines, k)
        self._quiet[start:trig + 1] = False
        # the next event starting cuts short the baseline window after the one before it
        return trig + 1, []

    def _scan_event(self, j: int, n: int) -> int:
        ma, tc = smoothed(self._t, self._y, self._ok, j, n, self.win.smooth)
        t_at, y_at, slope = self._frozen
        z = (ma - (y_at + slope * (tc - t_at))) / self._sigma()
        self._z[j:n] = z
        since = self._base + np.arange(j, n) - self._trigger
        tol = np.interp(since, *self._tol) / self._sigma()
        below = ~(np.abs(z) >= self.settings.end_level * np.maximum(tol, 1.0))  # NaN (no usable frame) counts as below
        runs = run_lengths(below, self._run)
        ends = np.flatnonzero(runs >= self.hold)
        length = self._base + np.arange(j, n) - self._start
        long = np.flatnonzero(length >= self.max_event)
        if ends.size and (not long.size or ends[0] <= long[0]):
            e = int(ends[0])
            end = j + e - self.hold + 1  # first frame of the quiet run (maybe in an earlier block)
            self._quiet[j:end] = False
            self._quiet[max(end, 0):j + e + 1] = True
            self._close(self._base + end)
            return j + e + 1
        if long.size:
            e = int(long[0])
            self._quiet[j:j + e + 1] = False
            self._close(self._base + j + e + 1, long=True)
            return j + e + 1
        self._quiet[j:n] = False
        self._run = int(runs[-1]) if runs.size else self._run
        return n

    def _freeze(self, trig: int, fit: np.ndarray, lines, k: int):
        """The baseline carried through an event, and its standard deviation after the trigger.

        Level: the median of the statistic's last ``L`` fit frames (at their mean time); slope:
        :func:`robust_slope` of the last ``SLOPE_FITS x L`` fit frames. Passes too weak to be
        found, and the slow rise into this one, sit inside those windows; medians keep them from
        tilting the line, which matters once it is carried far (a long event). The deviation from
        it (moving average minus the line) is close to a zero-sum combination of frames (the
        least-squares line's weights), so the variogram gives its variance ``m`` frames after the
        trigger, at a few ``m`` (interpolated between): it grows with the slope's error and the
        wander (:meth:`.variogram.Variogram.variance`); it is raised by ``ROBUST_SD_FACTOR``
        for the medians' lower efficiency. Without a variogram yet: ``sigma (1 + m hop / fit_s)``.
        """
        w = self.win.smooth
        # beyond TOLERANCE_S the last value is held (np.interp): long events end on that tolerance
        top = min(self.max_event, int(round(TOLERANCE_S / self.hop_s))) + w
        grid = np.unique(np.concatenate([[0], np.round(np.geomspace(w, top, 10)).astype(int)]))
        sig = self.noise.sigma_hz
        b_end = trig - w - self.win.gap
        frames = np.flatnonzero(fit[:max(b_end + 1, 0)])
        level_idx, slope_idx = frames[-self.win.fit:], frames[-SLOPE_FITS * self.win.fit:]
        fallback = ((float(lines.t_at[k]), float(lines.y_at[k]), float(lines.slope[k])),
                    (grid, sig * (1.0 + grid * self.hop_s / self.settings.fit_s)))
        if level_idx.size < 3:
            return fallback
        t_lv = self._t[level_idx]
        tm = float(np.mean(t_lv))
        ts = self._t[slope_idx]
        tm2 = float(np.mean(ts))
        stt = float(np.sum((ts - tm2) ** 2))
        if not stt > 0:
            return fallback
        frozen = (tm, float(np.median(self._y[level_idx])), robust_slope(ts, self._y[slope_idx]))
        if not self.variogram.known():
            return frozen, fallback[1]
        out = []
        for m in grid:
            ma_idx = np.arange(trig + m - w + 1, trig + m + 1)
            tc = self._t[trig] + (m - 0.5 * (w - 1)) * self.hop_s
            idx = np.concatenate([ma_idx, level_idx, slope_idx])
            wts = np.concatenate([np.full(w, 1.0 / w), np.full(level_idx.size, -1.0 / level_idx.size),
                                  -(tc - tm) * (ts - tm2) / stt])
            out.append(ROBUST_SD_FACTOR * math.sqrt(self.variogram.variance(idx, wts)))
        return frozen, (grid, np.maximum(np.asarray(out), sig))

    def _close(self, end_global: int, long: bool = False) -> None:
        """End the open event at ``end_global`` (first frame after it) and queue it. ``long``: ended
        at the longest event, so the level it ended at becomes the baseline (the fits start afresh
        after it) and it cannot go on."""
        shift = self.win.smooth // 2  # the moving average trails the frames by about half its length
        s = max(self._start - shift, self._base)
        e = max(end_global - shift, s + 1)
        lo, hi = s - self._base, e - self._base
        self._quiet[lo:hi] = False
        self._quiet[hi:end_global - self._base] = True
        self._pending.append((s, e, e + self.win.smooth + self.side, self._frozen, self._tol, self._trigger,
                              self._start, not long))
        self._last_end = e
        if long or e - s > self.win.fit:
            # frames from before a long event are stale as a baseline after it: start the fits afresh
            self._fit_floor = end_global
        self._state, self._frozen, self._run = _QUIET, None, 0

    def _due(self, final: bool) -> list[PassEvent]:
        out, keep = [], []
        have = self._base + self._t.size
        for item in self._pending:
            s, e, due = item[:3]
            if final or due <= have:
                ev = measure_event(self._t, self._y, self._ok, self._quiet, s - self._base, e - self._base,
                                   self.variogram, self.noise.sigma_hz, self.win.smooth, self.side,
                                   self.settings.polarity)
                if ev is not None:
                    out.append(ev)
            else:
                keep.append(item)
        self._pending = keep
        return out

    # ----- noise and memory ---------------------------------------------------------------------

    def _learn_from(self, d: np.ndarray) -> None:
        self._learn.append(d[np.isfinite(d)])
        got = np.concatenate(self._learn)
        if got.size >= self.learn_n:
            self.noise = noise_of_statistic(got, robust=True)
            self.level = self._level(self.noise)
            self._learn = []

    def _note_quiet(self, d: np.ndarray) -> None:
        """Keep the learned noise up to date from quiet values of the statistic."""
        fin = np.isfinite(d)
        self.quiet_frames += int(np.sum(fin))
        if self.fixed_noise or not np.any(fin):
            return
        prev = np.concatenate([[self._last_d], d[:-1]])
        pair = fin & np.isfinite(prev)
        self._sum += [np.sum(fin), np.sum(d[fin] ** 2), np.sum(pair), np.sum(d[pair] * prev[pair])]
        self._last_d = float(d[-1]) if fin[-1] else math.nan
        cnt, s2, npair, s11 = self._sum
        if cnt >= 2 * self.learn_n:
            var = s2 / cnt
            rho = min(max((s11 / npair) / var if npair > 0 and var > 0 else 0.0, 0.0), 0.9999)
            self.noise = NoiseLevel(math.sqrt(var), rho, cnt * (1 - rho) / (1 + rho))
            self.level = self._level(self.noise)

    def _trim(self) -> None:
        """Drop frames no longer needed (adding their pairs to the variogram first)."""
        n = self._t.size
        keep_from = n - (self.win.fit + self.win.gap + self.win.smooth + self.hold + self.side)
        keep_from = min(keep_from, n - self.max_lag - 1) if self.accumulate else keep_from
        fit = self._fitmask()
        need = np.flatnonzero(fit[:max(n - self.win.smooth - self.win.gap, 0)])
        if need.size >= SLOPE_FITS * self.win.fit:
            keep_from = min(keep_from, int(need[-SLOPE_FITS * self.win.fit]))
        else:
            keep_from = min(keep_from, 0)
        starts = [self._start] if self._state == _EVENT else []
        starts += [item[0] for item in self._pending]
        for s in starts:
            keep_from = min(keep_from, s - self._base - self.win.smooth - self.side)
        cut = max(keep_from, 0)
        if cut < TRIM_FRAMES:  # trim in steps, so small live blocks do not pay for it each time
            return
        if self.accumulate:
            self.variogram.add(self._y, self._ok & self._quiet, 0, cut)
        self._t, self._y, self._ok = self._t[cut:], self._y[cut:], self._ok[cut:]
        self._quiet, self._z = self._quiet[cut:], self._z[cut:]
        self._base += cut
        self._done -= cut

