"""Progress bar: drawn on a terminal only, never on a pipe or with --quiet."""

from __future__ import annotations

import io

from coilshift.logger.progress import make_progress


class _Tty(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_silent_on_a_pipe_and_when_quiet():
    pipe = io.StringIO()
    bar = make_progress("tracking", stream=pipe)
    bar(5.0, 10.0)
    bar.close()
    assert pipe.getvalue() == ""
    tty = _Tty()
    quiet = make_progress("tracking", quiet=True, stream=tty)
    quiet(10.0, 10.0)
    assert tty.getvalue() == ""


def test_draws_on_a_terminal_and_clears_its_line():
    tty = _Tty()
    with make_progress("tracking", stream=tty) as bar:
        bar(30.0, 60.0)
        assert "50.0%" in tty.getvalue() and "30/60 s" in tty.getvalue()
        bar(60.0, 60.0)  # the final update is never throttled
        assert "100.0%" in tty.getvalue()
    assert tty.getvalue().endswith("\r") and "\n" not in tty.getvalue()
