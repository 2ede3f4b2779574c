"""Hand passes and steady slides simulated at the log level (frame times and frequencies).

How detectors are tried by hand: a piece brought up to the coil and taken away, or swept across
its face, or slid at a steady pace along the axis. The shift follows the truth model of
:mod:`coilshift.sim.fields` (a finite winding's field by Biot-Savart) along the path:

* ``axial``: along the axis towards the face and back, at ``speed_mm_s``, turning round at the
  closest distance (the hand slows down there: the path is ``d = closest + sqrt((v t)^2 + c^2) - c``
  with a turning length ``c`` of half the closest distance);
* ``sweep``: across the face at height ``closest`` at ``speed_mm_s`` (off-axis field, a point
  target: the shift follows ``|h|^2``).

Each pass is scaled so that its largest shift is ``peak_hz`` (the truth an event's measured peak
is compared with). Frame noise is :class:`coilshift.sim.logsession.FrameNoise` (white, AR(1),
random-walk FM, drift).

:func:`write_ramp_session` writes a steady slide from one distance to another between
target-free baselines, the ramp calibration's input.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from typing import Callable

import numpy as np

from coilshift.logger.runfolder.folders import prepare_run_dir
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.markers import BASELINE, Marker, markers_to_csv
from coilshift.logger.runfolder.writer import RunWriter, write_markers_copy
from coilshift.sim.fields import Winding
from coilshift.sim.logsession import FrameNoise

PROFILES = ("axial", "sweep")
PATH_NODES = 400
RAMP_NODES = 200
#: the part of a pass's largest shift that bounds its true span (start, end)
SPAN_FRACTION = 0.01


@dataclass(frozen=True)
class HandPass:
    """One pass: time of closest approach (s), signed largest shift (Hz), path and pace."""

    t0_s: float
    peak_hz: float
    closest_mm: float = 60.0
    speed_mm_s: float = 150.0
    profile: str = "axial"

    def __post_init__(self):
        if self.profile not in PROFILES:
            raise ValueError(f"profile must be one of {', '.join(PROFILES)}, got {self.profile!r}")


def _field_sq(winding: Winding, rho_mm: np.ndarray, z_mm: np.ndarray) -> np.ndarray:
    hr, hz = winding.field_per_amp(np.asarray(rho_mm) * 1e-3, np.asarray(z_mm) * 1e-3)
    return hr * hr + hz * hz


def _tabulated(winding: Winding, p: HandPass) -> tuple[np.ndarray, np.ndarray]:
    """``|h|^2`` along the pass's path parameter (axial: distance; sweep: offset from the axis),
    on a grid fine enough to interpolate in log-log (the field is smooth along the path)."""
    reach = 60.0 * (p.closest_mm + winding.outer_radius_m * 1e3)
    if p.profile == "axial":
        s = np.geomspace(p.closest_mm, p.closest_mm + reach, PATH_NODES)
        return s, _field_sq(winding, np.zeros_like(s), s)
    s = np.concatenate([[0.0], np.geomspace(1e-3 * p.closest_mm, reach, PATH_NODES - 1)])
    return s, _field_sq(winding, s, np.full_like(s, p.closest_mm))


def pass_shape(winding: Winding, p: HandPass, t_s: np.ndarray) -> np.ndarray:
    """The pass's shift over ``t_s`` divided by its largest value (1 at the closest approach)."""
    x = p.speed_mm_s * (np.asarray(t_s, float) - p.t0_s)
    grid, f = _tabulated(winding, p)
    if p.profile == "axial":
        c = 0.5 * p.closest_mm
        path = p.closest_mm + np.sqrt(x * x + c * c) - c
    else:
        path = np.abs(x)
    logf = np.interp(np.log(np.maximum(path, grid[1] if grid[0] == 0 else grid[0])),
                     np.log(np.maximum(grid, grid[1] if grid[0] == 0 else grid[0])), np.log(f))
    return np.exp(logf) / float(np.max(f))


def pass_span_s(winding: Winding, p: HandPass) -> tuple[float, float]:
    """Where the pass's shift stays above :data:`SPAN_FRACTION` of its largest (s)."""
    reach = 20.0 * (p.closest_mm + winding.outer_radius_m * 1e3) / p.speed_mm_s
    t = np.linspace(p.t0_s - reach, p.t0_s + reach, 4001)
    above = np.flatnonzero(pass_shape(winding, p, t) >= SPAN_FRACTION)
    return float(t[above[0]]), float(t[above[-1]])


@dataclass(frozen=True)
class PassTruth:
    """What was done: each pass and its true span (s)."""

    passes: list
    spans_s: list


def _write(run_dir, t_s: np.ndarray, freq_hz: np.ndarray, f0_hz: float, markers: list | None) -> None:
    run_dir = prepare_run_dir(run_dir)
    meta = {"start_utc": "2026-12-01T12:00:00.000Z", "source": {"kind": "synthetic", "simulator": "passes"},
            "sample_rate_hz": 48000, "baseline": {"freq_hz": f0_hz, "method": "given"}}
    with RunWriter(run_dir, meta) as w:
        z = np.zeros(t_s.size)
        w.append(FrameTable(t_s, freq_hz, z - 6.0, z + 60.0))
    if markers:
        write_markers_copy(run_dir, markers_to_csv(markers))


def pass_frequencies(winding: Winding, passes: list[HandPass], duration_s: float, noise: FrameNoise,
                     rng: np.random.Generator, f0_hz: float = 20000.0) -> tuple[np.ndarray, np.ndarray]:
    """Frame times and frequencies of a session of hand passes (no files)."""
    n = int(round(duration_s / noise.hop_s))
    t_s = (np.arange(n) + 0.5) * noise.hop_s
    freq = f0_hz + noise.frames(rng, n)
    for p in passes:
        lo, hi = pass_span_s(winding, p)
        i0, i1 = np.searchsorted(t_s, [lo - 5.0, hi + 5.0])
        freq[i0:i1] += p.peak_hz * pass_shape(winding, p, t_s[i0:i1])
    return t_s, freq


def write_pass_session(run_dir: str | os.PathLike, winding: Winding, passes: list[HandPass], duration_s: float,
                       noise: FrameNoise, rng: np.random.Generator, f0_hz: float = 20000.0) -> PassTruth:
    """Write a run folder of hand passes (no markers: finding them is the analysis' job)."""
    t_s, freq = pass_frequencies(winding, passes, duration_s, noise, rng, f0_hz)
    _write(run_dir, t_s, freq, f0_hz, None)
    return PassTruth(list(passes), [pass_span_s(winding, p) for p in passes])


@dataclass(frozen=True)
class Ramp:
    """A steady slide of ``target`` from ``from_mm`` to ``to_mm`` over ``duration_s``, between
    target-free baselines (the first ``first_baseline_s`` long, the last ``baseline_s``)."""

    target: str
    from_mm: float
    to_mm: float
    duration_s: float
    first_baseline_s: float = 40.0
    baseline_s: float = 10.0
    placement_mm: float = 1.0


@dataclass(frozen=True)
class RampTruth:
    """The ramp's markers (baselines only), its stretch (s) and the true distances of its ends (mm)."""

    markers: list
    start_s: float
    end_s: float
    true_from_mm: float
    true_to_mm: float


def slide_shift_hz(response: Callable[[np.ndarray], np.ndarray], distance_mm: np.ndarray) -> np.ndarray:
    """``response`` along a slide's frames, evaluated on RAMP_NODES distances and interpolated in
    log-log between them (the truth model costs a quadrature per distance; a smooth response is
    reproduced to about 1e-5 relative at this spacing)."""
    d = np.maximum(np.asarray(distance_mm, float), 1e-3)
    lo, hi = float(d.min()), float(d.max())
    if hi <= lo * (1 + 1e-9):
        return np.asarray(response(d), float)
    grid = np.geomspace(lo, hi, RAMP_NODES)
    vals = np.asarray(response(grid), float)
    if np.all(vals > 0) or np.all(vals < 0):
        sign = np.sign(vals[0])
        return sign * np.exp(np.interp(np.log(d), np.log(grid), np.log(np.abs(vals))))
    return np.interp(d, grid, vals)


def write_ramp_session(run_dir: str | os.PathLike, ramp: Ramp, response: Callable[[np.ndarray], np.ndarray],
                       noise: FrameNoise, rng: np.random.Generator, f0_hz: float = 20000.0) -> RampTruth:
    """Write a run folder of one steady slide; the markers file holds the baselines.

    ``response`` maps true distances (mm) to the target's shift (Hz). Each end of the slide is
    off its nominal distance by up to ``placement_mm`` (uniform), the same tolerance as a fixed
    stop; the pace between them is steady.
    """
    start = ramp.first_baseline_s
    end = start + ramp.duration_s
    total = end + ramp.baseline_s
    d_from = ramp.from_mm + rng.uniform(-ramp.placement_mm, ramp.placement_mm)
    d_to = ramp.to_mm + rng.uniform(-ramp.placement_mm, ramp.placement_mm)
    n = int(round(total / noise.hop_s))
    t_s = (np.arange(n) + 0.5) * noise.hop_s
    freq = f0_hz + noise.frames(rng, n)
    i0, i1 = np.searchsorted(t_s, [start, end])
    frac = (t_s[i0:i1] - start) / ramp.duration_s
    freq[i0:i1] += slide_shift_hz(response, np.maximum(d_from + (d_to - d_from) * frac, 0.0))
    markers = [Marker(0.0, start, BASELINE, math.nan), Marker(end, total, BASELINE, math.nan)]
    _write(run_dir, t_s, freq, f0_hz, markers)
    return RampTruth(markers, start, end, d_from, d_to)


def write_stops_and_ramp(run_dir: str | os.PathLike, target: str, stops_mm, ramp: Ramp,
                         response: Callable[[np.ndarray], np.ndarray], noise: FrameNoise, rng: np.random.Generator,
                         dwell_s: float = 4.0, f0_hz: float = 20000.0) -> tuple[list, RampTruth]:
    """One run with both methods on the same detector: fixed stops of ``target`` (each a
    ``dwell_s`` stretch after a hand jolt of 20 noise sigmas for 0.5 s, bracketed by baselines of
    ``dwell_s``, after a first baseline of ``ramp.first_baseline_s``), then the slide and a last
    baseline of ``ramp.baseline_s``. The markers hold the stops and the baselines, not the slide.
    Returns the markers and the slide's truth; stops are off by up to ``ramp.placement_mm``."""
    hop = noise.hop_s
    tol = ramp.placement_mm
    markers = [Marker(0.0, ramp.first_baseline_s, BASELINE, math.nan)]
    t = ramp.first_baseline_s
    stops = []
    for d in stops_mm:
        markers += [Marker(t, t + dwell_s, target, float(d)), Marker(t + dwell_s, t + 2 * dwell_s, BASELINE, math.nan)]
        stops.append((t, t + dwell_s, max(float(d) + rng.uniform(-tol, tol), 0.0)))
        t += 2 * dwell_s
    start, end = t, t + ramp.duration_s
    total = end + ramp.baseline_s
    markers.append(Marker(end, total, BASELINE, math.nan))
    n = int(round(total / hop))
    ts = (np.arange(n) + 0.5) * hop
    freq = f0_hz + noise.frames(rng, n)
    jolt = 20.0 * math.hypot(noise.white_hz, noise.ar_hz)
    for a, b, d in stops:
        i0, i1 = np.searchsorted(ts, [a, b])
        freq[i0:i1] += float(np.asarray(response(np.array([d])), float)[0])
        freq[i0:np.searchsorted(ts, a + 0.5)] += jolt
    d_from = ramp.from_mm + rng.uniform(-tol, tol)
    d_to = ramp.to_mm + rng.uniform(-tol, tol)
    i0, i1 = np.searchsorted(ts, [start, end])
    frac = (ts[i0:i1] - start) / ramp.duration_s
    freq[i0:i1] += slide_shift_hz(response, np.maximum(d_from + (d_to - d_from) * frac, 0.0))
    _write(run_dir, ts, freq, f0_hz, markers)
    return markers, RampTruth(markers, start, end, d_from, d_to)
