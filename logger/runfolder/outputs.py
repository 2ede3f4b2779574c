"""Output folders built aside and swapped in whole: analysis results, stability outputs,
predictions, simulations, the demo.

A command that writes an output folder does all its work in a hidden temporary folder beside
it (``.OUT.building-XXXX``) and only when every output is written moves them into ``OUT``, with
Ctrl-C, SIGTERM and SIGHUP held off for those few renames. An interrupted or failed command
therefore leaves ``OUT`` exactly as it was: never a mix of new and old outputs.

With ``force`` an existing folder is allowed: each new output replaces the file of the same
name (one atomic rename each); the user's other files and folders there are kept as they are.
Those renames hold the folder's lock (:class:`~coilshift.logger.runfolder.locking.FolderLock`),
so two commands swapping into one folder never interleave their outputs, and a folder that a
run is being written into (a capture) is refused, at the start and again at the swap.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from contextlib import contextmanager
from pathlib import Path

from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.atomic import _umask
from coilshift.logger.runfolder.folders import make_folder, refuse_existing
from coilshift.logger.runfolder.locking import FolderLock, held_signals

#: prefix of the hidden folder an output folder is built in (after a dot and the folder's name)
BUILDING = ".building-"


@contextmanager
def building_output_dir(path: str | os.PathLike, force: bool = False):
    """Build an output folder aside, then swap it in: yields the folder to write into.

    Refuses (changing nothing) an existing file, or a non-empty folder without ``force``. If the
    body raises (an error, Ctrl-C, SIGTERM), the build folder is removed and ``path`` is left as
    it was. Files written in the yielded folder must not record its own path: it is temporary
    (say where things went with the final ``path``).
    """
    final = Path(path)
    refuse_existing(final, force, replaces="its contents")
    if final.is_dir():
        FolderLock(final).release()  # refused now, before the work, if another command is writing there
    make_folder(final.parent)
    try:
        build = Path(tempfile.mkdtemp(prefix=f".{final.name}{BUILDING}", dir=final.parent))
    except OSError as exc:
        raise InputError(f"{final}: cannot create the output folder ({exc.strerror})") from None
    try:
        os.chmod(build, 0o777 & ~_umask())  # mkdtemp makes it private; the output gets the usual mode
        try:
            yield build
        except OSError as exc:  # disk full while writing: name the output, not its temporary place
            raise _renamed(exc, build, final) from None
        swap_in(build, final, force)
    finally:
        shutil.rmtree(build, ignore_errors=True)  # nothing left there after a swap; all of it after a failure


def _renamed(exc: OSError, build: Path, final: Path) -> OSError:
    name = exc.filename
    if name is None or not str(name).startswith(str(build)):
        return exc
    shown = str(final) + str(name)[len(str(build)):]
    return OSError(exc.errno, exc.strerror or str(exc), shown)


def swap_in(build: Path, final: Path, force: bool) -> None:
    """Move everything in ``build`` into ``final`` (see the module notes); ``build`` ends empty.

    Raises InputError, moving nothing, when ``final`` became non-empty meanwhile without
    ``force``, when another command holds its lock, or when a new output's name is taken by a
    file where a folder goes (or the reverse).
    """
    with held_signals():
        refuse_existing(final, force, replaces="its contents")  # again: another command may have written it
        if not final.exists() or not any(final.iterdir()):
            os.replace(build, final)  # a new or empty folder: one rename
            return
        lock = FolderLock(final)  # one swap at a time
        try:
            _check_kinds(build, final)
            _merge(build, final)
        finally:
            lock.release()


def _check_kinds(src: Path, dst: Path) -> None:
    for entry in src.iterdir():
        target = dst / entry.name
        if not (target.exists() or target.is_symlink()):
            continue
        if entry.is_dir() != (target.is_dir() and not target.is_symlink()):
            kind = "a folder" if entry.is_dir() else "a file"
            raise InputError(f"{target}: is in the way of the new output of that name ({kind} goes there)")
        if entry.is_dir():
            _check_kinds(entry, target)


def _merge(src: Path, dst: Path) -> None:
    for entry in sorted(src.iterdir()):
        target = dst / entry.name
        if entry.is_dir() and target.is_dir():
            _merge(entry, target)
        else:
            os.replace(entry, target)
