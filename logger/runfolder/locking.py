"""Two guards for the moments when a folder is being swapped or replaced: a lock that keeps two
coilshift commands out of one run folder, and a way to hold off Ctrl-C, SIGTERM and SIGHUP for
the few renames that must not be cut in half.

The lock is an advisory ``flock`` on the folder itself (opened read-only), so it leaves no file
behind and the kernel drops it when the process dies, however it dies. Where ``fcntl`` does not
exist (Windows) there is no lock.
"""

from __future__ import annotations

import os
import signal
import threading
from contextlib import contextmanager
from pathlib import Path

from coilshift.logger.errors import InputError

#: the signals a user or the system sends to end a command: held during the short critical steps
ENDING_SIGNALS = tuple(getattr(signal, name) for name in ("SIGINT", "SIGTERM", "SIGHUP") if hasattr(signal, name))


@contextmanager
def held_signals():
    """Delay Ctrl-C, SIGTERM and SIGHUP until the block is done (they are delivered afterwards).

    For steps that take milliseconds and must finish once started: setting an old run aside,
    putting it back, swapping a finished output folder in. The handlers are swapped for ones
    that only note the signal, and the first one noted is raised again at the end, so it reaches
    the handler that was in place (Python runs signal handlers in the main thread whichever
    thread the signal hits, so masking it there would not be enough). Outside the main thread,
    where handlers cannot be changed, this does nothing.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    noted: list[int] = []
    saved = {}
    for sig in ENDING_SIGNALS:
        old = signal.getsignal(sig)
        if old is not None:  # None: a handler not set from Python, which cannot be put back
            saved[sig] = old
            signal.signal(sig, lambda signum, frame: noted.append(signum))
    try:
        yield
    finally:
        for sig, old in saved.items():
            signal.signal(sig, old)
        if noted:
            signal.raise_signal(noted[0])


class FolderLock:
    """An exclusive advisory lock on a folder, held by this process until :meth:`release`.

    Raises :class:`InputError` naming the folder when another process holds it.
    """

    def __init__(self, folder: str | os.PathLike):
        self.folder = Path(folder)
        self._fd: int | None = None
        try:
            import fcntl
        except ImportError:  # no advisory locks on this platform
            return
        try:
            fd = os.open(self.folder, os.O_RDONLY)
        except OSError:
            return  # a folder that cannot be opened cannot be written either: the writer says so
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(fd)
            raise InputError(f"{self.folder}: another coilshift command is writing this folder right now; "
                             "wait for it to finish or choose another folder") from None
        except OSError:  # the file system has no locks (some network mounts): go on without
            os.close(fd)
            return
        self._fd = fd

    @property
    def held(self) -> bool:
        return self._fd is not None

    def release(self) -> None:
        """Let go of the lock (closing the folder's descriptor drops it)."""
        fd, self._fd = self._fd, None
        if fd is not None:
            os.close(fd)
