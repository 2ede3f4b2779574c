"""Small helpers for the simulator tests: script builders and an independent frequency estimate."""

from __future__ import annotations

import copy

import numpy as np

BASE = {
    "seed": 1,
    "recording": {"sample_rate_hz": 48000, "level_dbfs": -12, "noise_dbfs": -90},
    "oscillator": {"freq_hz": 11000.0, "duty": 0.5},
    "targets": {"steel": {"peak_shift_hz": -6.0, "coil_radius_mm": 50},
                "alu": {"peak_shift_hz": 4.0, "coil_radius_mm": 50}},
    "session": {"move_s": 0.2,
                "steps": [{"target": "baseline", "hold_s": 1.0},
                          {"target": "steel", "distance_mm": 10, "hold_s": 1.0},
                          {"target": "alu", "distance_mm": 0, "hold_s": 1.0}]},
}


def script_dict(**changes) -> dict:
    """A copy of :data:`BASE` with top-level sections updated (``recording={...}`` merges)."""
    d = copy.deepcopy(BASE)
    for key, value in changes.items():
        if isinstance(value, dict) and isinstance(d.get(key), dict) and key != "targets":
            d[key].update(value)
        else:
            d[key] = value
    return d


def zero_crossing_freq_hz(x: np.ndarray, sample_rate_hz: float, mean: bool = False) -> float:
    """Frequency from rising zero crossings (linear interpolation between samples).

    Independent of the simulator's phase accumulator: it counts whole cycles between the first
    and the last crossing in the stretch.
    Linear interpolation misplaces each crossing by up to ~h^3 (h the phase step per sample),
    so keep the tone well below Nyquist or pass a pure sinusoid.
    """
    s = np.signbit(x)
    idx = np.nonzero(s[:-1] & ~s[1:])[0]  # negative then non-negative: a rising crossing
    frac = -x[idx] / (x[idx + 1] - x[idx])
    t = (idx + frac) / sample_rate_hz
    if mean:
        # whole cycles over the time they took: the mean frequency of a drifting tone
        return (len(t) - 1) / (t[-1] - t[0])
    # least-squares line through crossing time against cycle number: the slope is the period;
    # the fit averages the interpolation error, which changes from crossing to crossing
    k = np.arange(len(t), dtype=float)
    period = np.polyfit(k, t - t[0], 1)[0]
    return 1.0 / period
