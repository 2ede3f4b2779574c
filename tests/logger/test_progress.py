"""Progress bar and stage line: drawn on a terminal only, never on a pipe or with --quiet."""

from __future__ import annotations

import io
import threading
import time

from coilshift.logger.progress import Stages, make_progress, make_stages


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


class _Clock:
    """A hand-moved clock, so the lines do not depend on how fast the machine is."""

    def __init__(self):
        self.now = 100.0

    def __call__(self) -> float:
        return self.now


def _stages(stream, clock):
    return Stages("analyze", enabled=make_stages("analyze", stream=stream).enabled, stream=stream,
                  tick_s=3600.0, clock=clock)


def test_stage_lines_on_a_terminal_then_cleared():
    tty, clock = _Tty(), _Clock()
    with _stages(tty, clock) as stage:
        stage("run 1 of 2 (bench): reading the log")
        clock.now += 1.2
        stage("drawing plots 3/9")
        text = tty.getvalue()
        assert "\ranalyze: run 1 of 2 (bench): reading the log [0 s]" in text
        # the shorter line is padded over the longer one it replaces
        longer, shorter = text.split("\r")[1:]
        assert shorter.rstrip() == "analyze: drawing plots 3/9 [1 s]" and len(shorter) == len(longer)
    assert tty.getvalue().endswith("\r") and "\n" not in tty.getvalue()
    last = tty.getvalue().rsplit("[1 s]", 1)[1]
    assert last.strip() == ""  # the line is blanked: what follows starts at column 0


def test_no_stage_line_on_a_pipe_or_when_quiet():
    pipe = io.StringIO()
    with make_stages("analyze", stream=pipe) as stage:
        stage("reading the log")
        assert stage._thread is None  # nothing runs either
    assert pipe.getvalue() == ""
    tty = _Tty()
    with make_stages("analyze", quiet=True, stream=tty) as stage:
        stage("reading the log")
    assert tty.getvalue() == ""


def test_a_long_stage_is_redrawn_with_the_time():
    tty, clock = _Tty(), _Clock()
    with _stages(tty, clock) as stage:
        stage("stability: reading the log")
        clock.now += 3.4
        stage.tick()
        assert tty.getvalue().endswith("stability: reading the log [3 s]")
        # stages quicker than ten a second are drawn at the next redraw, not lost
        stage("one")
        stage("two")
        assert "two" not in tty.getvalue()
        stage.tick()
        assert tty.getvalue().rsplit("\r", 1)[1].rstrip() == "analyze: two [3 s]"


def test_the_clock_thread_redraws_by_itself():
    # a wait of at most 10 s for the thread's second drawing; nothing here depends on speed
    tty = _Tty()
    with Stages("demo", stream=tty, tick_s=0.01) as stage:
        stage("simulating A-150")
        done = threading.Event()
        for _ in range(1000):
            if tty.getvalue().count("simulating A-150") >= 3:
                done.set()
                break
            time.sleep(0.01)
        assert done.is_set()
    assert not stage._thread.is_alive()  # close() stopped it


def test_the_line_is_cut_to_the_terminal_width(monkeypatch):
    monkeypatch.setenv("COLUMNS", "40")  # a StringIO has no terminal: the width comes from COLUMNS
    tty, clock = _Tty(), _Clock()
    with _stages(tty, clock) as stage:
        stage("run 12 of 30 (a-very-long-run-folder-name): fitting steel and its range interval")
        assert len(tty.getvalue().lstrip("\r")) == 39


def test_a_broken_stderr_stops_the_line_not_the_command():
    class Broken(_Tty):
        def write(self, text):
            raise OSError(5, "Input/output error")

    with Stages("analyze", stream=Broken(), tick_s=3600.0) as stage:
        stage("reading the log")
        stage.tick()
        assert not stage.enabled
