"""``coilshift events`` end to end on a simulated hand-pass run, and its refusals."""

import json
import subprocess
import sys

import numpy as np
import pytest
from ttystream import on_a_terminal, stages

from coilshift.sim.fields import Winding
from coilshift.sim.logsession import FrameNoise
from coilshift.sim.passes import HandPass, write_pass_session


def _cs(*args):
    return subprocess.run([sys.executable, "-m", "coilshift.cli.main", *map(str, args)], capture_output=True,
                          text=True, timeout=120)


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory):
    d = tmp_path_factory.mktemp("ev") / "run"
    w = Winding.from_design_mm(40, 150.0, 6.0, 6.0)
    passes = [HandPass(60.0, -0.3), HandPass(75.0, 0.2, profile="sweep")]
    write_pass_session(d, w, passes, 95.0, FrameNoise(white_hz=0.01, drift_hz_per_min=0.2),
                       np.random.default_rng(2))
    return d


def test_events_table_json_and_outputs(run_dir, tmp_path):
    out = tmp_path / "out"
    r = _cs("events", run_dir, "-o", out)
    assert r.returncode == 0, r.stderr
    assert "2 event(s)" in r.stdout and "ferrous" in r.stdout and "non-ferrous" in r.stdout
    assert {p.name for p in out.iterdir()} == {"events.csv", "events.json", "events.png", "report.html"}
    assert "data:image/png;base64," in (out / "report.html").read_text()
    j = json.loads(_cs("events", run_dir, "--json").stdout)
    kinds = [e["kind"] for e in j["events"]]
    assert kinds == ["ferrous", "non-ferrous"]
    assert j["detector"]["false_per_hour"] == 1.0
    inv = json.loads(_cs("events", run_dir, "--json", "--polarity", "inverted").stdout)
    assert [e["kind"] for e in inv["events"]] == ["non-ferrous", "ferrous"]


def test_events_refuses_bad_input_in_one_line(tmp_path):
    r = _cs("events", tmp_path / "missing")
    assert r.returncode == 2 and len(r.stderr.strip().splitlines()) == 1
    r = _cs("events", tmp_path, "--false-per-hour", "0")
    assert r.returncode == 2 and "--false-per-hour" in r.stderr


def test_progress_on_a_terminal_only(run_dir, tmp_path, capsys, monkeypatch):
    from coilshift.cli.main import main

    assert main(["events", str(run_dir), "-o", str(tmp_path / "a")]) == 0
    assert capsys.readouterr().err == ""  # captured stderr is not a terminal: no line
    tty = on_a_terminal(monkeypatch)
    assert main(["events", str(run_dir), "-o", str(tmp_path / "b"), "--json"]) == 0
    assert len(json.loads(capsys.readouterr().out)["events"]) == 2  # stdout stays exactly one JSON object
    assert stages(tty) == [f"events: {s}" for s in (
        "reading the log", "measuring the noise", "finding events",
        "finding events again with the noise of the quiet frames", "writing the tables", "drawing the plot",
        "writing the report")]
    assert tty.getvalue().endswith("\r") and "\n" not in tty.getvalue()
    quiet = on_a_terminal(monkeypatch)
    assert main(["events", str(run_dir), "--quiet"]) == 0
    assert quiet.getvalue() == ""
