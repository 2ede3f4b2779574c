"""``coilshift stability`` end to end: table, JSON, output folder, refusals."""

from __future__ import annotations

import json

import numpy as np
import pytest

from coilshift.analysis.stability.analyse import analyse_stability
from coilshift.cli.main import main
from coilshift.logger.runfolder import flags
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.folders import prepare_run_dir
from coilshift.logger.runfolder.writer import RunWriter


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
    assert "OADEV_Hz" in text and "drift" in text and "warm-up" in text and "white FM" in text


def test_output_folder_and_refusal_to_overwrite(run_dir, tmp_path, capsys):
    temp = tmp_path / "temp.csv"
    temp.write_text("time_s,temp_c\n0,20\n30,22\n61,23\n")
    out = tmp_path / "out"
    assert main(["stability", str(run_dir), "-o", str(out), "--temperature", str(temp)]) == 0
    names = sorted(p.name for p in out.iterdir())
    assert names == ["drift.png", "sigma_tau.png", "stability.csv", "stability.json"]
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


@pytest.mark.parametrize("opt", [["--confidence", "1.5"], ["--settle", "-1"], ["--window", "0"]])
def test_bad_options(run_dir, capsys, opt):
    assert main(["stability", str(run_dir), *opt]) == 2
    assert capsys.readouterr().err.count("\n") == 1
