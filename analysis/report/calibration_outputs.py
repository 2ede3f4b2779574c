"""Calibration outputs: tables (CSV), the full result (JSON), plots (PNG) and a one-file HTML
report with the plots embedded, so a practitioner can file or send a single file.

All files go through the atomic writers: a finished file appears whole or not at all.
"""

from __future__ import annotations

import csv
import io
import json
import os
from pathlib import Path
from typing import Callable

from coilshift.logger.runfolder.atomic import to_jsonable, write_text_atomic

from coilshift.analysis.calibration.run import CalibrationResult
from coilshift.analysis.calibration.summary import result_details
from coilshift.analysis.calibration.compare import compare_runs, unique_names
from coilshift.analysis.report.calibration_html import FIELD_CAUTION, RANGE_CAUTION, report_html  # noqa: F401
from coilshift.analysis.report.calibration_text import fit_text, prediction_text, range_text, threshold_text
from coilshift.analysis.report.html_page import Provenance
from coilshift.analysis.report.cells import cell_text

STEP_COLUMNS = ("target", "distance_mm", "shift_hz", "stderr_hz", "n", "start_s", "end_s", "baseline_hz",
                "bracketed", "unbracketed_shift_hz", "note")
POINT_COLUMNS = ("target", "distance_mm", "shift_hz", "stderr_hz", "n", "repeats", "repeat_chi2",
                 "repeats_consistent")




def steps_csv(res: CalibrationResult) -> str:
    """Every target stretch: ``target, distance_mm, shift_hz, stderr_hz, n`` then details."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(STEP_COLUMNS)
    for s in res.steps:
        w.writerow([s.target, cell_text(s.distance_mm, "{:g}"), cell_text(s.shift_hz, "{:.6f}"), cell_text(s.stderr_hz, "{:.6f}"), s.n,
                    cell_text(s.start_s, "{:.3f}"), cell_text(s.end_s, "{:.3f}"), cell_text(s.baseline_hz, "{:.6f}"),
                    "yes" if s.bracketed else "no", cell_text(s.unbracketed_shift_hz, "{:.6f}"), s.note])
    return buf.getvalue()


def points_csv(res: CalibrationResult) -> str:
    """Repeats combined: one row per target and distance."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(POINT_COLUMNS)
    for t in res.targets:
        for p in t.points:
            w.writerow([p.target, cell_text(p.distance_mm, "{:g}"), cell_text(p.shift_hz, "{:.6f}"), cell_text(p.stderr_hz, "{:.6f}"),
                        p.n, p.repeats, cell_text(p.chi2, "{:.3f}"), "yes" if p.consistent else "no"])
    return buf.getvalue()


def _call_text(t) -> str:
    return f"{t.cls} - {t.classification.reason}"


def summary_lines(res: CalibrationResult) -> list[str]:
    """Plain-text summary for the terminal."""
    lines = [f"run {res.source}: {len(res.steps)} target stretch(es), dwell {res.dwell_s:.3g} s, "
             f"baseline {res.baseline_hz:.4f} Hz",
             f"noise {cell_text(res.noise_hz, '{:.4g}') or 'unknown'} Hz at {cell_text(res.noise_tau_s, '{:.3g}') or '-'} s; "
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


#: the plots of one run: the report's name for it, its file, the function of plots_calibration that draws it
RUN_PLOTS = (("curves", "curves.png", "plot_curves"), ("timeseries", "timeseries.png", "plot_timeseries"),
             ("residuals", "residuals.png", "plot_residuals"), ("noise", "baseline_noise.png", "plot_baseline_noise"))


def write_outputs(results: list[CalibrationResult], out_dir: str | os.PathLike,
                  prov: Provenance | None = None, progress: Callable[[str], None] | None = None) -> list[Path]:
    """Write tables, JSON, plots and the report for one or more analysed runs into ``out_dir``.

    One run: files at the top of ``out_dir``. Several: one sub-folder per run (named after the
    run folder) plus ``compare.png``, ``comparison.json`` and a single ``report.html``.
    ``progress`` is called with a few words as each stage begins ("drawing plots 3/9").

    Returns
    -------
    paths written
    """
    say = progress or (lambda text: None)
    out_dir = Path(out_dir)
    names = unique_names(results)
    written: list[Path] = []
    all_images = []
    n_plots = len(RUN_PLOTS) * len(results) + (len(results) > 1)
    for k, (name, res) in enumerate(zip(names, results)):
        folder = out_dir if len(results) == 1 else out_dir / name
        folder.mkdir(parents=True, exist_ok=True)
        say("writing tables" + (f" of {name}" if len(results) > 1 else ""))
        files = {"steps.csv": steps_csv(res), "points.csv": points_csv(res),
                 "result.json": json.dumps(to_jsonable(result_details(res)), indent=2) + "\n"}
        for fname, text in files.items():
            write_text_atomic(folder / fname, text)
            written.append(folder / fname)
        from coilshift.analysis.report import plots_calibration as plots  # matplotlib: loaded when first drawn

        imgs = {}
        for j, (key, fname, draw) in enumerate(RUN_PLOTS):
            say(f"drawing plots {k * len(RUN_PLOTS) + j + 1}/{n_plots}")
            imgs[key] = getattr(plots, draw)(res, folder / fname)
            written.append(folder / fname)
        all_images.append(imgs)
    compare_png = None
    if len(results) > 1:
        say(f"drawing plots {n_plots}/{n_plots}")
        compare_png = plots.plot_compare(results, names, out_dir / "compare.png")
        rows = [r.to_dict() for r in compare_runs(results, names)]
        write_text_atomic(out_dir / "comparison.json", json.dumps(to_jsonable({"runs": names, "targets": rows}),
                                                                  indent=2) + "\n")
        written += [out_dir / "compare.png", out_dir / "comparison.json"]
    say("writing the report")
    write_text_atomic(out_dir / "report.html", report_html(results, all_images, compare_png, prov))
    written.append(out_dir / "report.html")
    return written
