"""Calling something that may never return (an audio driver stopping a stream that has died),
with a bound on how long the caller waits."""

from __future__ import annotations

import threading
from typing import Callable


def call_with_timeout(fn: Callable[[], object], timeout_s: float, name: str = "coilshift-wait") -> tuple[bool, BaseException | None]:
    """Run ``fn()`` in a daemon thread and wait for it at most ``timeout_s`` seconds.

    Ctrl-C while waiting ends the wait early (the call goes on in its thread). Returns
    ``(finished, error)``: whether ``fn`` returned in time, and the exception it raised, if any.
    A call that has not finished is abandoned: its thread is a daemon and does not keep the
    process alive.
    """
    outcome: list[BaseException | None] = []

    def target():
        try:
            fn()
        except BaseException as exc:  # handed to the caller, never lost in the thread
            outcome.append(exc)
        else:
            outcome.append(None)

    worker = threading.Thread(target=target, name=name, daemon=True)
    worker.start()
    try:
        worker.join(timeout_s)
    except KeyboardInterrupt:
        pass  # the user does not want to wait for a stuck driver either
    if worker.is_alive() or not outcome:
        return False, None
    return True, outcome[0]
