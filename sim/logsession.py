"""Calibration sessions simulated at the log level: frame times and frequencies, no audio.

For studies that need many sessions (the range-coverage benchmark, coverage tests), rendering and
tracking audio is too slow; this writes what the tracker would have written, a run folder with
log.csv, run.json and markers.csv (through :mod:`coilshift.logger.runfolder`), from

* a target response: any function of the true distance (e.g. the finite winding and finite
  target of :mod:`coilshift.sim.fields`), evaluated at each placement's *true* distance, which is
  the nominal one plus a uniform error within the placement tolerance;
* frame noise (:class:`FrameNoise`): AR(1) frame-to-frame correlated noise (overlapping tracker
  frames), white FM, random-walk FM and a linear drift, with the closed-form Allan variance of
  that process (the truth behind a noise-based detection threshold);
* a hand jolt at the start of every target stretch (the placing hand), which the analysis's
  settling trim must remove.

The session is a first target-free baseline, then for every distance a target stretch followed
by a baseline, as ``coilshift calibrate`` records it.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy.signal import lfilter

from coilshift.logger.runfolder.folders import prepare_run_dir
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.markers import BASELINE, Marker, markers_to_csv
from coilshift.logger.runfolder.writer import RunWriter, write_markers_copy


@dataclass(frozen=True)
class FrameNoise:
    """Frequency noise of the frames (Hz), frame spacing ``hop_s``.

    Attributes
    ----------
    ar_hz, ar_phi : stationary standard deviation and lag-1 correlation of an AR(1) component
    white_hz : standard deviation of independent per-frame noise (white FM at the frame level)
    rw_hz_per_sqrt_s : random-walk FM, the frequency's diffusion (Hz per sqrt(s))
    drift_hz_per_min : linear drift
    """

    hop_s: float = 0.02
    ar_hz: float = 0.0
    ar_phi: float = 0.0
    white_hz: float = 0.0
    rw_hz_per_sqrt_s: float = 0.0
    drift_hz_per_min: float = 0.0

    def frames(self, rng: np.random.Generator, n: int) -> np.ndarray:
        """``n`` frames of the noise (Hz), drift included, starting at zero drift."""
        out = np.zeros(n)
        if self.ar_hz > 0:
            burn = int(min(10.0 / max(1.0 - self.ar_phi, 1e-3), 20000))
            e = rng.standard_normal(n + burn) * self.ar_hz * math.sqrt(1.0 - self.ar_phi ** 2)
            out += lfilter([1.0], [1.0, -self.ar_phi], e)[burn:]
        if self.white_hz > 0:
            out += rng.standard_normal(n) * self.white_hz
        if self.rw_hz_per_sqrt_s > 0:
            out += np.cumsum(rng.standard_normal(n)) * self.rw_hz_per_sqrt_s * math.sqrt(self.hop_s)
        out += self.drift_hz_per_min / 60.0 * self.hop_s * np.arange(n)
        return out

    def allan_variance_hz2(self, tau_s: float) -> float:
        """Allan variance (Hz^2) of these frames at ``tau_s`` (a whole number m of frames).

        By definition ``sigma^2(tau) = E[(ybar_2 - ybar_1)^2] / 2`` for adjacent m-frame means, i.e.
        half the variance of ``sum c_j y_j`` with ``c = (-1/m, ..., -1/m, 1/m, ..., 1/m)``. For the
        stationary parts that is ``sum_k gamma(k) R_c(k)`` (``gamma``: the autocovariance,
        ``s^2 phi^|k|`` for AR(1); ``R_c``: the autocorrelation of c); for the random walk
        ``q^2 sum_i C_i^2`` with C_i the tail sums of c and q^2 the per-frame increment
        variance; a drift D adds ``(D m tau0)^2``.
        """
        m = max(int(round(tau_s / self.hop_s)), 1)
        c = np.concatenate([np.full(m, -1.0 / m), np.full(m, 1.0 / m)])
        rc = np.correlate(c, c, "full")  # lags -(2m-1) .. 2m-1
        lags = np.arange(-(2 * m - 1), 2 * m)
        gamma = self.ar_hz ** 2 * self.ar_phi ** np.abs(lags) if self.ar_hz > 0 else np.zeros(lags.size)
        gamma = gamma + np.where(lags == 0, self.white_hz ** 2, 0.0)
        var = float(np.sum(gamma * rc))
        tails = np.cumsum(c[::-1])[::-1][1:]  # C_i for the increments i = 1 .. 2m-1 (C_0 = sum c = 0)
        var += self.rw_hz_per_sqrt_s ** 2 * self.hop_s * float(np.sum(tails ** 2))
        var += (self.drift_hz_per_min / 60.0 * m * self.hop_s) ** 2
        return 0.5 * var


@dataclass(frozen=True)
class Session:
    """The layout of a calibration session (seconds, mm)."""

    distances_mm: tuple
    dwell_s: float = 4.0
    baseline_s: float = 4.0
    first_baseline_s: float = 40.0
    placement_mm: float = 1.0
    hand_hz: float = 2.0
    hand_s: float = 0.5
    f0_hz: float = 20000.0


@dataclass(frozen=True)
class SessionTruth:
    """What was really done: the markers and the true distance of each placement."""

    markers: list
    true_distance_mm: np.ndarray
    true_shift_hz: np.ndarray


def write_session(run_dir: str | os.PathLike, target: str, response: Callable[[np.ndarray], np.ndarray],
                  session: Session, noise: FrameNoise, rng: np.random.Generator) -> SessionTruth:
    """Write one simulated calibration session of one target as a run folder; return the truth.

    ``response`` maps true distances (mm, array) to the target's shift (Hz).
    """
    hop = noise.hop_s
    markers = [Marker(0.0, session.first_baseline_s, BASELINE, math.nan)]
    t = session.first_baseline_s
    nominal = np.asarray(session.distances_mm, float)
    true_d = np.maximum(nominal + rng.uniform(-session.placement_mm, session.placement_mm, nominal.size), 0.0)
    shifts = np.asarray(response(true_d), float)
    for d in nominal:
        markers.append(Marker(t, t + session.dwell_s, target, float(d)))
        markers.append(Marker(t + session.dwell_s, t + session.dwell_s + session.baseline_s, BASELINE, math.nan))
        t += session.dwell_s + session.baseline_s
    n = int(round(t / hop))
    t_s = (np.arange(n) + 0.5) * hop
    freq = session.f0_hz + noise.frames(rng, n)
    k = 0
    for m in markers:
        if m.is_baseline:
            continue
        i0, i1 = np.searchsorted(t_s, [m.start_s, m.end_s])
        freq[i0:i1] += shifts[k]
        j1 = np.searchsorted(t_s, m.start_s + session.hand_s)
        freq[i0:j1] += session.hand_hz  # the hand near the coil while placing the target
        k += 1
    run_dir = prepare_run_dir(run_dir)
    meta = {"start_utc": "2026-12-01T12:00:00.000Z", "source": {"kind": "synthetic", "simulator": "logsession"},
            "sample_rate_hz": 48000, "baseline": {"freq_hz": session.f0_hz, "method": "given"}}
    with RunWriter(run_dir, meta) as w:
        z = np.zeros(n)
        w.append(FrameTable(t_s, freq, z - 6.0, z + 60.0))
    write_markers_copy(run_dir, markers_to_csv(markers))
    return SessionTruth(markers, true_d, shifts)
