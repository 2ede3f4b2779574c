"""The guided calibration and the live panel as a user meets them: a real terminal (tmux),
keys sent with send-keys, the screen read with capture-pane, the virtual audio device
(PulseAudio null sink, fixture ``virtual_audio``) playing the oscillator.

The played tone steps by a known amount while the "target" is in place, so the per-step
readback must show that shift. Playback and capture share the sound server's clock, so the
captured frequency equals the played one up to the tracker's error: the tolerance is 10x the
Cramer-Rao bound of one frame at a conservative 40 dB SNR (Kay 1993, Vol. 1, ex. 3.14), as in
tests/logger/sources/test_soundcard_e2e.py, plus five of the step's own standard errors.
"""

from __future__ import annotations

import math
import os
import re
import shlex
import shutil
import subprocess
import sys
import time

import numpy as np
import pytest
import soundfile as sf

from coilshift.logger.runfolder.markers import read_markers

pytestmark = [pytest.mark.audio, pytest.mark.slow]

FS = 48000
BASE_HZ = 1000.0
STEP_HZ = 3.0  # the "target" raises the tone by this much
FRAME_N = int(round(0.085 * FS))


def tol_hz(snr_db: float = 40.0) -> float:
    # 10 x sqrt(CRB) of one frame, Kay 1993 ex. 3.14: var >= 12 fs^2 / ((2 pi)^2 eta N (N^2 - 1))
    eta = 10 ** (snr_db / 10)
    return 10 * math.sqrt(12 * FS**2 / ((2 * math.pi) ** 2 * eta * FRAME_N * (FRAME_N**2 - 1)))


def tone(path, freq_hz, seconds=60.0):
    t = np.arange(int(seconds * FS)) / FS
    sf.write(path, (0.5 * np.sin(2 * np.pi * freq_hz * t)).astype(np.float32), FS, subtype="FLOAT")
    return path


class Tmux:
    """One detached tmux session running a command; keys in, screen text out."""

    def __init__(self, name: str, command: str, env: dict, cwd):
        self.name = name
        exports = " ".join(f"{k}={shlex.quote(v)}" for k, v in env.items())
        subprocess.run(["tmux", "new-session", "-d", "-s", name, "-x", "200", "-y", "60", "-c", str(cwd),
                        f"env {exports} {command}; echo EXIT=$?; sleep 30"], check=True, timeout=10)

    def keys(self, *keys: str) -> None:
        subprocess.run(["tmux", "send-keys", "-t", self.name, *keys], check=True, timeout=10)

    def screen(self) -> str:
        return subprocess.run(["tmux", "capture-pane", "-p", "-J", "-S", "-200", "-t", self.name],
                              capture_output=True, text=True, timeout=10).stdout

    def wait_for(self, pattern: str, timeout_s: float = 30.0) -> str:
        deadline = time.monotonic() + timeout_s
        while time.monotonic() < deadline:
            text = self.screen()
            if re.search(pattern, text):
                return text
            time.sleep(0.1)
        pytest.fail(f"tmux: {pattern!r} did not appear; screen:\n{self.screen()[-3000:]}")

    def close(self) -> None:
        subprocess.run(["tmux", "kill-session", "-t", self.name], capture_output=True, timeout=10)


@pytest.fixture
def tmux_env(virtual_audio, tmp_path):
    if shutil.which("tmux") is None:
        pytest.skip("tmux is not installed (CI installs it: .ci/run)")
    env = {"PATH": os.environ.get("PATH", "/usr/bin:/bin"), "HOME": str(tmp_path),
           "XDG_CONFIG_HOME": str(tmp_path / "cfg"), "PULSE_SERVER": os.environ.get("PULSE_SERVER", ""),
           "TERM": "xterm-256color", "LANG": "C.UTF-8"}
    return env


class Player:
    """One tone at a time into the null sink; switching kills the old player first."""

    def __init__(self, audio, folder):
        self.audio, self.folder, self.proc = audio, folder, None

    def play(self, freq_hz: float) -> None:
        self.stop()
        self.proc = self.audio.play(tone(self.folder / f"tone-{freq_hz:g}.wav", freq_hz))

    def stop(self) -> None:
        if self.proc is not None:
            self.proc.kill()
            self.proc.communicate()
            self.proc = None


READING = r"coin at 2 cm: shift ([+-][0-9.e+-]+) \+- ([0-9.e+-]+) Hz .*?against (the baseline before|baselines before and after): (significant|NOT significant)"


def test_guided_calibration_reads_back_the_played_shift(virtual_audio, tmux_env, tmp_path):
    player = Player(virtual_audio, tmp_path)
    run_dir = tmp_path / "cal"
    cmd = (f"{shlex.quote(sys.executable)} -m coilshift.cli.main calibrate -o {run_dir} --target coin "
           f"--distances 2cm --dwell 1.5 --settle-s 0.8 --device pulse --rate {FS} --baseline-s 0.5 "
           "--bootstrap 0 --threshold-hz 0.5")
    player.play(BASE_HZ)
    t = Tmux(f"cs-cal-{os.getpid()}", cmd, tmux_env, tmp_path)
    try:
        t.wait_for(r"\[1/3\].*Press Enter", 30)
        t.keys("Enter")                             # first baseline, 3.75 s
        t.wait_for(r"recording baseline: .*Hz")     # the live readout shows the frequency
        t.wait_for(r"\[2/3\] Place the coin at 2 cm", 30)
        player.play(BASE_HZ + STEP_HZ)              # the target goes on
        t.keys("Enter")
        screen = t.wait_for(READING, 30)
        shift, err, against, verdict = re.findall(READING, screen)[-1]
        assert against == "the baseline before" and verdict == "significant"
        assert abs(float(shift) - STEP_HZ) < tol_hz() + 5 * float(err), screen[-1500:]
        t.wait_for(r"\[3/3\] Remove the coin .*r = record the coin again", 10)
        player.play(BASE_HZ)                        # the target comes off
        t.keys("Enter")
        screen = t.wait_for(r"EXIT=\d+", 60)
        readings = re.findall(READING, screen)
        shift, err, against, verdict = readings[-1]
        assert against == "baselines before and after" and verdict == "significant"
        assert abs(float(shift) - STEP_HZ) < tol_hz() + 5 * float(err)
        assert "step readings" in screen and "EXIT=0" in screen, screen[-2000:]
    finally:
        t.close()
        player.stop()
    marks = read_markers(run_dir / "markers.csv")
    assert [m.target for m in marks] == ["baseline", "coin", "baseline"]


def test_live_panel_times_markers_at_the_key_press_and_marks_baselines(virtual_audio, tmux_env, tmp_path):
    player = Player(virtual_audio, tmp_path)
    run_dir = tmp_path / "live"
    cmd = (f"{shlex.quote(sys.executable)} -m coilshift.cli.main capture -o {run_dir} --device pulse "
           f"--rate {FS} --baseline-s 0.5")
    t = Tmux(f"cs-cap-{os.getpid()}", cmd, tmux_env, tmp_path)
    try:
        t.wait_for(r"Press Enter to start the capture", 30)   # the first-run wiring caution
        t.keys("Enter")
        t.wait_for(r"frequency +NO TONE", 30)                 # nothing plays yet: the panel says so
        player.play(BASE_HZ)
        t.wait_for(r"frequency +1000\.0", 30)
        t.keys("m")                                           # the marker is timed here ...
        t0 = time.monotonic()
        time.sleep(2.0)
        t.keys("coin 30", "Enter")                            # ... not 2 s later, when the label ends
        t.wait_for(r"marker 'coin 30' set at", 10)
        t.wait_for(r"mark target-free stretches too", 5)      # only a target so far: the hint
        t.keys("b")
        t1 = time.monotonic()
        t.wait_for(r"marker 'baseline' set at", 10)
        time.sleep(1.0)
        t.keys("q")
        t.wait_for(r"EXIT=0", 30)
    finally:
        t.close()
        player.stop()
    marks = read_markers(run_dir / "markers.csv")
    assert [m.target for m in marks] == ["coin", "baseline"]
    coin, base = marks
    # the coin stretch runs from the m key to the b key: about t1 - t0 (over 2 s), not the
    # fraction of a second between Enter and b; the slack is the terminal's key latency
    assert coin.end_s - coin.start_s == pytest.approx(t1 - t0, abs=0.5)
