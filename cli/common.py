"""Small helpers shared by the subcommands: JSON printing, what a command has already done (for
the message when stdout fails afterwards), ending signals, and the guarded standard output.
Output folders are :func:`coilshift.logger.runfolder.outputs.building_output_dir`."""

from __future__ import annotations

import json
import signal
import sys
import threading
from contextlib import contextmanager

from coilshift.logger.runfolder.atomic import to_jsonable  # noqa: F401  (re-exported for the commands)

#: what the running command has finished so far ("the run was written to r1"), newest last
_DONE: list[str] = []


def print_json(obj) -> None:
    """Print one JSON object on stdout."""
    sys.stdout.write(json.dumps(to_jsonable(obj), indent=2, allow_nan=False) + "\n")


def note_done(text: str) -> None:
    """Record something the command has finished (files written), so that a failure afterwards,
    such as a full disk behind stdout, can say what is safe."""
    _DONE.append(text)


class Interrupted(KeyboardInterrupt):
    """SIGTERM or SIGHUP, raised where the command is, exactly like Ctrl-C's KeyboardInterrupt."""

    def __init__(self, signum: int):
        super().__init__(signum)
        self.signum = int(signum)

    @property
    def name(self) -> str:
        return signal.Signals(self.signum).name


class OutputLost(OSError):
    """Writing to standard output failed (full disk, I/O error): only the printed text is lost."""


def _raise_interrupted(signum, frame):
    raise Interrupted(signum)


@contextmanager
def handle_ending_signals():
    """While the block runs, SIGTERM and SIGHUP raise :class:`Interrupted` (a KeyboardInterrupt),
    so every command cleans up after them as it does after Ctrl-C."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    old = {}
    for name in ("SIGTERM", "SIGHUP"):
        sig = getattr(signal, name, None)
        if sig is not None:
            old[sig] = signal.signal(sig, _raise_interrupted)
    try:
        yield
    finally:
        for sig, handler in old.items():
            signal.signal(sig, handler)


class _GuardedStream:
    """stdout, whose write errors (other than a closed pipe) become :class:`OutputLost`."""

    def __init__(self, stream):
        self._stream = stream

    def write(self, text):
        try:
            return self._stream.write(text)
        except BrokenPipeError:
            raise
        except OSError as exc:
            raise OutputLost(exc.errno, exc.strerror or str(exc), "<stdout>") from None

    def flush(self):
        try:
            return self._stream.flush()
        except BrokenPipeError:
            raise
        except OSError as exc:
            raise OutputLost(exc.errno, exc.strerror or str(exc), "<stdout>") from None

    def __getattr__(self, name):
        return getattr(self._stream, name)


@contextmanager
def guarded_stdout():
    """Run a command with stdout guarded; yields the list of what it has done (see :func:`note_done`)."""
    real = sys.stdout
    _DONE.clear()
    sys.stdout = _GuardedStream(real)
    try:
        yield _DONE
    finally:
        if isinstance(sys.stdout, _GuardedStream):
            sys.stdout = real
        _DONE.clear()
