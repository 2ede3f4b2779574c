"""Find the events of a whole recording: the streaming detector of :mod:`coilshift.logger.events` run
over the log, with its noise measured on the recording itself.

Three steps, so that the events do not inflate the noise they are judged against:

1. the statistic over the whole log with every usable frame taken as baseline, and its noise by the
   median absolute deviation (robust to the events inside it);
2. the detector with that noise: a first set of events;
3. the statistic's noise (again by the median absolute deviation: events too weak to be found stay
   in the quiet part) and the frames' variogram, from the frames outside those events (and a
   smoothing window either side), and the detector run with them: the events reported.

The false-event rate applies to the quiet part of the recording: at most ``false_per_hour`` events
per hour of it, on average, when the baseline noise is stationary and Gaussian at the statistic's
scale (:mod:`coilshift.logger.events.crossings`).
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Callable

import numpy as np

from coilshift.logger.errors import InputError, setting
from coilshift.logger.events.crossings import expected_false_events
from coilshift.logger.events.detector import DetectorSettings, PassDetector
from coilshift.logger.events.measure import PassEvent
from coilshift.logger.events.statistic import NoiseLevel, Windows, deviation, noise_of_statistic
from coilshift.logger.events.variogram import Variogram, lag_set
from coilshift.logger.runfolder.reader import FrequencyLog, read_log

BLOCK_FRAMES = 4096  # the batch run feeds the streaming detector in blocks of this many frames
POLARITIES = ("normal", "inverted")


@dataclass
class EventsResult:
    """The events of one recording and what they were judged against."""

    source: str
    name: str
    log: FrequencyLog
    events: list[PassEvent]
    settings: DetectorSettings
    noise: NoiseLevel
    level: float  # the detection level u, in standard deviations of the statistic
    hop_s: float
    duration_s: float
    quiet_s: float
    warnings: list

    @property
    def expected_false(self) -> float:
        """Upper bound on the expected false events in this recording's quiet part."""
        return expected_false_events(self.level, self.noise.rho1, self.quiet_s / self.hop_s)


def _quiet_mask(t_s: np.ndarray, events: list[PassEvent], margin_s: float) -> np.ndarray:
    quiet = np.ones(t_s.size, bool)
    for ev in events:
        i0, i1 = np.searchsorted(t_s, [ev.start_s - margin_s, ev.end_s + margin_s])
        quiet[i0:i1] = False
    return quiet


def detect(t_s: np.ndarray, freq_hz: np.ndarray, usable: np.ndarray, hop_s: float, settings: DetectorSettings,
           noise: NoiseLevel, variogram: Variogram | None) -> list[PassEvent]:
    """Run the streaming detector over arrays in blocks; return its events."""
    det = PassDetector(hop_s, settings, noise=noise, variogram=variogram)
    out: list[PassEvent] = []
    for i in range(0, t_s.size, BLOCK_FRAMES):
        sl = slice(i, i + BLOCK_FRAMES)
        out += det.push(t_s[sl], freq_hz[sl], usable[sl])
    return out + det.flush()


def frames_variogram(freq_hz: np.ndarray, ok: np.ndarray, hop_s: float) -> Variogram:
    """The variogram of the ``ok`` frames of a whole recording."""
    vg = Variogram(lag_set(hop_s))
    vg.add(freq_hz, ok)
    return vg


def find_events_in(t_s: np.ndarray, freq_hz: np.ndarray, usable: np.ndarray,
                   settings: DetectorSettings | None = None,
                   progress: Callable[[str], None] | None = None) -> tuple[list[PassEvent], NoiseLevel, float, np.ndarray]:
    """The three steps of the module docstring on arrays: (events, noise, level, quiet mask);
    ``progress`` is called with a few words as each step begins."""
    say = progress or (lambda text: None)
    settings = settings or DetectorSettings()
    t = np.asarray(t_s, float)
    y = np.where(usable, np.asarray(freq_hz, float), np.nan)
    ok = np.asarray(usable, bool) & np.isfinite(y)
    hop = float(np.median(np.diff(t)))
    win = Windows.from_seconds(hop, settings.smooth_s, settings.gap_s, settings.fit_s)
    say("measuring the noise")
    d, _, _ = deviation(t, np.where(ok, y, 0.0), ok, ok, 0, t.size, win)
    first = noise_of_statistic(d, robust=True)
    if not (first.sigma_hz > 0):
        raise InputError("the recording is too short or has too few usable frames to measure its noise "
                         f"(the detector needs more than {settings.fit_s + settings.gap_s:g} s of frames)")
    vg = frames_variogram(np.where(ok, y, 0.0), ok, hop)
    say("finding events")
    events = detect(t, y, ok, hop, settings, first, vg)
    margin = settings.smooth_s
    quiet = _quiet_mask(t, events, margin) & ok
    say("finding events again with the noise of the quiet frames")
    d2, _, _ = deviation(t, np.where(ok, y, 0.0), ok, quiet, 0, t.size, win)
    noise = noise_of_statistic(np.where(quiet, d2, np.nan), robust=True)
    if not (noise.sigma_hz > 0):
        noise = first
    vg = frames_variogram(np.where(ok, y, 0.0), quiet, hop)
    events = detect(t, y, ok, hop, settings, noise, vg)
    quiet = _quiet_mask(t, events, margin) & ok
    det = PassDetector(hop, settings, noise=noise, variogram=vg)
    return events, noise, det.level, quiet


def find_events(path: str | os.PathLike, settings: DetectorSettings | None = None,
                name: str | None = None, progress: Callable[[str], None] | None = None) -> EventsResult:
    """Find the events of a run folder (or log CSV): see the module docstring. ``progress`` is
    called with a few words as each step begins ("reading the log", "finding events").

    Raises
    ------
    InputError : unreadable log, too short a recording, bad settings
    """
    settings = settings or DetectorSettings()
    check_settings(settings)
    if progress is not None:
        progress("reading the log")
    log = read_log(path, columns=("flags",))
    src = str(path)
    if log.t_s.size < 3:
        raise InputError(f"{src}: the log has fewer than 3 frames")
    usable = log.usable()
    events, noise, level, quiet = find_events_in(log.t_s, log.freq_hz, usable, settings, progress)
    hop = float(np.median(np.diff(log.t_s)))
    warnings = []
    if log.interrupted:
        warnings.append("the run was interrupted: the log ends early")
    quiet_s = float(np.sum(quiet)) * hop
    if quiet_s < 60.0:
        warnings.append(f"only {quiet_s:.0f} s of quiet baseline: the noise, and so the threshold, rests on little")
    duration = float(log.t_s[-1] - log.t_s[0]) + hop
    return EventsResult(src, name or Path(src).name or src, log, events, settings, noise, level, hop, duration,
                        quiet_s, warnings)


def check_settings(s: DetectorSettings) -> None:
    """Refuse settings that mean nothing, naming the setting."""
    if s.polarity not in POLARITIES:
        raise InputError(f"{setting('polarity')}: must be normal or inverted, got {s.polarity!r}")
    if not (math.isfinite(s.false_per_hour) and s.false_per_hour > 0):
        raise InputError(f"{setting('false_per_hour')}: must be a positive number of events per hour, "
                         f"got {s.false_per_hour}")


def with_polarity(settings: DetectorSettings, polarity: str) -> DetectorSettings:
    return replace(settings, polarity=polarity)
