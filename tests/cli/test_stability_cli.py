"""``coilshift stability`` end to end: table, JSON, output folder, the part of the log used,
a calibration log's baselines, figures that are not determined, refusals."""

from __future__ import annotations

import json

import numpy as np
import pytest
from ttystream import on_a_terminal, stages

from coilshift.analysis.stability.analyse import analyse_stability
from coilshift.cli.main import main
from coilshift.logger.runfolder import flags
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.folders import prepare_run_dir
from coilshift.logger.runfolder.markers import Marker, markers_to_csv
from coilshift.logger.runfolder.writer import RunWriter, write_markers_copy


def _frames(n=3000, tau0=0.02, seed=0):
    rng = np.random.default_rng(seed)
    t = np.arange(n) * tau0 + tau0 / 2
    f = 25000 + 0.05 * rng.standard_normal(n) + 0.2 / 60 * t
    fl = np.zeros(n, dtype=np.int64)
    fl[1200:1230] = flags.NO_TONE
    f[1200:1230] = np.nan
    return FrameTable(t, f, np.full(n, -12.0), np.full(n, 40.0), fl)


@pytest.fixture
def run_dir(tmp_path):
    d = prepare_run_dir(tmp_path / "run")
    with RunWriter(d, {"source": {"kind": "test"}, "start_utc": "2026-12-01T12:00:00.000Z",
                        "tracker": {"frame_ms": 85.0, "hop_ms": 20.0}}) as w:
        w.append(_frames())
    return d


@pytest.fixture
def bare_csv(tmp_path):
    fr = _frames(seed=1)
    p = tmp_path / "export.csv"
    rows = [f"{t:.6f},{'' if np.isnan(f) else f'{f:.6f}'}" for t, f in zip(fr.t_s, fr.freq_hz)]
    p.write_text("t_s,freq_hz\n" + "\n".join(rows) + "\n")
    return p


LIST_KEYS = ("tau_s", "adev_hz", "oadev_hz", "mdev_hz", "tdev_s", "oadev_lo_hz", "oadev_hi_hz",
             "oadev_edf", "noise_type")


@pytest.mark.parametrize("which", ["run_dir", "bare_csv"])
def test_json_keys_and_values(which, request, capsys):
    path = request.getfixturevalue(which)
    assert main(["stability", str(path), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    n = len(out["tau_s"])
    assert n >= 8 and all(len(out[k]) == n for k in LIST_KEYS)
    assert out["n_unusable"] == 30
    fr = _frames(seed=0 if which == "run_dir" else 1)
    ref = analyse_stability(fr.t_s, fr.freq_hz, np.isfinite(fr.freq_hz))
    # the log round-trips through text, so compare to the printed precision of log.csv
    np.testing.assert_allclose(out["oadev_hz"], ref.oadev_hz, rtol=1e-3)
    assert out["drift_hz_per_min"] == pytest.approx(0.2, abs=5 * out["drift_u_hz_per_min"])
    assert out["tempco_hz_per_degc"] is None and out["warmup"]["threshold_hz_per_min"] > 0
    if which == "run_dir":  # run.json names the tracker frame: taus inside one frame are marked
        assert out["tracker_frame_s"] == 0.085
        assert out["within_frame"][:4] == [True, True, True, False]
    else:
        assert out["tracker_frame_s"] is None and not any(out["within_frame"])


def test_table_text(run_dir, capsys):
    assert main(["stability", str(run_dir)]) == 0
    text = capsys.readouterr().out
    assert "OADEV_Hz" in text and "settled drift:" in text and "warm-up" in text and "white FM" in text
    assert "deviations over" in text and "inf" not in text


def test_output_folder_and_refusal_to_overwrite(run_dir, tmp_path, capsys):
    temp = tmp_path / "temp.csv"
    temp.write_text("t_s,temp_c\n0,20\n30,22\n61,23\n")  # the log's own time column name
    out = tmp_path / "out"
    assert main(["stability", str(run_dir), "-o", str(out), "--temperature", str(temp)]) == 0
    names = sorted(p.name for p in out.iterdir())
    assert names == ["drift.png", "report.html", "sigma_tau.png", "stability.csv", "stability.json"]
    for png in ("drift.png", "sigma_tau.png"):
        assert (out / png).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    summary = json.loads((out / "stability.json").read_text())
    assert summary["tempco"]["n_frames"] > 0
    header = (out / "stability.csv").read_text().splitlines()[0].split(",")
    assert header[:3] == ["tau_s", "m", "adev_hz"] and "tdev_s" in header
    capsys.readouterr()
    before = (out / "stability.json").read_bytes()
    assert main(["stability", str(run_dir), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "not empty" in err
    assert (out / "stability.json").read_bytes() == before


@pytest.mark.parametrize("content,match", [
    ("t_s,amp_dbfs\n0,1\n1,2\n2,3\n", "freq_hz"),
    ("t_s,freq_hz\n0,1000\n0.02,1000.1\n", "too few usable frames"),
    ("t_s,freq_hz\n0,1000\n1,1000\n1.5,1000\n3,1000\n4,1000\n", "too uneven"),
])
def test_bad_input_one_line_nothing_written(tmp_path, capsys, content, match):
    p = tmp_path / "bad.csv"
    p.write_text(content)
    out = tmp_path / "out"
    code = main(["stability", str(p), "-o", str(out), "--json"])
    cap = capsys.readouterr()
    assert code != 0 and cap.out == ""
    assert cap.err.count("\n") == 1 and match in cap.err and str(p) in cap.err
    assert "Traceback" not in cap.err
    assert not out.exists()


@pytest.mark.parametrize("opt", [["--confidence", "1.5"], ["--settled-hz-per-min", "-1"], ["--start-s", "nan"],
                                 ["--start-s", "1e6"], ["--start-s", "10", "--whole-log"]])
def test_bad_options(run_dir, capsys, opt):
    assert main(["stability", str(run_dir), *opt]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err


def test_part_of_the_log_is_said(run_dir, capsys):
    # default: the settled part (this log has no warm-up: settled from its first frame)
    assert main(["stability", str(run_dir), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["span"]["kind"] == "settled" and "settled" in out["span"]["reason"]
    assert main(["stability", str(run_dir), "--json", "--start-s", "20"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["span"]["kind"] == "start" and out["span"]["start_s"] >= 20 and "as asked" in out["span"]["reason"]
    assert main(["stability", str(run_dir), "--whole-log"]) == 0
    assert "the whole log, as asked" in capsys.readouterr().out


def _calibration_run(tmp_path, drift_hz_per_s=2e-3):
    """A calibration-like log: 4 s baselines around 4 s target stretches that pull the frequency
    down by 6 Hz (steel close to the coil), white FM 0.02 Hz per frame, a linear drift."""
    rng = np.random.default_rng(9)
    n, tau0 = 6000, 0.02
    t = np.arange(n) * tau0
    f = 25000 + drift_hz_per_s * t + 0.02 * rng.standard_normal(n)
    markers = []
    for k, start in enumerate(np.arange(0.0, 120.0, 8.0)):
        markers.append(Marker(start, start + 4.0, "baseline", float("nan")))
        if start + 8.0 <= 120.0:
            markers.append(Marker(start + 4.0, start + 8.0, "steel", 20.0 + 10 * k))
    target = np.zeros(n, bool)
    for m in markers:
        if not m.is_baseline:
            target |= (t > m.start_s) & (t < m.end_s)
    f[target] -= 6.0
    d = prepare_run_dir(tmp_path / "cal")
    with RunWriter(d, {"source": {"kind": "test"}, "start_utc": "2026-12-01T12:00:00.000Z"}) as w:
        w.append(FrameTable(t, f, np.full(n, -12.0), np.full(n, 40.0), np.zeros(n, dtype=np.int64)))
    write_markers_copy(d, markers_to_csv(markers))
    return d


def test_calibration_log_uses_its_baselines_only(tmp_path, capsys):
    d = _calibration_run(tmp_path)
    assert main(["stability", str(d)]) == 0
    text = capsys.readouterr().out
    assert "baselines only" in text and "inf" not in text
    assert main(["stability", str(d), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["baselines_only"]["n_stretches"] == 15
    # the drift of the baselines (0.12 Hz/min) within 3 of its standard uncertainties, and the
    # targets' 6 Hz steps nowhere in the deviations: white FM 0.02 Hz per frame gives
    # sigma(tau) = 0.02 / sqrt(m) (SP 1065 Table 11), inside the 68 % interval widened to 3 sigma
    assert out["drift_u_hz_per_min"] is not None
    assert abs(out["drift_hz_per_min"] - 0.12) <= 3 * out["drift_u_hz_per_min"]
    assert max(out["oadev_hz"]) < 0.05


def test_undetermined_drift_is_said_with_its_reason(tmp_path, capsys):
    # a warm-up far slower than the log: no settled drift, and never "+- inf"
    n, tau0 = 4000, 0.05
    t = np.arange(n) * tau0
    f = 9000 + 2.0 * np.exp(-t / 2000.0) + 0.003 * np.random.default_rng(10).standard_normal(n)
    p = tmp_path / "slow.csv"
    p.write_text("t_s,freq_hz\n" + "".join(f"{a:.4f},{b:.6f}\n" for a, b in zip(t, f)))
    assert main(["stability", str(p)]) == 0
    text = capsys.readouterr().out
    assert "settled drift: not determined (" in text and "longer than the log" in text
    assert "inf" not in text.replace("info", "")
    assert main(["stability", str(p), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["drift_hz_per_min"] is None and out["drift"]["determined"] is False


def test_progress_on_a_terminal_only(run_dir, tmp_path, capsys, monkeypatch):
    assert main(["stability", str(run_dir), "-o", str(tmp_path / "a")]) == 0
    assert capsys.readouterr().err == ""  # captured stderr is not a terminal: no line
    tty = on_a_terminal(monkeypatch)
    assert main(["stability", str(run_dir), "-o", str(tmp_path / "b"), "--json"]) == 0
    out = capsys.readouterr().out
    assert json.loads(out)["tau_s"]  # stdout stays exactly one JSON object
    assert stages(tty) == [f"stability: {s}" for s in (
        "reading the log", "analysing 3000 frames: warm-up fit, drift, Allan deviations",
        "drawing plots 1/2", "drawing plots 2/2", "writing the table and the report")]
    assert tty.getvalue().endswith("\r") and "\n" not in tty.getvalue()
    quiet = on_a_terminal(monkeypatch)
    assert main(["stability", str(run_dir), "--quiet"]) == 0
    assert quiet.getvalue() == ""
