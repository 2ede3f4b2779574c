"""Ramp calibration: a target slid at a steady pace from one distance to another gives the whole
shift-vs-distance curve from one continuous stretch.

The stretch (``start_s .. end_s``, from ``from_mm`` to ``to_mm``) is cut into ``bins`` equal
parts; at a steady pace each holds the same span of distance. Each bin gives a point: the mean of
its usable frames minus the baseline under them (the straight line through the means of the
baseline stretches before and after the ramp, as for a fixed stop), at the mean distance of its
frames. The points' covariance comes from the frames' variogram (every point is a zero-sum
combination of frames; the covariance of two such combinations is ``-1/2 sum_ij a_i b_j D(i-j)``,
Matheron 1963), so the shared baselines and the noise's colour are in it. From there the points go
through exactly what fixed stops go through: the family-wise test, the finite-winding (with a
coil) or single-loop law and the power law with their chi-squared verdicts, and the range read
from the points with its Monte Carlo interval (:func:`.detection.detection_range`), with the
placement tolerance applied to every point.

A bin's mean shift is the response averaged over the bin's distances, not the response at its mean
distance: for a response ``~ d^-n`` the relative difference is ``n (n + 1) / 24 (Delta / d)^2``
for a bin of width Delta (Taylor expansion), under 0.5 % for n = 6 when Delta / d < 0.05. The
default bins keep Delta / d small where the range falls; the docs show the size of the effect on a
simulated slide.

The threshold is the fixed stops' when the run has some (the same noise and reading time); else
``k`` x the baselines' Allan deviation at the time one bin takes.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass

import numpy as np

from coilshift.analysis.calibration.curvefit import fit_curves
from coilshift.analysis.calibration.defaults import DEFAULT_K, DEFAULT_PLACEMENT_MM, DEFAULT_SEED
from coilshift.analysis.calibration.detection import RangeResult, detection_range
from coilshift.analysis.calibration.significance import family_test
from coilshift.analysis.calibration.threshold import noise_at_dwell
from coilshift.logger.errors import InputError, setting
from coilshift.logger.events.variogram import Variogram, lag_set
from coilshift.logger.runfolder.markers import read_markers
from coilshift.logger.runfolder.reader import read_log

DEFAULT_BINS = 16
MIN_BIN_FRAMES = 5


@dataclass(frozen=True)
class RampSpec:
    """One steady slide: a markers row with a start and an end distance."""

    start_s: float
    end_s: float
    target: str
    from_mm: float
    to_mm: float


def parse_ramp(text: str) -> RampSpec:
    """``START_S,END_S,TARGET,FROM_MM,TO_MM`` (the markers.csv columns, with two distances)."""
    parts = [p.strip() for p in str(text).split(",")]
    if len(parts) != 5 or not parts[2]:
        raise InputError(f"{setting('ramp')}: expected START_S,END_S,TARGET,FROM_MM,TO_MM, got {text!r}")
    try:
        a, b, d1, d2 = (float(parts[i]) for i in (0, 1, 3, 4))
    except ValueError:
        raise InputError(f"{setting('ramp')}: times and distances must be numbers, got {text!r}") from None
    if not all(math.isfinite(x) for x in (a, b, d1, d2)) or b <= a or min(d1, d2) < 0 or d1 == d2:
        raise InputError(f"{setting('ramp')}: needs START_S < END_S and two different distances >= 0, got {text!r}")
    return RampSpec(a, b, parts[2], d1, d2)


@dataclass
class RampResult:
    """The slide's points, their covariance, fits and range (and the fixed stops', when present)."""

    spec: RampSpec
    distance_mm: np.ndarray
    shift_hz: np.ndarray
    stderr_hz: np.ndarray
    cov: np.ndarray
    n_frames: np.ndarray
    seen: bool
    fit: object
    fit_reason: str
    power: object
    range: RangeResult
    threshold_hz: float
    threshold_edf: float
    threshold_source: str
    baseline_before_hz: float
    baseline_after_hz: float
    fixed_range: RangeResult | None = None  # the same target's fixed stops in the same run

    @property
    def difference_mm(self) -> float | None:
        """Ramp range minus fixed-stop range (None unless both are defined)."""
        if self.fixed_range is None or self.fixed_range.range_mm is None or self.range.range_mm is None:
            return None
        return float(self.range.range_mm - self.fixed_range.range_mm)


def _baseline_side(t, y, ok, markers, before: bool, edge_s: float, span_s: float):
    """Indices and mean of the usable frames of the nearest baseline stretch before (or after)
    ``edge_s``, its last (first) ``span_s`` seconds."""
    bases = [m for m in markers if m.is_baseline and ((m.end_s <= edge_s + 1e-9) if before else
                                                      (m.start_s >= edge_s - 1e-9))]
    if not bases:
        return np.zeros(0, int), math.nan, math.nan
    m = max(bases, key=lambda b: b.end_s) if before else min(bases, key=lambda b: b.start_s)
    lo, hi = (max(m.start_s, m.end_s - span_s), m.end_s) if before else (m.start_s, min(m.end_s, m.start_s + span_s))
    idx = np.flatnonzero(ok & (t >= lo) & (t < hi))
    if idx.size == 0:
        return idx, math.nan, math.nan
    return idx, float(np.mean(t[idx])), float(np.mean(y[idx]))


def _baseline_variogram(t, y, ok, markers, span_s: float) -> Variogram:
    """The variogram of the baseline frames, to lags of ``span_s``, after removing their
    least-squares straight line: the points' weights cancel a linear drift exactly, and without
    it the estimate need not carry a ``(drift x lag)^2`` term that interpolation would bend."""
    base = np.zeros(t.size, bool)
    for m in markers:
        if m.is_baseline:
            base |= (t >= m.start_s) & (t < m.end_s)
    use = ok & base
    if np.sum(use) >= 3:
        slope, icpt = np.polyfit(t[use] - t[use].mean(), y[use], 1)
        resid = y - (icpt + slope * (t - t[use].mean()))
    else:
        resid = y
    vg = Variogram(lag_set(float(np.median(np.diff(t))), max_lag_s=max(span_s, 1.0)))
    vg.add(np.where(use, resid, 0.0), use)
    return vg


def _covariance(vg: Variogram, combos: list[tuple[np.ndarray, np.ndarray]]) -> np.ndarray:
    """Covariance of zero-sum frame combinations, by polarization of the variogram variance."""
    n = len(combos)
    var = [vg.variance(i, w) for i, w in combos]
    cov = np.diag(var)
    for a in range(n):
        for b in range(a + 1, n):
            ia, wa = combos[a]
            ib, wb = combos[b]
            idx = np.concatenate([ia, ib])
            plus = vg.variance(idx, np.concatenate([wa, wb]))
            minus = vg.variance(idx, np.concatenate([wa, -wb]))
            cov[a, b] = cov[b, a] = 0.25 * (plus - minus)
    # an estimated (interpolated) variogram need not give a positive-definite matrix: clip its
    # eigenvalues (the nearest such matrix in the Frobenius norm; Higham 1988, Linear Algebra
    # Appl. 103, 103-118)
    vals, vecs = np.linalg.eigh(cov)
    vals = np.maximum(vals, 1e-6 * max(float(vals.max()), 0.0))
    return (vecs * vals) @ vecs.T


def ramp_points(t, y, ok, markers, spec: RampSpec, bins: int, side_s: float = 10.0):
    """The slide's points: (distance_mm, shift_hz, cov, n_frames, baseline before, after)."""
    bi, bt, by = _baseline_side(t, y, ok, markers, True, spec.start_s, side_s)
    ai, at, ay = _baseline_side(t, y, ok, markers, False, spec.end_s, side_s)
    if bi.size == 0 and ai.size == 0:
        raise InputError(f"ramp {spec.target}: no baseline stretch before or after {spec.start_s:g}-{spec.end_s:g} s "
                         "in the markers: record target-free stretches around the slide")
    edges = np.linspace(spec.start_s, spec.end_s, bins + 1)
    vg = _baseline_variogram(t, y, ok, markers, float(spec.end_s - spec.start_s) + 2.0 * side_s)
    d_out, s_out, n_out, combos = [], [], [], []
    for lo, hi in zip(edges[:-1], edges[1:]):
        idx = np.flatnonzero(ok & (t >= lo) & (t < hi))
        if idx.size < MIN_BIN_FRAMES:
            continue
        tm = float(np.mean(t[idx]))
        if bi.size and ai.size:
            lam = (tm - bt) / (at - bt)
            base, wb, wa = (1 - lam) * by + lam * ay, -(1 - lam) / bi.size, -lam / ai.size
        elif bi.size:
            base, wb, wa = by, -1.0 / bi.size, 0.0
        else:
            base, wb, wa = ay, 0.0, -1.0 / ai.size
        frac = (t[idx] - spec.start_s) / (spec.end_s - spec.start_s)
        d_out.append(float(np.mean(spec.from_mm + (spec.to_mm - spec.from_mm) * frac)))
        s_out.append(float(np.mean(y[idx]) - base))
        n_out.append(idx.size)
        combos.append((np.concatenate([idx, bi, ai]),
                       np.concatenate([np.full(idx.size, 1.0 / idx.size), np.full(bi.size, wb), np.full(ai.size, wa)])))
    if len(d_out) < 3:
        raise InputError(f"ramp {spec.target}: fewer than 3 bins with usable frames in {spec.start_s:g}-{spec.end_s:g} s")
    if not vg.known():
        raise InputError(f"ramp {spec.target}: the baseline stretches are too short to measure the noise")
    return (np.asarray(d_out), np.asarray(s_out), _covariance(vg, combos), np.asarray(n_out), by, ay)


def analyse_ramp(path: str | os.PathLike, spec: RampSpec, markers_path: str | os.PathLike | None = None, *,
                 bins: int = DEFAULT_BINS, threshold_hz: float | None = None, threshold_edf: float = math.inf,
                 k: float = DEFAULT_K, coil=None, placement_mm: float = DEFAULT_PLACEMENT_MM,
                 n_boot: int = 2000, seed: int = DEFAULT_SEED, fixed=None) -> RampResult:
    """Analyse one steady slide (see the module docstring).

    Parameters
    ----------
    path, markers_path : the run (its markers give the baseline stretches)
    spec : the slide
    bins : number of points the slide is cut into
    threshold_hz, threshold_edf : a threshold and its degrees of freedom (e.g. the fixed stops');
        None: ``k`` x the baselines' Allan deviation at one bin's duration
    coil : a ``CoilReport``: the fit uses its finite-winding law; else the single-loop law
    placement_mm : tolerance of the slide's distances
    n_boot, seed : Monte Carlo draws and seed of the range interval
    fixed : the run's fixed-stop ``CalibrationResult``, to compare with its range for this target
    """
    if not 3 <= bins <= 1000:
        raise InputError(f"{setting('bins')}: must be 3 to 1000, got {bins}")
    log = read_log(path, columns=("flags",))
    markers = read_markers(markers_path) if markers_path is not None else log.markers
    t, y, ok = log.t_s, log.freq_hz, log.usable()
    if spec.end_s > t[-1] + 1.0 or spec.start_s < t[0] - 1.0:
        raise InputError(f"ramp {spec.target}: {spec.start_s:g}-{spec.end_s:g} s lies outside the log "
                         f"({t[0]:.1f}-{t[-1]:.1f} s)")
    d, s, cov, n, by, ay = ramp_points(t, y, ok, markers, spec, bins)
    e = np.sqrt(np.diag(cov))
    sig = family_test(s, e)
    fit = power = None
    reason = "not detected: no significant shift, so no curve"
    if sig.seen:
        fit, reason, power = fit_curves(d, s, e, cov, coil, placement_mm)
    src = "given"
    if threshold_hz is None:
        base = np.zeros(t.size, bool)
        for m in markers:
            if m.is_baseline:
                base |= (t >= m.start_s) & (t < m.end_s)
        est = noise_at_dwell(t, np.where(ok & base, y, np.nan), (spec.end_s - spec.start_s) / bins)
        threshold_hz, threshold_edf, src = k * est.noise_hz, est.edf, f"{k:g} x noise at one bin's duration"
    z = s / e
    sign = -1.0 if np.sum(z) < 0 else 1.0
    rng_res = detection_range(d, s, cov, threshold_hz, seen=sig.seen, sign=sign, threshold_edf=threshold_edf,
                              placement_mm=placement_mm, fit=fit, power=power, n_draws=n_boot, seed=seed,
                              fit_reason=reason)
    fixed_range = None
    if fixed is not None and fixed.target(spec.target) is not None:
        fixed_range = fixed.target(spec.target).range
    return RampResult(spec, d, s, e, cov, n, sig.seen, fit, reason, power, rng_res, float(threshold_hz),
                      float(threshold_edf), src, by, ay, fixed_range)


def ramp_summary(r: RampResult) -> dict:
    """The result as a dictionary (``--json``)."""
    out = {"target": r.spec.target, "start_s": r.spec.start_s, "end_s": r.spec.end_s, "from_mm": r.spec.from_mm,
           "to_mm": r.spec.to_mm, "seen": r.seen, "threshold_hz": r.threshold_hz,
           "threshold_source": r.threshold_source,
           "points": [{"distance_mm": float(a), "shift_hz": float(b), "stderr_hz": float(c), "n": int(m)}
                      for a, b, c, m in zip(r.distance_mm, r.shift_hz, r.stderr_hz, r.n_frames)],
           "fit": r.fit.to_dict() if r.fit is not None else None, "fit_reason": r.fit_reason,
           "range": r.range.to_dict()}
    if r.fixed_range is not None:
        out["fixed_stops_range"] = r.fixed_range.to_dict()
        out["ramp_minus_fixed_mm"] = r.difference_mm
    return out
