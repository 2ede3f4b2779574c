"""Calibration outputs: tables (CSV), the full result (JSON), plots (PNG) and a one-file HTML
report with the plots embedded, so a practitioner can file or send a single file.

All files go through the atomic writers: a finished file appears whole or not at all.
"""

from __future__ import annotations

import base64
import csv
import html
import io
import json
import math
import os
from pathlib import Path

from coilshift.logger.runfolder.atomic import to_jsonable, write_text_atomic

from coilshift.analysis.calibration import classify as _classify
from coilshift.analysis.calibration.run import CalibrationResult
from coilshift.analysis.calibration.summary import result_details
from coilshift.analysis.calibration.compare import compare_runs, unique_names
from coilshift.analysis.calibration.curvefit import FIT_ACCEPT_P
from coilshift.analysis.calibration.detection import EXTRAPOLATION_LIMIT
from coilshift.analysis.calibration.significance import FAMILY_ALPHA
from coilshift.analysis.report.calibration_text import (fit_text, prediction_text, range_text, threshold_text,
                                                        uncertainty_rows)

STEP_COLUMNS = ("target", "distance_mm", "shift_hz", "stderr_hz", "n", "start_s", "end_s", "baseline_hz",
                "bracketed", "unbracketed_shift_hz", "note")
POINT_COLUMNS = ("target", "distance_mm", "shift_hz", "stderr_hz", "n", "repeats", "repeat_chi2",
                 "repeats_consistent")

RANGE_CAUTION = ("Ranges hold for this coil, oscillator, target, orientation and surroundings; ground "
                 "minerals, nearby metal, temperature and a different target size or angle change them. "
                 "They are a measured calibration figure, not a guarantee that a target will be found.")
FIELD_CAUTION = ("Searching and digging: follow local law, landowner permission and utility-locating "
                 "rules before you dig; leave suspected munitions alone and report them to the authorities.")


def _f(x, fmt="{:.6g}") -> str:
    return "" if x is None or (isinstance(x, float) and not math.isfinite(x)) else fmt.format(x)


def steps_csv(res: CalibrationResult) -> str:
    """Every target stretch: ``target, distance_mm, shift_hz, stderr_hz, n`` then details."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(STEP_COLUMNS)
    for s in res.steps:
        w.writerow([s.target, _f(s.distance_mm, "{:g}"), _f(s.shift_hz, "{:.6f}"), _f(s.stderr_hz, "{:.6f}"), s.n,
                    _f(s.start_s, "{:.3f}"), _f(s.end_s, "{:.3f}"), _f(s.baseline_hz, "{:.6f}"),
                    "yes" if s.bracketed else "no", _f(s.unbracketed_shift_hz, "{:.6f}"), s.note])
    return buf.getvalue()


def points_csv(res: CalibrationResult) -> str:
    """Repeats combined: one row per target and distance."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(POINT_COLUMNS)
    for t in res.targets:
        for p in t.points:
            w.writerow([p.target, _f(p.distance_mm, "{:g}"), _f(p.shift_hz, "{:.6f}"), _f(p.stderr_hz, "{:.6f}"),
                        p.n, p.repeats, _f(p.chi2, "{:.3f}"), "yes" if p.consistent else "no"])
    return buf.getvalue()


def _call_text(t) -> str:
    return f"{t.cls} - {t.classification.reason}"


def summary_lines(res: CalibrationResult) -> list[str]:
    """Plain-text summary for the terminal."""
    lines = [f"run {res.source}: {len(res.steps)} target stretch(es), dwell {res.dwell_s:.3g} s, "
             f"baseline {res.baseline_hz:.4f} Hz",
             f"noise {_f(res.noise_hz, '{:.4g}') or 'unknown'} Hz at {_f(res.noise_tau_s, '{:.3g}') or '-'} s; "
             f"{threshold_text(res)}; placement tolerance +-{res.placement_mm:g} mm; polarity {res.polarity}"]
    for t in res.targets:
        lines.append(f"  {t.target}: {_call_text(t)}")
        for p in t.points:
            lines.append(f"    {p.distance_mm:8g} mm  {p.shift_hz:+12.5f} Hz  +- {p.stderr_hz:.5f}  (n={p.n})")
        if t.seen:
            for f in (t.fit, t.power_fit):
                if f is not None:
                    lines.append(f"    {fit_text(f)}")
            if t.fit is None and t.fit_reason:
                lines.append(f"    {t.fit_reason}")
        lines.append(f"    range: {range_text(t)}")
        if t.prediction is not None:
            lines.append(f"    measured/predicted ({t.prediction.spec.name}): {prediction_text(t.prediction)}")
    for c in res.reference_checks:
        lines.append(f"  polarity check: reference {c.target} declared {c.declared}, reads "
                     f"{c.called or 'absent'}: " + {True: "agrees", False: "DISAGREES", None: "not checked"}[c.agrees])
    for wmsg in res.warnings:
        lines.append(f"  warning: {wmsg}")
    return lines


def _img(data: bytes, alt: str) -> str:
    b64 = base64.b64encode(data).decode("ascii")
    return f'<p><img alt="{html.escape(alt)}" src="data:image/png;base64,{b64}" style="max-width:100%"></p>'


def _table(header, rows) -> str:
    th = "".join(f"<th>{html.escape(str(h))}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{html.escape(str(c))}</td>" for c in r) + "</tr>" for r in rows)
    return f"<table><thead><tr>{th}</tr></thead><tbody>{body}</tbody></table>"


def _target_rows(res: CalibrationResult) -> list[list[str]]:
    rows = []
    for t in res.targets:
        fit = fit_text(t.fit, "±") if t.fit is not None and t.seen else ("-" if t.seen else "none (not detected)")
        power = fit_text(t.power_fit, "±") if t.power_fit is not None and t.seen else "-"
        pred = prediction_text(t.prediction, "±") if t.prediction is not None else "-"
        rows.append([t.target, t.cls, t.classification.reason, range_text(t), fit, power, pred])
    return rows


def _run_section(res: CalibrationResult, images: dict[str, bytes]) -> str:
    parts = [f"<h2>Run {html.escape(res.name)}</h2>",
             f"<p>Source <code>{html.escape(res.source)}</code>; baseline {res.baseline_hz:.4f} Hz; dwell "
             f"{res.dwell_s:.3g} s (settling {res.settle_s:g} s removed at each end of every stretch); "
             f"noise (overlapping Allan deviation of the baselines) {_f(res.noise_hz, '{:.4g}') or 'unknown'} Hz "
             f"at {_f(res.noise_tau_s, '{:.3g}') or '-'} s; {html.escape(threshold_text(res))}; placement "
             f"tolerance ±{res.placement_mm:g} mm; polarity {res.polarity}.</p>"]
    parts.append(_table(["target", "call", "evidence", "detection range", "curve fit", "power law",
                         "measured/predicted"], _target_rows(res)))
    unc = [[t.target] + row for t in res.targets for row in uncertainty_rows(t)]
    if unc:
        parts.append("<h3>Range uncertainty by source</h3><p>The 95 % interval with only that source on; "
                     "the share is of the summed squared widths.</p>")
        parts.append(_table(["target", "source", "interval alone", "width", "share"], unc))
    if res.reference_checks:
        verdict = {True: "agrees", False: "DISAGREES: check the polarity", None: "no clear call: not checked"}
        parts.append("<h3>Polarity check (reference targets)</h3>")
        parts.append(_table(["reference target", "declared", "reads", "verdict"],
                            [[c.target, c.declared, c.called or "not in the run", verdict[c.agrees]]
                             for c in res.reference_checks]))
    prow = [[p.target, f"{p.distance_mm:g}", f"{p.shift_hz:+.5f}", f"{p.stderr_hz:.5f}", p.n, p.repeats,
             "yes" if p.consistent else "NO"] for t in res.targets for p in t.points]
    parts.append("<h3>Calibration points</h3>")
    parts.append(_table(["target", "distance (mm)", "shift (Hz)", "stderr (Hz)", "frames", "repeats",
                         "repeats agree"], prow))
    if res.warnings:
        parts.append("<h3>Warnings</h3><ul>" + "".join(f"<li>{html.escape(w)}</li>" for w in res.warnings)
                     + "</ul>")
    for key, alt in (("curves", "shift vs distance"), ("timeseries", "time series"), ("residuals", "residuals")):
        if key in images:
            parts.append(_img(images[key], alt))
    return "\n".join(parts)


_STYLE = ("body{font-family:sans-serif;max-width:1100px;margin:1em auto;padding:0 1em;color:#222}"
          "table{border-collapse:collapse;margin:0.5em 0;font-size:0.9em}"
          "td,th{border:1px solid #bbb;padding:3px 6px;text-align:left;vertical-align:top}"
          "th{background:#eee}.caution{background:#fff6e0;border-left:4px solid #e0a000;padding:0.5em 1em}")


def report_html(results: list[CalibrationResult], images: list[dict[str, bytes]],
                compare_png: bytes | None = None) -> str:
    """The whole report as one HTML page with the plots embedded."""
    names = unique_names(results)
    parts = ["<!DOCTYPE html><html><head><meta charset='utf-8'>",
             "<title>coilshift calibration report</title>", f"<style>{_STYLE}</style></head><body>",
             "<h1>Calibration report</h1>",
             "<p>Shift = target-stretch mean minus the baseline interpolated in time between the target-free "
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
             "estimate and the interpolation model.</p>",
             "<div class='caution'><b>Cautions</b><ul>"
             + "".join(f"<li>{html.escape(c)}</li>" for c in (_classify.POLARITY_CAUTION,
                                                             _classify.MIXED_STEEL_CAUTION,
                                                             RANGE_CAUTION, FIELD_CAUTION))
             + "</ul></div>"]
    if len(results) > 1:
        rows = compare_runs(results, names)
        header = ["target"] + [f"{n}: range (mm)" for n in names] + [f"{n}: call" for n in names]
        body = []
        for row in rows:
            cells = [row.target]
            for n in names:
                r = row.range_mm.get(n)
                ci = row.range_ci_mm.get(n)
                cells.append("-" if n not in row.range_mm else "undefined" if r is None
                             else f"{r:.1f}" + (f" ({ci[0]:.1f}-{ci[1]:.1f})" if ci else ""))
            cells += [row.cls.get(n, "-") for n in names]
            body.append(cells)
        parts.append("<h2>Runs compared</h2>" + _table(header, body))
        if compare_png is not None:
            parts.append(_img(compare_png, "runs compared"))
    for res, imgs in zip(results, images):
        parts.append(_run_section(res, imgs))
    parts.append("</body></html>")
    return "\n".join(parts)


def write_outputs(results: list[CalibrationResult], out_dir: str | os.PathLike) -> list[Path]:
    """Write tables, JSON, plots and the report for one or more analysed runs into ``out_dir``.

    One run: files at the top of ``out_dir``. Several: one sub-folder per run (named after the
    run folder) plus ``compare.png``, ``comparison.json`` and a single ``report.html``.

    Returns
    -------
    paths written
    """
    from coilshift.analysis.report import plots_calibration as plots

    out_dir = Path(out_dir)
    names = unique_names(results)
    written: list[Path] = []
    all_images = []
    for name, res in zip(names, results):
        folder = out_dir if len(results) == 1 else out_dir / name
        folder.mkdir(parents=True, exist_ok=True)
        files = {"steps.csv": steps_csv(res), "points.csv": points_csv(res),
                 "result.json": json.dumps(to_jsonable(result_details(res)), indent=2) + "\n"}
        for fname, text in files.items():
            write_text_atomic(folder / fname, text)
            written.append(folder / fname)
        imgs = {"curves": plots.plot_curves(res, folder / "curves.png"),
                "timeseries": plots.plot_timeseries(res, folder / "timeseries.png"),
                "residuals": plots.plot_residuals(res, folder / "residuals.png")}
        written += [folder / f"{k}.png" for k in imgs]
        all_images.append(imgs)
    compare_png = None
    if len(results) > 1:
        compare_png = plots.plot_compare(results, names, out_dir / "compare.png")
        rows = [r.to_dict() for r in compare_runs(results, names)]
        write_text_atomic(out_dir / "comparison.json", json.dumps(to_jsonable({"runs": names, "targets": rows}),
                                                                  indent=2) + "\n")
        written += [out_dir / "compare.png", out_dir / "comparison.json"]
    write_text_atomic(out_dir / "report.html", report_html(results, all_images, compare_png))
    written.append(out_dir / "report.html")
    return written
