"""The built-in demo: qualify a new search coil against the old one on simulated bench recordings.

Scenario (invented for the demo): a workshop replaces its A-150 search coil (150 mm, 40 turns)
by a new B-200 coil (200 mm, 32 turns). Both run in the same LC oscillator on the bench, straight
into a 48 kHz line-in. Each coil is calibrated against the test-piece set (a 25 mm steel ball, a
25 mm aluminium ball, a 20 mm brass ball, a 10 mm ferrite slug and a 30 mm nylon block) at six
distances on the coil axis, out past the expected ranges so that every range is measured between
two points, every stretch bracketed by target-free baselines, after a 40 s first baseline (the
detection threshold rests on the Allan deviation at the dwell, and its uncertainty on how many
dwells of target-free signal there are); then the new coil is left alone for three minutes from
power-on to measure its stability.

The simulated bench is deliberately not the design: the aluminium ball is a cast alloy at about
half the handbook conductivity, the steel ball is less permeable than the model's default, and the
coils' tuning capacitors are 2-3 % off their marked values, and the balls are finite (the truth
model of :mod:`coilshift.sim.fields` averages the field over their volume). So the design
prediction (handbook materials, marked values) and the measurement differ as they would on a real
bench, while the truth of the recording is known exactly.

Everything runs on the normal code path: :mod:`coilshift.sim` renders WAV files, the recording
pipeline tracks them into run folders, the calibration analysis writes its report, the stability
analysis its plots; this module only adds the top-level summary page.
"""

from __future__ import annotations

import json
import math
import os
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np

from coilshift.logger.runfolder.atomic import write_text_atomic

from coilshift.sim.render import plan, simulate
from coilshift.sim.script import parse_script

SAMPLE_RATE_HZ = 48000
DISTANCES_MM = [20, 40, 70, 110, 160, 230]
#: the first target-free baseline (s): many dwells long, so the noise behind the threshold is well known
FIRST_BASELINE_S = 40.0
REFERENCE = {"steel ball": "ferrous"}  # the piece whose call is known, to check polarity

#: the coils as designed (what the coil files say)
COILS = {
    "A-150": {"name": "A-150 (old)", "turns": 40, "inner_diameter_mm": 150, "length_mm": 6, "depth_mm": 6,
              "awg": 26, "cap_nf": 220},
    "B-200": {"name": "B-200 (new)", "turns": 32, "inner_diameter_mm": 200, "length_mm": 7, "depth_mm": 7,
              "awg": 25, "cap_nf": 270},
}
#: the capacitors as fitted on the bench (within their 5 % tolerance)
CAP_AS_FITTED_NF = {"A-150": 224.5, "B-200": 263.0}
#: the test pieces as designed: handbook materials (coilshift.analysis.models.materials)
PIECES_DESIGN = {
    "steel ball": {"material": "mild_steel", "diameter_mm": 25},
    "aluminium ball": {"material": "aluminium", "diameter_mm": 25},
    "brass ball": {"material": "brass", "diameter_mm": 20},
    "ferrite slug": {"material": "ferrite", "diameter_mm": 10},
    "nylon block": {"material": "plastic", "diameter_mm": 30},
}
#: the test pieces as they really are on the simulated bench
PIECES_BENCH = {
    "steel ball": {"material": "mild_steel", "diameter_mm": 25, "mu_r": 70, "finite_size": True},
    "aluminium ball": {"material": "aluminium", "diameter_mm": 25, "sigma": 1.9e7,  # cast alloy, ~33 % IACS
                       "finite_size": True},
    "brass ball": {"material": "brass", "diameter_mm": 20, "finite_size": True},
    "ferrite slug": {"material": "ferrite", "diameter_mm": 10, "finite_size": True},
    "nylon block": {"material": "plastic", "diameter_mm": 30},
}


def calibration_script(coil_key: str, seed: int) -> dict:
    """The simulation script of one coil's calibration session."""
    coil = dict(COILS[coil_key], cap_nf=CAP_AS_FITTED_NF[coil_key])
    coil.pop("name")
    old = coil_key == "A-150"
    return {
        "seed": seed,
        "recording": {"sample_rate_hz": SAMPLE_RATE_HZ, "encoding": "wav", "level_dbfs": -10,
                      "noise_dbfs": -84, "clock_ppm": 38, "hum": {"mains_hz": 50, "level_dbfs": -62}},
        "oscillator": {"coil": coil, "duty": 0.45, "edge_tau_us": 3,
                       "warmup_hz": 0.4, "warmup_tau_s": 50,
                       "tempco_hz_per_c": -0.9 if old else -0.45,
                       "temperature": {"start_c": 22.0, "rate_c_per_h": 1.5},
                       "white_fm_hz": 0.006 if old else 0.004, "random_walk_hz": 0.0006},
        "targets": PIECES_BENCH,
        "session": {"move_s": 0.6, "hand_hz": 0.03,
                    "steps": [{"target": "baseline", "hold_s": FIRST_BASELINE_S},
                              {"sweep": {"targets": list(PIECES_BENCH), "distances_mm": DISTANCES_MM,
                                         "hold_s": 3.5, "baseline_s": 2.5}}]},
        "truth": {"thresholds_hz": [0.05, 0.1], "class_floor_hz": 0.02},
    }


def stability_script(seed: int) -> dict:
    """Three minutes of the new coil alone from power-on."""
    coil = dict(COILS["B-200"], cap_nf=CAP_AS_FITTED_NF["B-200"])
    coil.pop("name")
    return {
        "seed": seed,
        "recording": {"sample_rate_hz": SAMPLE_RATE_HZ, "encoding": "wav", "level_dbfs": -10, "noise_dbfs": -84,
                      "clock_ppm": 38, "hum": {"mains_hz": 50, "level_dbfs": -62}},
        "oscillator": {"coil": coil, "duty": 0.45, "edge_tau_us": 3, "warmup_hz": 0.8, "warmup_tau_s": 20,
                       "tempco_hz_per_c": -0.45,
                       "temperature": {"start_c": 22.0, "rate_c_per_h": 1.0, "swing_c": 0.02, "swing_period_s": 90},
                       "white_fm_hz": 0.004, "random_walk_hz": 0.0006},
        "session": {"steps": [{"target": "baseline", "hold_s": 180.0}]},
    }


@dataclass
class DemoRow:
    """One coil and target: what the analysis called and measured, against design and truth."""

    coil: str
    target: str
    expected: str
    measured: str
    range_mm: float | None
    range_ci_mm: tuple | None
    design_mm: float
    true_mm: float
    range_basis: str = ""

    @property
    def true_inside(self) -> bool | None:
        """The bench's exact range lies inside the reported interval (None: nothing to compare)."""
        if self.range_ci_mm is None or not math.isfinite(self.true_mm) or self.true_mm <= 0:
            return None
        return bool(self.range_ci_mm[0] <= self.true_mm <= self.range_ci_mm[1])


def _track(recording: Path, markers: Path | None, run_dir: Path, progress: Callable[[str], None] | None = None) -> dict:
    from coilshift.logger.pipeline.batch import track_source
    from coilshift.logger.sources import open_source
    from coilshift.logger.tracking.tracker import TrackerSettings

    bar = None if progress is None else (lambda done_s, total_s: progress(f"{done_s:.0f}/{total_s:.0f} s of audio"))
    return track_source(open_source(recording), TrackerSettings(), None, run_dir, markers=markers, progress=bar)


def _within(progress: Callable[[str], None] | None, stage: str) -> Callable[[str], None] | None:
    """``progress`` for the steps of one stage: each message prefixed with the stage."""
    return None if progress is None else (lambda text: progress(f"{stage}: {text}"))


def _record_sessions(out: Path, sessions: dict, say: Callable[[str], None],
                     progress: Callable[[str], None] | None) -> dict:
    """Simulate each session's recording and track it into ``out/runs``; returns their plans."""
    plans = {}
    scripts = {name: parse_script(obj, f"demo {name}") for name, obj in sessions.items()}  # all checked first
    for name, obj in sessions.items():
        script = scripts[name]
        rec = out / "recordings" / name
        rec.mkdir(parents=True, exist_ok=True)
        write_text_atomic(rec / "script.json", json.dumps(obj, indent=2) + "\n")
        say(f"simulating {name}: {script.duration_s:.0f} s at {script.recording.sample_rate_hz:g} Hz")
        simulate(script, rec)
        plans[name] = plan(script)
        say(f"tracking {name}")
        _track(rec / "recording.wav", rec / "markers.csv", out / "runs" / name, _within(progress, f"tracking {name}"))
    return plans


def _fmt_mm(x) -> str:
    # the models give 0 mm for "never reaches the threshold"; show it like an undefined range
    return "-" if x is None or not math.isfinite(x) or x <= 0 else f"{x:.0f}"


CAUTION = ("Before wiring a real detector to a line input read docs/guide.md section 1: a line input "
           "takes about 1-2 V peak, detector outputs can swing to their supply, and nothing tied to the "
           "mains may be connected without isolation.")


def range_gains(rows: list[dict], new: str = "B-200", old: str = "A-150") -> dict[str, float]:
    """Range of the new coil over the old one, per target both coils detect."""
    by = {(r["coil"], r["target"]): r["range_mm"] for r in rows}
    out = {}
    for (coil, target), rng in by.items():
        other = by.get((old, target))
        if coil == new and rng and other:
            out[target] = rng / other
    return out


def run_demo(out_dir: str | os.PathLike, force: bool = False,
             say: Callable[[str], None] = lambda s: None, progress: Callable[[str], None] | None = None) -> dict:
    """Simulate, track, analyse and report the demo scenario into ``out_dir``.

    Returns a summary dict (paths, rows, timings). ``say`` receives a one-line message as each
    stage begins ("tracking A-150"); ``progress``, when given, also hears the steps within the
    stages ("tracking A-150: 96/256 s of audio", "writing the calibration report: drawing plots 3/9").
    """
    from coilshift.analysis.calibration.run import analyse_run
    from coilshift.analysis.models.coil import analyse_coil, design_from_dict
    from coilshift.analysis.report.calibration_outputs import write_outputs
    from coilshift.analysis.report.html_page import provenance
    from coilshift.sim.demo_report import report_html
    from coilshift.analysis.models.target import parse_target_spec, predicted_range_mm
    from coilshift.logger.runfolder.atomic import to_jsonable
    from coilshift.logger.runfolder.folders import new_output_dir

    t_start = time.monotonic()
    out = new_output_dir(out_dir, force)
    sessions = {"A-150": calibration_script("A-150", 11), "B-200": calibration_script("B-200", 12),
                "B-200-stability": stability_script(13)}
    results, reports = {}, {}
    plans = _record_sessions(out, sessions, say, progress)
    coils_dir = out / "coils"
    coils_dir.mkdir(exist_ok=True)
    for key, design in COILS.items():
        write_text_atomic(coils_dir / f"{key}.json", json.dumps(design, indent=2) + "\n")
        reports[key] = analyse_coil(design_from_dict(design, key))
    models = {n: parse_target_spec(f"{p['material']}:diameter_mm={p['diameter_mm']}") for n, p in PIECES_DESIGN.items()}
    for key in COILS:
        say(f"analysing the {key} calibration run")
        results[key] = analyse_run(out / "runs" / key, coil=reports[key], target_models=models,
                                   reference=REFERENCE, name=key, progress=_within(progress, f"analysing {key}"))
    say("writing the calibration report")
    write_outputs([results[k] for k in COILS], out / "calibration", provenance([out / "runs" / k for k in COILS]),
                  progress=_within(progress, "writing the calibration report"))

    say("analysing the stability run")
    stab = _stability(out, _within(progress, "stability run"))
    say("finding the passes of a hand-pass session (no markers)")
    from coilshift.sim.demo_passes import hand_pass_session

    passes = hand_pass_session(out)

    rows: list[DemoRow] = []
    for key, res in results.items():
        p = plans[key]
        for t in res.targets:
            resp = p.responses[t.target]
            thr = res.threshold_hz
            nearest = min(st.distance_mm for st in p.script.steps if st.target == t.target)
            design = predicted_range_mm(reports[key], models[t.target], res.baseline_hz, threshold_hz=thr)
            rows.append(DemoRow(key, t.target, resp.expected_class(nearest, 3 * res.noise_hz),
                                t.cls, t.range.range_mm, t.range.ci_mm, design, resp.range_mm(thr), t.range.basis))
    elapsed = time.monotonic() - t_start
    summary = {
        "report": str(out / "report.html"),
        "calibration_report": str(out / "calibration" / "report.html"),
        "thresholds_hz": {k: r.threshold_hz for k, r in results.items()},
        "noise_hz": {k: r.noise_hz for k, r in results.items()},
        "stability": {"oadev_hz_at_1s": _at_tau(stab, 1.0), **_drift(stab.drift),
                      "warmup_s": stab.warmup.warmup_s if stab.warmup.settled else None},
        "rows": [dict(vars(r), true_inside=r.true_inside) for r in rows],
        "all_classes_right": all(r.expected == r.measured for r in rows),
        "all_true_ranges_inside": all(r.true_inside is not False for r in rows),
        "range_gain_b200_over_a150": range_gains([vars(r) for r in rows]),
        "polarity_warnings": [w for r in results.values() for w in r.warnings if "polarity" in w.lower()],
        "hand_passes": passes,
        "elapsed_s": elapsed,
    }
    write_text_atomic(out / "report.html", report_html(summary, rows, results, out))
    write_text_atomic(out / "summary.json", json.dumps(to_jsonable(summary), indent=2, allow_nan=False) + "\n")
    return summary


def _stability(out: Path, progress: Callable[[str], None] | None = None):
    """Analyse the demo's stability run and write its outputs (report included)."""
    from coilshift.analysis.report.html_page import provenance
    from coilshift.analysis.report.stability_outputs import write_stability_outputs
    from coilshift.analysis.stability.analyse import analyse_stability
    from coilshift.logger.runfolder.reader import read_log

    slog = read_log(out / "runs" / "B-200-stability", columns=("flags",))
    stab = analyse_stability(slog.t_s, slog.freq_hz, slog.usable(), source="B-200 stability run",
                             frame_s=slog.meta["tracker"]["frame_ms"] / 1000.0)  # marks taus inside one frame
    (out / "stability").mkdir(exist_ok=True)
    write_stability_outputs(stab, out / "stability", prov=provenance([out / "runs" / "B-200-stability"]),
                            progress=progress)
    return stab


def _drift(drift) -> dict:
    """The settled drift and its standard uncertainty (None when not determined)."""
    ok = drift.determined
    return {"drift_hz_per_min": drift.rate_hz_per_min if ok else None,
            "drift_u_hz_per_min": drift.u_rate_hz_per_min if ok else None}


def _at_tau(stab, tau_s: float) -> float | None:
    i = np.flatnonzero(np.isclose(stab.tau_s, tau_s, rtol=0.3))
    return float(stab.oadev_hz[i[0]]) if i.size else None


def summary_table(summary: dict) -> str:
    """The short text table the command prints."""
    head = (f"{'coil':<7} {'target':<15} {'truth':<14} {'measured':<14} {'range mm (95% CI)':<20} {'basis':<12} "
            f"{'design mm':>9} {'true mm':>8} {'true in CI':>10}")
    lines = [head, "-" * len(head)]
    inside = {None: "-", True: "yes", False: "NO"}
    for r in summary["rows"]:
        ci = r["range_ci_mm"]
        rng = _fmt_mm(r["range_mm"]) + (f" ({ci[0]:.0f}-{ci[1]:.0f})" if ci else "")
        lines.append(f"{r['coil']:<7} {r['target']:<15} {r['expected']:<14} {r['measured']:<14} {rng:<20} "
                     f"{r.get('range_basis') or '-':<12} {_fmt_mm(r['design_mm']):>9} {_fmt_mm(r['true_mm']):>8} "
                     f"{inside[r.get('true_inside')]:>10}")
    gains = summary.get("range_gain_b200_over_a150") or {}
    if gains:
        lines.append("")
        lines.append("B-200 range / A-150 range: " + ", ".join(f"{k} {v:.2f}" for k, v in gains.items()))
    return "\n".join(lines)
