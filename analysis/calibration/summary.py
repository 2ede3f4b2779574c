"""An analysed calibration run as plain dictionaries: the documented ``--json`` summary and the
full ``result.json`` details (NumPy arrays and NaN are left for the JSON writer to convert)."""

from __future__ import annotations

import math

from coilshift.analysis.calibration import classify as _classify
from coilshift.analysis.calibration.run import CalibrationResult


def _fit_brief(fit) -> dict | None:
    if fit is None:
        return None
    return {"model": fit.model, "chi2_dof": _num(fit.chi2_red), "dof": fit.dof, "p_value": _num(fit.p_value),
            "accepted": fit.accepted}


def result_summary(res: CalibrationResult) -> dict:
    """The run in the documented ``--json`` shape (exactly these keys, docs/calibration.md).

    ``{"targets": [{"target", "class", "class_z", "class_p", "seen", "points": [{"distance_mm",
    "shift_hz", "stderr_hz"}], "fit", "power_law", "range_mm", "range_ci_mm", "range_basis",
    "range_dominant"}], "threshold_hz", "threshold_edf", "noise_hz", "placement_mm"}``; a fit is
    ``{"model", "chi2_dof", "dof", "p_value", "accepted"}`` (None for a target that is not seen);
    undefined values are None.
    """
    out = []
    for t in res.targets:
        ci = list(t.range.ci_mm) if t.range.ci_mm is not None else None
        c = t.classification
        out.append({"target": t.target, "class": t.cls, "class_z": _num(c.z), "class_p": _num(c.p_value),
                    "seen": t.seen,
                    "points": [{"distance_mm": p.distance_mm, "shift_hz": p.shift_hz, "stderr_hz": p.stderr_hz}
                               for p in t.points],
                    "fit": _fit_brief(t.fit) if t.seen else None,
                    "power_law": _fit_brief(t.power_fit) if t.seen else None,
                    "range_mm": t.range.range_mm, "range_ci_mm": ci, "range_basis": t.range.basis or None,
                    "range_dominant": t.range.dominant or None})
    return {"targets": out, "threshold_hz": _num(res.threshold_hz), "threshold_edf": _num(res.threshold_edf),
            "noise_hz": _num(res.noise_hz), "placement_mm": res.placement_mm}


def _num(x):
    return float(x) if x is not None and math.isfinite(x) else None


def result_details(res: CalibrationResult) -> dict:
    """Everything a reader of ``result.json`` may want: the summary plus fits, calls and settings."""
    targets = []
    for t in res.targets:
        item = {"target": t.target, "class": t.cls, "class_reason": t.classification.reason,
                "classification": t.classification.to_dict(),
                "significance": t.classification.significance.to_dict() if t.classification.significance else None,
                "points": [{"distance_mm": p.distance_mm, "shift_hz": p.shift_hz, "stderr_hz": p.stderr_hz,
                            "n": p.n, "repeats": p.repeats, "repeats_consistent": p.consistent}
                           for p in t.points],
                "points_covariance_hz2": t.cov,
                "fit": t.fit.to_dict() if t.fit else None, "fit_reason": t.fit_reason,
                "power_law": t.power_fit.to_dict() if t.power_fit else None,
                "power_law_range_mm": t.power_range_mm, **t.range.to_dict()}
        if t.prediction is not None:
            pr = t.prediction
            item["prediction"] = {"model": pr.spec.to_dict(), "freq_hz": pr.freq_hz,
                                  "predicted_shift_hz": pr.shift_hz, "measured_over_predicted": pr.ratio,
                                  "scale": pr.scale, "scale_err": pr.scale_err}
        targets.append(item)
    return {"run": res.source, "targets": targets, "threshold_hz": res.threshold_hz,
            "threshold_source": res.threshold_source, "threshold_edf": res.threshold_edf,
            "threshold_edf_noise": res.threshold_edf_noise, "noise_factor_k": res.k, "noise_hz": res.noise_hz,
            "noise_tau_s": res.noise_tau_s, "dwell_s": res.dwell_s, "baseline_hz": res.baseline_hz,
            "settle_s": res.settle_s, "polarity": res.polarity, "coil_radius_mm": res.radius_mm,
            "placement_mm": res.placement_mm, "reference_checks": [c.to_dict() for c in res.reference_checks],
            "interrupted": res.log.interrupted, "warnings": res.warnings,
            "cautions": [_classify.POLARITY_CAUTION, _classify.MIXED_STEEL_CAUTION]}
