"""The run folder writer: whole rows, metadata first, crash safety, no overwrite."""

from __future__ import annotations

import csv
import datetime as dt
import json
import os
import signal
import subprocess
import sys
import textwrap

import numpy as np
import pytest

from coilshift.logger.runfolder.reader import read_log
from coilshift.logger.runfolder import flags
from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.columns import LOG_COLUMNS, utc_iso
from coilshift.logger.runfolder.folders import prepare_run_dir
from coilshift.logger.runfolder.writer import RunWriter

START = "2026-03-01T12:00:00.000Z"


def _frames(n=5, f0=1000.0, first=0):
    t = 0.0425 + 0.02 * np.arange(first, first + n)
    return FrameTable(t, f0 + 0.1 * np.arange(n), np.full(n, -6.0), np.full(n, 40.0))


def test_writes_metadata_before_rows_and_header(tmp_path):
    run = prepare_run_dir(tmp_path / "run")
    w = RunWriter(run, {"start_utc": START, "baseline": {"freq_hz": 1000.0, "method": "test"}})
    meta = json.loads((run / "run.json").read_text())
    assert meta["status"] == "running" and meta["format"] == "coilshift-run"
    assert (run / "log.csv").read_text() == ",".join(LOG_COLUMNS) + "\n"
    w.append(_frames())
    w.close({"frames": 5})
    meta = json.loads((run / "run.json").read_text())
    assert meta["status"] == "complete" and meta["totals"]["rows"] == 5


def test_rows_are_whole_and_times_are_iso8601(tmp_path):
    run = prepare_run_dir(tmp_path / "run")
    with RunWriter(run, {"start_utc": START, "baseline": {"freq_hz": 1000.0, "method": "test"}}) as w:
        fr = _frames(3)
        fr.flags[1] = flags.CLIPPED | flags.LOW_SNR
        fr.freq_hz[2] = np.nan
        fr.flags[2] = flags.NO_TONE
        w.append(fr)
    rows = list(csv.DictReader((run / "log.csv").read_text().splitlines()))
    assert [r["flags"] for r in rows] == ["", "clipped;low_snr", "no_tone"]
    assert rows[2]["freq_hz"] == "" and rows[2]["shift_hz"] == ""
    assert float(rows[1]["shift_hz"]) == pytest.approx(0.1, abs=1e-9)
    # ISO 8601 (Python's own parser is the reference): start + t_s
    t1 = dt.datetime.fromisoformat(rows[1]["utc"].replace("Z", "+00:00"))
    t0 = dt.datetime.fromisoformat(START.replace("Z", "+00:00"))
    assert (t1 - t0).total_seconds() == pytest.approx(float(rows[1]["t_s"]), abs=1e-3)


def test_existing_folder_refused_without_force(tmp_path):
    run = tmp_path / "run"
    run.mkdir()
    (run / "log.csv").write_text("precious\n")
    (run / "notes.txt").write_text("mine\n")
    with pytest.raises(InputError, match="not empty"):
        prepare_run_dir(run)
    assert (run / "log.csv").read_text() == "precious\n"
    prepare_run_dir(run, force=True)
    assert not (run / "log.csv").exists()
    assert (run / "notes.txt").read_text() == "mine\n"  # --force replaces only the run's own files


def test_file_in_place_of_folder_refused(tmp_path):
    p = tmp_path / "run"
    p.write_text("x")
    with pytest.raises(InputError, match="not a folder"):
        prepare_run_dir(p, force=True)
    assert p.read_text() == "x"


def test_utc_iso_format():
    # ISO 8601 extended format with milliseconds and Z designator
    t = dt.datetime(2026, 12, 1, 18, 1, 8, 123456, tzinfo=dt.timezone.utc)
    assert utc_iso(t) == "2026-12-01T18:01:08.123Z"


WRITER_SCRIPT = textwrap.dedent("""
    import sys, time, numpy as np
    from coilshift.logger.runfolder.frames import FrameTable
    from coilshift.logger.runfolder.folders import prepare_run_dir
    from coilshift.logger.runfolder.writer import RunWriter
    run = prepare_run_dir(sys.argv[1])
    w = RunWriter(run, {"start_utc": "2026-03-01T12:00:00.000Z",
                        "baseline": {"freq_hz": 1000.0, "method": "test"}}, fsync_interval_s=0.2)
    k = 0
    while True:
        t = 0.02 * np.arange(k, k + 10)
        w.append(FrameTable(t, 1000.0 + t, np.full(10, -6.0), np.full(10, 40.0)))
        k += 10
        print(k, flush=True)
        time.sleep(0.01)
""")


def test_killed_writer_leaves_a_readable_log(tmp_path):
    """SIGKILL mid-run: the rows written so far read back correctly; the run says interrupted."""
    run = tmp_path / "run"
    proc = subprocess.Popen([sys.executable, "-c", WRITER_SCRIPT, str(run)], stdout=subprocess.PIPE, text=True)
    written = 0
    for line in proc.stdout:
        written = int(line)
        if written >= 300:
            break
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    proc.stdout.close()
    log = read_log(run)
    assert log.interrupted
    n = len(log.table)
    assert written <= n <= written + 10
    # each row is exactly what was written: freq = 1000 + t
    np.testing.assert_allclose(log.freq_hz, 1000.0 + log.t_s, atol=1e-6)


def test_disk_errors_surface_as_oserror_with_rows_kept(tmp_path, monkeypatch):
    """An injected ENOSPC on fsync: the error propagates (the CLI turns it into one line)
    and what was already flushed stays readable."""
    run = prepare_run_dir(tmp_path / "run")
    w = RunWriter(run, {"start_utc": START, "baseline": {"freq_hz": 1000.0, "method": "test"}}, fsync_interval_s=0)
    w.append(_frames(4))
    real_fsync = os.fsync

    def full(fd):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "fsync", full)
    with pytest.raises(OSError):
        w.append(_frames(4, first=4))
    monkeypatch.setattr(os, "fsync", real_fsync)
    w.close(status="interrupted")
    log = read_log(run)
    assert len(log.table) >= 4


def test_atomic_files_get_the_usual_permissions(tmp_path):
    """Finished files get the mode open() would give them (0666 less the umask), not mkstemp's 0600."""
    from coilshift.logger.runfolder import atomic

    atomic.write_text_atomic(tmp_path / "a.txt", "x")
    with open(tmp_path / "b.txt", "w") as fh:  # the reference: what a plain open() gives
        fh.write("x")
    assert (tmp_path / "a.txt").stat().st_mode & 0o777 == (tmp_path / "b.txt").stat().st_mode & 0o777
