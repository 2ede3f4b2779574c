"""Progress on stderr, only when stderr is a terminal: a plain bar for long file runs
(:class:`Progress`) and a stage line for long commands made of several steps (:class:`Stages`).

Redirected output, pipes, CI logs and ``--quiet`` get nothing, so stdout stays clean for
``--json`` and logs are not filled with carriage returns.
"""

from __future__ import annotations

import math
import os
import shutil
import sys
import threading
import time
from typing import TextIO


class Progress:
    """Callable ``progress(done, total)`` that redraws one stderr line at most ~10 times a second.

    Parameters
    ----------
    label : text in front of the bar
    unit : what ``done``/``total`` count (shown after the numbers), e.g. ``"s"``
    enabled : draw at all (see :func:`make_progress`)
    stream : where to draw (stderr)
    """

    width = 30

    def __init__(self, label: str, unit: str = "s", enabled: bool = True, stream: TextIO | None = None):
        self.label = label
        self.unit = unit
        self.enabled = enabled
        self.stream = stream if stream is not None else sys.stderr
        self._last = 0.0
        self._drawn = False

    def __call__(self, done: float, total: float) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if now - self._last < 0.1 and done < total:
            return
        self._last = now
        frac = 0.0 if total <= 0 else min(1.0, max(0.0, done / total))
        filled = int(round(frac * self.width))
        bar = "#" * filled + "-" * (self.width - filled)
        self.stream.write(f"\r{self.label} [{bar}] {100 * frac:5.1f}% {done:.0f}/{total:.0f} {self.unit}")
        self.stream.flush()
        self._drawn = True

    def close(self) -> None:
        """Clear the bar's line so later messages start at column 0."""
        if self.enabled and self._drawn:
            self.stream.write("\r" + " " * (len(self.label) + self.width + 40) + "\r")
            self.stream.flush()
            self._drawn = False

    def __enter__(self) -> "Progress":
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def make_progress(label: str, quiet: bool = False, unit: str = "s", stream: TextIO | None = None) -> Progress:
    """A :class:`Progress` that draws only when ``stream`` (stderr) is a terminal and not ``quiet``."""
    stream = stream if stream is not None else sys.stderr
    return Progress(label, unit=unit, enabled=_is_terminal(stream) and not quiet, stream=stream)


class Stages:
    """Callable ``stage(text)``: one stderr line saying what a long command is doing now
    ("analysing run 2 of 3: fitting", "drawing plots 3/9"), redrawn in place.

    A clock thread redraws the line every ``tick_s`` with the seconds since the command began,
    so a single long step (reading a big log, one fit) still shows signs of life; stages that
    follow each other faster than ten a second are drawn at the next redraw. Nothing at all
    happens when disabled (see :func:`make_stages`); :meth:`close` (or leaving the ``with``
    block) stops the clock and clears the line, so what the command prints next starts clean.

    Parameters
    ----------
    label : the command's name, in front of every stage
    enabled : draw at all
    stream : where to draw (stderr)
    tick_s : seconds between the clock's redraws
    clock : the time source (seconds; monotonic)
    """

    #: stages given sooner than this after the last drawing wait for the next redraw (s)
    min_interval_s = 0.1

    def __init__(self, label: str, enabled: bool = True, stream: TextIO | None = None, tick_s: float = 1.0,
                 clock=time.monotonic):
        self.label = label
        self.enabled = enabled
        self.stream = stream if stream is not None else sys.stderr
        self.tick_s = tick_s
        self._clock = clock
        self._t0 = clock()
        self._text = ""
        self._width = 0  # characters of the line now drawn (0: none)
        self._drawn_at = -math.inf
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None

    def __call__(self, text: str) -> None:
        if not self.enabled:
            return
        with self._lock:
            self._text = text
            if self._clock() - self._drawn_at >= self.min_interval_s:
                self._draw()
        if self._thread is None:
            self._thread = threading.Thread(target=self._run_clock, name="coilshift-stages", daemon=True)
            self._thread.start()

    def line(self) -> str:
        """The line as drawn now: label, stage and the seconds since the start."""
        return f"{self.label}: {self._text} [{self._clock() - self._t0:.0f} s]"

    def tick(self) -> None:
        """Redraw the current stage (the clock thread calls this every ``tick_s``)."""
        with self._lock:
            if self.enabled and self._text:
                self._draw()

    def _draw(self) -> None:
        cols = _columns(self.stream)
        text = self.line()[:max(cols - 1, 10)]  # a wrapped line could not be redrawn in place
        try:
            self.stream.write("\r" + text.ljust(self._width))
            self.stream.flush()
        except (OSError, ValueError):  # a closed or broken stderr: the work goes on without a line
            self.enabled = False
            return
        self._width = len(text)
        self._drawn_at = self._clock()

    def _run_clock(self) -> None:
        while not self._stop.wait(self.tick_s):
            self.tick()

    def close(self) -> None:
        """Stop the clock and clear the line so later messages start at column 0."""
        self._stop.set()
        if self._thread is not None and self._thread is not threading.current_thread():
            self._thread.join(timeout=2.0)
        with self._lock:
            if self.enabled and self._width:
                try:
                    self.stream.write("\r" + " " * self._width + "\r")
                    self.stream.flush()
                except (OSError, ValueError):
                    pass
            self._width = 0
            self._text = ""

    def __enter__(self) -> "Stages":
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def make_stages(label: str, quiet: bool = False, stream: TextIO | None = None) -> Stages:
    """A :class:`Stages` line that draws only when ``stream`` (stderr) is a terminal and not ``quiet``."""
    stream = stream if stream is not None else sys.stderr
    return Stages(label, enabled=_is_terminal(stream) and not quiet, stream=stream)


def _columns(stream) -> int:
    """The width of the terminal behind ``stream`` (stdout may be a file while stderr is not)."""
    try:
        cols = os.get_terminal_size(stream.fileno()).columns
    except (AttributeError, OSError, ValueError):
        cols = 0
    return cols if cols > 0 else shutil.get_terminal_size((80, 24)).columns  # 0: a terminal of unknown size


def _is_terminal(stream) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False
