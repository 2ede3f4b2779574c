"""The live readout says NO TONE, instead of a blank frequency, and counts the frames without one."""

from __future__ import annotations

import math

from coilshift.logger.capture.session import CaptureSession, CaptureSnapshot
from coilshift.logger.capture.view import NO_TONE_TEXT, panel_lines, status_line
from coilshift.logger.runfolder import flags as fl


def _snap(**kw):
    base = dict(elapsed_s=12.0, freq_hz=math.nan, shift_hz=math.nan, baseline_hz=1000.0,
                baseline_pending=False, amp_dbfs=math.nan, snr_db=math.nan, peak_dbfs=-60.0)
    base.update(kw)
    return CaptureSnapshot(**base)


def test_no_tone_state_is_shown_and_counted():
    snap = _snap(frame_flags=fl.NO_TONE, no_tone_frames=37)
    text = "\n".join(panel_lines(snap, "title", None, ""))
    assert NO_TONE_TEXT in text and "no tone    37 frames" in text
    line = status_line(snap)
    assert f"f={NO_TONE_TEXT}" in line and "no_tone_frames=37" in line
    # with a tone the frequency is back, and a frame analysis will drop says why
    back = _snap(freq_hz=1000.25, shift_hz=0.25, frame_flags=fl.EDGE, no_tone_frames=37)
    text = "\n".join(panel_lines(back, "title", None, ""))
    assert NO_TONE_TEXT not in text and "1000.250 Hz" in text and "not used by analysis: edge" in text
    assert "unusable=edge" in status_line(back)
    assert "unusable" not in status_line(_snap(freq_hz=1000.25, shift_hz=0.25))


def test_session_counts_frames_without_a_tone(tmp_path):
    session = CaptureSession(tmp_path, position=lambda: 0, time_of=lambda n: n / 48000.0)
    session.show_frame(1000.0, 1000.0, -6.0, 40.0, 0, no_tone_frames=0)
    session.show_frame(math.nan, 1000.0, math.nan, math.nan, fl.NO_TONE, no_tone_frames=5)
    session.show_frame(math.nan, 1000.0, math.nan, math.nan, fl.NO_TONE, no_tone_frames=3)
    snap = session.snapshot(1.0, 0.0)
    assert snap.no_tone_frames == 8 and snap.frame_flags & fl.NO_TONE
