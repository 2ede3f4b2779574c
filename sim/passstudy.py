"""A simulated study of the event detector: sessions of hand passes with known truth, quiet
baselines, and the scoring of found events against the truth (used by benchmarks/events.py and,
smaller, by the test suite).

A session is a first quiet stretch, then passes every 10-14 s (random), each with its strength
drawn log-uniformly between 2x and 50x the frame noise, a random sign (ferrous or not), path
(along the axis or across the face), pace (80-300 mm/s) and closest distance (30-120 mm), past a
150 mm coil (the truth model of :mod:`coilshift.sim.fields`). The frame noise is white plus
AR(1) (phi 0.8) plus random-walk FM, with a linear drift; "the noise" a strength refers to is
the frames' stationary standard deviation ``sqrt(white^2 + ar^2)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from coilshift.logger.events.measure import FERROUS, NON_FERROUS, Z_CALL
from coilshift.sim.fields import Winding
from coilshift.sim.logsession import FrameNoise
from coilshift.sim.passes import PROFILES, HandPass, pass_frequencies

COIL = Winding.from_design_mm(40, 150.0, 6.0, 6.0)
STRENGTH_RANGE = (2.0, 50.0)
MATCH_S = 0.5  # a found event matches a pass whose closest approach lies within its span +- this


def study_noise(level_hz: float, drift_hz_per_min: float) -> FrameNoise:
    """White + AR(1) of equal parts (stationary sd ``level_hz``), random-walk FM, drift."""
    part = level_hz / math.sqrt(2.0)
    return FrameNoise(0.02, ar_hz=part, ar_phi=0.8, white_hz=part, rw_hz_per_sqrt_s=0.05 * level_hz,
                      drift_hz_per_min=drift_hz_per_min)


def frame_noise_hz(noise: FrameNoise) -> float:
    return math.hypot(noise.white_hz, noise.ar_hz)


def session_passes(rng: np.random.Generator, n: int, level_hz: float, first_s: float = 60.0) -> tuple[list, float]:
    """``n`` passes and the session's duration (s)."""
    passes, t = [], first_s
    for _ in range(n):
        t += float(rng.uniform(10.0, 14.0))
        strength = float(np.exp(rng.uniform(*np.log(STRENGTH_RANGE))))
        passes.append(HandPass(t, float(rng.choice([-1.0, 1.0])) * strength * level_hz,
                               float(rng.uniform(30.0, 120.0)), float(rng.uniform(80.0, 300.0)),
                               str(rng.choice(PROFILES))))
    return passes, t + 20.0


def pass_session(rng: np.random.Generator, n: int, level_hz: float, drift_hz_per_min: float):
    """(t_s, freq_hz, passes, noise) of one simulated session."""
    passes, duration = session_passes(rng, n, level_hz)
    noise = study_noise(level_hz, drift_hz_per_min)
    t, f = pass_frequencies(COIL, passes, duration, noise, rng)
    return t, f, passes, noise


def quiet_session(rng: np.random.Generator, minutes: float, level_hz: float, drift_hz_per_min: float):
    """(t_s, freq_hz) of a quiet baseline."""
    noise = study_noise(level_hz, drift_hz_per_min)
    t, f = pass_frequencies(COIL, [], minutes * 60.0, noise, rng)
    return t, f


@dataclass
class Scored:
    """One true pass and what was found for it."""

    strength: float
    true_peak_hz: float
    found: bool
    peak_hz: float = math.nan
    u_hz: float = math.nan
    kind: str = ""

    @property
    def covered(self) -> bool:
        return self.found and abs(self.peak_hz - self.true_peak_hz) <= Z_CALL * self.u_hz

    @property
    def kind_right(self) -> bool:
        return self.kind == (FERROUS if self.true_peak_hz < 0 else NON_FERROUS)


def score(passes: list[HandPass], events: list, level_hz: float) -> tuple[list[Scored], int]:
    """Match found events to passes; return each pass's score and the number of unmatched (false) events."""
    used = set()
    out = []
    for p in passes:
        hit = None
        for i, ev in enumerate(events):
            if i not in used and ev.start_s - MATCH_S <= p.t0_s <= ev.end_s + MATCH_S:
                hit = i
                break
        s = Scored(abs(p.peak_hz) / level_hz, p.peak_hz, hit is not None)
        if hit is not None:
            used.add(hit)
            ev = events[hit]
            s.peak_hz, s.u_hz, s.kind = ev.peak_shift_hz, ev.peak_u_hz, ev.kind
        out.append(s)
    return out, len(events) - len(used)
