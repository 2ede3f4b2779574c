"""A call that may never return, waited for with a bound (logger/waiting.py), and the soundcard
stream's close built on it: an input that stops delivering must not hang the command.

Nothing here computes a measurement; the checks are of time bounds and of which driver calls
were made. The bounds leave a second of slack for a loaded two-core machine.
"""

from __future__ import annotations

import threading
import time

import pytest

from coilshift.logger.waiting import call_with_timeout


def test_a_call_that_returns_in_time_is_waited_for():
    seen = []
    t0 = time.monotonic()
    assert call_with_timeout(lambda: seen.append("ran"), 5.0) == (True, None)
    assert seen == ["ran"] and time.monotonic() - t0 < 1.0


def test_an_error_in_the_call_is_handed_back_not_lost():
    def fail():
        raise OSError(5, "Input/output error")

    finished, error = call_with_timeout(fail, 5.0)
    assert finished and isinstance(error, OSError) and error.errno == 5


def test_a_call_that_never_returns_is_abandoned_after_the_bound():
    release = threading.Event()
    t0 = time.monotonic()
    try:
        assert call_with_timeout(release.wait, 0.3, name="stuck-driver") == (False, None)
        waited = time.monotonic() - t0
        stuck = [t for t in threading.enumerate() if t.name == "stuck-driver"]
        assert stuck and all(t.daemon for t in stuck)  # it cannot keep the process alive at exit
    finally:
        release.set()
    assert 0.3 <= waited < 1.3


def test_ctrl_c_while_waiting_ends_the_wait():
    import signal

    release = threading.Event()
    main = threading.main_thread().ident  # Ctrl-C 0.2 s into a 30 s wait, delivered to the waiting thread
    timer = threading.Timer(0.2, lambda: signal.pthread_kill(main, signal.SIGINT))
    t0 = time.monotonic()
    timer.start()
    try:
        assert call_with_timeout(release.wait, 30.0) == (False, None)
    finally:
        release.set()
        timer.cancel()
    assert time.monotonic() - t0 < 2.0


class _Stream:
    """A PortAudio stream stand-in whose named calls never return (a driver whose device died)."""

    def __init__(self, hangs):
        self.hangs, self.calls = set(hangs), []
        self.release = threading.Event()

    def _call(self, name):
        self.calls.append(name)
        if name in self.hangs:
            self.release.wait()

    def stop(self):
        self._call("stop")

    def abort(self):
        self._call("abort")

    def close(self):
        self._call("close")


@pytest.mark.parametrize("hangs, calls, abandoned", [
    ((), ["stop", "close"], False),                      # a healthy stream
    (("stop",), ["stop", "abort", "close"], False),      # stop() blocks: the stream is aborted instead
    (("stop", "abort"), ["stop", "abort"], True),        # both block: abandoned, PortAudio's exit skipped
], ids=["stops", "stop-hangs", "stop-and-abort-hang"])
def test_soundcard_close_returns_whatever_the_driver_does(monkeypatch, hangs, calls, abandoned):
    import atexit

    from coilshift.logger.sources import soundcard

    unregistered = []
    monkeypatch.setattr(atexit, "unregister", lambda fn: unregistered.append(fn))
    monkeypatch.setattr(soundcard, "CLOSE_TIMEOUT_S", 0.2)
    stream = _Stream(hangs)
    src = object.__new__(soundcard.SoundcardSource)  # no device: only the closing is under test
    src._stream, src._closing, src.abandoned = stream, False, False
    t0 = time.monotonic()
    try:
        src.close()
        took = time.monotonic() - t0
    finally:
        stream.release.set()
    assert took < 0.2 * len(hangs) + 1.0
    assert stream.calls == calls and src.abandoned is abandoned
    assert bool(unregistered) is abandoned  # sounddevice's exit handler would hang on an abandoned stream
