"""The per-step readback of a guided calibration: after each stretch, the latest target
stretch's shift from the log written so far, with the calibration analysis' own step statistic
(:func:`coilshift.analysis.calibration.steps.compute_steps`) and its significance test for one
point (:func:`coilshift.analysis.calibration.significance.family_test`). The guide
(logger/capture/guide.py) must not import the analysis, so the command line hands it this."""

from __future__ import annotations

import time
from pathlib import Path

#: how long to wait for the log to hold the rows of a stretch just closed (it is flushed each second)
LOG_CATCH_UP_S = 3.0


def make_readback(run_dir: str | Path, sleep=time.sleep):
    """``f(markers) -> StepReading | None`` for :class:`~coilshift.logger.capture.guide.CalibrationGuide`.

    The stretches of a guided run start settled, so nothing is trimmed (as ``analyze`` does for
    runs made by ``calibrate``).
    """
    def readback(markers):
        import math

        from coilshift.analysis.calibration.significance import family_test
        from coilshift.analysis.calibration.steps import compute_steps
        from coilshift.logger.capture.guide import StepReading
        from coilshift.logger.errors import InputError
        from coilshift.logger.runfolder.reader import read_log

        targets = [m for m in markers if not m.is_baseline]
        if not targets or not any(m.is_baseline for m in markers):
            return None
        last = targets[-1]
        end_s = max(m.end_s for m in markers)
        deadline = time.monotonic() + LOG_CATCH_UP_S
        while True:
            try:
                log = read_log(run_dir, columns=("flags",))
            except InputError:
                log = None
            if log is not None and log.t_s.size and log.t_s[-1] >= end_s - 0.05:
                break
            if time.monotonic() > deadline:
                if log is None:
                    return None
                break
            sleep(0.1)
        try:
            steps, _ = compute_steps(log.t_s, log.freq_hz, markers, log.usable(), settle_s=0.0, source=str(run_dir))
        except InputError:
            return None
        step = next((s for s in steps if s.target == last.target and s.distance_mm == last.distance_mm
                     and s.start_s >= last.start_s - 1e-9), None)
        if step is None or not math.isfinite(step.stderr_hz):
            return None
        sig = family_test([step.shift_hz], [step.stderr_hz])
        return StepReading(step.target, step.distance_mm, step.shift_hz, step.stderr_hz,
                           bool(sig.significant[0]), step.bracketed, step.baseline_hz,
                           step.note.replace("baseline on one side only: drift not removed", "").strip("; "))

    return readback
