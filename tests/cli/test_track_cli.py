"""``coilshift track`` and ``coilshift clock-error`` run as a user runs them (subprocess).

Bad inputs must give exactly one line on stderr, a non-zero exit, no traceback, and write nothing.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys

import numpy as np
import pytest
import soundfile as sf

from coilshift.logger.sources.synthetic import ToneSource

FS = 48000


def cli(*args, cwd=None):
    env = {k: v for k, v in os.environ.items() if k != "COILSHIFT_DEBUG"}
    return subprocess.run([sys.executable, "-m", "coilshift.cli.main", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, env=env, timeout=120)


def wav16(path, x, fs=FS):
    # the WAV reader itself is checked against stdlib-written bytes in tests/logger/sources/test_audiofile.py
    sf.write(str(path), np.asarray(x), fs, subtype="PCM_16")
    return path


def _bad_inputs(tmp):
    tone = wav16(tmp / "good.wav", 0.3 * np.sin(2 * np.pi * 1000 * np.arange(FS) / FS))
    data = tone.read_bytes()
    (tmp / "empty.wav").write_bytes(b"")
    (tmp / "cut.wav").write_bytes(data[: len(data) // 3])
    (tmp / "noise.wav").write_bytes(np.random.default_rng(0).integers(0, 256, 5000, dtype=np.uint8).tobytes())
    (tmp / "notime.csv").write_text("CH1,CH2\n" + "".join(f"{np.sin(i):.4f},{np.cos(i):.4f}\n" for i in range(100)))
    rows = [f"{i * 1e-4:.6f},{np.sin(i / 5):.4f}" for i in range(100)]
    rows[60] = f"{58 * 1e-4:.6f},0.1"
    (tmp / "backwards.csv").write_text("Time (s),Volt\n" + "\n".join(rows) + "\n")
    wav16(tmp / "silence.wav", np.zeros(FS))
    return {
        "empty.wav": "empty file",
        "cut.wav": "truncated WAV",
        "noise.wav": "not a WAV file",
        "notime.csv": "no time column",
        "backwards.csv": "line 62: time goes backwards",
        "silence.wav": "no tone found",
    }


def test_bad_inputs_one_line_no_traceback_nothing_written(tmp_path):
    cases = _bad_inputs(tmp_path)
    for name, message in cases.items():
        out = tmp_path / f"run_{name}"
        r = cli("track", tmp_path / name, "-o", out)
        assert r.returncode != 0, name
        lines = r.stderr.splitlines()
        assert len(lines) == 1, (name, r.stderr)
        assert lines[0].startswith("coilshift: error: ") and name in lines[0] and message in lines[0], lines[0]
        assert "Traceback" not in r.stderr and r.stdout == ""
        assert not out.exists(), name


def test_existing_run_dir_refused_without_force(tmp_path):
    rec = wav16(tmp_path / "rec.wav", ToneSource(1500.0, 2.0, FS, amplitude=0.3, snr_db=40.0).read_all())
    run = tmp_path / "run"
    run.mkdir()
    (run / "log.csv").write_text("t_s,freq_hz\n0,1\n")
    r = cli("track", rec, "-o", run)
    assert r.returncode != 0 and len(r.stderr.splitlines()) == 1 and "--force" in r.stderr
    assert (run / "log.csv").read_text() == "t_s,freq_hz\n0,1\n"  # untouched
    r = cli("track", rec, "-o", run, "--force", "--quiet")
    assert r.returncode == 0 and r.stdout == "" and r.stderr == ""
    assert (run / "run.json").is_file()


def test_json_summary_and_markers(tmp_path):
    src = ToneSource([(0, 3000.0), (3.0, 2999.6)], 5.0, FS, amplitude=0.3, snr_db=40.0, seed=1)
    rec = wav16(tmp_path / "rec.wav", src.read_all())
    mk = tmp_path / "m.csv"
    mk.write_text("start_s,end_s,target,distance_mm\n0,2.5,baseline,\n3.2,4.8,steel washer,20\n")
    r = cli("track", rec, "-o", tmp_path / "run", "--markers", mk, "--json")
    assert r.returncode == 0, r.stderr
    s = json.loads(r.stdout)  # exactly one JSON object
    for key in ("frames", "duration_s", "baseline_hz", "sample_rate_hz", "run_dir", "flag_counts", "warnings"):
        assert key in s
    assert s["sample_rate_hz"] == FS and s["duration_s"] == pytest.approx(5.0)
    assert s["baseline_hz"] == pytest.approx(3000.0, abs=0.01)
    assert s["shift_min_hz"] == pytest.approx(-0.4, abs=0.01)
    assert (tmp_path / "run" / "markers.csv").is_file()


def test_human_summary_and_nyquist_warning(tmp_path):
    rec = wav16(tmp_path / "rec.wav", ToneSource(8000.0, 2.0, FS, amplitude=0.3, snr_db=40.0).read_all())
    r = cli("track", rec, "-o", tmp_path / "run", "--nyquist-zone", "2", "--band", "39000", "41000")
    assert r.returncode == 0, r.stderr
    assert "baseline 40000.0" in r.stdout and "median of the first 2 s" in r.stdout
    warn = r.stderr.splitlines()
    assert len(warn) == 1 and "SIGN INVERTED" in warn[0]


def test_clock_error_command(tmp_path):
    # a card 60 ppm fast records a 1000 Hz reference as 1000 / (1 + 60e-6) Hz
    src = ToneSource(1000.0 / (1 + 60e-6), 6.0, FS, amplitude=0.5, snr_db=40.0, seed=3)
    rec = wav16(tmp_path / "ref.wav", src.read_all())
    r = cli("clock-error", rec, "--reference-hz", "1000", "--json")
    assert r.returncode == 0, r.stderr
    res = json.loads(r.stdout)
    # 16-bit quantisation adds noise far below the 40 dB SNR; see test_pipeline for the CRB bound
    assert res["clock_ppm"] == pytest.approx(60.0, abs=1.0)
    r = cli("clock-error", rec, "--reference-hz", "1100")
    assert r.returncode != 0 and len(r.stderr.splitlines()) == 1
