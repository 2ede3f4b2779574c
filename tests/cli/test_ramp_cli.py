"""``coilshift ramp`` end to end on a simulated run with fixed stops and a slide: text, JSON,
outputs, and the progress line (on a terminal only)."""

import json

import numpy as np
import pytest
from ttystream import on_a_terminal, stages

from coilshift.cli.main import main
from coilshift.sim.fields import Target, Winding, finite_target_shift_hz
from coilshift.sim.logsession import FrameNoise
from coilshift.sim.passes import Ramp, write_stops_and_ramp

THR = 0.05


@pytest.fixture(scope="module")
def slide(tmp_path_factory):
    w = Winding.from_design_mm(40, 150.0, 6.0, 6.0)
    tg = Target("sphere", 12.5e-3)
    amp = -THR / float(finite_target_shift_hz(w, tg, np.array([100.0]), 1.0)[0])
    run = tmp_path_factory.mktemp("ramp") / "run"
    _, rt = write_stops_and_ramp(run, "ball", (30.0, 56.0, 113.0, 160.0), Ramp("ball", 160.0, 30.0, 60.0, 40.0, 10.0, 1.0),
                                 lambda d: finite_target_shift_hz(w, tg, d, amp), FrameNoise(white_hz=0.003),
                                 np.random.default_rng(5))
    return run, f"{rt.start_s},{rt.end_s},ball,160,30"


def test_text_json_and_outputs(slide, tmp_path, capsys):
    run, spec = slide
    assert main(["ramp", str(run), "--ramp", spec, "--threshold-hz", str(THR), "-o", str(tmp_path / "o")]) == 0
    out, err = capsys.readouterr()
    assert out.startswith("ramp ball: 160 -> 30 mm") and err.count("\n") <= 1  # at most the note of what was written
    assert {p.name for p in (tmp_path / "o").iterdir()} == {"ramp.json", "ramp_points.csv"}
    assert main(["ramp", str(run), "--ramp", spec, "--threshold-hz", str(THR), "--json"]) == 0
    j = json.loads(capsys.readouterr().out)
    assert [r["target"] for r in j["ramps"]] == ["ball"]
    assert len(j["ramps"][0]["points"]) == 16 and "fixed_stops_range" in j["ramps"][0]  # the run has fixed stops


def test_progress_on_a_terminal_only(slide, capsys, monkeypatch):
    run, spec = slide
    args = ["ramp", str(run), "--ramp", spec, "--threshold-hz", str(THR), "--bootstrap", "0"]
    assert main(args) == 0
    assert capsys.readouterr().err == ""  # captured stderr is not a terminal: no line
    tty = on_a_terminal(monkeypatch)
    assert main(args + ["--json"]) == 0
    json.loads(capsys.readouterr().out)  # stdout stays exactly one JSON object
    drawn = stages(tty)
    assert drawn[0].startswith("ramp: fixed stops: ") and drawn[-1] == "ramp: slide of ball: points, fits and range interval"
    assert tty.getvalue().endswith("\r")  # the line is cleared before anything else is written
    quiet = on_a_terminal(monkeypatch)
    assert main(args + ["--quiet"]) == 0
    assert quiet.getvalue() == ""
