"""Claiming a run folder (lock, old run set aside and put back) and building an output folder aside.

Nothing here computes a measurement; the checks are of files on disk, byte for byte.
"""

from __future__ import annotations

import os
import signal
import threading
import time

import pytest

from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.folders import RunClaim, replacing_run
from coilshift.logger.runfolder.locking import FolderLock, held_signals
from coilshift.logger.runfolder.outputs import BUILDING, building_output_dir


def _tree(folder):
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


def _old_run(folder):
    folder.mkdir()
    (folder / "log.csv").write_text("t_s,freq_hz\n0.0,1000.0\n")
    (folder / "run.json").write_text('{"status": "complete"}\n')
    (folder / "markers.csv").write_text("start_s,end_s,target,distance_mm\n")
    (folder / "audio.wav").write_bytes(b"RIFF old")
    (folder / "notes.txt").write_text("mine\n")
    return _tree(folder)


def test_a_claim_undone_puts_the_old_run_back_byte_for_byte(tmp_path):
    run = tmp_path / "run"
    before = _old_run(run)
    claim = RunClaim(run, force=True, also=("audio.wav",))
    claim.take()
    assert sorted(p.name for p in run.iterdir() if not p.name.startswith(".")) == ["notes.txt"]
    (run / "log.csv").write_text("t_s,freq_hz\n")  # the new run had begun
    (run / ".run.json.reserve.tmp").write_bytes(b"\0" * 10)
    claim.undo()
    claim.release()
    assert _tree(run) == before


def test_a_claim_committed_leaves_only_the_new_run_and_the_users_files(tmp_path):
    run = tmp_path / "run"
    _old_run(run)
    with replacing_run(run, force=True) as folder:
        (folder / "log.csv").write_text("new\n")
    assert sorted(p.name for p in run.iterdir()) == ["audio.wav", "log.csv", "notes.txt"]
    assert (run / "log.csv").read_text() == "new\n"


def test_a_new_folder_claimed_and_undone_is_gone(tmp_path):
    claim = RunClaim(tmp_path / "new")
    claim.take()
    claim.undo()
    claim.release()
    assert not (tmp_path / "new").exists()


def test_a_locked_folder_is_refused_and_left_alone(tmp_path):
    run = tmp_path / "run"
    before = _old_run(run)
    first = RunClaim(run, force=True)
    first.take()
    try:
        with pytest.raises(InputError, match="another coilshift command"):
            RunClaim(run, force=True).take()
    finally:
        first.undo()
        first.release()
    assert _tree(run) == before
    FolderLock(run).release()  # free again once released


def test_held_signals_wait_until_the_block_is_done(tmp_path):
    # SIGINT sent in the middle of a held block arrives after it, as a KeyboardInterrupt
    done = []
    with pytest.raises(KeyboardInterrupt):
        with held_signals():
            os.kill(os.getpid(), signal.SIGINT)
            time.sleep(0.05)
            done.append("finished")
    assert done == ["finished"]


def test_held_signals_outside_the_main_thread_do_nothing():
    seen = []
    t = threading.Thread(target=lambda: seen.append(held_signals().__enter__() is None))
    t.start()
    t.join()
    assert seen == [True]


def test_an_output_folder_failing_midway_is_left_as_it_was(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "report.html").write_text("old report\n")
    (out / "keep.txt").write_text("mine\n")
    before = _tree(out)
    with pytest.raises(KeyboardInterrupt):
        with building_output_dir(out, force=True) as build:
            (build / "report.html").write_text("new report\n")
            raise KeyboardInterrupt
    assert _tree(out) == before
    assert not [p for p in tmp_path.iterdir() if BUILDING in p.name]  # no build folder left


def test_an_output_folder_swapped_in_keeps_the_users_files(tmp_path):
    out = tmp_path / "out"
    (out / "run-a").mkdir(parents=True)
    (out / "run-a" / "steps.csv").write_text("old\n")
    (out / "run-a" / "mine.txt").write_text("mine\n")
    (out / "keep.txt").write_text("mine\n")
    with building_output_dir(out, force=True) as build:
        (build / "run-a").mkdir()
        (build / "run-a" / "steps.csv").write_text("new\n")
        (build / "report.html").write_text("new\n")
    assert _tree(out) == {"keep.txt": b"mine\n", "report.html": b"new\n", "run-a/mine.txt": b"mine\n",
                          "run-a/steps.csv": b"new\n"}
    assert oct(out.stat().st_mode & 0o777) == oct(0o777 & ~_umask())


def test_an_output_in_the_way_of_a_folder_is_refused_before_anything_moves(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "run-a").write_text("a file where the outputs' folder goes\n")
    (out / "keep.txt").write_text("mine\n")
    before = _tree(out)
    with pytest.raises(InputError, match="in the way"):
        with building_output_dir(out, force=True) as build:
            (build / "report.html").write_text("new\n")
            (build / "run-a").mkdir()
    assert _tree(out) == before


def test_a_new_output_folder_appears_whole(tmp_path):
    out = tmp_path / "deep" / "out"
    with building_output_dir(out) as build:
        (build / "a.csv").write_text("1\n")
        assert not out.exists()  # nothing visible until the swap
    assert _tree(out) == {"a.csv": b"1\n"}


def test_a_disk_error_names_the_output_not_its_building_place(tmp_path):
    out = tmp_path / "out"
    with pytest.raises(OSError) as exc:
        with building_output_dir(out) as build:
            raise OSError(28, "No space left on device", str(build / "report.html"))
    assert exc.value.filename == str(out / "report.html")
    assert not out.exists()


@pytest.mark.parametrize("when", ["before", "during"])
def test_an_output_folder_another_command_is_writing_is_refused_and_left_alone(tmp_path, when):
    # two commands with --force into one folder (or one into a folder a capture is writing):
    # the one that finds the folder locked, at the start or at its swap, changes nothing there
    out = tmp_path / "out"
    out.mkdir()
    (out / "report.html").write_text("the other command's report\n")
    (out / "keep.txt").write_text("mine\n")
    before = _tree(out)
    other = FolderLock(out) if when == "before" else None
    try:
        with pytest.raises(InputError, match="another coilshift command"):
            with building_output_dir(out, force=True) as build:
                (build / "report.html").write_text("new report\n")
                (build / "steps.csv").write_text("new\n")
                other = FolderLock(out)  # the other command took the folder while this one worked
    finally:
        if other is not None:
            other.release()
    assert _tree(out) == before
    assert not [p for p in tmp_path.iterdir() if BUILDING in p.name]


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask
