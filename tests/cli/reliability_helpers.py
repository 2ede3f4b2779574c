"""Helpers shared by the reliability tests (not a test module).

Recordings are written with the stdlib ``wave`` module and raw bytes, independent of the
project's own readers; logs with the project's RunWriter (the format under test elsewhere).
"""

from __future__ import annotations

import hashlib
import math
import os
import subprocess
import sys
import wave
from pathlib import Path

import numpy as np

from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.markers import BASELINE, Marker, markers_to_csv
from coilshift.logger.runfolder.folders import prepare_run_dir
from coilshift.logger.runfolder.writer import RunWriter, write_markers_copy

FS = 8000
START = "2026-03-01T12:00:00.000Z"  # small recordings keep the sweep fast; 1 kHz sits well inside 8 kHz Nyquist


def cli(*args, cwd=None, timeout=120, env=None):
    """Run the real command line in a fresh interpreter, as a user would."""
    env = {**{k: v for k, v in os.environ.items() if k != "COILSHIFT_DEBUG"}, **(env or {})}
    return subprocess.run([sys.executable, "-m", "coilshift.cli.main", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, env=env, timeout=timeout)


def wav16(path, x, fs=FS, channels=1) -> Path:
    """16-bit PCM WAV via the stdlib ``wave`` module; ``x`` in [-1, 1], shape (n,) or (n, ch)."""
    ints = np.clip(np.round(np.asarray(x) * 32767), -32768, 32767).astype("<i2")
    with wave.open(str(path), "wb") as w:
        w.setnchannels(channels)
        w.setsampwidth(2)
        w.setframerate(fs)
        w.writeframes(ints.tobytes())
    return Path(path)


def tone(seconds=1.0, freq_hz=1000.0, amp=0.3, fs=FS, noise=1e-3, seed=0) -> np.ndarray:
    n = int(round(seconds * fs))
    rng = np.random.default_rng(seed)
    return amp * np.sin(2 * np.pi * freq_hz * np.arange(n) / fs) + noise * rng.standard_normal(n)


def snapshot(folder) -> dict[str, str]:
    """SHA-256 of every file under ``folder`` (relative path -> digest)."""
    folder = Path(folder)
    out = {}
    for p in sorted(folder.rglob("*")):
        if p.is_file():
            out[str(p.relative_to(folder))] = hashlib.sha256(p.read_bytes()).hexdigest()
    return out


def one_line_error(res) -> str:
    """Assert the failure contract (non-zero exit, one non-empty stderr line, no traceback)."""
    lines = res.stderr.splitlines()
    assert res.returncode != 0, f"exit 0; stdout={res.stdout!r} stderr={res.stderr!r}"
    assert "Traceback" not in res.stderr, res.stderr
    assert len(lines) == 1 and lines[0].strip(), f"expected one stderr line, got {lines!r}"
    return lines[0]


def write_small_run(run_dir, n=3000, hop=0.02, f0=20000.0, with_markers=True) -> Path:
    """A small valid run folder written by RunWriter: baseline / coin at 10 mm (+3 Hz) / baseline."""
    t = (np.arange(n) + 0.5) * hop
    rng = np.random.default_rng(1)
    f = f0 + 0.01 * rng.standard_normal(n)
    third = n * hop / 3
    f[(t >= third) & (t < 2 * third)] += 3.0
    frames = FrameTable(t, f, np.full(n, -20.0), np.full(n, 40.0), np.zeros(n, np.int64))
    run = prepare_run_dir(run_dir)
    with RunWriter(run, {"start_utc": START, "baseline": {"freq_hz": f0, "method": "test"},
                         "tracker": {"frame_ms": 85.0}}) as w:
        w.append(frames)
    if with_markers:
        write_markers_copy(run, markers_to_csv([Marker(0.0, third, BASELINE, math.nan),
                                                Marker(third, 2 * third, "coin", 10.0),
                                                Marker(2 * third, 3 * third, BASELINE, math.nan)]))
    return run


#: runs coilshift on a terminal of its own (``os.forkpty``: the terminal is the command's
#: controlling terminal, in a session of its own), so the test process never owns a terminal.
#: argv: WAIT_FOR ACTION COILSHIFT-ARGS...; WAIT_FOR is text the command prints or a path that
#: must exist; ACTION is "ctrl-c" (type Ctrl-C, 0.5 s later) or "close" (close the terminal, 1 s later).
#: Prints what the command printed; exits with the command's status.
ON_A_TERMINAL = r"""
import os, select, sys, time
wait_for, action, args = sys.argv[1], sys.argv[2], sys.argv[3:]
pid, fd = os.forkpty()
if pid == 0:
    os.execv(sys.executable, [sys.executable, "-m", "coilshift.cli.main", *args])
seen, deadline = b"", time.monotonic() + 30
def ready():
    return wait_for.encode() in seen if not wait_for.startswith("/") else os.path.exists(wait_for)
while not ready() and time.monotonic() < deadline:
    if select.select([fd], [], [], 0.1)[0]:
        try:
            seen += os.read(fd, 65536)
        except OSError:
            break
if action == "ctrl-c":
    # as a person would, a moment after the prompt: a signal that lands between the prompt's
    # write and the read that follows is noted by Python but does not end that read
    time.sleep(0.5)
    os.write(fd, b"\x03")
else:
    time.sleep(1.0)
    os.close(fd)
while action == "ctrl-c":
    try:
        chunk = os.read(fd, 65536)
    except OSError:
        break
    if not chunk:
        break
    seen += chunk
_, status = os.waitpid(pid, 0)
sys.stdout.write(seen.decode("utf-8", "replace"))
sys.exit(os.waitstatus_to_exitcode(status))
"""


def on_a_terminal(wait_for, action: str, *args, env=None, timeout=60):
    """Run coilshift ``args`` on a terminal of its own; see :data:`ON_A_TERMINAL`."""
    env = {**{k: v for k, v in os.environ.items() if k != "COILSHIFT_DEBUG"}, **(env or {})}
    return subprocess.run([sys.executable, "-c", ON_A_TERMINAL, str(wait_for), action, *map(str, args)],
                          capture_output=True, text=True, env=env, timeout=timeout)
