"""Run folders and output folders on disk: which files a run folder holds, creating one, refusing
an existing one, and undoing a run that failed while it was written.

A run never overwrites another by accident: an existing non-empty folder is refused unless
``force``; with ``force`` only the run's own files are replaced (anything else the user keeps
there stays), and a run that fails while being written puts the replaced files back.
"""

from __future__ import annotations

import os
import shutil
from contextlib import contextmanager
from pathlib import Path

from coilshift.logger.errors import InputError, setting

LOG_NAME = "log.csv"
META_NAME = "run.json"
MARKERS_NAME = "markers.csv"
#: files a run folder may hold that a forced run is allowed to replace
RUN_FILES = (LOG_NAME, META_NAME, MARKERS_NAME)


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


def _make_folder(path: Path) -> None:
    try:
        path.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"{path}: cannot create folder ({exc.strerror})") from None


def prepare_run_dir(run_dir: str | os.PathLike, force: bool = False) -> Path:
    """Create ``run_dir`` for a new run; refuse an existing non-empty folder unless ``force``.

    With ``force`` only the run's own files (log.csv, run.json, markers.csv) are removed;
    anything else the user keeps there is left alone.
    """
    run_dir = Path(run_dir)
    refuse_existing(run_dir, force)
    if run_dir.is_dir():
        for name in RUN_FILES:
            p = run_dir / name
            if p.is_file():
                p.unlink()
            elif p.is_dir():
                shutil.rmtree(p)
    _make_folder(run_dir)
    if not os.access(run_dir, os.W_OK):
        raise InputError(f"{run_dir}: folder is not writable")
    return run_dir


def new_output_dir(path: str | os.PathLike, force: bool) -> Path:
    """An output folder (analysis results, a simulation) that must not already hold anything,
    unless ``force``."""
    path = Path(path)
    refuse_existing(path, force, replaces="its contents")
    _make_folder(path)
    return path


def set_aside(run_dir: Path) -> list[tuple[Path, Path]]:
    """Rename an old run's files (replaced under ``force``) so a failed write can put them back.

    Returns (original, set-aside) path pairs for :func:`restore` or :func:`discard`.
    """
    kept = []
    for fname in RUN_FILES:
        old = run_dir / fname
        if old.is_file():
            new = run_dir / f".{fname}.replaced-{os.getpid()}"
            os.replace(old, new)
            kept.append((old, new))
    return kept


def restore(kept: list[tuple[Path, Path]]) -> None:
    """Put files set aside by :func:`set_aside` back as they were."""
    for old, new in kept:
        os.replace(new, old)


def discard(kept: list[tuple[Path, Path]]) -> None:
    """Delete files set aside by :func:`set_aside` once the new run is complete."""
    for _old, new in kept:
        new.unlink()


def remove_created(run_dir: Path, existed: bool) -> None:
    """Undo a failed write: the folder if this run made it, else just the run's own files."""
    if not existed:
        shutil.rmtree(run_dir, ignore_errors=True)
        return
    for fname in RUN_FILES:
        try:
            (run_dir / fname).unlink()
        except OSError:
            pass
    for tmp in run_dir.glob(f".{META_NAME}.*.tmp"):
        try:
            tmp.unlink()
        except OSError:
            pass


@contextmanager
def replacing_run(run_dir: str | os.PathLike, force: bool = False):
    """Write a run into ``run_dir`` all or nothing: yields the prepared folder.

    Files of an old run are set aside first; if the body raises, what it created is removed and
    the old run comes back as it was; if it succeeds, the old files are deleted.
    """
    run_dir = Path(run_dir)
    existed = run_dir.exists()
    kept = set_aside(run_dir) if existed else []
    try:
        yield prepare_run_dir(run_dir, force)
    except BaseException:
        remove_created(run_dir, existed)
        restore(kept)
        raise
    discard(kept)
