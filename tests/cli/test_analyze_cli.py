"""``coilshift analyze`` and ``coilshift calibrate`` from the command line."""

from __future__ import annotations

import importlib.util
import io
import json
import math
import sys
from pathlib import Path

import numpy as np
import pytest

from coilshift.cli.main import main


import synthcal  # noqa: E402  (tests/ is on sys.path, see tests/conftest.py)
from ttystream import on_a_terminal, stages  # noqa: E402


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    base = tmp_path_factory.mktemp("runs")
    synthcal.make_run(base / "small", {"washer": (-20.0, 25.0), "foil": (8.0, 25.0)}, distances_mm=(10, 20, 40, 80),
                      dwell_s=4.0, noise_hz=0.02, drift_hz_per_min=0.3, seed=31)
    synthcal.make_run(base / "large", {"washer": (-35.0, 40.0)}, distances_mm=(10, 20, 40, 80),
                      dwell_s=4.0, noise_hz=0.02, seed=32)
    return base


def _run(capsys, *argv):
    rc = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return rc, out, err


def test_json_is_one_object_of_the_documented_shape(runs, capsys):
    rc, out, err = _run(capsys, "analyze", runs / "small", "--json", "--bootstrap", "50")
    assert rc == 0
    obj = json.loads(out)
    assert set(obj) == {"targets", "threshold_hz", "threshold_edf", "noise_hz", "placement_mm"}
    calls = {t["target"]: t["class"] for t in obj["targets"]}
    # common practice: ferrous lowers the frequency (washer, A < 0), non-ferrous raises it (foil)
    assert calls == {"washer": "ferrous", "foil": "non-ferrous"}
    for t in obj["targets"]:
        assert set(t) == {"target", "class", "class_z", "class_p", "seen", "points", "fit", "power_law", "range_mm",
                          "range_ci_mm", "range_basis", "range_dominant"}
        lo, hi = t["range_ci_mm"]
        assert lo <= t["range_mm"] <= hi


def test_several_runs_add_a_runs_list(runs, capsys):
    rc, out, _ = _run(capsys, "analyze", runs / "small", runs / "large", "--json", "--bootstrap", "0")
    obj = json.loads(out)
    assert rc == 0 and [r["run"] for r in obj["runs"]] == ["small", "large"]
    for r in obj["runs"]:
        assert set(r) == {"run", "targets", "threshold_hz", "threshold_edf", "noise_hz", "placement_mm"}
    washer = next(c for c in obj["comparison"] if c["target"] == "washer")
    assert set(washer["range_mm"]) == {"small", "large"}


def test_output_folder_and_refusal_to_overwrite(runs, tmp_path, capsys):
    out_dir = tmp_path / "out"
    rc, out, _ = _run(capsys, "analyze", runs / "small", "-o", out_dir, "--bootstrap", "20")
    assert rc == 0 and "washer: ferrous" in out
    assert (out_dir / "report.html").is_file() and (out_dir / "steps.csv").is_file()
    before = (out_dir / "report.html").read_bytes()
    rc, _, err = _run(capsys, "analyze", runs / "small", "-o", out_dir)
    assert rc == 2 and err.count("\n") == 1 and "not empty" in err
    assert (out_dir / "report.html").read_bytes() == before


@pytest.mark.parametrize("argv, problem", [
    (["analyze", "{tmp}/nothing"], "no such file or folder"),
    (["analyze", "{runs}/small", "--target-model", "washer=steel:diameter_mm=10"], "needs --coil"),
    (["analyze", "{runs}/small", "{runs}/large", "--markers", "{tmp}/m.csv"], "one run"),
    (["analyze", "{runs}/small", "--coil", "{tmp}/missing.json"], "missing.json"),
])
def test_bad_input_is_one_line(runs, tmp_path, capsys, argv, problem):
    argv = [a.format(tmp=tmp_path, runs=runs) for a in argv]
    rc, _, err = _run(capsys, *argv)
    assert rc == 2 and err.count("\n") == 1 and problem in err and "Traceback" not in err


def test_bare_csv_log_with_separate_markers(tmp_path, runs, capsys):
    # any CSV with t_s and freq_hz, markers given apart: same numbers as the run folder
    import pandas as pd

    tab = pd.read_csv(runs / "small" / "log.csv", usecols=["t_s", "freq_hz"])
    tab.to_csv(tmp_path / "export.csv", index=False)
    rc, out, _ = _run(capsys, "analyze", tmp_path / "export.csv", "--markers", runs / "small" / "markers.csv",
                      "--json", "--bootstrap", "0")
    ref = json.loads(_run(capsys, "analyze", runs / "small", "--json", "--bootstrap", "0")[1])
    got = json.loads(out)
    assert rc == 0
    a = [p["shift_hz"] for t in got["targets"] for p in t["points"]]
    b = [p["shift_hz"] for t in ref["targets"] for p in t["points"]]
    assert a == pytest.approx(b, abs=2e-6)  # log.csv keeps 6 decimals


def test_prediction_overlay_reports_measured_over_predicted(tmp_path, capsys):
    # the run's true shifts are 0.7 x the models helper's prediction for this coil and target;
    # the reported scale must find 0.7 within 3 of its stated errors
    from coilshift.analysis.models.coil import analyse_coil, load_coil
    from coilshift.analysis.models.target import parse_target_spec, predicted_shift_hz

    coil_file = tmp_path / "coil.json"
    coil_file.write_text(json.dumps({"turns": 40, "inner_diameter_mm": 60, "length_mm": 6, "depth_mm": 4,
                                     "awg": 26, "cap_nf": 47}))
    coil = analyse_coil(load_coil(coil_file))
    spec_text = "steel:diameter_mm=15"
    spec = parse_target_spec(spec_text)
    f0 = 20000.0
    pred = np.asarray(predicted_shift_hz(coil, spec, np.array([10.0]), f0))[0]
    assert pred < 0  # a steel ball lowers the frequency (REFERENCES section 8, permeable limit)
    scale = 5.0 / abs(pred)  # keep the synthetic shifts in a realistic few-hertz range
    synthcal.make_run(tmp_path / "run", {"ball": lambda d: 0.7 * scale * float(
        np.asarray(predicted_shift_hz(coil, spec, np.array([float(d)]), f0))[0])},
        distances_mm=(10, 20, 40, 80), dwell_s=4.0, noise_hz=0.01, f0_hz=f0, seed=33)
    out_dir = tmp_path / "out"
    # the prediction is evaluated at the run's baseline frequency (f0): the factor `scale` is
    # divided out again by comparing against scale x prediction
    rc, _, _ = _run(capsys, "analyze", tmp_path / "run", "--coil", coil_file, "--target-model",
                    f"ball={spec_text}", "-o", out_dir, "--bootstrap", "0")
    assert rc == 0
    item = json.loads((out_dir / "result.json").read_text())["targets"][0]
    got = item["prediction"]["scale"] / scale
    assert abs(got - 0.7) <= 3 * item["prediction"]["scale_err"] / scale
    # with the coil known the fit is the finite-winding law of that coil (shape fixed by the file)
    assert item["fit"]["model"] == "winding" and item["fit"]["fixed"]["shape"].startswith("coil file")
    assert item["prediction"]["freq_hz"] == pytest.approx(f0, abs=0.01)  # the run's baseline
    assert f"{item['prediction']['scale']:.3g}±" in (out_dir / "report.html").read_text()


def test_guided_calibration_end_to_end_on_a_paced_synthetic_tone(tmp_path, capsys, monkeypatch):
    # a paced synthetic tone stands in for the soundcard; Enter is pressed three times
    monkeypatch.setattr("sys.stdin", io.StringIO("\n\n\n"))
    run_dir = tmp_path / "live"
    rc, out, err = _run(capsys, "calibrate", "-o", run_dir, "--target", "coin", "--distances", "1cm",
                        "--dwell", "0.5", "--settle-s", "0.1", "--synthetic", "5000", "--baseline-s", "0.5",
                        "--threshold-hz", "0.5", "--bootstrap", "0", "--json")
    assert rc == 0, err
    assert "CAUTION" in err and "line input" in err
    obj = json.loads(out)
    assert obj["targets"][0]["target"] == "coin" and obj["targets"][0]["points"][0]["distance_mm"] == 10.0
    # a constant tone: no shift, so no call (the coin is simulated by nothing)
    assert obj["targets"][0]["class"] == "indeterminate"
    rows = (run_dir / "markers.csv").read_text().splitlines()
    assert rows[0] == "start_s,end_s,target,distance_mm" and len(rows) == 4
    starts = [float(r.split(",")[0]) for r in rows[1:]]
    ends = [float(r.split(",")[1]) for r in rows[1:]]
    # settled stretches: each starts at least --settle after the previous one ended
    assert all(s - e >= 0.1 - 0.03 for s, e in zip(starts[1:], ends[:-1]))
    assert math.isclose(ends[1] - starts[1], 0.5, abs_tol=0.05)


def test_a_terminal_is_told_each_stage(runs, tmp_path, capsys, monkeypatch):
    tty = on_a_terminal(monkeypatch)
    rc, out, err = _run(capsys, "analyze", runs / "small", runs / "large", "-o", tmp_path / "out", "--bootstrap", "0")
    assert rc == 0 and err == ""
    fit = "fitting {} and its range interval"
    runs_part = [f"run {i} of 2 ({name}): {step}" for i, name, targets in ((1, "small", ("washer", "foil")),
                                                                           (2, "large", ("washer",)))
                 for step in ("reading the log", "steps, baselines and noise", *(fit.format(t) for t in targets))]
    plots = [f"drawing plots {k}/9" for k in range(1, 10)]
    outputs = ["writing tables of small", *plots[:4], "writing tables of large", *plots[4:], "writing the report"]
    assert stages(tty) == [f"analyze: {s}" for s in runs_part + outputs]
    # the line is blanked before the summary is printed, and stdout never sees it
    assert tty.getvalue().endswith("\r") and "\n" not in tty.getvalue()
    assert out.startswith("run ") and "\r" not in out


def test_no_progress_on_a_pipe_or_with_quiet_and_json_stays_json(runs, tmp_path, capsys, monkeypatch):
    rc, out, err = _run(capsys, "analyze", runs / "small", "-o", tmp_path / "a", "--bootstrap", "0")
    assert rc == 0 and err == ""  # stderr is not a terminal here (captured)
    tty = on_a_terminal(monkeypatch)
    rc, _, _ = _run(capsys, "analyze", runs / "small", "-o", tmp_path / "b", "--bootstrap", "0", "--quiet")
    assert rc == 0 and tty.getvalue() == ""
    rc, out, _ = _run(capsys, "analyze", runs / "small", "--json", "--bootstrap", "0")
    assert rc == 0 and "analyze: small: reading the log" in tty.getvalue()  # the line is on stderr only
    assert json.loads(out)["targets"] and out.lstrip().startswith("{") and out.rstrip().endswith("}")
