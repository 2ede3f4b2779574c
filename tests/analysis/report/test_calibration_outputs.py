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


def test_summary_has_exactly_the_documented_shape(run_dir):
    res = analyse_run(run_dir, n_boot=100)
    s = result_summary(res)
    assert set(s) == {"targets", "threshold_hz", "noise_hz"}
    assert [t["target"] for t in s["targets"]] == ["nail", "foil", "plastic"]
    for t in s["targets"]:
        assert set(t) == {"target", "class", "points", "range_mm", "range_ci_mm"}
        assert all(set(p) == {"distance_mm", "shift_hz", "stderr_hz"} for p in t["points"])
    cls = {t["target"]: t["class"] for t in s["targets"]}
    assert cls == {"nail": "ferrous", "foil": "non-ferrous", "plastic": "indeterminate"}
    plastic = s["targets"][2]
    assert plastic["range_mm"] is None and plastic["range_ci_mm"] is None
    # threshold is the documented default: 5 x the noise
    assert s["threshold_hz"] == pytest.approx(5 * s["noise_hz"])
    json.dumps(s, allow_nan=False)


def test_outputs_written_and_report_is_one_self_contained_file(run_dir, tmp_path):
    res = analyse_run(run_dir, n_boot=50)
    paths = write_outputs([res], tmp_path)
    names = sorted(p.name for p in paths)
    assert names == sorted(["steps.csv", "points.csv", "result.json", "curves.png", "timeseries.png",
                            "residuals.png", "report.html"])
    for png in ("curves.png", "timeseries.png", "residuals.png"):
        assert (tmp_path / png).read_bytes()[:8] == PNG_MAGIC
    rows = list(csv.reader(io.StringIO((tmp_path / "steps.csv").read_text())))
    assert rows[0][:5] == ["target", "distance_mm", "shift_hz", "stderr_hz", "n"]
    assert len(rows) == 1 + 12
    page = (tmp_path / "report.html").read_text()
    imgs = re.findall(r'src="data:image/png;base64,([A-Za-z0-9+/=]+)"', page)
    assert len(imgs) == 3 and all(base64.b64decode(i)[:8] == PNG_MAGIC for i in imgs)
    assert "src=\"http" not in page and "src=\"file" not in page  # nothing outside the file
    # the polarity caution and the field caution are in every report
    assert "--polarity inverted" in page and "Nyquist" in page and "local law" in page
    details = json.loads((tmp_path / "result.json").read_text())
    assert details["polarity"] == "normal" and details["targets"][0]["fit"]["model"] == "dipole"


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
