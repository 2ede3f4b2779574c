"""``coilshift capture`` and ``coilshift devices`` as a user runs them.

The capture runs use the hidden paced synthetic source (``--synthetic``), which drives the same
engine in real time without a soundcard; the real audio stack is covered in
tests/logger/test_soundcard_e2e.py. The live log is checked against the offline tracker
(:func:`coilshift.logger.tracking.tracker.track_array`) run on the same synthetic samples: the capture
path must reproduce it exactly (same frames, same times), since the tracker's output does not
depend on how the signal is cut into blocks.
"""

from __future__ import annotations

import builtins
import json
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

from coilshift.logger.runfolder.reader import read_log
from coilshift.cli import cautions
from coilshift.cli.main import main
from coilshift.logger.sources.synthetic import ToneSource
from coilshift.logger.tracking.tracker import TrackerSettings, track_array

FS = 48000


@pytest.fixture
def config_home(tmp_path, monkeypatch):
    home = tmp_path / "config"
    monkeypatch.setenv("XDG_CONFIG_HOME", str(home))
    return home


def cli_env(tmp_path):
    env = {k: v for k, v in os.environ.items() if k != "COILSHIFT_DEBUG"}
    env["XDG_CONFIG_HOME"] = str(tmp_path / "config")
    return env


def test_help_shows_the_wiring_caution(capsys):
    assert main(["capture", "--help"]) == 0  # main returns argparse's status instead of exiting
    text = " ".join(capsys.readouterr().out.split())
    for words in ("1-2 V peak", "divider", "DC-blocking capacitor", "mains", "isolation", "local electrical codes"):
        assert words in text


def test_capture_logs_what_the_offline_tracker_finds(tmp_path, config_home, capsys):
    out = tmp_path / "run"
    rc = main(["capture", "--synthetic", "1000,1010@1", "--seconds", "2", "--baseline-s", "0.5",
               "--json", "-o", str(out)])
    captured = capsys.readouterr()
    assert rc == 0, captured.err
    summary = json.loads(captured.out)  # stdout holds exactly one JSON object
    assert summary["status"] == "complete" and summary["ended_by"] == "duration"
    # the same samples the hidden source generates (see coilshift.cli.inputs.synthetic_source)
    x = ToneSource([(0.0, 1000.0), (1.0, 1010.0)], 7.0, FS, amplitude=0.5, snr_db=50.0, seed=1).read_all()
    ref = track_array(x[: 2 * FS], FS, TrackerSettings())
    log = read_log(out)
    np.testing.assert_allclose(log.t_s, ref.t_s, atol=1e-6)  # log.csv keeps 6 decimals
    np.testing.assert_allclose(log.freq_hz, ref.freq_hz, atol=1e-6)
    assert summary["rows"] == len(ref)
    # first run: the caution was shown once and remembered
    assert "DC-blocking" in captured.err
    assert json.loads((config_home / "coilshift" / "state.json").read_text())["wiring_caution_shown"]
    rc = main(["capture", "--synthetic", "1000", "--seconds", "0.5", "-o", str(tmp_path / "run2")])
    assert rc == 0 and "DC-blocking" not in capsys.readouterr().err


def test_save_audio_can_be_tracked_again(tmp_path, config_home, capsys):
    out = tmp_path / "run"
    assert main(["capture", "--synthetic", "1500", "--seconds", "1", "--save-audio", "--no-view",
                 "-o", str(out)]) == 0
    capsys.readouterr()
    assert main(["track", str(out / "audio.wav"), "-o", str(tmp_path / "again"), "--quiet"]) == 0
    live, again = read_log(out), read_log(tmp_path / "again")
    np.testing.assert_allclose(again.freq_hz, live.freq_hz, atol=1e-6)


def test_existing_folder_is_refused_and_kept(tmp_path, config_home, capsys):
    out = tmp_path / "run"
    out.mkdir()
    (out / "notes.txt").write_text("mine")
    assert main(["capture", "--synthetic", "1000", "--seconds", "0.5", "-o", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "not empty" in err[0]
    assert (out / "notes.txt").read_text() == "mine" and sorted(p.name for p in out.iterdir()) == ["notes.txt"]


@pytest.mark.parametrize("args, words", [
    (["--seconds", "0"], "--seconds"),
    (["--baseline-s", "-1"], "--baseline-s"),
    (["--synthetic", "abc"], "--synthetic"),
    (["--band", "5000", "4000", "--nyquist-zone", "3"], "--band"),
])
def test_bad_options_one_line_and_no_folder(tmp_path, config_home, capsys, args, words):
    out = tmp_path / "run"
    rc = main(["capture", "--synthetic", "1000", *args, "-o", str(out)])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 2 and len(err) == 1 and words in err[0], err
    assert not out.exists()


def test_missing_portaudio_is_one_clear_line(monkeypatch, capsys):
    real_import = builtins.__import__

    def fake_import(name, *args, **kwargs):
        if name == "sounddevice":  # what sounddevice raises when libportaudio cannot be loaded
            raise OSError("PortAudio library not found")
        return real_import(name, *args, **kwargs)

    monkeypatch.delitem(sys.modules, "sounddevice", raising=False)
    monkeypatch.setattr(builtins, "__import__", fake_import)
    assert main(["devices"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "libportaudio2" in err[0] and "PortAudio" in err[0]


def test_unknown_device_is_one_line_and_no_folder(tmp_path, config_home, capsys):
    out = tmp_path / "run"
    rc = main(["capture", "--device", "no-such-card-xyz", "-o", str(out)])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 2 and len(err) == 1, err
    assert "no-such-card-xyz" in err[0] or "no input device" in err[0]
    assert not out.exists()


def _start_capture(tmp_path, *extra):
    run_dir = tmp_path / "run"
    proc = subprocess.Popen([sys.executable, "-m", "coilshift.cli.main", "capture", "--synthetic", "1000",
                             "--baseline-s", "0.3", "--no-view", "-o", str(run_dir), *extra],
                            env=cli_env(tmp_path), stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    log_path = run_dir / "log.csv"
    deadline = time.monotonic() + 30
    while not (log_path.exists() and log_path.stat().st_size > 100 * 60):  # ~1.5 s of rows on disk
        if proc.poll() is not None:
            pytest.fail(proc.communicate()[1].decode())
        assert time.monotonic() < deadline, "capture wrote no rows"
        time.sleep(0.05)
    time.sleep(0.6)
    return proc, run_dir


@pytest.mark.slow
def test_sigkill_mid_run_leaves_a_readable_log(tmp_path):
    proc, run_dir = _start_capture(tmp_path)
    proc.send_signal(signal.SIGKILL)
    proc.communicate(timeout=10)
    log = read_log(run_dir)
    assert log.interrupted and log.meta["status"] == "running"
    n = len(log.t_s)
    assert n >= 60
    ref = track_array(ToneSource(1000.0, 60.0, FS, amplitude=0.5, snr_db=50.0, seed=1).read_all()[: FS * 10],
                      FS, TrackerSettings())
    # every row that reached the disk is exactly the offline tracker's row
    np.testing.assert_allclose(log.t_s, ref.t_s[:n], atol=1e-6)
    np.testing.assert_allclose(log.freq_hz, ref.freq_hz[:n], atol=1e-6)


@pytest.mark.slow
@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM])
def test_interrupt_ends_cleanly(tmp_path, sig):
    proc, run_dir = _start_capture(tmp_path)
    proc.send_signal(sig)
    out, err = proc.communicate(timeout=20)
    assert proc.returncode == 0, err.decode()
    log = read_log(run_dir)
    assert not log.interrupted and log.meta["status"] == "complete"
    assert log.meta["totals"]["rows"] == len(log.t_s)
    assert b"complete:" in out


def test_state_file_in_the_config_folder(config_home):
    assert cautions.state_path() == config_home / "coilshift" / "state.json"
