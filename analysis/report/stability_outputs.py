"""Stability outputs: the sigma(tau) and drift plots, the per-tau table (CSV), the summary (JSON)
and the one-file HTML report.

``coilshift stability -o`` and the demo write the same five files through
:func:`write_stability_outputs`, each atomically: a finished file appears whole or not at all.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Callable

import pandas as pd

from coilshift.logger.runfolder.atomic import write_json_atomic, write_text_atomic

from coilshift.analysis.report.plots_stability import plot_drift, plot_sigma_tau
from coilshift.analysis.stability.result import StabilityResult

SIGMA_TAU_PNG = "sigma_tau.png"
DRIFT_PNG = "drift.png"
TABLE_CSV = "stability.csv"
SUMMARY_JSON = "stability.json"
REPORT_HTML = "report.html"


def stability_csv(res: StabilityResult) -> str:
    """One row per averaging time: deviations with intervals, edf and terms, then the local slope
    with its 95 % interval and the noise type it identifies (empty where it identifies none)."""
    cols = {"tau_s": res.tau_s, "m": res.m}
    for k in ("adev", "oadev", "mdev", "tdev"):
        unit = "s" if k == "tdev" else "hz"
        cols[f"{k}_{unit}"] = getattr(res, f"{k}_{unit}")
        cols[f"{k}_lo_{unit}"] = res.ci_lo[k]
        cols[f"{k}_hi_{unit}"] = res.ci_hi[k]
        cols[f"{k}_edf"] = res.edf[k]
        cols[f"{k}_n_terms"] = res.n_terms[k]
    for k in ("adev", "oadev", "mdev"):
        cols[f"{k}_frac"] = res.frac(k)
    cols["within_frame"] = res.within_frame()
    nl = res.noise
    cols["noise_slope"], cols["noise_slope_lo"], cols["noise_slope_hi"] = nl.slope, nl.slope_lo, nl.slope_hi
    cols["noise_alpha"] = pd.array(nl.alpha, dtype="Int64")  # empty where no label
    cols["noise_type"] = [x or "" for x in nl.label]
    return pd.DataFrame(cols).to_csv(index=False, float_format="%.10g", lineterminator="\n")


def write_stability_outputs(result: StabilityResult, out_dir: str | os.PathLike,
                            summary: dict | None = None, prov=None, name_of=str,
                            progress: Callable[[str], None] | None = None) -> list[Path]:
    """Write ``sigma_tau.png``, ``drift.png``, ``stability.csv``, ``stability.json`` and
    ``report.html`` into ``out_dir``.

    Parameters
    ----------
    result : the analysis to write
    out_dir : an existing folder
    summary : what ``stability.json`` holds (default ``result.to_dict()``; a caller may add keys
        such as ``log_interrupted``); NaN and inf are written as null
    prov : the report's provenance (:func:`~coilshift.analysis.report.html_page.provenance`;
        default: now, this command line, the log named in the result)
    name_of : how the report names a setting (the command line passes its option names)
    progress : called with a few words as each stage begins ("drawing plots 1/2")

    Returns
    -------
    the paths written, in that order
    """
    out = Path(out_dir)
    from coilshift.analysis.report.stability_html import report_html

    say = progress or (lambda text: None)
    paths = [out / SIGMA_TAU_PNG, out / DRIFT_PNG, out / TABLE_CSV, out / SUMMARY_JSON, out / REPORT_HTML]
    say("drawing plots 1/2")
    plot_sigma_tau(result, paths[0])
    say("drawing plots 2/2")
    plot_drift(result, paths[1])
    say("writing the table and the report")
    write_text_atomic(paths[2], stability_csv(result))
    write_json_atomic(paths[3], result.to_dict() if summary is None else summary)
    write_text_atomic(paths[4], report_html(result, paths[0].read_bytes(), paths[1].read_bytes(), prov, name_of))
    return paths
