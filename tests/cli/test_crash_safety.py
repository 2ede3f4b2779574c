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
from reliability_helpers import cli, on_a_terminal, one_line_error, snapshot, tone, wav16, write_small_run

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
def test_stability_outputs_killed_mid_write_stay_whole(tmp_path, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "0")  # the reports' date: each rewrite is the same bytes
    run = _small_run(tmp_path / "run")
    out = tmp_path / "out"
    # the same command line as the rewrites below: the report's header records it
    res = cli("stability", run, "-o", out, "--force", "--json")
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
    # rows and audio are both written as they come: whichever meets the full disk first is named
    assert ("audio.wav" in line and save_audio or "log.csv" in line) and "No space left on device" in line
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


# --------------------------------------------------------------------------- round two: signals, locks, windows

def _popen(*args, env=None, **kw):
    env = {**{k: v for k, v in os.environ.items() if k != "COILSHIFT_DEBUG"}, **(env or {})}
    return subprocess.Popen([sys.executable, "-m", "coilshift.cli.main", *map(str, args)], env=env, **kw)


def _wait_for(pred, proc, timeout=30.0, what="the command"):
    deadline = time.monotonic() + timeout
    while not pred():
        if proc.poll() is not None:
            out, err = proc.communicate()
            pytest.fail(f"{what} ended early (exit {proc.returncode}): {err!r}")
        assert time.monotonic() < deadline, f"{what}: timed out waiting"
        time.sleep(0.002)


def _old_run(folder: Path) -> dict:
    folder.mkdir()
    (folder / "log.csv").write_text("t_s,freq_hz\n0.0,1000.0\n")
    (folder / "run.json").write_text('{"status": "complete", "note": "the old run"}\n')
    (folder / "markers.csv").write_text("start_s,end_s,target,distance_mm\n0,1,baseline,\n")
    (folder / "notes.txt").write_text("mine\n")
    return snapshot(folder)


def _locked_by(folder: Path, pid: int) -> bool:
    """``pid`` holds a flock on ``folder`` (read from /proc/locks, without touching the lock)."""
    locks = Path("/proc/locks")
    if not locks.exists():
        pytest.skip("no /proc/locks to see a lock from outside")
    ino = folder.stat().st_ino
    for line in locks.read_text().splitlines():
        f = line.split()
        if "FLOCK" in f and str(pid) in f and any(x.endswith(f":{ino}") for x in f):
            return True
    return False


def _setting_aside(folder: Path) -> bool:
    """The forced run has set the old run aside: it is writing now."""
    return any(q.name.startswith(".log.csv.replaced-") for q in folder.iterdir())


@pytest.fixture(scope="module")
def long_recording(tmp_path_factory):
    # 30 s at 1 ms hops: 30 000 rows, about half a second of writing on this machine
    return wav16(tmp_path_factory.mktemp("rec") / "long.wav", tone(30.0))


SIGNALS = [signal.SIGINT, signal.SIGTERM, signal.SIGHUP]


@pytest.mark.slow
def test_track_force_ended_by_any_signal_while_writing_puts_the_old_run_back(tmp_path, long_recording):
    # the class: Ctrl-C, SIGTERM (kill, a service manager) and SIGHUP (a closed terminal) alike
    runs = {sig: tmp_path / sig.name for sig in SIGNALS}
    before = {sig: _old_run(run) for sig, run in runs.items()}
    # one at a time: started together, the later ones could finish writing while the first is
    # being waited for, and the signal would come too late
    for sig, run in runs.items():
        proc = _popen("track", long_recording, "-o", run, "--force", "--quiet", "--hop-ms", "1",
                      stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
        try:
            _wait_for(lambda: _setting_aside(run), proc, what=f"track ({sig.name})")
            proc.send_signal(sig)
            _, err = proc.communicate(timeout=60)
        finally:
            if proc.poll() is None:
                proc.kill()
                proc.communicate()
        assert proc.returncode == 128 + sig, (sig.name, proc.returncode, err)
        lines = err.splitlines()
        assert len(lines) == 1 and "Traceback" not in err, lines
        assert snapshot(runs[sig]) == before[sig], f"{sig.name}: the old run is not back as it was"


@pytest.mark.slow
def test_a_run_folder_being_written_is_refused_to_a_second_command(tmp_path, monkeypatch):
    # two `track --force` into one folder at once: the second is refused in one line and the
    # folder ends with one consistent run (run.json and log.csv of the same recording)
    from concurrent.futures import ThreadPoolExecutor

    env = _quiet_config(monkeypatch, tmp_path)
    # long enough (240 000 frames, several seconds even on two threads) that the others are tried
    # while it runs: each of them spends most of a second just starting Python
    long_recording = wav16(tmp_path / "long.wav", tone(120.0))
    other = wav16(tmp_path / "other.wav", tone(2.0, freq_hz=1500.0))
    run = tmp_path / "run"
    _old_run(run)
    first = _popen("track", long_recording, "-o", run, "--force", "--quiet", "--hop-ms", "0.5",
                   stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    try:
        _wait_for(lambda: _locked_by(run, first.pid), first, what="the first track")  # it is tracking now
        with ThreadPoolExecutor(2) as pool:
            second = pool.submit(cli, "track", other, "-o", run, "--force", "--quiet")
            capture = pool.submit(cli, "capture", "-o", run, "--force", "--synthetic", "1000", "--rate", "8000",
                                  "--seconds", "1", "--no-view", env=env)
            second, capture = second.result(), capture.result()
        assert first.poll() is None, "the first track ended before the others tried: the test proves nothing"
        _, err = first.communicate(timeout=120)
    finally:
        if first.poll() is None:
            first.kill()
        first.communicate()  # and its stderr pipe is closed whatever happened
    assert first.returncode == 0, err
    for res in (second, capture):
        line = one_line_error(res)
        assert str(run) in line and "another coilshift command" in line
    meta = json.loads((run / "run.json").read_text())
    assert meta["source"]["path"] == str(long_recording)
    assert len(read_log(run).table) == meta["totals"]["rows"]


@pytest.mark.slow
def test_a_running_capture_keeps_its_folder_locked(tmp_path, monkeypatch):
    env = _quiet_config(monkeypatch, tmp_path)
    run = tmp_path / "run"
    wav = wav16(tmp_path / "rec.wav", tone(1.0))
    proc = _popen("capture", "-o", run, "--synthetic", "1000", "--rate", "8000", "--seconds", "30", "--no-view",
                  env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    _wait_for(lambda: (run / "log.csv").exists(), proc, what="capture")
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(2) as pool:  # every command that writes a run folder: track and calibrate
        tried = [pool.submit(cli, "track", wav, "-o", run, "--force", "--quiet"),
                 pool.submit(cli, "calibrate", "-o", run, "--force", "--target", "coin", "--distances", "10",
                             "--synthetic", "1000", "--rate", "8000", env=env)]
        tried = [t.result() for t in tried]
    assert proc.poll() is None, "the capture ended before the others tried: the test proves nothing"
    for res in tried:
        assert "another coilshift command" in one_line_error(res)
    proc.send_signal(signal.SIGINT)  # Ctrl-C: the capture ends as usual
    _, err = proc.communicate(timeout=30)
    assert proc.returncode == 0, err
    assert json.loads((run / "run.json").read_text())["status"] == "complete"


def _kill_in_window(run: Path, proc, seconds: float) -> float:
    """SIGKILL ``proc`` ``seconds`` after its run.json appeared (the input is open by then);
    returns the audio it had received, an upper estimate (a paced source runs in real time)."""
    _wait_for(lambda: (run / "run.json").exists(), proc, what="capture")
    opened = time.monotonic()
    time.sleep(seconds)
    proc.send_signal(signal.SIGKILL)
    received = time.monotonic() - opened + 0.05  # + the poll period and the start's own few ms
    proc.communicate(timeout=10)
    return received


REZEROING = textwrap.dedent("""
    import sys, time
    from coilshift.cli.inputs import synthetic_source
    from coilshift.logger.capture.engine import CaptureEngine
    from coilshift.logger.runfolder.folders import prepare_run_dir
    from coilshift.logger.tracking.tracker import TrackerSettings
    eng = CaptureEngine(synthetic_source("1000", 8000.0, None), prepare_run_dir(sys.argv[1]), TrackerSettings(),
                        baseline_s=2.0)
    eng.start()
    while True:  # a re-zero every 1.5 s: a 2 s baseline window is always open
        time.sleep(1.5)
        eng.rezero()
""")


@pytest.mark.slow
@pytest.mark.parametrize("window", ["start", "rezero"])
def test_capture_killed_inside_a_baseline_window_keeps_its_rows(tmp_path, monkeypatch, window):
    # a crash loses at most about a second, whatever the state: rows of an open baseline window
    # are on disk with shift_hz empty, filled in by the reader once a baseline is known
    env = _quiet_config(monkeypatch, tmp_path)
    run = tmp_path / "run"
    if window == "start":  # the first window lasts 20 s; killed 5 s in
        proc = _popen("capture", "-o", run, "--synthetic", "1000", "--rate", "8000", "--baseline-s", "20",
                      "--no-view", env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    else:  # re-zeroed every 1.5 s; killed 5 s in, inside the third window
        proc = subprocess.Popen([sys.executable, "-c", REZEROING, str(run)], stdout=subprocess.DEVNULL,
                                stderr=subprocess.PIPE)
    received = _kill_in_window(run, proc, 5.0)
    log = read_log(run)
    assert log.interrupted
    tone_rows = np.isfinite(log.freq_hz)
    assert log.t_s[-1] >= received - 1.0, f"rows end at {log.t_s[-1]:.2f} s of {received:.2f} s received"
    assert np.all(np.abs(log.freq_hz[tone_rows] - 1000.0) < 0.5)
    if window == "rezero":  # the first window (0 .. 1.5 s, restarted) never closed: no baseline yet
        assert np.isnan(log.table["shift_hz"]).all()


@pytest.mark.slow
@pytest.mark.parametrize("how", ["SIGINT", "SIGTERM", "SIGHUP", "terminal closed"])
def test_capture_ended_by_a_signal_or_a_hangup_closes_the_run_cleanly(tmp_path, monkeypatch, how):
    # the class: Ctrl-C, SIGTERM (kill, a service manager, a shutdown) and SIGHUP (a closed
    # terminal) all end a capture the same way: the run is complete and its log whole
    env = _quiet_config(monkeypatch, tmp_path)
    run = tmp_path / "run"
    args = ["capture", "-o", run, "--synthetic", "1000", "--rate", "8000"]
    if how.startswith("SIG"):
        proc = _popen(*args, "--no-view", env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        _wait_for(lambda: (run / "log.csv").exists(), proc, what="capture")
        time.sleep(1.0)
        proc.send_signal(getattr(signal, how))
        _, err = proc.communicate(timeout=30)
        err = err.decode()
        assert proc.returncode == 0, (how, proc.returncode, err)  # as Ctrl-C: the usual way to end a capture
    else:  # the live panel on a terminal that goes away: the kernel sends SIGHUP, the tty fails
        res = on_a_terminal(run / "log.csv", "close", *args, env=env)
        err = res.stdout + res.stderr
    assert "Traceback" not in err and "internal error" not in err, err
    meta = json.loads((run / "run.json").read_text())
    assert meta["status"] == "complete" and meta["totals"]["ended_by"] == "stopped"
    log = read_log(run)
    assert not log.interrupted and log.t_s[-1] > 0.8


# --------------------------------------------------------------------------- round two: output folders

@pytest.mark.slow
def test_analyze_force_ended_by_sigterm_while_writing_leaves_the_old_outputs(tmp_path):
    runs = [write_small_run(tmp_path / name / "run") for name in ("a", "b", "c")]
    out = tmp_path / "out"
    res = cli("analyze", runs[0], "--bootstrap", "20", "-o", out)
    assert res.returncode == 0, res.stderr
    (out / "keep.txt").write_text("mine\n")
    before = snapshot(out)
    for delay in (0.0, 0.05, 0.15):  # the build folder appears early; kill at a few points of the writing
        stamp = {q: q.stat().st_mtime_ns for q in out.iterdir()}
        proc = _popen("analyze", *runs, "--bootstrap", "20", "-o", out, "--force", stdout=subprocess.DEVNULL,
                      stderr=subprocess.PIPE)
        _wait_for(lambda: _writing_started(out, stamp) or any(".building-" in q.name for q in tmp_path.iterdir()),
                  proc, what="analyze")
        time.sleep(delay)
        proc.send_signal(signal.SIGTERM)
        proc.communicate(timeout=60)
        if proc.returncode == 0:
            continue  # it finished first: nothing to check at this delay
        assert snapshot(out) == before  # every old output whole, no new one mixed in
        assert not [q for q in tmp_path.iterdir() if ".building-" in q.name]  # cleaned up


def test_a_full_disk_while_analyze_writes_names_the_output(tmp_path, monkeypatch, capsys):
    from coilshift.logger.runfolder import atomic

    run = write_small_run(tmp_path / "run")
    out = tmp_path / "out"
    real_fsync, calls = os.fsync, []

    def failing_fsync(fd):  # a write into an open file fails with no file name attached
        calls.append(fd)
        if len(calls) > 2:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        real_fsync(fd)

    monkeypatch.setattr(atomic.os, "fsync", failing_fsync)
    rc = main(["analyze", str(run), "--bootstrap", "20", "-o", str(out)])
    lines = capsys.readouterr().err.splitlines()
    assert rc == 1 and len(lines) == 1, lines
    assert str(out) in lines[0] and "No space left on device" in lines[0] and ".building" not in lines[0]
    assert not out.exists()


@pytest.mark.parametrize("argv, done", [
    (("track", "{rec}", "-o", "{out}", "--json", "--quiet"), "run was written"),
    (("analyze", "{run}", "--bootstrap", "20", "-o", "{out}", "--json"), "outputs were written"),
    (("coil", "--turns", "20", "--inner-diameter-mm", "100", "--length-mm", "200", "--awg", "26", "--json"),
     "nothing else"),
])
def test_a_full_disk_behind_stdout_says_only_the_printed_result_was_lost(tmp_path, argv, done):
    rec = wav16(tmp_path / "rec.wav", tone(1.0))
    run = write_small_run(tmp_path / "run")
    out = tmp_path / "out"
    args = [str(a).replace("{rec}", str(rec)).replace("{run}", str(run)).replace("{out}", str(out)) for a in argv]
    env = {k: v for k, v in os.environ.items() if k != "COILSHIFT_DEBUG"}
    with open("/dev/full", "w") as full:
        res = subprocess.run([sys.executable, "-m", "coilshift.cli.main", *args], stdout=full, stderr=subprocess.PIPE,
                             text=True, env=env, timeout=120)
    line = one_line_error(res)
    assert "standard output" in line and done in line, line
    if argv[0] == "track":
        assert json.loads((out / "run.json").read_text())["status"] == "complete"
