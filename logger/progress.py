"""A plain progress bar for long file runs: on stderr, only when stderr is a terminal.

Redirected output, pipes, CI logs and ``--quiet`` get nothing, so stdout stays clean for
``--json`` and logs are not filled with carriage returns.
"""

from __future__ import annotations

import sys
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
    try:
        tty = stream.isatty()
    except (AttributeError, ValueError):
        tty = False
    return Progress(label, unit=unit, enabled=tty and not quiet, stream=stream)
