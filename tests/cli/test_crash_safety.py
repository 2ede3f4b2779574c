"""Crash safety: killed writers, full disks and read-only folders lose nothing and explain themselves.

* A process SIGKILLed while writing finished outputs (atomic temp + rename) leaves the old file
  or the new one, never part of one: checked on the writer itself and on a real command
  (``stability -o --force``) killed at random moments.
* A log write that fails (disk full, folder turned read-only, I/O error; injected into the
  log file) stops capture and track with one line naming log.csv; capture keeps the rows
  already written and run.json says ``interrupted``; track (which can be re-run from its
  recording) leaves no half run and restores the run it was asked to replace.
* The same on a real small tmpfs that fills up and on a read-only mount, when this machine
  lets the tests mount one (root in a container that allows it); skipped otherwise.
"""

from __future__ import annotations

import builtins
import errno
import json
import os
import random
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import numpy as np
import pytest
from reliability_helpers import cli, one_line_error, snapshot, tone, wav16, write_small_run

from coilshift.logger.runfolder.reader import read_log
from coilshift.cli.main import main
from coilshift.logger.runfolder import writer as runlog


def _quiet_config(monkeypatch, tmp_path):
    # the first-run wiring caution is shown once per user: mark it shown for these runs
    cfg = tmp_path / "cfg"
    (cfg / "coilshift").mkdir(parents=True)
    (cfg / "coilshift" / "state.json").write_text(json.dumps({"wiring_caution_shown": True}))
    monkeypatch.setenv("XDG_CONFIG_HOME", str(cfg))
    return {"XDG_CONFIG_HOME": str(cfg)}


def _small_run(path: Path, n=4000) -> Path:
    return write_small_run(path, n=n, with_markers=False)


# --------------------------------------------------------------------------- SIGKILL mid-write

WRITER = textwrap.dedent("""
    import sys
    from coilshift.logger.runfolder.atomic import write_bytes_atomic
    path = sys.argv[1]
    versions = [bytes([65 + k]) * (1 << 21) for k in range(3)]  # 2 MB of A, of B, of C
    print("ready", flush=True)
    k = 0
    while True:
        write_bytes_atomic(path, versions[k % 3])
        k += 1
""")


def test_atomic_writer_killed_mid_write_leaves_a_whole_file(tmp_path):
    path = tmp_path / "out.bin"
    rng = random.Random(7)
    wholes = {bytes([65 + k]) * (1 << 21) for k in range(3)}
    path.write_bytes(bytes([65]) * (1 << 21))  # an old version exists before the first kill
    for _ in range(6):
        p = subprocess.Popen([sys.executable, "-c", WRITER, str(path)], stdout=subprocess.PIPE, text=True)
        assert p.stdout.readline().strip() == "ready"
        time.sleep(rng.uniform(0.05, 0.4))
        p.send_signal(signal.SIGKILL)
        p.wait()
        p.stdout.close()
        assert path.read_bytes() in wholes  # the old file or the new one, never half
    # what a kill can leave behind is a hidden temp file, never a damaged output
    assert all(q.name.startswith(".out.bin.") and q.name.endswith(".tmp")
               for q in tmp_path.iterdir() if q != path)


def _writing_started(folder: Path, stamp: dict) -> bool:
    """A new (temp) file or a replaced output in ``folder`` since ``stamp`` was taken."""
    for q in folder.iterdir():
        try:
            if q not in stamp or q.stat().st_mtime_ns != stamp[q]:
                return True
        except FileNotFoundError:  # a temp file renamed away meanwhile: writing has started
            return True
    return False


@pytest.mark.slow
def test_stability_outputs_killed_mid_write_stay_whole(tmp_path):
    run = _small_run(tmp_path / "run")
    out = tmp_path / "out"
    res = cli("stability", run, "-o", out, "--json")
    assert res.returncode == 0, res.stderr
    reference = {k: v for k, v in snapshot(out).items() if not k.startswith(".")}
    assert set(reference) >= {"stability.json", "stability.csv", "sigma_tau.png", "drift.png"}
    env = {k: v for k, v in os.environ.items() if k != "COILSHIFT_DEBUG"}
    rng = random.Random(11)
    for _ in range(4):
        stamp = {q: q.stat().st_mtime_ns for q in out.iterdir()}
        p = subprocess.Popen([sys.executable, "-m", "coilshift.cli.main", "stability", str(run), "-o", str(out),
                              "--force", "--json"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)
        # wait until it starts writing (a temp file or a replaced output), then kill within 60 ms
        deadline = time.monotonic() + 30
        while p.poll() is None and time.monotonic() < deadline:
            if _writing_started(out, stamp):
                break
            time.sleep(0.002)
        time.sleep(rng.uniform(0.0, 0.06))
        p.send_signal(signal.SIGKILL)
        p.wait()
        now = {k: v for k, v in snapshot(out).items() if not k.startswith(".")}
        assert now == reference  # every output is the old whole file (identical to the new one)
    # the log it read is untouched
    assert read_log(run).table.shape[0] == 4000


# --------------------------------------------------------------------------- injected write failures

class _FailingFile:
    """A log file whose writes fail with ``err`` after ``ok_writes`` successful ones."""

    def __init__(self, fh, ok_writes: int, err: int):
        self._fh, self._left, self._err = fh, ok_writes, err

    def write(self, text):
        if self._left <= 0:
            raise OSError(self._err, os.strerror(self._err))
        self._left -= 1
        return self._fh.write(text)

    def __getattr__(self, name):
        return getattr(self._fh, name)


def _inject(monkeypatch, ok_writes: int, err: int) -> None:
    real_open = builtins.open

    def fake_open(path, mode="r", *args, **kwargs):
        fh = real_open(path, mode, *args, **kwargs)
        if str(path).endswith(runlog.LOG_NAME) and "x" in mode:
            return _FailingFile(fh, ok_writes, err)
        return fh

    monkeypatch.setattr(runlog, "open", fake_open, raising=False)


ERRORS = [errno.ENOSPC, errno.EROFS, errno.EIO]


@pytest.mark.parametrize("err", ERRORS, ids=[errno.errorcode[e] for e in ERRORS])
def test_capture_stops_cleanly_when_the_log_cannot_be_written(tmp_path, monkeypatch, capsys, err):
    _quiet_config(monkeypatch, tmp_path)
    _inject(monkeypatch, ok_writes=3, err=err)  # the header and two batches, then the failure
    run = tmp_path / "run"
    rc = main(["capture", "-o", str(run), "--synthetic", "1000", "--rate", "8000", "--seconds", "20",
               "--no-view"])
    cap = capsys.readouterr()
    assert rc != 0
    lines = cap.err.splitlines()
    assert len(lines) == 1 and "log.csv" in lines[0] and os.strerror(err) in lines[0], lines
    assert "Traceback" not in cap.err
    meta = json.loads((run / "run.json").read_text())
    assert meta["status"] == "interrupted"
    assert "log.csv" in meta["totals"]["write_error"]
    log = read_log(run)
    assert log.interrupted and len(log.table) > 0  # what was written before the failure is kept
    assert np.all(np.abs(log.freq_hz[np.isfinite(log.freq_hz)] - 1000.0) < 0.5)
    assert not list(run.glob(".*.tmp"))  # the room kept for run.json was given back


@pytest.mark.parametrize("err", ERRORS, ids=[errno.errorcode[e] for e in ERRORS])
def test_track_write_failure_restores_the_replaced_run(tmp_path, monkeypatch, capsys, err):
    wav = wav16(tmp_path / "rec.wav", tone(3.0))
    run = _small_run(tmp_path / "run", n=50)
    (run / "notes.txt").write_text("mine\n")
    before = snapshot(run)
    _inject(monkeypatch, ok_writes=1, err=err)  # the header goes through, the rows do not
    rc = main(["track", str(wav), "-o", str(run), "--force", "--quiet"])
    cap = capsys.readouterr()
    assert rc != 0
    lines = cap.err.splitlines()
    assert len(lines) == 1 and "log.csv" in lines[0], lines
    assert snapshot(run) == before  # the old run is back, byte for byte, and the notes kept


def test_track_write_failure_leaves_no_half_run(tmp_path, monkeypatch, capsys):
    wav = wav16(tmp_path / "rec.wav", tone(3.0))
    _inject(monkeypatch, ok_writes=1, err=errno.ENOSPC)
    rc = main(["track", str(wav), "-o", str(tmp_path / "new"), "--quiet"])
    err = capsys.readouterr().err.splitlines()
    assert rc != 0 and len(err) == 1 and "No space left on device" in err[0]
    assert not (tmp_path / "new").exists()


# --------------------------------------------------------------------------- real small / read-only disks

@pytest.fixture
def mount_point(tmp_path):
    """Mount a tmpfs: ``mount(size_kb, read_only)``; skipped where mounting is not allowed."""
    mnt = tmp_path / "disk"
    mnt.mkdir()
    mounted = []

    def mount(size_kb: int, read_only: bool = False) -> Path:
        opts = f"size={size_kb}k" + (",ro" if read_only else "")
        r = subprocess.run(["mount", "-t", "tmpfs", "-o", opts, "tmpfs", str(mnt)], capture_output=True)
        if r.returncode != 0:
            pytest.skip(f"cannot mount a tmpfs here ({r.stderr.decode().strip()})")
        mounted.append(mnt)
        return mnt

    if os.geteuid() != 0:
        pytest.skip("mounting a tmpfs needs root")
    yield mount
    for m in mounted:
        subprocess.run(["umount", str(m)], capture_output=True)


@pytest.mark.slow
@pytest.mark.parametrize("save_audio", [False, True], ids=["log", "log+audio"])
def test_capture_on_a_disk_that_fills_up(tmp_path, monkeypatch, mount_point, save_audio):
    import soundfile as sf

    env = _quiet_config(monkeypatch, tmp_path)
    disk = mount_point(96 if not save_audio else 256)  # 64 KiB of it held for the final run.json
    extra = ["--save-audio"] if save_audio else []
    res = cli("capture", "-o", disk / "run", "--synthetic", "1000", "--rate", "8000", "--hop-ms", "2",
              "--seconds", "60", "--no-view", *extra, env=env, timeout=60)
    line = one_line_error(res)
    assert ("audio.wav" if save_audio else "log.csv") in line and "No space left on device" in line
    meta = json.loads((disk / "run" / "run.json").read_text())
    assert meta["status"] == "interrupted"
    log = read_log(disk / "run")
    assert log.interrupted and len(log.table) > 100
    if save_audio:  # the audio up to its last flush reads back
        assert sf.info(str(disk / "run" / "audio.wav")).frames > 8000


def test_commands_refuse_a_read_only_folder_in_one_line(tmp_path, monkeypatch, mount_point):
    env = _quiet_config(monkeypatch, tmp_path)
    wav = wav16(tmp_path / "rec.wav", tone(1.0))
    run = _small_run(tmp_path / "run")
    disk = mount_point(256, read_only=True)
    cases = [("track", wav, "-o", disk / "a", "--quiet"),
             ("capture", "-o", disk / "b", "--synthetic", "1000", "--seconds", "1", "--no-view"),
             ("stability", run, "-o", disk / "c"),
             ("simulate", Path(__file__).parents[2] / "sample_data" / "calibration.json", "-o", disk / "d")]
    for args in cases:
        res = cli(*args, env=env)
        line = one_line_error(res)
        assert str(disk) in line, line
    assert list(disk.iterdir()) == []


@pytest.mark.slow
def test_track_on_a_full_disk_leaves_nothing_half_written(tmp_path, mount_point):
    wav = wav16(tmp_path / "long.wav", tone(60.0))  # ~3000 rows, ~200 KB of log
    disk = mount_point(96)
    res = cli("track", wav, "-o", disk / "new", "--quiet")
    line = one_line_error(res)
    assert "log.csv" in line and "No space left on device" in line
    assert list(disk.iterdir()) == []  # no half run that looks like a run
    old = disk / "old"
    old.mkdir()
    (old / "log.csv").write_text("t_s,freq_hz\n0.0,1000.0\n")
    (old / "run.json").write_text('{"status": "complete"}\n')
    before = snapshot(old)
    res = cli("track", wav, "-o", old, "--force", "--quiet")
    one_line_error(res)
    assert snapshot(old) == before  # the run it was to replace is back
