"""A calibration run, from its log to curves, ranges and calls: the orchestration layer.

``analyse_run`` reads a run folder (or a log CSV with a separate markers file), measures every
target stretch against its bracketing baselines (:mod:`.steps`), combines repeats and builds
their covariance (:mod:`.covariance`), tests whether each target is seen at all
(:mod:`.significance`), calls it ferrous, non-ferrous or mixed (:mod:`.classify`), fits the
shift-versus-distance curves of a seen target (:mod:`.curvefit`: the finite-winding law with a
coil file, else the single-loop law, and a power law), sets the detection threshold from the
baseline noise at the dwell time with its degrees of freedom (:mod:`.threshold`), reads the
range from the points with its Monte Carlo interval (:mod:`.detection`, :mod:`.rangemc`), and,
given a coil and target models, compares the measured curve with the predicted one. Nothing
here writes files: :mod:`.summary` turns the result into dictionaries, and
:mod:`coilshift.analysis.report.calibration_outputs` into tables, plots and the HTML report.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from coilshift.logger.errors import InputError, setting
from coilshift.logger.runfolder.markers import check_within, read_markers
from coilshift.logger.runfolder.reader import FrequencyLog, read_log

from coilshift.analysis.calibration import classify as _classify
from coilshift.analysis.calibration.covariance import point_covariance
from coilshift.analysis.calibration.curvefit import CurveFit, fit_curves
from coilshift.analysis.calibration.defaults import DEFAULT_PLACEMENT_MM
from coilshift.analysis.calibration.detection import (DEFAULT_BOOTSTRAP, DEFAULT_K, DEFAULT_SEED, RangeResult,
                                                      detection_range, numeric_range_mm)
from coilshift.analysis.calibration.steps import DEFAULT_SETTLE_S, MIN_FRAMES, Point, Segment, Step, combine_repeats, compute_steps
from coilshift.analysis.calibration.threshold import noise_at_dwell

#: baseline noise this many times the typical step error means drift, not noise, sets the
#: threshold (for white or short-correlated noise the two are about equal)
DRIFT_DOMINATED_RATIO = 10.0


@dataclass
class Prediction:
    """Predicted curve of one target from the coil and target models, and how the run compares.

    Attributes
    ----------
    spec : the target model (``coilshift.analysis.models.target.TargetSpec``)
    freq_hz : operating frequency used (the run's baseline)
    distance_mm, shift_hz : predicted shift at the calibration distances
    ratio : measured/predicted per calibration point (NaN where the prediction is 0)
    scale, scale_err : least-squares factor ``measured ~ scale x predicted`` and its error
    """

    spec: object
    freq_hz: float
    distance_mm: np.ndarray
    shift_hz: np.ndarray
    ratio: np.ndarray
    scale: float
    scale_err: float

    def curve(self, coil, distance_mm) -> np.ndarray:
        from coilshift.analysis.models.target import predicted_shift_hz

        return predicted_shift_hz(coil, self.spec, distance_mm, self.freq_hz)


@dataclass
class TargetResult:
    """Everything found for one target of one run."""

    target: str
    points: list[Point]
    fit: CurveFit | None
    fit_reason: str
    power_fit: CurveFit | None
    range: RangeResult
    power_range_mm: float
    classification: _classify.Classification
    prediction: Prediction | None = None
    cov: np.ndarray | None = field(default=None, repr=False)

    @property
    def cls(self) -> str:
        return self.classification.cls

    @property
    def seen(self) -> bool:
        """The family-wise test found a significant shift (else no curve, range or advice)."""
        sig = self.classification.significance
        return bool(sig is not None and sig.seen)


@dataclass
class CalibrationResult:
    """The analysed calibration run (see :func:`analyse_run`)."""

    source: str
    name: str
    log: FrequencyLog = field(repr=False)
    steps: list[Step]
    baselines: list[Segment]
    targets: list[TargetResult]
    baseline_hz: float
    dwell_s: float
    noise_hz: float
    noise_tau_s: float
    threshold_hz: float
    threshold_source: str
    k: float
    settle_s: float
    polarity: str
    coil: object | None = None
    radius_mm: float | None = None
    warnings: list[str] = field(default_factory=list)
    threshold_edf: float = math.inf
    threshold_edf_noise: str = ""
    placement_mm: float = DEFAULT_PLACEMENT_MM
    reference_checks: list = field(default_factory=list)

    def target(self, name: str) -> TargetResult | None:
        return next((t for t in self.targets if t.target == name), None)


def _baseline_only(log: FrequencyLog, baselines: list[Segment], usable: np.ndarray) -> np.ndarray:
    f = np.full(log.t_s.size, np.nan)
    t, freq = log.t_s, log.freq_hz
    for b in baselines:
        i0, i1 = int(np.searchsorted(t, b.used_start_s, "left")), int(np.searchsorted(t, b.used_end_s, "right"))
        f[i0:i1] = np.where(usable[i0:i1], freq[i0:i1], np.nan)
    return f


def _prediction(coil, spec, freq_hz: float, pts: list[Point]) -> Prediction:
    from coilshift.analysis.models.target import predicted_shift_hz

    d = np.array([p.distance_mm for p in pts], float)
    y = np.array([p.shift_hz for p in pts], float)
    e = np.array([p.stderr_hz for p in pts], float)
    pred = np.asarray(predicted_shift_hz(coil, spec, d, freq_hz), float)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(pred != 0, y / pred, np.nan)
    ok = np.isfinite(e) & (e > 0) & (pred != 0)
    if ok.any():
        w = 1.0 / e[ok] ** 2
        den = float(np.sum(w * pred[ok] ** 2))
        scale = float(np.sum(w * y[ok] * pred[ok]) / den)
        scale_err = 1.0 / math.sqrt(den)
    else:
        scale = scale_err = math.nan
    return Prediction(spec, freq_hz, d, pred, ratio, scale, scale_err)


def analyse_run(path: str | os.PathLike, markers_path: str | os.PathLike | None = None, *,
                settle_s: float | None = None, threshold_hz: float | None = None,
                k: float = DEFAULT_K, coil=None, target_models: dict | None = None,
                polarity: str = "normal", reference: dict[str, str] | None = None,
                fit_offset: bool = False, n_boot: int = DEFAULT_BOOTSTRAP,
                seed: int = DEFAULT_SEED, name: str | None = None,
                placement_mm: float = DEFAULT_PLACEMENT_MM,
                progress: Callable[[str], None] | None = None) -> CalibrationResult:
    """Analyse one calibration run.

    Parameters
    ----------
    path : run folder or log CSV
    markers_path : markers CSV to use instead of the run's own markers.csv
    settle_s : time dropped at each end of every stretch (s); None: 0 for runs recorded by
        ``coilshift calibrate`` (run.json has a ``calibration`` entry: its stretches start settled),
        else :data:`~coilshift.analysis.calibration.steps.DEFAULT_SETTLE_S`
    threshold_hz : detection threshold; default ``k`` x the baseline Allan deviation at the dwell
    k : threshold factor on the noise
    coil : a ``CoilReport`` (from ``analyse_coil``): the fits use its finite-winding law
    target_models : target name -> ``TargetSpec`` for predicted curves (needs ``coil``); a
        model's diameter also enters the winding law's finite-size term
    polarity : ``normal`` (frequency down = ferrous) or ``inverted``
    reference : target name -> declared kind, to check the polarity
    fit_offset : also fit the housing offset d0
    n_boot, seed : Monte Carlo draws (parametric bootstrap) and seed for the range interval
    placement_mm : tolerance +-delta of every target placement (mm)
    progress : called with a few words as each stage begins ("reading the log", "fitting washer")

    Returns
    -------
    CalibrationResult

    Raises
    ------
    InputError : unreadable log or markers, no markers, no baselines or targets, bad options
    """
    _check_settings(polarity, threshold_hz, k, settle_s)
    if not (math.isfinite(placement_mm) and placement_mm >= 0):
        raise InputError(f"{setting('placement_mm')}: must be zero or a positive number of mm, got {placement_mm}")
    target_models = dict(target_models or {})
    reference = dict(reference or {})
    _check_references(reference, target_models, coil)
    say = progress or (lambda text: None)
    say("reading the log")
    log = read_log(path, columns=("flags",))  # the analysis needs time, frequency and flags only
    src = str(path)
    if settle_s is None:
        settle_s = 0.0 if isinstance(log.meta.get("calibration"), dict) else DEFAULT_SETTLE_S
    markers = _load_markers(log, markers_path, src)
    usable = log.usable()
    say("steps, baselines and noise")
    steps, bases = compute_steps(log.t_s, log.freq_hz, markers, usable, settle_s, source=src)
    warnings = _stretch_warnings(log, markers, steps, bases)
    points = combine_repeats(steps)
    warnings += _repeat_warnings(points)
    baseline_hz = float(np.median([b.stat.mean for b in bases]))
    dwell_s = float(np.median([s.end_s - s.start_s for s in steps]))
    noise = _noise_and_threshold(log, bases, usable, steps, dwell_s, threshold_hz, k)
    warnings += noise.warnings
    radius = None if coil is None else float(coil.mean_radius_mm)
    by_target: dict[str, list[Point]] = {}
    for p in points:
        by_target.setdefault(p.target, []).append(p)
    opts = _TargetOptions(noise.threshold_hz, noise.edf, placement_mm, fit_offset, n_boot, seed, polarity, coil,
                          baseline_hz)
    targets = []
    for tname, pts in by_target.items():
        say(f"fitting {tname} and its range interval")
        targets.append(_analyse_target(tname, pts, opts, target_models.get(tname)))
    warnings += _call_warnings(targets, by_target, target_models, reference, polarity)
    if any(t.range.dominant == "threshold" for t in targets):
        warnings.append(f"the threshold's noise estimate ({noise.edf:.3g} degrees of freedom) dominates the range "
                        "interval(s): a known threshold (--threshold-hz) or a longer first "
                        "target-free stretch (10-20 dwells) narrows them")
    checks = _classify.reference_checks({t.target: t.classification for t in targets}, reference)
    return CalibrationResult(src, name or Path(src).name or src, log, steps, bases, targets, baseline_hz, dwell_s,
                             noise.noise_hz, noise.noise_tau_s, noise.threshold_hz, noise.source, k, settle_s,
                             polarity, coil, radius, warnings, noise.edf, noise.edf_noise, placement_mm, checks)


def _check_settings(polarity: str, threshold_hz: float | None, k: float, settle_s: float | None) -> None:
    """Refuse a bad polarity, threshold, noise factor or settling time before the log is read."""
    if polarity not in _classify.POLARITIES:
        raise InputError(f"polarity: must be normal or inverted, got {polarity!r}")
    if threshold_hz is not None and not (math.isfinite(threshold_hz) and threshold_hz > 0):
        raise InputError(f"threshold: must be a positive number of hertz, got {threshold_hz}")
    if not (math.isfinite(k) and k > 0):
        raise InputError(f"noise factor: must be positive, got {k}")
    if settle_s is not None and not (math.isfinite(settle_s) and settle_s >= 0):
        raise InputError(f"settling time: must be zero or positive seconds, got {settle_s}")


def _check_references(reference: dict, target_models: dict, coil) -> None:
    """Refuse a reference target of unknown kind, and target models without a coil."""
    for tname, kind in reference.items():
        if kind not in _classify.CLASSES:
            raise InputError(f"reference target {tname}: kind must be ferrous or non-ferrous, got {kind!r}")
    if target_models and coil is None:
        raise InputError(f"target models need a coil ({setting('coil')} FILE) to predict a curve")


def _load_markers(log: FrequencyLog, markers_path, src: str) -> list:
    """The stretches: from ``markers_path`` (checked against the log's length) or the run's own."""
    if markers_path is not None:
        markers = read_markers(markers_path)
        t = log.t_s
        # frame times are frame centres: the recording runs on about one hop past the last one
        hop = float(np.median(np.diff(t))) if t.size > 1 else 0.0
        check_within(markers, float(t[-1]) + hop, str(markers_path))
        return markers
    if not log.markers:
        raise InputError(f"{src}: no markers.csv in the run; give the stretches with {setting('markers_path')} FILE")
    return log.markers


def _stretch_warnings(log: FrequencyLog, markers: list, steps: list[Step], bases: list[Segment]) -> list[str]:
    """An interrupted log, stretches left out, and target stretches without a baseline on both sides."""
    warnings: list[str] = []
    if log.interrupted:
        warnings.append("the run was interrupted: the log ends early")
    dropped = sum(1 for m in markers if not m.is_baseline) - len(steps)
    dropped_b = sum(1 for m in markers if m.is_baseline) - len(bases)
    if dropped or dropped_b:
        warnings.append(f"{dropped} target and {dropped_b} baseline stretch(es) left out: fewer than "
                        f"{MIN_FRAMES} usable frames after settling (no tone, gaps, or too short)")
    n_unbr = sum(1 for s in steps if not s.bracketed)
    if n_unbr:
        warnings.append(f"{n_unbr} target stretch(es) have a baseline on one side only: drift not removed there")
    return warnings


def _repeat_warnings(points: list[Point]) -> list[str]:
    return [f"{p.target} at {p.distance_mm:g} mm: the {p.repeats} repeats disagree beyond "
            f"their errors (chi2 {p.chi2:.1f}); error enlarged to cover the scatter"
            for p in points if not p.consistent]


@dataclass
class _Threshold:
    """The baseline noise at the dwell and the detection threshold set from it (or given)."""

    noise_hz: float
    noise_tau_s: float
    threshold_hz: float
    source: str
    warnings: list[str]
    edf: float = math.inf  # degrees of freedom of the noise behind the threshold (inf: given)
    edf_noise: str = ""


def _noise_and_threshold(log: FrequencyLog, bases: list[Segment], usable: np.ndarray, steps: list[Step],
                         dwell_s: float, threshold_hz: float | None, k: float) -> _Threshold:
    """Noise of the baselines at the dwell (:func:`.threshold.noise_at_dwell`); threshold k x noise."""
    warnings: list[str] = []
    est = noise_at_dwell(log.t_s, _baseline_only(log, bases, usable), dwell_s)
    noise_hz, noise_tau = est.noise_hz, est.tau_s
    edf = math.inf
    if threshold_hz is not None:
        thr, thr_src = float(threshold_hz), "given"
    elif math.isfinite(noise_hz):
        thr, thr_src = k * noise_hz, f"{k:g} x noise"
        edf = est.edf if math.isfinite(est.edf) else 1.0
        if noise_tau < dwell_s:
            warnings.append(f"baselines too short for the noise at the {dwell_s:g} s dwell; used the noise "
                            f"at {noise_tau:g} s (higher, so the threshold errs high). Record a first "
                            "baseline of at least twice the dwell.")
    else:
        thr, thr_src = math.nan, "none"
        warnings.append("no noise estimate from the baselines and no --threshold-hz: ranges undefined")
    typical_err = float(np.median([s.stderr_hz for s in steps]))
    if math.isfinite(noise_hz) and typical_err > 0 and noise_hz > DRIFT_DOMINATED_RATIO * typical_err:
        warnings.append(f"the baseline noise at the dwell ({noise_hz:.3g} Hz) is {noise_hz / typical_err:.0f} x the "
                        f"typical step error ({typical_err:.3g} Hz): drift or slow wander dominates it"
                        + (" and sets the threshold; let the oscillator warm up, shorten the dwell, or give "
                           "--threshold-hz" if thr_src != "given" else ""))
    return _Threshold(noise_hz, noise_tau, thr, thr_src, warnings, edf, est.edf_noise if thr_src != "given" else "")


@dataclass(frozen=True)
class _TargetOptions:
    """The run-wide settings every target is analysed with."""

    threshold_hz: float
    threshold_edf: float
    placement_mm: float
    fit_offset: bool
    n_draws: int
    seed: int
    polarity: str
    coil: object
    baseline_hz: float


def _analyse_target(tname: str, pts: list[Point], o: _TargetOptions, spec) -> TargetResult:
    """One target: the call, and for a seen target the fits and the range with its interval."""
    d = [p.distance_mm for p in pts]
    y = [p.shift_hz for p in pts]
    e = [p.stderr_hz for p in pts]
    cov = point_covariance(pts)
    call = _classify.classify_points(tname, pts, o.polarity)
    seen = call.significance is not None and call.significance.seen
    fit = power = None
    reason = "not detected: no significant shift, so no curve"
    if seen:
        fit, reason, power = fit_curves(d, y, e, cov, o.coil, o.placement_mm, o.fit_offset,
                                        float(spec.diameter_mm) if spec is not None else 0.0)
    sign = -1.0 if (call.z < 0 if math.isfinite(call.z) else sum(y) < 0) else 1.0
    rng_res = detection_range(d, y, cov, o.threshold_hz, seen=seen, sign=sign, threshold_edf=o.threshold_edf,
                              placement_mm=o.placement_mm, fit=fit, power=power, n_draws=o.n_draws, seed=o.seed,
                              fit_reason=reason)
    p_range = numeric_range_mm(power, o.threshold_hz) if power is not None and power.accepted else math.nan
    pred = _prediction(o.coil, spec, o.baseline_hz, pts) if spec is not None else None
    return TargetResult(tname, pts, fit, reason, power, rng_res, p_range, call, pred, cov)


def _call_warnings(targets: list[TargetResult], by_target: dict, target_models: dict, reference: dict,
                   polarity: str) -> list[str]:
    """Target models without a target, the polarity check against reference targets, mixed steel."""
    warnings = [f"target model {tname!r} names no target of this run" for tname in target_models
                if tname not in by_target]
    classes = {t.target: t.classification for t in targets}
    warnings += _classify.check_reference(classes, reference, polarity)
    if any(t.cls == _classify.MIXED for t in targets):
        warnings.append(_classify.MIXED_STEEL_CAUTION)
    return warnings
