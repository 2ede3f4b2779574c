"""Synthetic calibration runs for the calibration tests (not a test module).

PROVENANCE: every run is generated here with numpy from the parameters the test passes: a
constant oscillator frequency, a linear drift, AR(1) frame noise, and the on-axis dipole law
``A (R^2/(R^2+d^2))^3`` for the target stretches. The folders are written through the project's
own RunWriter (log.csv, run.json) and markers.csv, exactly as a recording would leave them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.signal import lfilter

from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.markers import BASELINE, Marker, markers_to_csv
from coilshift.logger.runfolder.folders import prepare_run_dir
from coilshift.logger.runfolder.writer import RunWriter, write_markers_copy


@dataclass
class Truth:
    markers: list
    true_shift: dict  # (target, distance_mm) -> Hz


def dipole(d, a_hz, r_mm):
    return a_hz * (r_mm ** 2 / (r_mm ** 2 + np.asarray(d, float) ** 2)) ** 3


def make_run(run_dir, targets: dict, distances_mm=(10, 20, 40, 80), dwell_s=10.0, hop_s=0.02,
             f0_hz=20000.0, drift_hz_per_min=0.0, noise_hz=0.02, phi=0.8, repeats=1,
             first_baseline_s=None, seed=0, jolt_hz=5.0, settle_s=0.5):
    """Write a synthetic calibration run and return the truth.

    Parameters
    ----------
    targets : name -> (A_hz, R_mm) for the dipole law, or name -> callable(distance_mm) -> Hz
    dwell_s : length of every stretch; the first baseline lasts ``first_baseline_s``
        (default 2 x dwell)
    noise_hz : standard deviation of the AR(1) frame noise; ``phi`` its lag-1 correlation
    jolt_hz : offset (Hz) during the first ``settle_s`` of every stretch (the hand
        placing the target), which the analysis must discard
    """
    rng = np.random.default_rng(seed)
    first_baseline_s = 2 * dwell_s if first_baseline_s is None else first_baseline_s
    markers = [Marker(0.0, first_baseline_s, BASELINE, math.nan)]
    truth = {}
    t = first_baseline_s
    for _ in range(repeats):
        for name, law in targets.items():
            for d in distances_mm:
                markers.append(Marker(t, t + dwell_s, name, float(d)))
                s = float(law(d)) if callable(law) else float(dipole(d, *law))
                truth[(name, float(d))] = s
                markers.append(Marker(t + dwell_s, t + 2 * dwell_s, BASELINE, math.nan))
                t += 2 * dwell_s
    n = int(round(t / hop_s))
    t_s = (np.arange(n) + 0.5) * hop_s
    e = rng.standard_normal(n + 500) * noise_hz * math.sqrt(1 - phi ** 2)
    noise = lfilter([1.0], [1.0, -phi], e)[500:]
    freq = f0_hz + drift_hz_per_min / 60.0 * t_s + noise
    for m in markers:
        sel = (t_s >= m.start_s) & (t_s < m.end_s)
        if not m.is_baseline:
            freq[sel] += truth[(m.target, m.distance_mm)]
        jolt = sel & (t_s < m.start_s + settle_s) & (not m.is_baseline)
        freq[jolt] += jolt_hz  # the hand near the coil while placing the target
    run_dir = prepare_run_dir(run_dir)
    meta = {"start_utc": "2026-12-01T12:00:00.000Z", "source": {"kind": "synthetic"},
            "sample_rate_hz": 48000, "baseline": {"freq_hz": f0_hz, "method": "given"}}
    w = RunWriter(run_dir, meta)
    z = np.zeros(n)
    w.append(FrameTable(t_s, freq, z - 6.0, z + 60.0))
    w.close()
    write_markers_copy(run_dir, markers_to_csv(markers))
    return Truth(markers, truth)
