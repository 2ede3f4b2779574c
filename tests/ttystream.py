"""A stderr that says it is a terminal, for the progress lines of the commands.

``on_a_terminal(monkeypatch)`` puts one in place of ``sys.stderr`` and lets every stage be drawn
(a real terminal gets at most ten a second), so a test sees each stage the command went through;
``stages(stream)`` reads them back in order, without the seconds counter.
"""

from __future__ import annotations

import io
import re
import sys

from coilshift.logger.progress import Stages


class TtyStream(io.StringIO):
    def isatty(self) -> bool:
        return True


def on_a_terminal(monkeypatch) -> TtyStream:
    tty = TtyStream()
    monkeypatch.setattr(sys, "stderr", tty)
    monkeypatch.setattr(Stages, "min_interval_s", 0.0)
    monkeypatch.setenv("COLUMNS", "1000")  # a StringIO has no size: wide enough that no line is cut
    return tty


def stages(stream: io.StringIO) -> list[str]:
    """The stages drawn, in order, each once (the clock's redraws of a long stage dropped)."""
    out: list[str] = []
    for seg in stream.getvalue().split("\r"):
        text = re.sub(r" \[\d+ s\]\s*$", "", seg)
        if text.strip() and (not out or out[-1] != text):
            out.append(text)
    return out
