"""One event measured: its span, baselines before and after, peak shift with its uncertainty,
sign and class.

* Baselines: the means of the quiet usable frames in a window before the event and one after it
  (a guard of one smoothing window away from the event); the baseline under the event is the
  straight line through the two (one side only: that side's mean), which removes a linear drift.
* Peak: a least-squares parabola through the frames around the extreme of the lightly smoothed
  deviation (a fifth of the detector's average, so a short pass keeps its top), over the stretch
  where that smoothed deviation stays within three of its standard deviations of the extreme
  (at least five frames); the peak is the
  parabola's vertex (or its extreme value at the stretch's end when the vertex falls outside).
  Narrowing the stretch as the event grows keeps the parabola's error at the top (the profile's
  fourth-order term) small against the noise.
* Uncertainty: the peak minus the baseline at the peak's time is a zero-sum combination of
  frames (parabola weights at the vertex, minus the two baseline means' interpolation weights),
  so its variance follows from the measured variogram (:mod:`.variogram`), whatever the noise's
  colour. The vertex's position is treated as fixed (first order).
* Class: a frequency that falls (normal polarity) is ferrous, one that rises non-ferrous
  (common practice; see the calibration analysis' classification); a peak within 1.96 of its
  standard uncertainties of zero is indeterminate.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np

from coilshift.logger.events.variogram import Variogram

FERROUS = "ferrous"
NON_FERROUS = "non-ferrous"
INDETERMINATE = "indeterminate"
Z_CALL = 1.96  # two-sided 95 %
MIN_PEAK_FRAMES = 5
PEAK_SMOOTH_DIVISOR = 5  # the peak is located on a moving average this many times shorter than the detector's


@dataclass(frozen=True)
class PassEvent:
    """One event (times in s, shifts in Hz; ``peak_u_hz`` is the standard uncertainty).

    ``noise_hz`` is the detector statistic's standard deviation on quiet baseline (the noise an
    event is detected against); ``strength`` = |peak| / noise_hz; ``z`` = peak / peak_u_hz.
    """

    start_s: float
    end_s: float
    peak_t_s: float
    peak_shift_hz: float
    peak_u_hz: float
    baseline_before_hz: float
    baseline_after_hz: float
    sign: int
    kind: str
    noise_hz: float
    n_before: int
    n_after: int

    @property
    def duration_s(self) -> float:
        return self.end_s - self.start_s

    @property
    def strength(self) -> float:
        return abs(self.peak_shift_hz) / self.noise_hz if self.noise_hz > 0 else math.nan

    @property
    def z(self) -> float:
        return self.peak_shift_hz / self.peak_u_hz if self.peak_u_hz > 0 else math.nan

    @property
    def ci95_hz(self) -> tuple[float, float]:
        return (self.peak_shift_hz - Z_CALL * self.peak_u_hz, self.peak_shift_hz + Z_CALL * self.peak_u_hz)

    def to_dict(self) -> dict:
        out = asdict(self)
        out["duration_s"] = self.duration_s
        out["strength"] = self.strength
        out["z"] = self.z
        out["ci95_hz"] = list(self.ci95_hz)
        return out


def kind_of(shift_hz: float, u_hz: float, polarity: str = "normal") -> str:
    """Ferrous, non-ferrous or indeterminate from the peak's sign and its uncertainty."""
    if not (u_hz > 0) or abs(shift_hz) < Z_CALL * u_hz:
        return INDETERMINATE
    down = shift_hz < 0
    if polarity == "inverted":
        down = not down
    return FERROUS if down else NON_FERROUS


def _side(t_s, y_hz, ok, lo: int, hi: int) -> tuple[np.ndarray, float, float]:
    """Indices, mean time and mean of the ``ok`` frames in ``lo .. hi-1`` (clipped to the arrays)."""
    lo, hi = max(lo, 0), min(hi, y_hz.size)
    idx = np.arange(lo, hi)[ok[lo:hi]] if hi > lo else np.zeros(0, int)
    if idx.size == 0:
        return idx, math.nan, math.nan
    return idx, float(np.mean(t_s[idx])), float(np.mean(y_hz[idx]))


def _parabola(tt: np.ndarray) -> np.ndarray:
    """The least-squares operator (3 x n) of a parabola ``c0 + c1 t + c2 t^2`` through the frames."""
    return np.linalg.pinv(np.column_stack([np.ones_like(tt), tt, tt * tt]))


def _smoothed_sd(variogram: Variogram, k: int, fallback: float) -> float:
    """Standard deviation of a ``k``-frame moving average about its mean level: half the
    variance of the difference of two such averages far apart (from the variogram)."""
    if not variogram.known():
        return fallback
    far = 10 * k + 50
    idx = np.concatenate([np.arange(k), far + np.arange(k)])
    w = np.concatenate([np.full(k, 1.0 / k), np.full(k, -1.0 / k)])
    return math.sqrt(0.5 * variogram.variance(idx, w))


def measure_event(t_s: np.ndarray, y_hz: np.ndarray, usable: np.ndarray, quiet: np.ndarray, s: int, e: int,
                  variogram: Variogram, sigma_d_hz: float, smooth: int, side: int,
                  polarity: str = "normal") -> PassEvent | None:
    """Measure the event on frames ``s .. e-1`` of the arrays (see the module docstring).

    ``quiet``: frames outside every event (baseline windows use only those); ``sigma_d_hz``: the
    detector statistic's standard deviation; ``smooth``, ``side``: the smoothing and the baseline
    windows in frames. None when the event has no usable frame.
    """
    n = y_hz.size
    s, e = max(s, 0), min(e, n)
    ok_b = usable & quiet
    bi, bt, by = _side(t_s, y_hz, ok_b, s - smooth - side, s - smooth)
    ai, at, ay = _side(t_s, y_hz, ok_b, e + smooth, e + smooth + side)
    if bi.size == 0 and ai.size == 0:
        bi, bt, by = _side(t_s, y_hz, ok_b, 0, s)
        ai, at, ay = _side(t_s, y_hz, ok_b, e, n)
    ev = np.arange(s, e)[usable[s:e]]
    if ev.size == 0 or (bi.size == 0 and ai.size == 0):
        return None

    def base(tq):
        if bi.size and ai.size and at > bt:
            lam = (tq - bt) / (at - bt)
            return (1 - lam) * by + lam * ay, lam
        return (by, 0.0) if bi.size else (ay, 1.0)

    r = y_hz[ev] - base(t_s[ev])[0]
    k = max(smooth // PEAK_SMOOTH_DIVISOR, 1)  # light smoothing: a short pass keeps its top
    sm = np.convolve(r, np.ones(k) / k, mode="same") if r.size >= k else np.full(r.size, np.mean(r))
    p = int(np.argmax(np.abs(sm)))
    sign = 1.0 if sm[p] >= 0 else -1.0
    top = sign * sm[p] - 3.0 * _smoothed_sd(variogram, k, sigma_d_hz * math.sqrt(smooth / k))
    lo = p
    while lo > 0 and sign * sm[lo - 1] >= top:
        lo -= 1
    hi = p + 1
    while hi < sm.size and sign * sm[hi] >= top:
        hi += 1
    while hi - lo < MIN_PEAK_FRAMES and (lo > 0 or hi < sm.size):
        lo, hi = max(lo - 1, 0), min(hi + 1, sm.size)
    sel = np.arange(lo, hi)
    tt = t_s[ev[sel]] - t_s[ev[p]]
    if sel.size >= 3:
        pinv = _parabola(tt)
        coef = pinv @ r[sel]
        c2, c1 = coef[2], coef[1]
        tv = -c1 / (2 * c2) if c2 * sign < 0 else math.nan
        if not (math.isfinite(tv) and tt[0] <= tv <= tt[-1]):
            fitted = coef[0] + coef[1] * tt + coef[2] * tt * tt
            tv = float(tt[int(np.argmax(sign * fitted))])
        g = np.array([1.0, tv, tv * tv]) @ pinv
    else:
        tv, g = float(tt[0]), np.full(sel.size, 1.0 / sel.size)
    t_peak = float(t_s[ev[p]] + tv)
    level, lam = base(t_peak)
    peak = float(g @ y_hz[ev[sel]] - level)
    idx = np.concatenate([ev[sel], bi, ai])
    wts = np.concatenate([g, np.full(bi.size, -(1 - lam) / max(bi.size, 1)) if bi.size else np.zeros(0),
                          np.full(ai.size, -lam / max(ai.size, 1)) if ai.size else np.zeros(0)])
    u = math.sqrt(variogram.variance(idx, wts)) if variogram.known() else math.nan
    return PassEvent(float(t_s[s]), float(t_s[e - 1]), t_peak, peak, u, by, ay, int(sign),
                     kind_of(peak, u, polarity), float(sigma_d_hz), int(bi.size), int(ai.size))
