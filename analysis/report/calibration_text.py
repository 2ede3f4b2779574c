"""Words and numbers for the calibration results, shared by the terminal summary and the report.

Every number printed is a claim, so: a fit says whether it passes its chi-squared test; a
parameter whose error exceeds its value is "not determined"; a fixed parameter says "fixed" and
where its value comes from; a range says how it was obtained (measured between two points, or
extrapolated), its interval, and which uncertainty dominates; a target that is not seen gets no
curve, range or advice.
"""

from __future__ import annotations

import math

from coilshift.analysis.calibration.classify import format_p
from coilshift.analysis.calibration.curvefit import FIT_ACCEPT_P, POWER, WINDING, CurveFit
from coilshift.analysis.calibration.detection import EXTRAPOLATED, MEASURED

#: parameter -> (symbol, unit, value format)
PARAMS = {"a_hz": ("A", "Hz", "{:+.4g}"), "radius_mm": ("R", "mm", "{:.4g}"), "offset_mm": ("d0", "mm", "{:.3g}"),
          "c_hz": ("C", "Hz mm^n", "{:+.4g}"), "p": ("exponent n", "", "{:.3g}")}
MODEL_NAMES = {"dipole": "single-loop law", WINDING: "finite-winding law", POWER: "power law"}


def _num(x, fmt="{:.4g}") -> str:
    return "-" if x is None or not math.isfinite(x) else fmt.format(x)


def param_text(fit: CurveFit, name: str, pm: str = "+-") -> str:
    """``R = 60.0 +- 0.4 mm``, ``R = 78 mm (fixed: coil file)`` or ``R not determined``."""
    sym, unit, fmt = PARAMS[name]
    value = fmt.format(fit.params[name])
    unit = f" {unit}" if unit else ""
    if name not in fit.free:
        return f"{sym} = {value}{unit} (fixed: {fit.fixed_from.get(name, 'given')})"
    if not fit.determined(name):
        return f"{sym} not determined ({value} {pm} {fit.errors[name]:.2g}{unit})"
    return f"{sym} = {value} {pm} {fit.errors[name]:.2g}{unit}"


def fit_verdict(fit: CurveFit) -> str:
    """``chi2/dof = 0.25 (4 dof), p = 0.86: accepted`` or ``...: rejected at the 1 % level``."""
    if fit.dof <= 0:
        return "no degree of freedom left: the fit cannot be tested (not used to extrapolate)"
    head = f"chi2/dof = {fit.chi2_red:.3g} ({fit.dof} dof), {format_p(fit.p_value)}"
    if fit.accepted:
        return f"{head}: accepted"
    return f"{head}: REJECTED at the {100 * FIT_ACCEPT_P:g} % level (not drawn, not used to extrapolate)"


def fit_text(fit: CurveFit, pm: str = "+-", with_offset_fixed: bool = False) -> str:
    """One line: the law, its parameters and its verdict."""
    names = [k for k in fit.params if k != "offset_mm" or "offset_mm" in fit.free or with_offset_fixed]
    shape = f" (shape: {fit.fixed_from['shape']})" if "shape" in fit.fixed_from else ""
    params = ", ".join(param_text(fit, k, pm) for k in names)
    return f"{MODEL_NAMES.get(fit.model, fit.model)} fit{shape}: {params}; {fit_verdict(fit)}"


def dominant_text(rng) -> str:
    """``dominant: placement tolerance (61 % of the variance)``, '' without an interval."""
    if not rng.dominant:
        return ""
    share = rng.shares().get(rng.dominant, 0.0)
    return f"dominant: {rng.component_label(rng.dominant)} ({100 * share:.0f} % of the variance)"


def range_text(t, unit_dash: str = "-") -> str:
    """The range with its interval and basis, or why there is none."""
    r = t.range
    if r.range_mm is None:
        extra = ""
        if r.lower_bound_mm is not None:
            extra = f" (the range is beyond {r.lower_bound_mm:g} mm)"
        return f"undefined: {r.reason}{extra}"
    ci = f" (95 % interval {r.ci_mm[0]:.1f}{unit_dash}{r.ci_mm[1]:.1f} mm)" if r.ci_mm else " (no interval)"
    if r.basis == MEASURED and r.bracket_mm and r.bracket_mm[1] is not None:
        how = f"measured: interpolated between {r.bracket_mm[0]:g} and {r.bracket_mm[1]:g} mm"
    elif r.basis == EXTRAPOLATED:
        law = MODEL_NAMES.get(t.fit.model, "fitted law") if t.fit is not None else "fitted law"
        how = f"EXTRAPOLATED past the farthest point ({r.bracket_mm[0]:g} mm) with the {law}"
    else:
        how = r.basis
    dom = dominant_text(r)
    return f"{r.range_mm:.1f} mm{ci}, {how}" + (f"; {dom}" if dom else "")


def uncertainty_rows(t) -> list[list[str]]:
    """Per component: name, interval with only it on, width, share of the variance."""
    r = t.range
    shares = r.shares()
    rows = []
    for k, (lo, hi) in r.components.items():
        rows.append([r.component_label(k), f"{lo:.1f}-{hi:.1f} mm", f"{hi - lo:.2f} mm", f"{100 * shares[k]:.0f} %"])
    return rows


def threshold_text(res) -> str:
    """``threshold 0.088 Hz (5 x noise; noise from 1.7 degrees of freedom, random-walk FM)``."""
    thr = _num(res.threshold_hz)
    if not math.isfinite(res.threshold_hz):
        return "threshold none"
    extra = ""
    if math.isfinite(res.threshold_edf):
        extra = (f"; the noise estimate has {res.threshold_edf:.3g} degrees of freedom"
                 + (f" ({res.threshold_edf_noise})" if res.threshold_edf_noise else ""))
    return f"threshold {thr} Hz ({res.threshold_source}{extra})"


def prediction_text(pred, pm: str = "+-") -> str:
    """``0.97 +- 0.0006``, or why there is no ratio (the model predicts no shift at all)."""
    if not (math.isfinite(pred.scale) and math.isfinite(pred.scale_err)):
        return "undefined (the model predicts no shift)"
    return f"{pred.scale:.3g} {pm} {pred.scale_err:.2g}" if pm == "+-" else f"{pred.scale:.3g}{pm}{pred.scale_err:.2g}"
