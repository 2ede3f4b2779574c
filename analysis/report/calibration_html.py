"""The calibration report as one HTML page (plots embedded): provenance header, how to read it,
cautions, the comparison of runs (ranges, their ratio to the first run, each run's threshold),
then per run the targets, the points (shift in Hz and ppm), the sensitivity near the range, the
range uncertainty, the baselines' noise and the plots."""

from __future__ import annotations

import html
import math

from coilshift.analysis.calibration import classify as _classify
from coilshift.analysis.calibration.compare import compare_runs, unique_names
from coilshift.analysis.calibration.curvefit import FIT_ACCEPT_P
from coilshift.analysis.calibration.detection import EXTRAPOLATION_LIMIT, MEASURED
from coilshift.analysis.calibration.run import CalibrationResult
from coilshift.analysis.calibration.significance import FAMILY_ALPHA
from coilshift.analysis.report.calibration_text import (fit_text, prediction_text, range_text, threshold_text,
                                                        uncertainty_rows)
from coilshift.analysis.report.html_page import Provenance, howto, img, page, provenance, table
from coilshift.analysis.report.cells import cell_text

RANGE_CAUTION = ("Ranges hold for this coil, oscillator, target, orientation and surroundings; ground "
                 "minerals, nearby metal, temperature and a different target size or angle change them. "
                 "They are a measured calibration figure, not a guarantee that a target will be found.")
FIELD_CAUTION = ("Searching and digging: follow local law, landowner permission and utility-locating "
                 "rules before you dig; leave suspected munitions alone and report them to the authorities.")

HOW_TO_READ = [
    "<b>Runs compared</b> (several runs): each target's detection range per run, its 95 % interval, the ratio "
    "to the first run's range (above 1: reaches farther) and the threshold each run used.",
    "<b>Targets</b>: the call (ferrous, non-ferrous, or indeterminate) with its evidence, the detection range "
    "with its interval and how it was found (<i>measured</i> between two points, or <i>extrapolated</i> with a "
    "fitted law), the sensitivity near the range (how many Hz a millimetre is worth there) and the fits with "
    "their verdicts.",
    "<b>Calibration points</b>: the shift at each distance against the bracketing baselines, in Hz and in ppm "
    "of the baseline frequency, with its standard error; a shift smaller than about three standard errors is "
    "not distinguishable from noise.",
    "<b>Baseline noise</b>: the overlapping Allan deviation of the target-free stretches against averaging "
    "time; the threshold is K times its value at the dwell time.",
    "<b>Plots</b>: shift against distance (log-log; triangles down = frequency falls, up = rises), the whole "
    "run in time with the stretches shaded, and the fits' residuals in standard errors.",
]



def sensitivity_hz_per_mm(t) -> float:
    """How fast the shift changes with distance near the range, Hz/mm (signed; NaN when there is
    no range): the slope between the two calibration points that bracket a measured range, or the
    accepted fit's slope at an extrapolated one. (The report shows how fast |shift| falls.)"""
    r = t.range
    if r.range_mm is None:
        return math.nan
    if r.basis == MEASURED and r.bracket_mm and r.bracket_mm[1] is not None:
        by_d = {p.distance_mm: p.shift_hz for p in t.points}
        d0, d1 = r.bracket_mm
        if d0 in by_d and d1 in by_d and d1 != d0:
            return (by_d[d1] - by_d[d0]) / (d1 - d0)
        return math.nan
    if t.fit is not None and t.fit.accepted:
        h = max(1e-3 * r.range_mm, 1e-3)
        return float(t.fit.predict(r.range_mm + h) - t.fit.predict(r.range_mm - h)) / (2 * h)
    return math.nan


def _target_rows(res: CalibrationResult) -> list[list[str]]:
    rows = []
    for t in res.targets:
        sens = sensitivity_hz_per_mm(t)
        rows.append([t.target, t.cls, t.classification.reason, range_text(t), cell_text(abs(sens), "{:.3g}")])
    return rows


def _fit_rows(res: CalibrationResult) -> list[list[str]]:
    rows = []
    for t in res.targets:
        if not t.seen:
            continue  # not detected: no curve (said in the targets table)
        fit = fit_text(t.fit, "±") if t.fit is not None else (t.fit_reason or "-")
        power = fit_text(t.power_fit, "±") if t.power_fit is not None else "-"
        pred = prediction_text(t.prediction, "±") if t.prediction is not None else "-"
        rows.append([t.target, fit, power, pred])
    return rows


def _point_rows(res: CalibrationResult) -> list[list]:
    base = res.baseline_hz if math.isfinite(res.baseline_hz) and res.baseline_hz > 0 else math.nan
    points = [p for t in res.targets for p in t.points]
    repeated = any(p.repeats > 1 for p in points)  # with one repeat each, "repeats agree" says nothing
    return [[p.target, f"{p.distance_mm:g}", f"{p.shift_hz:+.5f}", f"{p.stderr_hz:.5f}",
             cell_text(1e6 * p.shift_hz / base, "{:+.4g}"), cell_text(1e6 * p.stderr_hz / base, "{:.2g}"), p.n,
             p.repeats if repeated else "", ("yes" if p.consistent else "NO") if repeated else ""]
            for p in points]


def _run_section(res: CalibrationResult, images: dict[str, bytes]) -> str:
    parts = [f"<h2>Run {html.escape(res.name)}</h2>",
             f"<p>Source <code>{html.escape(res.source)}</code>; baseline {res.baseline_hz:.4f} Hz; dwell "
             f"{res.dwell_s:.3g} s (settling {res.settle_s:g} s removed at each end of every stretch); "
             f"noise (overlapping Allan deviation of the baselines) {cell_text(res.noise_hz, '{:.4g}') or 'unknown'} Hz "
             f"at {cell_text(res.noise_tau_s, '{:.3g}') or '-'} s; {html.escape(threshold_text(res))}; placement "
             f"tolerance ±{res.placement_mm:g} mm; polarity {res.polarity}.</p>"]
    parts.append("<h3>Targets</h3>")
    parts.append(table(["target", "call", "evidence", "detection range",
                        "how fast |shift| falls near the range (Hz per mm)"], _target_rows(res)))
    fits = _fit_rows(res)
    if fits:
        parts.append("<h3>Curve fits</h3>")
        parts.append(table(["target", "curve fit", "power law", "measured/predicted (model scale)"], fits))
    unc = [[t.target] + row for t in res.targets for row in uncertainty_rows(t)]
    if unc:
        parts.append("<h3>Range uncertainty by source</h3><p>The 95 % interval with only that source on; "
                     "the share is of the summed squared widths.</p>")
        parts.append(table(["target", "source", "interval alone", "width", "share"], unc))
    if res.reference_checks:
        verdict = {True: "agrees", False: "DISAGREES: check the polarity", None: "no clear call: not checked"}
        parts.append("<h3>Polarity check (reference targets)</h3>")
        parts.append(table(["reference target", "declared", "reads", "verdict"],
                           [[c.target, c.declared, c.called or "not in the run", verdict[c.agrees]]
                            for c in res.reference_checks]))
    parts.append("<h3>Calibration points</h3>")
    parts.append(table(["target", "distance (mm)", "shift (Hz)", "stderr (Hz)", "shift (ppm)", "stderr (ppm)",
                        "frames", "repeats", "repeats agree"], _point_rows(res),
                       numeric=("distance (mm)", "shift (Hz)", "stderr (Hz)", "shift (ppm)", "stderr (ppm)",
                                "frames", "repeats")))
    if res.warnings:
        parts.append("<h3>Warnings</h3><ul>" + "".join(f"<li>{html.escape(w)}</li>" for w in res.warnings)
                     + "</ul>")
    for key, alt, head in (("curves", "shift vs distance", "Shift against distance"),
                           ("timeseries", "time series", "The run in time"),
                           ("residuals", "residuals", "Fit residuals"),
                           ("noise", "baseline noise", "Baseline noise")):
        if key in images:
            parts.append(f"<h3>{head}</h3>" + img(images[key], alt))
    return "\n".join(parts)


def _method_text() -> str:
    return ("<p>Shift = target-stretch mean minus the baseline interpolated in time between the target-free "
            "stretches before and after it. Errors allow for correlated frame noise; neighbouring steps share "
            f"baselines and are fitted with their covariance. A target is <i>seen</i> when a Sidak family-wise "
            f"test at {100 * FAMILY_ALPHA:g} % over its points finds a significant shift; otherwise it gets no "
            "curve and no range. Curves: the finite-winding law A·(h(d+d0)/h(0))² with a coil file, else the "
            "single-loop law A·(R²/(R²+(d+d0)²))³ (falls as d⁻⁶), and a power law; a fit whose χ² test gives "
            f"p &lt; {FIT_ACCEPT_P:g} is rejected (not drawn, not used to extrapolate). Range = where the "
            "target's |shift| falls to the threshold, interpolated between the two calibration points that "
            "bracket it (<i>measured</i>), or carried on past the farthest point with an accepted fit's shape "
            f"(<i>extrapolated</i>, at most {EXTRAPOLATION_LIMIT:g}× the farthest distance). The 95 % interval is "
            "a Monte Carlo propagation of the point errors, the placement tolerance, the threshold's noise "
            "estimate and the interpolation model.</p>")


def _comparison(results: list[CalibrationResult], names: list[str], compare_png: bytes | None) -> str:
    rows = compare_runs(results, names)
    first = names[0]
    header = ["target"]
    for n in names:
        header += [f"{n}: range (mm)"] + ([] if n == first else [f"{n}/{first}: range ratio"]) + [f"{n}: call"]
    body = []
    for row in rows:
        cells = [row.target]
        r0 = row.range_mm.get(first)
        for n in names:
            r = row.range_mm.get(n)
            ci = row.range_ci_mm.get(n)
            cells.append("-" if n not in row.range_mm else "undefined" if r is None
                         else f"{r:.1f}" + (f" ({ci[0]:.1f}-{ci[1]:.1f})" if ci else ""))
            if n != first:
                cells.append(f"{r / r0:.2f}" if r is not None and r0 else "-")
            cells.append(row.cls.get(n, "-"))
        body.append(cells)
    thr = table(["run", "threshold (Hz)", "how it was set", "noise at the dwell (Hz)", "dwell (s)"],
                [[n, cell_text(r.threshold_hz, "{:.4g}"), r.threshold_source, cell_text(r.noise_hz, "{:.4g}"),
                  cell_text(r.dwell_s, "{:.3g}")] for n, r in zip(names, results)])
    out = "<h2>Runs compared</h2>" + table(header, body) + "<p>Thresholds of the runs:</p>" + thr
    if compare_png is not None:
        out += img(compare_png, "runs compared")
    return out


def report_html(results: list[CalibrationResult], images: list[dict[str, bytes]],
                compare_png: bytes | None = None, prov: Provenance | None = None) -> str:
    """The whole report as one HTML page with the plots embedded."""
    names = unique_names(results)
    prov = prov or provenance([r.source for r in results])
    body = [howto(HOW_TO_READ), _method_text(),
            "<div class='caution'><b>Cautions</b><ul>"
            + "".join(f"<li>{html.escape(c)}</li>" for c in (_classify.POLARITY_CAUTION,
                                                            _classify.MIXED_STEEL_CAUTION,
                                                            RANGE_CAUTION, FIELD_CAUTION))
            + "</ul></div>"]
    if len(results) > 1:
        body.append(_comparison(results, names, compare_png))
    body += [_run_section(res, imgs) for res, imgs in zip(results, images)]
    return page("Calibration report", prov, body)
