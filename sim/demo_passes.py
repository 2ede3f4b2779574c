"""The demo's hand-pass session: someone waves the test pieces past the new B-200 coil by hand
(no markers), and ``coilshift events`` finds and classes each pass.

Invented for the demo: eight passes, each piece brought up along the axis or swept across the
face, at 90-250 mm/s, closest 40-110 mm, written at the log level (the truth model of
:mod:`coilshift.sim.fields`; white + AR(1) frame noise of 6 mHz, random-walk FM, a slow drift).
The truth (which piece, when, how large) is written beside the run as ``truth.json`` so the
events can be checked against it.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from coilshift.logger.runfolder.atomic import write_text_atomic
from coilshift.sim.fields import Winding
from coilshift.sim.passes import HandPass, write_pass_session
from coilshift.sim.passstudy import study_noise

#: (time s, piece, signed peak shift Hz, closest mm, pace mm/s, path)
PASSES = ((45.0, "steel ball", -0.42, 60.0, 150.0, "axial"), (58.0, "aluminium ball", 0.25, 50.0, 200.0, "sweep"),
          (71.0, "brass ball", 0.12, 70.0, 120.0, "axial"), (84.0, "ferrite slug", -0.30, 80.0, 250.0, "sweep"),
          (97.0, "steel ball", -0.09, 110.0, 90.0, "axial"), (110.0, "aluminium ball", 0.06, 100.0, 180.0, "axial"),
          (123.0, "brass ball", 0.35, 40.0, 220.0, "sweep"), (136.0, "ferrite slug", -0.15, 90.0, 130.0, "axial"))
DURATION_S = 155.0


def hand_pass_session(out: Path, seed: int = 14) -> dict:
    """Write the run (``out/runs/hand-passes``), find its events into ``out/events``; a summary."""
    from coilshift.analysis.events.find import find_events
    from coilshift.analysis.report.events_outputs import write_events_outputs

    coil = Winding.from_design_mm(32, 200.0, 7.0, 7.0)  # the demo's B-200 coil
    passes = [HandPass(t, a, d, v, path) for t, _, a, d, v, path in PASSES]
    run = out / "runs" / "hand-passes"
    write_pass_session(run, coil, passes, DURATION_S, study_noise(0.006, 0.2), np.random.default_rng(seed))
    truth = [{"t_s": t, "piece": name, "peak_shift_hz": a} for t, name, a, *_ in PASSES]
    write_text_atomic(run / "truth.json", json.dumps(truth, indent=2) + "\n")
    res = find_events(run, name="hand passes")
    (out / "events").mkdir(exist_ok=True)
    write_events_outputs(res, out / "events")
    found = []
    for p in truth:
        ev = next((e for e in res.events if e.start_s - 0.5 <= p["t_s"] <= e.end_s + 0.5), None)
        found.append({**p, "found": ev is not None, "class": ev.kind if ev else None,
                      "measured_hz": ev.peak_shift_hz if ev else None})
    return {"report": str(out / "events" / "report.html"), "events": len(res.events), "passes": len(truth),
            "found": sum(f["found"] for f in found), "rows": found}
