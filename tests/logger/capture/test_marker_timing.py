"""Live markers are timed at the key press, a baseline key marks a target-free stretch, and the
panel says to mark baselines while only targets are marked."""

from __future__ import annotations

import io

from coilshift.logger.capture.session import CaptureSession
from coilshift.logger.capture.view import BASELINE_HINT, TerminalPanel


class Clocked:
    """An engine-like object with a real CaptureSession on a sample clock the test moves."""

    def __init__(self, run_dir, rate_hz=1000.0):
        self.samples = 0
        self.session = CaptureSession(run_dir, position=lambda: self.samples, time_of=lambda n: n / rate_hz)

    def add_marker(self, label):
        return self.session.add_marker(label)

    def snapshot(self):
        return self.session.snapshot(self.samples / 1000.0, 0.0)


def test_a_marker_is_timed_when_m_is_pressed_not_when_enter_ends_the_label(tmp_path):
    eng = Clocked(tmp_path)
    panel = TerminalPanel(eng, "t", inp=io.StringIO(), out=io.StringIO())
    eng.samples = 2000          # 2.000 s: the key is pressed
    panel._keys("m")
    eng.samples = 7500          # typing the label took 5.5 s
    panel._keys("coin 50\r")
    assert panel.note == "marker 'coin 50' set at 2.00 s"
    eng.samples = 9000
    panel._keys("b")            # the baseline key marks at once
    assert panel.note == "marker 'baseline' set at 9.00 s"
    eng.samples = 12000
    got = eng.session.close_markers(12.0)
    assert [(m.target, m.start_s, m.end_s) for m in got] == [("coin", 2.0, 9.0), ("baseline", 9.0, 12.0)]
    assert (tmp_path / "markers.csv").read_text().splitlines()[1] == "2.000000,9.000000,coin,50"


def test_a_marker_timed_in_the_past_never_swallows_a_later_stretch(tmp_path):
    eng = Clocked(tmp_path)
    panel = TerminalPanel(eng, "t", inp=io.StringIO(), out=io.StringIO())
    eng.samples = 1000
    panel._keys("m")            # prompt opened at 1 s ...
    eng.samples = 3000
    eng.session.add_marker("baseline")  # ... another marker is set at 3 s meanwhile (e.g. a script)
    eng.samples = 5000
    panel._keys("coin 20\r")    # the coin starts where the baseline began, not before it
    got = eng.session.close_markers(6.0)
    assert [(m.target, m.start_s) for m in got] == [("coin", 3.0)]


def test_the_panel_asks_for_baselines_while_only_targets_are_marked(tmp_path):
    eng = Clocked(tmp_path)
    out = io.StringIO()
    panel = TerminalPanel(eng, "t", inp=io.StringIO(), out=out)
    eng.samples = 1000
    panel._keys("mcoin 10\r")
    panel._draw()
    assert BASELINE_HINT in out.getvalue()
    panel._keys("b")
    out.truncate(0)
    panel._draw()
    assert BASELINE_HINT not in out.getvalue()
