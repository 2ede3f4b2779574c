"""The demo's report.html: one file with every image embedded, a provenance header, how to read
it, the calls and ranges against the simulated truth, the stability figures and the cautions."""

from __future__ import annotations

import html
from pathlib import Path

from coilshift.analysis.report.html_page import howto, img, page, provenance, table

HOW_TO_READ = [
    "<b>Synthetic data</b>: the simulator made every recording, so the truth is known; the table says "
    "whether coilshift found it.",
    "<b>truth</b> is the call the simulated response deserves, <b>measured</b> the call the analysis made; "
    "a red cell is a wrong call.",
    "<b>range</b> is where the target's shift falls to the threshold, with its 95 % interval; <b>design</b> "
    "is what the coil and target models predict; <b>true</b> is the simulated bench's exact range; "
    "<b>true in CI</b> says whether the interval covers it (it should, about 95 times in 100).",
    "<b>B-200 / A-150</b> is the ratio of the two coils' ranges per target (above 1: the new coil reaches "
    "farther).",
    "The full calibration report (fits, residuals, time series, baseline noise) is "
    "<code>calibration/report.html</code>; the stability report is <code>stability/report.html</code>.",
]


def drift_text(st: dict) -> str:
    """The settled drift with its standard uncertainty, or why there is none."""
    if st.get("drift_hz_per_min") is None:
        return "not determined"
    return f"{st['drift_hz_per_min']:+.2g} +- {st['drift_u_hz_per_min']:.2g} Hz/min (1 sigma)"


def _png(path: Path) -> bytes | None:
    try:
        return path.read_bytes()
    except OSError:
        return None


def report_html(summary: dict, rows, results: dict, out: Path) -> str:
    """The page. ``out`` is the demo folder (the plots are read from it and embedded)."""
    from coilshift.sim.demo import CAUTION, _fmt_mm

    e = html.escape
    out = Path(out)
    thr = ", ".join(f"{k}: {v:.3g} Hz (noise {summary['noise_hz'][k]:.2g} Hz)"
                    for k, v in summary["thresholds_hz"].items())
    inside = {None: "-", True: "yes", False: "NO"}
    body_rows = []
    for r in rows:
        ci = f" ({r.range_ci_mm[0]:.0f}-{r.range_ci_mm[1]:.0f})" if r.range_ci_mm else ""
        body_rows.append([r.coil, r.target, r.expected, r.measured + ("" if r.expected == r.measured else " (WRONG)"),
                          f"{_fmt_mm(r.range_mm)}{ci}", r.range_basis or "-", _fmt_mm(r.design_mm),
                          _fmt_mm(r.true_mm), inside[r.true_inside]])
    gains = summary.get("range_gain_b200_over_a150") or {}
    st = summary["stability"]
    warm = "did not settle" if st["warmup_s"] is None else f"{st['warmup_s']:.0f} s"
    oadev = "-" if st["oadev_hz_at_1s"] is None else f"{1000 * st['oadev_hz_at_1s']:.2f} mHz"
    warnings = sorted({w for res in results.values() for w in res.warnings})
    recordings = sorted(out.glob("recordings/*/recording.wav"))
    body = [
        "<p class='caution'><b>Synthetic data.</b> Every recording here was made by the coilshift simulator "
        "(<code>recordings/*/script.json</code>, with the truth in <code>truth.json</code>); no detector was "
        "involved. The simulated bench differs from the design on purpose (cast aluminium ball, less permeable "
        "steel, capacitors a few percent off), as a real bench does.</p>",
        howto(HOW_TO_READ),
        "<h2>Calls and detection ranges</h2>",
        f"<p>Threshold per coil: {e(thr)}.</p>",
        table(["coil", "target", "truth", "measured", "range mm (95% CI)", "basis", "design mm", "true mm",
               "true in CI"], body_rows),
        "<p>'-': the range is undefined (no reading reaches the threshold, or the target gives no response).</p>",
        table(["target", "B-200 / A-150 range ratio"], [[k, f"{v:.2f}"] for k, v in gains.items()]),
    ]
    for rel, alt, head in (("calibration/compare.png", "shift against distance for both coils",
                            "Shift against distance, both coils"),
                           ("stability/sigma_tau.png", "Allan deviation against averaging time", None),
                           ("stability/drift.png", "frequency against time with drift line", None)):
        data = _png(out / rel)
        if rel.startswith("stability/sigma"):
            body.append(f"<h2>Stability of B-200</h2><p>Overlapping Allan deviation at 1 s: {oadev}; settled "
                        f"drift {drift_text(st)}; warm-up: {warm}.</p>")
        if head:
            body.append(f"<h2>{head}</h2>")
        if data is not None:
            body.append(img(data, alt))
    body += ["<h2>Warnings from the analysis</h2><ul>" + ("".join(f"<li>{e(w)}</li>" for w in warnings)
                                                          or "<li>none</li>") + "</ul>",
             f"<h2>Before you connect real hardware</h2><p class='caution'>{e(CAUTION)}</p>",
             "<h2>Files</h2><ul><li><code>recordings/</code>: simulated WAV files, markers, truth and scripts</li>"
             "<li><code>runs/</code>: the tracked run folders (log.csv, run.json, markers.csv)</li>"
             "<li><code>coils/</code>: the two coil descriptions (as designed)</li>"
             "<li><code>calibration/</code>, <code>stability/</code>: analysis outputs, each with its own "
             "report.html</li></ul>",
             f"<p>Made in {summary['elapsed_s']:.0f} s.</p>"]
    return page("coilshift demo: qualifying search coil B-200 against A-150", provenance(recordings), body)
