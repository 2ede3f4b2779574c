"""The health of a live input: fault counts and events, its level (peak and clipping) and the rate
the stream really delivered."""

from __future__ import annotations

import math

import numpy as np

#: level meter: the peak reading falls this fast after a louder block (dB per second)
PEAK_FALL_DB_PER_S = 20.0
#: a clipping warning stays on this long after the last clipped block
CLIP_HOLD_S = 1.0
#: at most this many fault events are listed in run.json (all are counted)
MAX_FAULTS_LISTED = 1000
#: the delivered rate is measured over runs longer than this (s of the computer's clock)
MIN_RATE_SPAN_S = 5.0


class StreamHealth:
    """Counts of overflows, gaps, lost samples and device errors, and the first fault events."""

    def __init__(self):
        self.counts = {"overflows": 0, "gaps": 0, "lost_samples": 0, "device_errors": 0, "queue_overruns": 0}
        self.faults: list[dict] = []

    def record(self, kind: str, t_s: float, samples: int, detail: str) -> str:
        """List a fault event (the first :data:`MAX_FAULTS_LISTED`); returns its one-line summary."""
        if len(self.faults) < MAX_FAULTS_LISTED:
            self.faults.append({"kind": kind, "t_s": round(t_s, 6), "samples": int(samples), "detail": detail})
        return f"{kind} at {t_s:.2f} s: {detail}"

    def totals(self) -> dict:
        """The fault counts and events, as run.json ``totals`` lists them."""
        c = self.counts
        return {"overflows": c["overflows"], "gaps": c["gaps"], "queue_overruns": c["queue_overruns"],
                "lost_samples": c["lost_samples"], "device_errors": c["device_errors"], "faults": self.faults}


class LevelMeter:
    """The input's peak level, with meter ballistics: an instant rise, a fall of
    :data:`PEAK_FALL_DB_PER_S`; a clip stays lit for :data:`CLIP_HOLD_S`."""

    def __init__(self, sample_rate_hz: float, clip_level: float):
        self.sample_rate_hz = float(sample_rate_hz)
        self.clip_level = clip_level
        self._peak_hold = 0.0
        self._clip_until = -1

    def update(self, block: np.ndarray, start: int) -> tuple[float, bool]:
        """Take the block starting at sample ``start``; returns (peak dBFS, clipping now)."""
        n = block.shape[0]
        peak = float(np.max(np.abs(block)))
        dur = n / self.sample_rate_hz
        self._peak_hold = max(peak, self._peak_hold * 10 ** (-PEAK_FALL_DB_PER_S * dur / 20))
        if peak >= self.clip_level:
            self._clip_until = start + n + int(CLIP_HOLD_S * self.sample_rate_hz)
        peak_dbfs = 20 * math.log10(self._peak_hold) if self._peak_hold > 0 else -math.inf
        return peak_dbfs, start + n <= self._clip_until


def measured_rates(arrival_first, arrival_last, adc_first, adc_last, sample_rate_hz: float) -> dict:
    """The rate the stream really delivered, against the computer's clock (runs over 5 s).

    Each argument is ``(samples so far, clock time s)`` or None. From block arrival times: uncertain
    by about the callback jitter (one buffer) divided by the run length. From the stream's ADC
    timestamps when they are plausible (some drivers and sound servers report unrelated values;
    those are left out).
    """
    out: dict = {}
    a, b = arrival_first, arrival_last
    if a and b and b[1] - a[1] > MIN_RATE_SPAN_S:
        out["delivered_rate_hz"] = (b[0] - a[0]) / (b[1] - a[1])
        out["delivered_rate_note"] = (f"samples per second of the computer clock over {b[1] - a[1]:.1f} s; "
                                      f"uncertain by about one buffer / run length")
    a, b = adc_first, adc_last
    if a and b and b[1] - a[1] > MIN_RATE_SPAN_S:
        rate = (b[0] - a[0]) / (b[1] - a[1])
        if abs(rate / sample_rate_hz - 1) < 0.01:
            out["adc_clock_rate_hz"] = rate
    return out
