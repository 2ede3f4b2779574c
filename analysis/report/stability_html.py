"""The stability report as one HTML page: provenance header, how to read it, the settling fit,
settled start and drift (the words ``coilshift stability`` prints), the per-tau table and the two
plots embedded."""

from __future__ import annotations

import html
import math

from coilshift.analysis.report import stability_text as _text
from coilshift.analysis.report.html_page import Provenance, howto, img, page, provenance, table
from coilshift.analysis.stability.result import StabilityResult

HOW_TO_READ = [
    "<b>Summary</b>: how much of the log was usable, the warm-up (exponential settling, chosen by the BIC), "
    "when the oscillator counts as settled, and the settled drift in Hz/min with its 1-sigma uncertainty.",
    "<b>Deviations</b>: for each averaging time tau, the Allan (ADEV), overlapping Allan (OADEV) and modified "
    "Allan (MDEV) deviations in Hz, the time deviation (TDEV) in s, and OADEV as a fraction of the nominal "
    "frequency; the interval is the chi-squared interval at the stated confidence. The noise type is named "
    "only where the local slope identifies one.",
    "<b>Reading time</b>: a calibration reading averaged over tau, minus its bracketing baselines, scatters by "
    "about 1.2 times OADEV at that tau (white frequency noise); a detection threshold of K times OADEV (K = 5 "
    "by default in 'analyze', 'calibrate' and 'target') is about 4 of those standard deviations.",
    "<b>Plots</b>: the deviations against tau with their intervals; the frequency against time with the "
    "fitted warm-up and drift, and the part of the log the deviations use.",
]


def _rows(res: StabilityResult) -> list[list[str]]:
    nl = res.noise
    inside = res.within_frame()
    rows = []
    for i, tau in enumerate(res.tau_s):
        slope = (f"{nl.slope[i]:+.2f} ({nl.slope_lo[i]:+.2f} to {nl.slope_hi[i]:+.2f})"
                 if math.isfinite(nl.slope[i]) else "-")
        rows.append([f"{tau:.4g}" + (" *" if inside[i] else ""), f"{res.adev_hz[i]:.4g}", f"{res.oadev_hz[i]:.4g}",
                     f"{res.ci_lo['oadev'][i]:.4g} to {res.ci_hi['oadev'][i]:.4g}", f"{res.mdev_hz[i]:.4g}",
                     f"{res.tdev_s[i]:.4g}", f"{res.oadev_hz[i] / res.nominal_hz:.3g}",
                     str(res.n_terms["oadev"][i]), slope, nl.label[i] or "-"])
    return rows


def report_html(res: StabilityResult, sigma_png: bytes, drift_png: bytes, prov: Provenance | None = None,
                name_of=str) -> str:
    """The page; ``name_of`` shows a setting's name (the command line passes its option names)."""
    prov = prov or provenance([res.source] if res.source else [])
    summary = [ln.strip() for ln in _text._header_lines(res, name_of) + _text._tempco_lines(res) if ln.strip()]
    table_head = [ln for ln in _text._table_lines(res)[:4] if ln.strip()]
    body = [howto(HOW_TO_READ), "<h2>Summary</h2><ul>"
            + "".join(f"<li>{html.escape(s)}</li>" for s in summary) + "</ul>",
            "<h2>Deviations</h2><p>" + "<br>".join(html.escape(s) for s in table_head) + "</p>",
            table(["tau (s)", "ADEV (Hz)", "OADEV (Hz)", f"OADEV {100 * res.confidence:.4g} % interval (Hz)",
                   "MDEV (Hz)", "TDEV (s)", "OADEV (fraction)", "terms", "slope (95 %)", "noise"], _rows(res),
                  numeric=("ADEV (Hz)", "OADEV (Hz)", "MDEV (Hz)", "TDEV (s)", "OADEV (fraction)", "terms"))]
    if res.within_frame().any():
        body.append(f"<p>* shorter than the tracker frame ({1000 * res.frame_s:.4g} ms): these rows show the "
                    "tracker's smoothing, not the oscillator.</p>")
    body += ["<h2>Deviation against averaging time</h2>", img(sigma_png, "Allan deviation against averaging time"),
             "<h2>Frequency against time</h2>", img(drift_png, "frequency against time with warm-up and drift")]
    return page("Stability report", prov, body)
