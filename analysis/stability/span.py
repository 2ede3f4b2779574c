"""Which frames a stability analysis uses: the baseline stretches of a calibration log, and the
part of the log the deviations are computed on (settled by default)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from coilshift.logger.errors import InputError, setting

from coilshift.analysis.stability import allan
from coilshift.analysis.stability.grid import UniformSeries
from coilshift.analysis.stability.warmup import Warmup

#: fewer usable samples than this in the settled part: the deviations use the whole log
MIN_SPAN_SAMPLES = 16


@dataclass
class BaselineNote:
    """A log whose markers hold target stretches is analysed on its baselines only."""

    n_stretches: int
    n_frames_outside: int

    def text(self) -> str:
        return (f"baselines only: the markers hold target stretches, so only the {self.n_stretches} baseline "
                f"stretch{'es' if self.n_stretches != 1 else ''} are used ({self.n_frames_outside} frames outside "
                "them are gaps)")


def baseline_mask(t_s, baselines) -> np.ndarray:
    """True for frames inside any of the ``baselines`` intervals (start_s, end_s), ends included."""
    t = np.asarray(t_s, float)
    inside = np.zeros(t.shape, bool)
    for start, end in baselines:
        inside |= (t >= start) & (t <= end)
    return inside


@dataclass
class Span:
    """The part of the log the deviations (and the temperature coefficient) are computed on.

    Attributes
    ----------
    start_s, end_s : on the log's clock
    kind : "settled" (the default), "start" (a start given) or "whole"
    reason : one line saying why this part
    """

    start_s: float
    end_s: float
    kind: str
    reason: str


def _slice(series: UniformSeries, start_s: float) -> UniformSeries:
    i0 = max(int(np.ceil((start_s - series.t0_s) / series.tau0_s - 1e-9)), 0)
    y = series.freq_hz[i0:]
    return UniformSeries(series.t0_s + i0 * series.tau0_s, series.tau0_s, y, series.n_frames, series.n_unusable,
                         series.n_missing, series.jitter_rms)


def _long_enough(s: UniformSeries) -> bool:
    return s.n_used >= MIN_SPAN_SAMPLES and allan.octave_factors(s.freq_hz.size).size > 0


def choose_span(series: UniformSeries, warmup: Warmup, start_s: float | None = None,
                whole_log: bool = False, source: str = "log") -> tuple[Span, UniformSeries]:
    """The part of the record for the deviations, and that part of the grid.

    Default: from the settled start (:mod:`.warmup`) to the end; the whole log when the
    oscillator never settles or when the settled part is too short for one averaging time.
    ``start_s`` chooses the start; ``whole_log`` takes everything.

    Raises
    ------
    InputError : ``start_s`` outside the log, or leaving too little of it
    """
    t_end = float(series.t0_s + (series.freq_hz.size - 1) * series.tau0_s)
    whole = Span(series.t0_s, t_end, "whole", "the whole log, as asked")
    if whole_log:
        return whole, series
    if start_s is not None:
        if not (np.isfinite(start_s) and series.t0_s <= start_s < t_end):
            raise InputError(f"{setting('start_s')}: {start_s:g} s lies outside the log "
                             f"({series.t0_s:.6g} .. {t_end:.6g} s)")
        part = _slice(series, start_s)
        if not _long_enough(part):
            raise InputError(f"{setting('start_s')}: from {start_s:g} s the log has only {part.n_used} usable "
                             f"frames, too few for one averaging time")
        return Span(part.t0_s, t_end, "start", f"from {start_s:g} s, as asked"), part
    if not warmup.settled:
        return Span(series.t0_s, t_end, "whole", f"the whole log: {warmup.reason}, so the warm-up is "
                                                 "part of these deviations"), series
    part = _slice(series, warmup.t_settled_s)
    if part.t0_s <= series.t0_s:
        return Span(series.t0_s, t_end, "settled", f"the whole log is settled: {warmup.reason}"), series
    if not _long_enough(part):
        return Span(series.t0_s, t_end, "whole", f"the whole log: the settled part ({warmup.reason} at "
                                                 f"{warmup.t_settled_s:.4g} s) is too short for one averaging "
                                                 "time, so the warm-up is part of these deviations"), series
    return Span(part.t0_s, t_end, "settled", f"settled part: {warmup.reason} at {warmup.t_settled_s:.4g} s"), part
