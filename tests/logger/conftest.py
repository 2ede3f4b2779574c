"""Fixtures for the live-capture tests: a scripted block source and a virtual audio device.

* ``scripted_source``: a fake real-time source that plays a script of steps (blocks, overflow
  flags, errors, stalls, calls into the engine at exact sample positions). Each fake fails the
  test at teardown if any scripted step went unused.
* ``virtual_audio``: a PulseAudio null sink whose monitor is the default ALSA ``pulse`` input,
  so a tone played into the sink comes back through sounddevice -> PortAudio -> ALSA -> the
  sound server. Started (and stopped) by the fixture when no server is running; the tests that
  use it are marked ``audio`` and are skipped when PulseAudio is not installed.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import threading
import time

import numpy as np
import pytest

SINK = "coilshift_test_sink"


class ScriptedSource:
    """A block source that plays a script; see :mod:`coilshift.logger.capture.engine` for the interface.

    Steps: ``("block", samples, overflow)``, ``("error", message)`` (calls ``fail``),
    ``("stall",)`` (stops delivering, no error), ``("call", fn)`` (runs ``fn()`` between blocks,
    in the delivering thread, so its sample position is exact). ``preroll`` blocks are delivered
    inside ``open()`` (before the engine's worker runs), like a device handing over its buffer.
    """

    def __init__(self, sample_rate_hz: float, steps, preroll=(), pace_s: float = 0.0):
        self.sample_rate_hz = float(sample_rate_hz)
        self.steps = list(steps)
        self.preroll = list(preroll)
        self.pace_s = pace_s
        self.used = 0
        self.preroll_used = 0
        self.done = threading.Event()
        self._halt = threading.Event()
        self._thread = None
        self.closed = False

    def open(self, deliver, fail) -> None:
        self._deliver, self._fail = deliver, fail
        for block in self.preroll:
            deliver(np.asarray(block, dtype=np.float32), 0.0, False)
            self.preroll_used += 1
        self._thread = threading.Thread(target=self._run, daemon=True)
        self._thread.start()

    def _run(self) -> None:
        for step in self.steps:
            if self._halt.is_set():
                return
            kind = step[0]
            if kind == "block":
                self._deliver(np.asarray(step[1], dtype=np.float32), 0.0, bool(step[2]))
            elif kind == "error":
                self._fail(step[1])
            elif kind == "call":
                step[1]()
            elif kind == "stall":
                self.used += 1
                self.done.set()
                return
            else:
                raise AssertionError(f"unknown scripted step {kind!r}")
            self.used += 1
            if self.pace_s:
                time.sleep(self.pace_s)
        self.done.set()

    def close(self) -> None:
        self._halt.set()
        self.closed = True
        if self._thread is not None:
            self._thread.join()

    def describe(self) -> dict:
        return {"kind": "scripted test source", "sample_rate_hz": self.sample_rate_hz}

    def unused(self) -> int:
        return (len(self.steps) - self.used) + (len(self.preroll) - self.preroll_used)


@pytest.fixture
def scripted_source():
    """Factory for :class:`ScriptedSource`; fails the test if a scripted step was never played."""
    made: list[ScriptedSource] = []

    def make(*args, **kwargs) -> ScriptedSource:
        src = ScriptedSource(*args, **kwargs)
        made.append(src)
        return src

    yield make
    for src in made:
        assert src.unused() == 0, f"{src.unused()} scripted step(s) were never played"


def _pactl(*args: str, timeout: float = 5.0) -> subprocess.CompletedProcess:
    return subprocess.run(["pactl", *args], capture_output=True, text=True, timeout=timeout)


def _server_up() -> bool:
    try:
        return _pactl("info").returncode == 0
    except (OSError, subprocess.TimeoutExpired):
        return False


class VirtualAudio:
    """The virtual device: play into ``sink``; capture from the ALSA device ``pulse``."""

    capture_device = "pulse"

    def __init__(self, sink: str):
        self.sink = sink

    def play(self, wav_path: str | os.PathLike) -> subprocess.Popen:
        """Start playing a WAV file into the sink (returns the player; finish with communicate())."""
        return subprocess.Popen(["paplay", f"--device={self.sink}", str(wav_path)],
                                stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)


@pytest.fixture(scope="session")
def virtual_audio():
    """Name of a PulseAudio null sink whose monitor is the default source (ALSA device ``pulse``)."""
    if shutil.which("pulseaudio") is None or shutil.which("pactl") is None:
        pytest.skip("PulseAudio is not installed (apt install pulseaudio pulseaudio-utils "
                    "libasound2-plugins libportaudio2): no virtual audio device")
    if shutil.which("paplay") is None:
        pytest.skip("paplay is not installed (apt install pulseaudio-utils)")
    started = False
    module_id = None
    if not _server_up():
        # -n: no default config; the server is ours alone (root is tolerated with a warning)
        proc = subprocess.run(["pulseaudio", "--daemonize=true", "--exit-idle-time=-1", "-n",
                               f"--load=module-null-sink sink_name={SINK}",
                               "--load=module-native-protocol-unix auth-anonymous=1"],
                              capture_output=True, text=True, timeout=20)
        deadline = time.monotonic() + 10
        while not _server_up():
            if time.monotonic() > deadline:
                pytest.fail(f"could not start PulseAudio: {proc.stderr.strip()[-300:]}")
            time.sleep(0.1)
        started = True
    # name the server explicitly, so clients whose config folder differs (a subprocess with its
    # own XDG_CONFIG_HOME) still find it
    server = next((line.split(":", 1)[1].strip() for line in _pactl("info").stdout.splitlines()
                   if line.startswith("Server String:")), None)
    old_env = os.environ.get("PULSE_SERVER")
    if server:
        os.environ["PULSE_SERVER"] = server
    sinks = _pactl("list", "short", "sinks").stdout
    if SINK not in sinks.split():
        res = _pactl("load-module", "module-null-sink", f"sink_name={SINK}")
        if res.returncode != 0:
            pytest.fail(f"could not create the null sink: {res.stderr.strip()}")
        module_id = res.stdout.strip()
    old_source = _pactl("get-default-source").stdout.strip()
    _pactl("set-default-source", f"{SINK}.monitor")
    from coilshift.logger.errors import InputError
    from coilshift.logger.sources.soundcard import rescan_devices

    try:
        rescan_devices()  # PortAudio lists devices once per initialisation
    except InputError as exc:
        pytest.skip(str(exc))
    yield VirtualAudio(SINK)
    if old_env is None:
        os.environ.pop("PULSE_SERVER", None)
    else:
        os.environ["PULSE_SERVER"] = old_env
    if started:
        _pactl("exit")
    else:
        if old_source:
            _pactl("set-default-source", old_source)
        if module_id:
            _pactl("unload-module", module_id)


