"""Run folders and output folders on disk: which files a run folder holds, creating one, refusing
an existing one, and claiming one for a new run so that a run that fails, or is refused, while
it starts leaves the old run whole.

A run never overwrites another by accident: an existing non-empty folder is refused unless
``force``; with ``force`` only the run's own files are replaced (anything else the user keeps
there stays). A :class:`RunClaim` locks the folder against a second coilshift command, sets the
old run's files aside (hidden, renamed) when the new run begins, puts them back if it fails
before it is under way, and deletes them once it is.
"""

from __future__ import annotations

import os
import shutil
from contextlib import contextmanager
from pathlib import Path
from typing import Callable, TypeVar

from coilshift.logger.errors import InputError, setting
from coilshift.logger.runfolder.locking import FolderLock, held_signals

LOG_NAME = "log.csv"
META_NAME = "run.json"
MARKERS_NAME = "markers.csv"
#: files a run folder may hold that a forced run is allowed to replace
RUN_FILES = (LOG_NAME, META_NAME, MARKERS_NAME)

T = TypeVar("T")


def refuse_existing(run_dir: str | os.PathLike, force: bool = False,
                    replaces: str = "its run files") -> None:
    """Raise InputError if ``run_dir`` is a file, or a non-empty folder and not ``force``.

    Changes nothing: a command checks this before hours of work, not only when it writes.
    """
    run_dir = Path(run_dir)
    if run_dir.exists() and not run_dir.is_dir():
        raise InputError(f"{run_dir}: exists and is not a folder")
    if run_dir.is_dir() and any(run_dir.iterdir()) and not force:
        raise InputError(f"{run_dir}: folder exists and is not empty (use {setting('force')} to replace {replaces})")


def make_folder(path: Path) -> None:
    """``mkdir -p``, with a one-line InputError naming the folder when it cannot be made."""
    try:
        path.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"{path}: cannot create folder ({exc.strerror})") from None


def _check_writable(folder: Path) -> None:
    if not os.access(folder, os.W_OK):
        raise InputError(f"{folder}: folder is not writable")


def _run_files(run_dir: Path, also: tuple[str, ...]) -> list[Path]:
    """The files of a run in ``run_dir``: log, run.json, markers, and those matching ``also``."""
    found = [run_dir / name for name in RUN_FILES if (run_dir / name).is_file()]
    for pattern in also:
        found += sorted(p for p in run_dir.glob(pattern) if p.is_file() and p not in found)
    return found


def prepare_run_dir(run_dir: str | os.PathLike, force: bool = False) -> Path:
    """Create ``run_dir`` for a new run; refuse an existing non-empty folder unless ``force``.

    With ``force`` only the run's own files (log.csv, run.json, markers.csv) are removed;
    anything else the user keeps there is left alone. (Commands use :class:`RunClaim`, which
    keeps the old files until the new run is under way; this is for tests and scripts.)
    """
    run_dir = Path(run_dir)
    refuse_existing(run_dir, force)
    make_folder(run_dir)
    _check_writable(run_dir)
    for p in _run_files(run_dir, ()):
        p.unlink()
    return run_dir


def new_output_dir(path: str | os.PathLike, force: bool) -> Path:
    """An output folder (analysis results, a simulation) that must not already hold anything,
    unless ``force``. (Commands build their outputs with
    :func:`coilshift.logger.runfolder.outputs.building_output_dir` instead, which swaps the
    finished folder in.)"""
    path = Path(path)
    refuse_existing(path, force, replaces="its contents")
    make_folder(path)
    return path


class RunClaim:
    """A run folder this process is about to write a run into.

    Parameters
    ----------
    run_dir : the folder (need not exist yet)
    force : allow a folder that already holds files; only the run's own files are replaced
    also : glob patterns of further files an old run may have left that the new run replaces
        (capture: its saved audio)

    :meth:`check` refuses a folder the run may not use and changes nothing. :meth:`take` (when
    the new run is ready to write) creates the folder, locks it against other coilshift
    commands and renames the old run's files aside (``.log.csv.replaced-PID``); then either
    :meth:`commit` (the new run is under way: delete them) or :meth:`undo` (it failed: remove
    what it wrote, put them back). :meth:`release` drops the lock when the run is finished.
    """

    def __init__(self, run_dir: str | os.PathLike, force: bool = False, also: tuple[str, ...] = ()):
        self.run_dir = Path(run_dir)
        self.force = bool(force)
        self.also = tuple(also)
        self.existed = False
        self._taken = False  # the folder is ours and the old run set aside: undo() has work to do
        self._kept: list[tuple[Path, Path]] = []
        self._lock: FolderLock | None = None

    def check(self) -> None:
        """Refuse now what :meth:`take` would refuse for the folder as it is (changes nothing)."""
        refuse_existing(self.run_dir, self.force)

    def hold(self) -> None:
        """Lock an existing folder now, before hours of work, changing nothing in it (a folder
        that does not exist yet is locked by :meth:`take`). Refuses a folder in use."""
        if self._lock is None and self.run_dir.is_dir():
            self._lock = FolderLock(self.run_dir)

    def take(self) -> Path:
        """Create and lock the folder, set an old run aside; returns the folder.

        Raises InputError (changing nothing) for a folder in use, not writable or not allowed.
        """
        run_dir = self.run_dir
        self.check()
        with held_signals():
            self.existed = run_dir.exists()
            make_folder(run_dir)
            try:
                if self._lock is None:
                    self._lock = FolderLock(run_dir)
                _check_writable(run_dir)
                self.check()  # again under the lock: another command may have filled it meanwhile
            except BaseException:
                self.release()
                if not self.existed:
                    shutil.rmtree(run_dir, ignore_errors=True)
                raise
            for old in _run_files(run_dir, self.also):
                aside = old.with_name(f".{old.name}.replaced-{os.getpid()}")
                os.replace(old, aside)
                self._kept.append((old, aside))
            self._taken = True
        return run_dir

    def start_run(self, write_first: Callable[[], T]) -> T:
        """:meth:`take`, then ``write_first()`` (the new run's first files): :meth:`commit` if it
        works, else :meth:`undo` and :meth:`release` and re-raise. Returns what it returned."""
        try:
            self.take()  # inside the try: Ctrl-C held during take() arrives just after it
            made = write_first()
        except BaseException:
            self.undo()
            self.release()
            raise
        self.commit()
        return made

    @contextmanager
    def replacing(self):
        """:meth:`take`, yield the folder, then :meth:`commit`, or :meth:`undo` if the body raises
        (an error, Ctrl-C, SIGTERM). The lock stays held (see :meth:`release`)."""
        try:
            folder = self.take()  # inside the try: Ctrl-C held during take() arrives just after it
            yield folder
        except BaseException:
            self.undo()
            raise
        self.commit()

    def commit(self) -> None:
        """The new run is under way: delete the old run's files that were set aside."""
        with held_signals():
            for _old, aside in self._kept:
                aside.unlink(missing_ok=True)
            self._kept = []
            self._taken = False  # the new run stands, whatever happens to it from now on

    def undo(self) -> None:
        """The new run failed before it was under way: remove what it created, put the old run back.

        Does nothing unless :meth:`take` succeeded (a refused folder is never touched)."""
        if not self._taken:
            return
        with held_signals():
            if not self.existed:
                shutil.rmtree(self.run_dir, ignore_errors=True)
            else:
                for p in _run_files(self.run_dir, self.also):
                    p.unlink(missing_ok=True)
                for tmp in self.run_dir.glob(f".{META_NAME}.*.tmp"):
                    tmp.unlink(missing_ok=True)
                for old, aside in self._kept:
                    os.replace(aside, old)
            self._kept = []
            self._taken = False

    def release(self) -> None:
        """Drop the folder lock (also dropped by the kernel when the process ends)."""
        if self._lock is not None:
            self._lock.release()
            self._lock = None


@contextmanager
def replacing_run(run_dir: str | os.PathLike, force: bool = False):
    """Write a run into ``run_dir`` all or nothing: yields the prepared, locked folder.

    Files of an old run are set aside first; if the body raises (an error, Ctrl-C, SIGTERM),
    what it created is removed and the old run comes back as it was; if it succeeds, the old
    files are deleted.
    """
    claim = RunClaim(run_dir, force)
    try:
        with claim.replacing() as folder:
            yield folder
    finally:
        claim.release()
