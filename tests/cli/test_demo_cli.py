"""``coilshift demo`` from a clean environment: no soundcard, one command, a report with plots."""

from __future__ import annotations

import json
import re
import subprocess
import sys

import pytest
from ttystream import on_a_terminal, stages

from coilshift.cli import cmd_demo
from coilshift.cli.main import main

# Run the demo in a fresh interpreter and prove that no audio library was loaded on the way.
_RUNNER = """
import sys
from coilshift.cli.main import main
rc = main(["demo", "-o", sys.argv[1]])
assert "sounddevice" not in sys.modules, "the demo must not need a soundcard library"
sys.exit(rc)
"""


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo") / "out"
    r = subprocess.run([sys.executable, "-c", _RUNNER, str(out)], capture_output=True, text=True, timeout=300,
                       env={"PATH": "/usr/bin:/bin", "HOME": str(out.parent), "LANG": "C.UTF-8"})
    return out, r


@pytest.mark.slow
def test_demo_runs_and_reports(demo):
    out, r = demo
    assert r.returncode == 0, r.stderr
    assert f"report: {out / 'report.html'}" in r.stdout
    assert "synthetic" in r.stdout
    # stderr is a pipe here: one plain line as each stage begins, never a redrawn line
    lines = r.stderr.splitlines()
    assert "tracking A-150" in lines and "writing the calibration report" in lines and "\r" not in r.stderr
    for rel in ("report.html", "summary.json", "calibration/report.html", "calibration/compare.png",
                "calibration/A-150/curves.png", "calibration/B-200/timeseries.png",
                "stability/sigma_tau.png", "stability/drift.png"):
        assert (out / rel).is_file() and (out / rel).stat().st_size > 1000, rel
    for png in out.rglob("*.png"):
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    html = (out / "report.html").read_text()
    assert "Synthetic data" in html and 'src="data:image/png;base64,' in html  # one file: images inline
    for rel in ("report.html", "calibration/report.html", "stability/report.html"):
        page = (out / rel).read_text()
        # the header says where the report came from: date, version, command line, inputs and checksums
        assert "coilshift demo -o" in page and "sha256" in page and "How to read this report" in page
        assert re.search(r"\d{4}-\d\d-\d\d \d\d:\d\d:\d\d UTC", page)
        assert "nan" not in re.sub(r"<[^>]+>|data:image/png;base64,[A-Za-z0-9+/=]+", "", page).lower().split()


@pytest.mark.slow
@pytest.mark.parametrize("rel", ["report.html", "calibration/report.html", "stability/report.html"])
def test_every_report_renders_in_a_browser(demo, rel, tmp_path):
    # headless Chromium at 1280 px: every image decodes, is inline, nothing reaches past the page
    import browser

    if browser.chromium() is None:
        pytest.skip("chromium is not installed (CI installs it: .ci/run)")
    out, r = demo
    assert r.returncode == 0, r.stderr
    got = browser.probe(out / rel, tmp_path)
    assert got["images"] >= 2, got
    assert got["broken"] == [] and got["not_inline"] == [] and got["external"] == [], got
    assert got["scroll_width"] <= got["inner_width"] == browser.WIDTH_PX, got
    assert got["wide"] == [], got


@pytest.mark.slow
def test_demo_calls_match_truth(demo):
    out, r = demo
    summary = json.loads((out / "summary.json").read_text())
    rows = summary["rows"]
    assert len(rows) == 10  # two coils x five test pieces
    # the truth of each call is the sign of the simulated bench's modelled shift (the models'
    # sphere response, Wait 1951): steel and ferrite fall, the conductors rise, nylon nothing
    want = {"steel ball": "ferrous", "ferrite slug": "ferrous", "aluminium ball": "non-ferrous",
            "brass ball": "non-ferrous", "nylon block": "indeterminate"}
    for row in rows:
        assert row["expected"] == want[row["target"]]
        assert row["measured"] == row["expected"], row
    # measured ranges against the simulated bench's exact range at the same threshold (the bench's
    # finite winding and finite balls from sim.fields, not the analysis's law): every true range
    # lies inside its 95 % interval, and within 10 % of the estimate (the calibration acceptance figure)
    for row in rows:
        if row["true_mm"] is not None and row["range_mm"] is not None:
            lo, hi = row["range_ci_mm"]
            assert lo <= row["true_mm"] <= hi, row
            assert row["range_mm"] == pytest.approx(row["true_mm"], rel=0.10), row
    assert summary["all_true_ranges_inside"]
    assert summary["polarity_warnings"] == []


def test_demo_refuses_non_empty_folder(tmp_path):
    (tmp_path / "keep.txt").write_text("mine")
    r = subprocess.run([sys.executable, "-m", "coilshift.cli.main", "demo", "-o", str(tmp_path)],
                       capture_output=True, text=True, timeout=60)
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and "not empty" in r.stderr
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.txt"]


def test_default_folder_never_reuses_a_full_one(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert str(cmd_demo._free_dir()) == "coilshift-demo"
    (tmp_path / "coilshift-demo").mkdir()
    assert str(cmd_demo._free_dir()) == "coilshift-demo"  # empty: fine to use
    (tmp_path / "coilshift-demo" / "report.html").write_text("old")
    assert str(cmd_demo._free_dir()) == "coilshift-demo-2"


def _fake_demo(out_dir, force, say, progress=None):
    # stands in for sim.demo.run_demo: the command's wiring of its two progress callbacks
    from pathlib import Path

    say("simulating A-150: 256 s at 48000 Hz")
    if progress is not None:
        progress("tracking A-150: 96/256 s of audio")
    say("writing the calibration report")
    Path(out_dir, "report.html").write_text("<html></html>")
    return {"report": "report.html", "calibration_report": "calibration/report.html", "rows": [],
            "stability": {"oadev_hz_at_1s": None}}


def test_progress_a_line_on_a_terminal_plain_lines_on_a_pipe(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr("coilshift.sim.demo.run_demo", _fake_demo)
    assert main(["demo", "-o", str(tmp_path / "pipe")]) == 0
    cap = capsys.readouterr()
    assert cap.err == "simulating A-150: 256 s at 48000 Hz\nwriting the calibration report\n"
    tty = on_a_terminal(monkeypatch)
    assert main(["demo", "-o", str(tmp_path / "tty")]) == 0
    assert stages(tty) == ["demo: simulating A-150: 256 s at 48000 Hz", "demo: tracking A-150: 96/256 s of audio",
                           "demo: writing the calibration report"]
    assert tty.getvalue().endswith("\r") and "report: " in capsys.readouterr().out
    for flag in ("--quiet", "--json"):
        quiet = on_a_terminal(monkeypatch)
        assert main(["demo", "-o", str(tmp_path / flag.strip("-")), flag]) == 0
        assert quiet.getvalue() == ""
        out = capsys.readouterr().out
        assert json.loads(out)["rows"] == [] if flag == "--json" else "report: " in out  # --json: one JSON object


def test_each_recording_reports_its_tracking(tmp_path):
    # a short session through the demo's own simulate-and-track step: the stage messages, and the
    # tracker's progress as seconds of audio, prefixed with the stage
    from coilshift.sim import demo

    session = demo.stability_script(5)
    session["session"]["steps"][0]["hold_s"] = 4.0
    said, steps = [], []
    plans = demo._record_sessions(tmp_path, {"short": session}, said.append, steps.append)
    assert said == ["simulating short: 4 s at 48000 Hz", "tracking short"]
    assert steps and all(re.fullmatch(r"tracking short: \d+/\d+ s of audio", s) for s in steps), steps
    assert steps[-1].split(": ")[1].split("/")[0] == steps[-1].split("/")[1].split()[0]  # ends at the end
    assert set(plans) == {"short"} and (tmp_path / "runs" / "short" / "log.csv").is_file()
