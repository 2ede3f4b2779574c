"""An analysed calibration run as plain dictionaries: the documented ``--json`` summary and the
full ``result.json`` details (NumPy arrays and NaN are left for the JSON writer to convert)."""

from __future__ import annotations

import math

from coilshift.analysis.calibration import classify as _classify
from coilshift.analysis.calibration.run import CalibrationResult


def result_summary(res: CalibrationResult) -> dict:
    """The run in the documented ``--json`` shape (exactly these keys).

    ``{"targets": [{"target", "class", "points": [{"distance_mm", "shift_hz", "stderr_hz"}],
    "range_mm", "range_ci_mm"}], "threshold_hz", "noise_hz"}``; undefined values are None.
    """
    out = []
    for t in res.targets:
        ci = list(t.range.ci_mm) if t.range.ci_mm is not None else None
        out.append({"target": t.target, "class": t.cls,
                    "points": [{"distance_mm": p.distance_mm, "shift_hz": p.shift_hz, "stderr_hz": p.stderr_hz}
                               for p in t.points],
                    "range_mm": t.range.range_mm, "range_ci_mm": ci})
    return {"targets": out, "threshold_hz": _num(res.threshold_hz), "noise_hz": _num(res.noise_hz)}


def _num(x):
    return float(x) if x is not None and math.isfinite(x) else None


def result_details(res: CalibrationResult) -> dict:
    """Everything a reader of ``result.json`` may want: the summary plus fits, calls and settings."""
    targets = []
    for t in res.targets:
        item = {"target": t.target, "class": t.cls, "class_reason": t.classification.reason,
                "points": [{"distance_mm": p.distance_mm, "shift_hz": p.shift_hz, "stderr_hz": p.stderr_hz,
                            "n": p.n, "repeats": p.repeats, "repeats_consistent": p.consistent}
                           for p in t.points],
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
            "threshold_source": res.threshold_source, "noise_factor_k": res.k, "noise_hz": res.noise_hz,
            "noise_tau_s": res.noise_tau_s, "dwell_s": res.dwell_s, "baseline_hz": res.baseline_hz,
            "settle_s": res.settle_s, "polarity": res.polarity, "coil_radius_mm": res.radius_mm,
            "interrupted": res.log.interrupted, "warnings": res.warnings,
            "cautions": [_classify.POLARITY_CAUTION, _classify.MIXED_STEEL_CAUTION]}
