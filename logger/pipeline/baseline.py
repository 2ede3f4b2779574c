"""The baseline frequency: the oscillator with no target near the coil.

``shift_hz`` in the log is ``freq_hz - baseline``. Two ways to set it:

* the median of the first ``seconds`` of the run (the coil is assumed target-free at the start,
  common practice when logging a detector);
* the median over every frame inside the markers' ``baseline`` stretches (a calibration run
  brackets each target placement with target-free stretches).

The median, not the mean, so a few glitches or a target passing by barely move it.
Frames with unusable frequencies (no tone, out of band, gap) are left out; low-SNR frames are
used only when nothing better is available.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from coilshift.logger.runfolder import flags as _flags
from coilshift.logger.errors import InputError, setting
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.markers import Marker

METHOD_START = "median of the first seconds"
METHOD_MARKERS = "median over the markers' baseline stretches"

#: normal-consistency factor of the median absolute deviation (Gaussian data)
MAD_TO_SIGMA = 1.4826


@dataclass(frozen=True)
class Baseline:
    """A baseline value, how it was found, and the figures behind it (for run.json)."""

    freq_hz: float
    method: str
    details: dict = field(default_factory=dict)


def _good(frames: FrameTable, sel: np.ndarray) -> np.ndarray:
    ok = sel & np.isfinite(frames.freq_hz) & ((frames.flags & _flags.UNUSABLE) == 0)
    clean = ok & ((frames.flags & _flags.LOW_SNR) == 0)
    return clean if clean.any() else ok


def _spread(f: np.ndarray) -> float:
    return float(MAD_TO_SIGMA * np.median(np.abs(f - np.median(f)))) if len(f) else float("nan")


def _why_dropped(frames: FrameTable, sel: np.ndarray) -> str:
    """``": its N frames with a tone are flagged ..."`` when flags, not silence, emptied ``sel``."""
    toned = sel & np.isfinite(frames.freq_hz)
    if not toned.any():
        return ""
    counts = {}
    for bit, word in _flags.NAMES.items():
        n = int(np.count_nonzero(frames.flags[toned] & bit & _flags.UNUSABLE))
        if n:
            counts[word] = n
    text = ", ".join(f"{word} {n}" for word, n in counts.items())
    hint = ""
    if "alias_close" in counts:
        hint = (f"; the input has no anti-alias filter and folded harmonics sit too close to the tone: "
                f"longer frames ({setting('frame_ms')} 1000) separate them")
    return f": its {int(toned.sum())} frames with a tone are flagged ({text}){hint}"


def baseline_from_start(frames: FrameTable, seconds: float = 2.0, name: str = "recording") -> Baseline:
    """Median frequency of the frames whose centre lies in the first ``seconds`` of the run.

    When the run is shorter than ``seconds`` all of it is used (and the details say so).
    Raises InputError when no frame in that window has a usable tone.
    """
    if not seconds > 0:
        raise InputError(f"baseline: the window must be positive, got {seconds} s")
    if len(frames) == 0:
        raise InputError(f"{name}: no frames to set a baseline from")
    window = frames.t_s <= seconds
    sel = _good(frames, window)
    if not sel.any():
        raise InputError(f"{name}: no usable tone in the first {seconds:g} s to set the baseline"
                         f"{_why_dropped(frames, window)} (choose another {setting('baseline_s')} "
                         "or give markers with baseline rows)")
    f = frames.freq_hz[sel]
    return Baseline(float(np.median(f)), METHOD_START,
                    {"window_s": float(seconds), "frames_used": int(len(f)), "spread_hz": _spread(f),
                     "run_shorter_than_window": bool(frames.t_s[-1] < seconds)})


def baseline_from_markers(frames: FrameTable, markers: list[Marker], name: str = "markers") -> Baseline:
    """Median frequency over all frames inside the markers' ``baseline`` stretches.

    The details list each stretch's own median too, so drift between stretches shows in run.json.
    Raises InputError when there are no baseline rows or none of them holds a usable tone.
    """
    stretches = [m for m in markers if m.is_baseline]
    if not stretches:
        raise InputError(f"{name}: no baseline rows to set the baseline from")
    in_any = np.zeros(len(frames), dtype=bool)
    per: list[dict] = []
    for m in stretches:
        inside = (frames.t_s >= m.start_s) & (frames.t_s <= m.end_s)
        in_any |= inside
        good = _good(frames, inside)
        per.append({"start_s": m.start_s, "end_s": m.end_s, "frames": int(good.sum()),
                    "median_hz": float(np.median(frames.freq_hz[good])) if good.any() else None})
    sel = _good(frames, in_any)
    if not sel.any():
        raise InputError(f"{name}: the baseline stretches hold no usable tone")
    f = frames.freq_hz[sel]
    return Baseline(float(np.median(f)), METHOD_MARKERS,
                    {"stretches": per, "frames_used": int(len(f)), "spread_hz": _spread(f)})
