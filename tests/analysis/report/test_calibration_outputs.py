"""Calibration outputs: CSV columns, the documented JSON shape, one-file HTML report, plots."""

from __future__ import annotations

import base64
import csv
import io
import json
import re

import pytest
from synthcal import make_run

from coilshift.analysis.calibration.run import analyse_run
from coilshift.analysis.calibration.summary import result_summary
from coilshift.analysis.report.calibration_outputs import write_outputs
from coilshift.logger.errors import InputError

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948, section 5.2)


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory):
    d = tmp_path_factory.mktemp("cal") / "bench"
    make_run(d, {"nail": (-25.0, 25.0), "foil": (9.0, 25.0), "plastic": lambda d: 0.0},
             distances_mm=(10, 20, 40, 80), dwell_s=4.0, noise_hz=0.03, phi=0.8, drift_hz_per_min=0.3, seed=21)
    return d


TARGET_KEYS = {"target", "class", "class_z", "class_p", "seen", "points", "fit", "power_law", "range_mm",
               "range_ci_mm", "range_basis", "range_dominant"}
FIT_KEYS = {"model", "chi2_dof", "dof", "p_value", "accepted"}


def test_summary_has_exactly_the_documented_shape(run_dir):
    # the keys docs/calibration.md documents for --json
    res = analyse_run(run_dir, n_boot=100)
    s = result_summary(res)
    assert set(s) == {"targets", "threshold_hz", "threshold_edf", "noise_hz", "placement_mm"}
    assert [t["target"] for t in s["targets"]] == ["nail", "foil", "plastic"]
    for t in s["targets"]:
        assert set(t) == TARGET_KEYS
        assert all(set(p) == {"distance_mm", "shift_hz", "stderr_hz"} for p in t["points"])
    cls = {t["target"]: t["class"] for t in s["targets"]}
    assert cls == {"nail": "ferrous", "foil": "non-ferrous", "plastic": "indeterminate"}
    nail = s["targets"][0]
    assert nail["seen"] and set(nail["fit"]) == FIT_KEYS and nail["range_basis"] in ("measured", "extrapolated")
    assert nail["range_dominant"] in ("points", "placement", "threshold", "model")
    plastic = s["targets"][2]
    assert plastic["range_mm"] is None and plastic["range_ci_mm"] is None
    # a target that is not seen has no fit at all, not a fit to noise
    assert not plastic["seen"] and plastic["fit"] is None and plastic["power_law"] is None
    # threshold is the documented default: 5 x the noise
    assert s["threshold_hz"] == pytest.approx(5 * s["noise_hz"])
    json.dumps(s, allow_nan=False)


def test_outputs_written_and_report_is_one_self_contained_file(run_dir, tmp_path):
    res = analyse_run(run_dir, n_boot=50)
    paths = write_outputs([res], tmp_path)
    names = sorted(p.name for p in paths)
    assert names == sorted(["steps.csv", "points.csv", "result.json", "curves.png", "timeseries.png",
                            "residuals.png", "baseline_noise.png", "report.html"])
    for png in ("curves.png", "timeseries.png", "residuals.png", "baseline_noise.png"):
        assert (tmp_path / png).read_bytes()[:8] == PNG_MAGIC
    rows = list(csv.reader(io.StringIO((tmp_path / "steps.csv").read_text())))
    assert rows[0][:5] == ["target", "distance_mm", "shift_hz", "stderr_hz", "n"]
    assert len(rows) == 1 + 12
    page = (tmp_path / "report.html").read_text()
    imgs = re.findall(r'src="data:image/png;base64,([A-Za-z0-9+/=]+)"', page)
    assert len(imgs) == 4 and all(base64.b64decode(i)[:8] == PNG_MAGIC for i in imgs)
    assert "src=\"http" not in page and "src=\"file" not in page  # nothing outside the file
    # the polarity caution and the field caution are in every report
    assert "--polarity inverted" in page and "Nyquist" in page and "local law" in page
    details = json.loads((tmp_path / "result.json").read_text())
    assert details["polarity"] == "normal" and details["targets"][0]["fit"]["model"] == "dipole"
    # every fit reports chi2/dof and its p-value, in the JSON and in the report
    fit = details["targets"][0]["fit"]
    assert {"chi2_red", "p_value", "accepted", "fixed", "not_determined"} <= set(fit)
    assert "chi2/dof = " in page and ", p = " in page
    assert "Range uncertainty by source" in page


def test_run_folder_is_never_modified(run_dir, tmp_path):
    before = {p.name: p.read_bytes() for p in run_dir.iterdir()}
    write_outputs([analyse_run(run_dir, n_boot=20)], tmp_path / "out")
    assert {p.name: p.read_bytes() for p in run_dir.iterdir()} == before


def test_two_runs_compared(run_dir, tmp_path):
    other = tmp_path / "bench2"
    make_run(other, {"nail": (-40.0, 35.0)}, distances_mm=(10, 20, 40, 80), dwell_s=4.0, seed=22)
    res = [analyse_run(run_dir, n_boot=20), analyse_run(other, n_boot=20)]
    write_outputs(res, tmp_path / "out")
    out = tmp_path / "out"
    assert (out / "compare.png").read_bytes()[:8] == PNG_MAGIC
    assert (out / "bench" / "steps.csv").is_file() and (out / "bench2" / "steps.csv").is_file()
    comp = json.loads((out / "comparison.json").read_text())
    nail = next(r for r in comp["targets"] if r["target"] == "nail")
    assert set(nail["range_mm"]) == {"bench", "bench2"}
    # the bigger coil (R 35 mm, larger A) reaches farther: closed form R sqrt((|A|/T)^(1/3) - 1)
    assert nail["range_mm"]["bench2"] > nail["range_mm"]["bench"]


def test_reference_target_disagreement_is_flagged(run_dir):
    res = analyse_run(run_dir, n_boot=0, reference={"nail": "non-ferrous"})
    assert any("declared non-ferrous" in w and "--polarity inverted" in w for w in res.warnings)
    flipped = analyse_run(run_dir, n_boot=0, polarity="inverted", reference={"nail": "non-ferrous"})
    assert flipped.target("nail").cls == "non-ferrous"
    assert not any("declared" in w for w in flipped.warnings)


@pytest.mark.parametrize("kwargs, problem", [
    ({"polarity": "sideways"}, "polarity"),
    ({"threshold_hz": -1.0}, "threshold"),
    ({"reference": {"nail": "gold"}}, "ferrous or non-ferrous"),
    ({"target_models": {"nail": object()}}, "need a coil"),
])
def test_bad_options_refused(run_dir, kwargs, problem):
    with pytest.raises(InputError, match=problem):
        analyse_run(run_dir, **kwargs)


def test_run_without_markers_is_refused(tmp_path):
    import numpy as np

    from coilshift.logger.runfolder.frames import FrameTable
    from coilshift.logger.runfolder.folders import prepare_run_dir
    from coilshift.logger.runfolder.writer import RunWriter

    d = prepare_run_dir(tmp_path / "bare")
    with RunWriter(d, {"start_utc": "2026-12-01T00:00:00.000Z"}) as w:
        t = np.arange(100) * 0.02
        w.append(FrameTable(t, np.full(100, 1000.0), np.zeros(100), np.zeros(100)))
    with pytest.raises(InputError, match="no markers"):
        analyse_run(d)


def test_stretches_without_usable_frames_are_reported(tmp_path):
    # blank the tone (NaN frequency) through one target stretch: it is left out with a warning
    import numpy as np
    import pandas as pd

    truth = make_run(tmp_path / "r", {"nail": (-25.0, 25.0)}, distances_mm=(10, 20, 40), dwell_s=4.0, seed=23)
    log = pd.read_csv(tmp_path / "r" / "log.csv", dtype={"flags": str}, keep_default_na=False)
    m = next(mk for mk in truth.markers if mk.target == "nail" and mk.distance_mm == 20.0)
    sel = (log["t_s"] >= m.start_s) & (log["t_s"] < m.end_s)
    log["freq_hz"] = log["freq_hz"].astype(str)
    log.loc[sel, "freq_hz"] = ""
    log.loc[sel, "flags"] = "no_tone"
    log.to_csv(tmp_path / "r" / "log.csv", index=False)
    res = analyse_run(tmp_path / "r", n_boot=0)
    assert [p.distance_mm for p in res.target("nail").points] == [10.0, 40.0]
    assert any("1 target and 0 baseline stretch(es) left out" in w for w in res.warnings)
    assert np.isfinite(res.target("nail").points[0].shift_hz)


@pytest.mark.parametrize("drift, warned", [(0.0, False), (1.0, True)])
def test_drift_dominated_threshold_is_pointed_out(tmp_path, drift, warned):
    # white-ish noise: the Allan deviation at the dwell is about the error of a dwell mean (NIST
    # SP 1065, white FM), so comparable to a step's error; a drift of 1 Hz/min adds about
    # drift x dwell / sqrt(2) = 0.24 Hz at a 20 s dwell, far above the step errors (~1e-3 Hz)
    make_run(tmp_path / "r", {"nail": (-25.0, 25.0)}, distances_mm=(10, 40), dwell_s=20.0, noise_hz=0.02,
             phi=0.5, drift_hz_per_min=drift, seed=24)
    res = analyse_run(tmp_path / "r", n_boot=0)
    assert any("drift or slow wander" in w for w in res.warnings) is warned


def test_target_without_significant_shift_gets_no_curve_range_or_advice(run_dir, tmp_path):
    # the plastic part reads pure noise: no fit line, no range, no "move closer"
    from coilshift.analysis.report import plots_calibration
    from coilshift.analysis.report.calibration_outputs import summary_lines
    from coilshift.analysis.report.figures import subplots

    res = analyse_run(run_dir, n_boot=0)
    plastic = res.target("plastic")
    assert plastic.fit is None and plastic.power_fit is None and plastic.range.range_mm is None
    text = "\n".join(summary_lines(res))
    block = text[text.index("  plastic:"):]
    assert "fit" not in block.split("range:")[0].split("\n", 1)[1] and "closer" not in block
    fig, ax = subplots()
    import numpy as np

    grid = np.geomspace(5, 100, 50)
    plots_calibration._draw_target(ax, plastic, "C0", grid, threshold_hz=res.threshold_hz)
    curves = [ln for ln in ax.lines if len(ln.get_xdata()) == grid.size]
    assert curves == []  # the points with their error bars only, no curve over the distance grid
    assert any("not detected" in ln.get_label() for ln in ax.lines)
    # the nail, seen and fitted, does get its curve: the check above can fail
    fig, ax = subplots()
    plots_calibration._draw_target(ax, res.target("nail"), "C1", grid, threshold_hz=res.threshold_hz)
    assert res.target("nail").fit.accepted
    assert any(len(ln.get_xdata()) == grid.size for ln in ax.lines)


def test_rejected_fixed_and_not_determined_are_printed_as_such():
    import numpy as np

    from coilshift.analysis.calibration.curvefit import dipole_shift, fit_dipole, fit_power_law
    from coilshift.analysis.report.calibration_text import fit_text, param_text

    d = np.array([10.0, 20.0, 40.0, 80.0])
    # a power law through single-loop points measured precisely: rejected by its chi2 test
    y = dipole_shift(d, -20.0, 25.0)
    power = fit_power_law(d, y, np.full(4, 1e-3))
    assert not power.accepted and "REJECTED at the 1 % level" in fit_text(power)
    # the coil's radius held fixed: says so and where from, never "+- 0"
    fixed = fit_dipole(d, y, np.full(4, 1e-3), radius_mm=25.0)
    assert param_text(fixed, "radius_mm") == "R = 25 mm (fixed: coil file)" and "+-0" not in fit_text(fixed)
    # an amplitude whose error exceeds it
    noisy = fit_power_law(d, [0.02, -0.01, 0.005, 0.001], np.full(4, 0.05))
    assert param_text(noisy, "c_hz").startswith("C not determined")
    assert "accepted" in fit_text(fixed) and "p = " in fit_text(fixed)


def test_chi2_rejected_fit_is_marked_and_not_drawn(tmp_path):
    # a response falling as d^-1.5 (a long target, not a small one) cannot be followed by the
    # single-loop law; measured with 10 mHz noise and exact placements it is rejected, and then it
    # is neither drawn nor used to extrapolate, but the range between the points still stands
    import numpy as np

    from coilshift.analysis.report import plots_calibration
    from coilshift.analysis.report.calibration_outputs import summary_lines
    from coilshift.analysis.report.figures import subplots

    make_run(tmp_path / "r", {"rod": lambda d: -3.0 * (10.0 / d) ** 1.5}, distances_mm=(10, 20, 40, 80, 160),
             dwell_s=4.0, noise_hz=0.01, phi=0.5, seed=25)
    res = analyse_run(tmp_path / "r", n_boot=200, threshold_hz=0.3, placement_mm=0.0)
    rod = res.target("rod")
    assert not rod.fit.accepted and rod.range.basis == "measured"
    assert "REJECTED" in "\n".join(summary_lines(res))
    grid = np.geomspace(5, 200, 60)
    fig, ax = subplots()
    plots_calibration._draw_target(ax, rod, "C0", grid, threshold_hz=res.threshold_hz)
    assert not any(len(ln.get_xdata()) == grid.size and "single-loop" in ln.get_label() for ln in ax.lines)
    # the power law, which does follow d^-1.5, passes its test and is drawn
    assert rod.power_fit.accepted and any(len(ln.get_xdata()) == grid.size for ln in ax.lines)
    assert any("REJECTED" in ln.get_label() for ln in ax.lines)
