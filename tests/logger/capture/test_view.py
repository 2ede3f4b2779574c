"""The live readout's text and keys, without a terminal (a scripted engine stands in)."""

from __future__ import annotations

import io
import math

import matplotlib
import pytest

from coilshift.logger.capture.session import CaptureSnapshot
from coilshift.logger.errors import InputError
from coilshift.logger.capture.view import (KEY_MARKER, KEY_QUIT, KEY_REZERO, LivePlot, PlainLines, TerminalPanel,
                                        level_meter, panel_lines, status_line)


class ScriptedEngine:
    """Expects exactly the calls listed in ``expect`` (name, argument) in order."""

    baseline_s = 2.0

    def __init__(self, expect):
        self.expect = list(expect)
        self.finished_after = None

    def _call(self, name, arg=None):
        assert self.expect, f"unexpected call {name}({arg!r})"
        want = self.expect.pop(0)
        assert want[:2] == (name, arg), f"expected {want[:2]}, got {(name, arg)}"
        if len(want) > 2 and isinstance(want[2], Exception):
            raise want[2]
        return want[2] if len(want) > 2 else 1.5

    def add_marker(self, label):
        return self._call("add_marker", label)

    def rezero(self):
        return self._call("rezero")


def snap(**kw):
    base = dict(elapsed_s=65.25, freq_hz=1000.1234, shift_hz=-0.5, baseline_hz=1000.6234, baseline_pending=False,
                amp_dbfs=-12.0, snr_db=45.0, peak_dbfs=-10.0)
    base.update(kw)
    return CaptureSnapshot(**base)


def test_level_meter_scale():
    assert level_meter(0.0, width=10) == "[##########]"
    assert level_meter(-30.0, width=10, range_db=60) == "[#####.....]"
    assert level_meter(-100.0, width=10) == "[..........]"
    assert level_meter(-math.inf, width=10) == "[..........]"


def test_panel_and_line_show_the_readings():
    text = "\n".join(panel_lines(snap(clipping=True, faults=2, overflows=1, gaps=1), "title", None, "hello"))
    for words in ("00:01:05.2", "1000.123 Hz", "-0.500 Hz", "1000.623 Hz", "CLIPPING", "45.0 dB",
                  "faults     2", f"[{KEY_REZERO}] re-zero", f"[{KEY_MARKER}] marker", f"[{KEY_QUIT}] quit", "hello"):
        assert words in text
    line = status_line(snap())
    assert "f=1000.123 Hz" in line and "shift=-0.500 Hz" in line and "faults=0" in line
    pending = "\n".join(panel_lines(snap(baseline_pending=True, baseline_hz=math.nan, shift_hz=math.nan),
                                    "t", "coin 5", ""))
    assert "measuring baseline" in pending and "label (Enter to set, Esc to cancel): coin 5_" in pending


def test_keys_drive_the_engine():
    eng = ScriptedEngine([("rezero", None), ("add_marker", "coin 50", 3.25),
                          ("add_marker", "coin", InputError("marker 'coin': give a distance"))])
    panel = TerminalPanel(eng, "t", inp=io.StringIO(), out=io.StringIO())
    assert panel._keys("z") is False and "re-zero at 1.50 s" in panel.note
    assert panel._keys("mcoim\x7fn 50\r") is False and panel.note == "marker 'coin 50' set at 3.25 s"
    assert panel._keys("mcoin\n") is False and panel.note.startswith("not set:")
    assert panel._keys("mabc\x1b") is False and panel.note == "marker cancelled"  # Esc: no call
    assert panel._keys("q") is True
    assert not eng.expect


def test_plain_lines_until_the_run_ends():
    class Ending:
        def __init__(self):
            self.n = 0

        def wait(self, timeout):
            self.n += 1
            return self.n > 3

        def snapshot(self):
            return snap()

    out = io.StringIO()
    assert PlainLines(Ending(), out=out, interval_s=0.0).run() == "ended"
    assert out.getvalue().count("f=1000.123 Hz") == 3


def test_live_plot_keeps_the_last_span():
    matplotlib.use("Agg")  # off screen: the window's contents are what is checked
    import matplotlib.pyplot as plt

    plot = LivePlot(plt, span_s=1.05, refresh_s=0.0)
    try:
        for i in range(30):
            plot.update(snap(elapsed_s=0.1 * i, freq_hz=1000.0 + i, shift_hz=float(i)))
        t, f = plot.line_f.get_data()
        assert len(t) == 11 and t[0] == pytest.approx(1.9) and f[-1] == 1029.0
    finally:
        plot.close()


def test_plot_without_a_display_says_so(monkeypatch):
    monkeypatch.delenv("DISPLAY", raising=False)
    monkeypatch.delenv("WAYLAND_DISPLAY", raising=False)
    monkeypatch.setattr("sys.platform", "linux")
    err = io.StringIO()
    assert LivePlot.open(err=err) is None
    assert err.getvalue().count("\n") == 1 and "no display" in err.getvalue()
