"""End to end through the real audio stack: sounddevice -> PortAudio -> ALSA -> PulseAudio.

A null sink is the virtual device (fixture ``virtual_audio`` in conftest.py): the test plays a
known sequence of tones into it with ``paplay`` and captures its monitor from the ALSA device
``pulse``. Playback and capture run on the same sound-server clock and the server only
resamples, so the captured frequencies equal the played ones up to the tracker's error; the
tolerance is 10x the Cramer-Rao bound of one frame at a conservative 40 dB SNR (Kay 1993,
Vol. 1, ex. 3.14), far below the 200-400 Hz steps between tones.
"""

from __future__ import annotations

import json
import math
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest
import soundfile as sf

from coilshift.logger.runfolder.reader import read_log
from coilshift.logger.capture.engine import CaptureEngine
from coilshift.logger.runfolder.folders import prepare_run_dir
from coilshift.logger.sources.soundcard import SoundcardSource, list_input_devices
from coilshift.logger.tracking.tracker import FrameTracker, TrackerSettings

pytestmark = pytest.mark.audio

FS = 48000
SETTINGS = TrackerSettings()
N = FrameTracker(FS, SETTINGS).frame_len
HOP_S = FrameTracker(FS, SETTINGS).hop_len / FS


def tol_hz(snr_db: float = 40.0) -> float:
    # 10 x sqrt(CRB), Kay 1993 ex. 3.14: var >= 12 fs^2 / ((2 pi)^2 eta N (N^2 - 1))
    eta = 10 ** (snr_db / 10)
    return 10 * math.sqrt(12 * FS**2 / ((2 * math.pi) ** 2 * eta * N * (N**2 - 1)))


def write_tones(path, tones_hz, seconds_each, amplitude=0.5):
    t = np.arange(int(seconds_each * FS)) / FS
    sig = np.concatenate([amplitude * np.sin(2 * np.pi * f * t) for f in tones_hz])
    sf.write(path, sig.astype(np.float32), FS, subtype="FLOAT")


def test_the_virtual_device_is_listed(virtual_audio):
    names = [d["name"] for d in list_input_devices()]
    assert virtual_audio.capture_device in names


@pytest.mark.slow
def test_played_tone_sequence_is_logged(virtual_audio, tmp_path):
    tones = [800.0, 1200.0, 1000.0]
    seconds_each = 1.2
    wav = tmp_path / "tones.wav"
    write_tones(wav, tones, seconds_each)
    run_dir = prepare_run_dir(tmp_path / "run")
    source = SoundcardSource(virtual_audio.capture_device, FS, 0)
    eng = CaptureEngine(source, run_dir, SETTINGS, baseline_s=0.3, save_audio=True)
    eng.start()
    deadline = time.monotonic() + 10
    while eng.elapsed_s < 0.2:  # the stream is running before the tones start
        assert time.monotonic() < deadline, "no audio arrived from the virtual device"
        time.sleep(0.02)
    player = virtual_audio.play(wav)
    _, err = player.communicate(timeout=20)
    assert player.returncode == 0, err
    time.sleep(0.5)
    summary = eng.stop()
    log = read_log(run_dir)
    f, t = log.freq_hz, log.t_s
    firsts = []
    for tone in tones:
        hit = np.abs(f - tone) < tol_hz()
        # each tone fills its stretch except the frames that straddle a change (frame + hop)
        assert hit.sum() * HOP_S > seconds_each - 2 * N / FS - 0.1, f"{tone} Hz: only {hit.sum()} frames"
        firsts.append(t[hit][0])
    assert firsts == sorted(firsts), "tones logged out of order"
    assert np.diff(firsts) == pytest.approx([seconds_each, seconds_each], abs=0.1)
    assert summary["status"] == "complete" and summary["gaps"] == 0 and summary["device_errors"] == 0
    src = log.meta["source"]
    assert src["kind"] == "soundcard" and src["sample_rate_hz"] == FS and src["input_latency_s"] > 0
    # the saved audio re-tracks to the same tones
    audio, rate = sf.read(run_dir / "audio.wav")
    assert rate == FS and len(audio) == summary["samples"]


@pytest.mark.slow
def test_capture_killed_mid_run_keeps_a_readable_log(virtual_audio, tmp_path):
    wav = tmp_path / "tone.wav"
    write_tones(wav, [1500.0], 8.0)
    run_dir = tmp_path / "run"
    env = dict(os.environ, XDG_CONFIG_HOME=str(tmp_path / "cfg"))
    player = virtual_audio.play(wav)
    try:
        time.sleep(0.3)
        proc = subprocess.Popen([sys.executable, "-m", "coilshift.cli.main", "capture", "--device",
                                 virtual_audio.capture_device, "--rate", str(FS), "--baseline-s", "0.3",
                                 "--no-view", "-o", str(run_dir)],
                                env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        log_path = run_dir / "log.csv"
        deadline = time.monotonic() + 20
        # wait for about 2 s of rows on disk, then kill without warning
        while not (log_path.exists() and log_path.stat().st_size > 100 * 60):
            if proc.poll() is not None:
                pytest.fail(proc.communicate()[1].decode())
            assert time.monotonic() < deadline, "capture wrote no rows"
            time.sleep(0.05)
        time.sleep(0.7)
        proc.send_signal(signal.SIGKILL)
        proc.communicate(timeout=10)
    finally:
        player.kill()
        player.communicate()
    log = read_log(run_dir)
    assert log.interrupted and log.meta["status"] == "running"
    tone = np.isfinite(log.freq_hz)
    assert tone.sum() >= 50
    assert np.all(np.abs(log.freq_hz[tone] - 1500.0) < tol_hz())
    assert np.all(np.diff(log.t_s) > 0)


@pytest.fixture
def private_sound_server(tmp_path):
    """A PulseAudio server of this test alone (its own runtime folder), which the test may freeze.

    Yields the environment that points clients at it and the server's pid; the server is
    resumed and stopped afterwards.
    """
    import shutil

    if shutil.which("pulseaudio") is None or shutil.which("pactl") is None:
        pytest.skip("PulseAudio is not installed: no private sound server")
    runtime = tmp_path / "xdg"
    runtime.mkdir(mode=0o700)
    env = dict(os.environ, XDG_RUNTIME_DIR=str(runtime), PULSE_RUNTIME_PATH=str(runtime / "pulse"),
               XDG_CONFIG_HOME=str(tmp_path / "cfg"))
    env.pop("PULSE_SERVER", None)
    (tmp_path / "cfg" / "coilshift").mkdir(parents=True)  # the first-run caution counts as shown
    (tmp_path / "cfg" / "coilshift" / "state.json").write_text('{"wiring_caution_shown": true}')
    r = subprocess.run(["pulseaudio", "--daemonize=true", "--exit-idle-time=-1", "-n",
                        "--load=module-null-sink sink_name=frozen", "--load=module-native-protocol-unix"],
                       env=env, capture_output=True, text=True, timeout=20)
    pid_file = runtime / "pulse" / "pid"
    deadline = time.monotonic() + 10
    while not pid_file.exists() and time.monotonic() < deadline:
        time.sleep(0.05)
    if not pid_file.exists():
        pytest.skip(f"the private sound server did not start: {r.stderr.strip()[-200:]}")
    pid = int(pid_file.read_text().split()[0])
    subprocess.run(["pactl", "set-default-source", "frozen.monitor"], env=env, capture_output=True, timeout=10)
    try:
        yield env, pid
    finally:
        for sig in (signal.SIGCONT, signal.SIGTERM):
            try:
                os.kill(pid, sig)
            except ProcessLookupError:
                pass


@pytest.mark.slow
def test_a_frozen_sound_server_ends_the_capture_within_seconds(private_sound_server, tmp_path):
    # the input stops delivering and the driver's stop() never returns: capture must still
    # record the fault, say so in one line and exit non-zero, instead of hanging for ever
    env, server = private_sound_server
    run_dir = tmp_path / "run"
    proc = subprocess.Popen([sys.executable, "-m", "coilshift.cli.main", "capture", "--device", "pulse",
                             "--rate", str(FS), "--no-view", "-o", str(run_dir)],
                            env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 20
        while not ((run_dir / "log.csv").exists() and (run_dir / "log.csv").stat().st_size > 60 * 20):
            assert proc.poll() is None, proc.communicate()[1]
            assert time.monotonic() < deadline, "no rows from the private sound server"
            time.sleep(0.05)
        os.kill(server, signal.SIGSTOP)
        frozen = time.monotonic()
        _, err = proc.communicate(timeout=30)
        took = time.monotonic() - frozen
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.communicate()
    # 3 s without audio to notice it, 1.5 s each to stop and then abort the stream, some slack
    assert took < 3.0 + 2 * 1.5 + 3.0, f"took {took:.1f} s"
    lines = err.splitlines()
    assert proc.returncode == 1 and len(lines) == 1 and "input stopped" in lines[0], lines
    meta = json.loads((run_dir / "run.json").read_text())
    assert meta["status"] == "device_error"
    assert read_log(run_dir).t_s[-1] > 0.2
