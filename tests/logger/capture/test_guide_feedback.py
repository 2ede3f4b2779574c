"""The guided calibration talks back: live readout while recording, the measured shift after
each stretch (through the readback it is given), a warning when a target shows no response,
redo of the last target, and the summary at the end."""

from __future__ import annotations

import math
from types import SimpleNamespace

from test_guide import FakeEngine, Script

from coilshift.logger.capture.guide import (CalibrationGuide, StepReading, live_text, plan_session,
                                            reading_text)
from coilshift.logger.runfolder import flags


class Snapshotting(FakeEngine):
    def snapshot(self):
        return SimpleNamespace(freq_hz=1000.25, shift_hz=0.25, frame_flags=0)


def _guide(answers, readings, engine=None):
    eng = engine or Snapshotting()
    said, shown, asked = [], [], Script(answers)
    seen_markers = []

    def readback(markers):
        seen_markers.append(list(markers))
        return readings.pop(0) if readings else None

    plan = plan_session(["coin"], [20.0], dwell_s=1.0)
    g = CalibrationGuide(eng, plan, settle_s=0.2, ask=asked, say=said.append, sleep=eng.sleep,
                         readback=readback, show=shown.append)
    return g, eng, said, shown, asked, seen_markers


def test_each_stretch_is_read_back_and_a_silent_target_is_warned_about():
    quiet = StepReading("coin", 20.0, 0.001, 0.01, False, False, 1000.0)
    bracketed = StepReading("coin", 20.0, 0.002, 0.01, False, True, 1000.0)
    g, eng, said, shown, asked, seen = _guide(["", "", ""], [quiet, bracketed])
    res = g.run()
    asked.done()
    assert res.completed
    text = "\n".join(said)
    assert "coin at 20 mm: shift +0.001 +- 0.01 Hz (+1 ppm) against the baseline before: NOT significant" in text
    assert "showed no response" in text and "press r" in text
    assert "against baselines before and after" in text
    # the readback sees the markers recorded so far: after the target, then after its baseline
    assert [len(m) for m in seen] == [2, 3]
    # the summary keeps the bracketed reading, not both
    assert res.readings == [bracketed]
    assert any("1 of 1 target stretch(es) showed no significant response" in line for line in res.summary_lines())
    # the live readout showed the frequency and the shift while recording
    assert shown and all("1000.250 Hz" in s and "shift +0.250 Hz" in s for s in shown)


def test_r_records_the_last_target_again():
    good = StepReading("coin", 20.0, 1.5, 0.01, True, False, 1000.0)
    g, eng, said, shown, asked, _ = _guide(["", "", "r", "", ""], [None, good, good])
    res = g.run()
    asked.done()
    assert res.completed and res.redone == 1
    assert any("will be recorded again" in s for s in said)
    assert [m.target for m in res.markers] == ["baseline", "coin", "baseline"]
    coin_marks = [lbl for _, lbl in eng.labels if lbl.startswith("coin")]
    assert coin_marks == ["coin 20", "coin 20"]  # recorded twice, the first one dropped
    assert "r = record the coin again" in asked.prompts[2]


def test_no_tone_shows_in_the_live_readout():
    snap = SimpleNamespace(freq_hz=math.nan, shift_hz=math.nan, frame_flags=flags.NO_TONE)
    assert "NO TONE" in live_text(snap, "coin at 20 mm", 3.0) and "shift ---" in live_text(snap, "x", 1.0)


def test_the_shift_is_shown_to_the_decimals_its_error_supports():
    r = StepReading("coin", 20.0, 3.000012345, 4.2e-4, True, True, 5000.0)
    assert "shift +3.00001 +- 0.00042 Hz (+600 ppm)" in reading_text(r)
