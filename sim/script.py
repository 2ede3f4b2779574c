"""Simulation scripts: the JSON that describes a bench session, parsed and checked.

A script is one JSON object. Every key is optional except ``oscillator`` (with a frequency or a
coil), ``targets`` (when the session uses any) and ``session``. Units are in the key names.

.. code-block:: json

    {
      "seed": 7,
      "recording": {"sample_rate_hz": 48000, "encoding": "wav", "bits": 16,
                    "level_dbfs": -12, "noise_dbfs": -80, "clock_ppm": 0,
                    "anti_alias": true, "hum": {"mains_hz": 50, "level_dbfs": -60}},
      "oscillator": {"freq_hz": 9000, "duty": 0.5, "edge_tau_us": 0, "prescaler": 1,
                     "warmup_hz": 2.0, "warmup_tau_s": 30,
                     "tempco_hz_per_c": -0.1,
                     "temperature": {"start_c": 21, "rate_c_per_h": 1.0,
                                     "swing_c": 0, "swing_period_s": 600},
                     "white_fm_hz": 0.003, "random_walk_hz": 0.0005},
      "targets": {
        "steel": {"peak_shift_hz": -8.0, "coil_radius_mm": 60},
        "nylon": {"peak_shift_hz": 0.0, "coil_radius_mm": 60}
      },
      "session": {"move_s": 0.6, "hand_hz": 0.0,
                  "steps": [{"target": "baseline", "hold_s": 4},
                            {"target": "steel", "distance_mm": 20, "hold_s": 3}]},
      "truth": {"thresholds_hz": [0.5], "class_floor_hz": 0.1}
    }

``session.steps`` may also hold a ``sweep`` item that expands to baseline / target / baseline
... for every target and distance listed: ``{"sweep": {"targets": ["steel"], "distances_mm":
[15, 30], "hold_s": 3, "baseline_s": 2}}``.

A target is either parametric (``peak_shift_hz`` A and ``coil_radius_mm`` R: the on-axis dipole
response ``A (R^2/(R^2+d^2))^3``) or physical (a sphere: ``material``, ``diameter_mm``, optional
``sigma``, ``mu_r`` and ``finite_size``; needs the oscillator's ``coil``), whose true response the
simulator computes with its own models (:mod:`coilshift.sim.response`). The oscillator frequency is
either ``freq_hz`` or set by a ``coil`` (the keys of a coil file, with ``cap_nf`` the tuning
capacitor) through f = 1/(2 pi sqrt(L C)), L the simulator's own inductance of the winding and C
``cap_nf`` without the coil's self-capacitance (:mod:`coilshift.sim.benchcoil`). Nothing here or
there imports the analysis side, so the analysis is checked against this truth, not fed by it.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass, field
from typing import Any

from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.markers import BASELINE
from coilshift.logger.textfile import read_json
from coilshift.sim.benchcoil import bench_coil

ENCODINGS = ("wav", "flac")
BITS = (16, 24)
#: the largest magnitudes a script may give for a frequency (a shift, drift or noise level), a
#: time and a length: far beyond any bench, and small enough that nothing overflows
MAX_HZ = 1e6
MAX_S = 1e8
MAX_MM = 1e6


@dataclass(frozen=True)
class Recording:
    """The soundcard side: rate, level, noise, clock error, hum, quantisation."""

    sample_rate_hz: float = 48000.0
    encoding: str = "wav"
    bits: int = 16
    level_dbfs: float = -12.0  # fundamental amplitude, dB re a full-scale sine
    noise_dbfs: float = -80.0  # white noise rms, dB re full scale (amplitude 1)
    clock_ppm: float = 0.0  # the card's true rate is sample_rate_hz (1 + ppm 1e-6)
    anti_alias: bool = True
    max_harmonic: int = 25
    hum_hz: float = 50.0
    hum_dbfs: float | None = None  # None: no hum


@dataclass(frozen=True)
class Oscillator:
    """The detector's oscillator: frequency, waveform, settling, drift and phase noise."""

    freq_hz: float
    coil: dict | None = None  # CoilDesign fields when the frequency comes from a coil
    duty: float = 0.5
    edge_tau_us: float = 0.0  # RC time constant shaping the pulse edges (0: sharp)
    prescaler: int = 1  # digital divider between oscillator and line-in
    warmup_hz: float = 0.0  # frequency offset at power-on, settling exponentially
    warmup_tau_s: float = 30.0
    tempco_hz_per_c: float = 0.0
    start_c: float = 21.0
    rate_c_per_h: float = 0.0
    swing_c: float = 0.0
    swing_period_s: float = 600.0
    white_fm_hz: float = 0.0  # white FM: Allan deviation in Hz at tau = 1 s
    random_walk_hz: float = 0.0  # random-walk FM: Hz per sqrt(s)


@dataclass(frozen=True)
class TargetDef:
    """A target: parametric (A, R) or a physical spec for the models."""

    name: str
    peak_shift_hz: float | None = None
    coil_radius_mm: float | None = None
    spec: dict | None = None


@dataclass(frozen=True)
class Step:
    """One stretch of the session: a target held at a distance, or a baseline (no target)."""

    target: str
    distance_mm: float  # NaN for baseline
    hold_s: float
    move_s: float  # time spent moving into this step (0 for the first)


@dataclass
class Script:
    """A parsed, validated simulation script."""

    oscillator: Oscillator
    recording: Recording = field(default_factory=Recording)
    targets: dict[str, TargetDef] = field(default_factory=dict)
    steps: list[Step] = field(default_factory=list)
    seed: int = 0
    hand_hz: float = 0.0
    thresholds_hz: tuple[float, ...] = (0.5,)
    class_floor_hz: float = 0.1
    name: str = "script"
    raw: dict = field(default_factory=dict)

    @property
    def duration_s(self) -> float:
        return float(sum(s.move_s + s.hold_s for s in self.steps))


class _Checker:
    """Pulls typed values out of a JSON object and names the key on error."""

    def __init__(self, name: str):
        self.name = name

    def fail(self, where: str, problem: str) -> None:
        raise InputError(f"{self.name}: {where}: {problem}")

    def obj(self, parent: dict, key: str, where: str, required: bool = False) -> dict:
        v = parent.get(key)
        if v is None:
            if required:
                self.fail(where, f"missing '{key}'")
            return {}
        if not isinstance(v, dict):
            self.fail(f"{where}.{key}", "expected a JSON object")
        return v

    def unknown(self, d: dict, allowed: set[str], where: str) -> None:
        extra = sorted(set(d) - allowed)
        if extra:
            self.fail(where, f"unknown key '{extra[0]}' (allowed: {', '.join(sorted(allowed))})")

    def num(self, d: dict, key: str, where: str, default=None, lo=None, hi=None,
            lo_open=False, integer=False):
        if key not in d or d[key] is None:
            if default is None:
                self.fail(where, f"missing '{key}'")
            return default
        v = d[key]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            self.fail(f"{where}.{key}", f"expected a number, got {json.dumps(v)}")
        if integer and int(v) != v:
            self.fail(f"{where}.{key}", f"expected a whole number, got {v}")
        if lo is not None and (v < lo or (lo_open and v == lo)):
            self.fail(f"{where}.{key}", f"must be {'>' if lo_open else '>='} {lo:g}, got {v:g}")
        if hi is not None and v > hi:
            self.fail(f"{where}.{key}", f"must be <= {hi:g}, got {v:g}")
        return int(v) if integer else float(v)


def _recording(c: _Checker, d: dict) -> Recording:
    w = "recording"
    c.unknown(d, {"sample_rate_hz", "encoding", "bits", "level_dbfs", "noise_dbfs", "clock_ppm",
                  "anti_alias", "max_harmonic", "hum"}, w)
    enc = d.get("encoding", "wav")
    if enc not in ENCODINGS:
        c.fail(f"{w}.encoding", f"expected one of {', '.join(ENCODINGS)}, got {json.dumps(enc)}")
    bits = c.num(d, "bits", w, 16, integer=True)
    if bits not in BITS:
        c.fail(f"{w}.bits", f"expected 16 or 24, got {bits}")
    aa = d.get("anti_alias", True)
    if not isinstance(aa, bool):
        c.fail(f"{w}.anti_alias", "expected true or false")
    hum = c.obj(d, "hum", w)
    c.unknown(hum, {"mains_hz", "level_dbfs"}, f"{w}.hum")
    # sound files store a whole number of hertz; FLAC stops at 655350 Hz
    rate = c.num(d, "sample_rate_hz", w, 48000, lo=1000, hi=655350 if enc == "flac" else 768000, integer=True)
    return Recording(
        sample_rate_hz=float(rate),
        encoding=enc, bits=bits,
        level_dbfs=c.num(d, "level_dbfs", w, -12.0, lo=-200.0, hi=20.0),
        noise_dbfs=c.num(d, "noise_dbfs", w, -80.0, lo=-200.0, hi=0.0),
        clock_ppm=c.num(d, "clock_ppm", w, 0.0, lo=-2000.0, hi=2000.0),
        anti_alias=aa,
        max_harmonic=c.num(d, "max_harmonic", w, 25, lo=1, hi=200, integer=True),
        hum_hz=c.num(hum, "mains_hz", f"{w}.hum", 50.0, lo=1.0, hi=1000.0),
        hum_dbfs=(c.num(hum, "level_dbfs", f"{w}.hum", lo=-200.0, hi=0.0) if hum else None),
    )


def _oscillator(c: _Checker, d: dict) -> Oscillator:
    w = "oscillator"
    c.unknown(d, {"freq_hz", "coil", "duty", "edge_tau_us", "prescaler", "warmup_hz", "warmup_tau_s",
                  "tempco_hz_per_c", "temperature", "white_fm_hz", "random_walk_hz"}, w)
    coil = d.get("coil")
    if ("freq_hz" in d) == (coil is not None):
        c.fail(w, "give exactly one of 'freq_hz' or 'coil'")
    if coil is not None:
        if not isinstance(coil, dict):
            c.fail(f"{w}.coil", "expected a JSON object with the coil's design fields")
        freq = coil_frequency_hz(coil, f"{c.name}: {w}.coil")
    else:
        freq = c.num(d, "freq_hz", w, lo=1.0, hi=50e6)
    temp = c.obj(d, "temperature", w)
    tw = f"{w}.temperature"
    c.unknown(temp, {"start_c", "rate_c_per_h", "swing_c", "swing_period_s"}, tw)
    duty = c.num(d, "duty", w, 0.5, lo=0.0, hi=1.0, lo_open=True)
    if duty >= 1.0:
        c.fail(f"{w}.duty", "must be below 1 (a duty of 1 is a constant level, no tone)")
    return Oscillator(
        freq_hz=freq, coil=coil, duty=duty,
        edge_tau_us=c.num(d, "edge_tau_us", w, 0.0, lo=0.0, hi=1e6),
        prescaler=c.num(d, "prescaler", w, 1, lo=1, hi=65536, integer=True),
        warmup_hz=c.num(d, "warmup_hz", w, 0.0, lo=-MAX_HZ, hi=MAX_HZ),
        warmup_tau_s=c.num(d, "warmup_tau_s", w, 30.0, lo=0.0, lo_open=True, hi=MAX_S),
        tempco_hz_per_c=c.num(d, "tempco_hz_per_c", w, 0.0, lo=-MAX_HZ, hi=MAX_HZ),
        start_c=c.num(temp, "start_c", tw, 21.0, lo=-60.0, hi=150.0),
        rate_c_per_h=c.num(temp, "rate_c_per_h", tw, 0.0, lo=-1e4, hi=1e4),
        swing_c=c.num(temp, "swing_c", tw, 0.0, lo=0.0, hi=1e3),
        swing_period_s=c.num(temp, "swing_period_s", tw, 600.0, lo=0.0, lo_open=True, hi=MAX_S),
        white_fm_hz=c.num(d, "white_fm_hz", w, 0.0, lo=0.0, hi=MAX_HZ),
        random_walk_hz=c.num(d, "random_walk_hz", w, 0.0, lo=0.0, hi=MAX_HZ),
    )


def coil_frequency_hz(coil: dict, where: str) -> float:
    """Operating frequency of an LC oscillator tuned by ``coil['cap_nf']``: 1/(2 pi sqrt(L C)).

    L is the simulator's own inductance of the winding (:func:`coil_inductance_uh`, the same value
    the targets' responses and ``truth.json`` use); C is ``cap_nf`` alone, the coil's
    self-capacitance is not included (:mod:`coilshift.sim.benchcoil`).
    """
    f = bench_coil(coil, where).lc_freq_hz
    if f is None or not math.isfinite(f):
        raise InputError(f"{where}: needs 'cap_nf' (the tuning capacitor, nF) to set the frequency")
    return float(f)


def coil_inductance_uh(coil: dict, where: str) -> float:
    """The simulator's inductance (uH) of a script's coil: uniform current density over the
    winding's section, by quadrature of Maxwell's mutual inductance (:mod:`coilshift.sim.inductance`)."""
    return bench_coil(coil, where).inductance_h * 1e6


def _targets(c: _Checker, d: dict) -> dict[str, TargetDef]:
    out = {}
    for name, spec in d.items():
        w = f"targets.{name}"
        if name == BASELINE or not name.strip() or "," in name:
            c.fail(w, "target names must be non-empty, without commas, and not 'baseline'")
        if not isinstance(spec, dict):
            c.fail(w, "expected a JSON object")
        if "peak_shift_hz" in spec:
            c.unknown(spec, {"peak_shift_hz", "coil_radius_mm"}, w)
            out[name] = TargetDef(name, peak_shift_hz=c.num(spec, "peak_shift_hz", w, lo=-MAX_HZ, hi=MAX_HZ),
                                  coil_radius_mm=c.num(spec, "coil_radius_mm", w, lo=0.0, lo_open=True,
                                                       hi=MAX_MM))
        elif "material" in spec:
            out[name] = TargetDef(name, spec=dict(spec))
        else:
            c.fail(w, "give 'peak_shift_hz' and 'coil_radius_mm' (parametric) or 'material' (physical model)")
    return out


def _steps(c: _Checker, d: dict, targets: dict) -> tuple[list[Step], float]:
    w = "session"
    c.unknown(d, {"move_s", "hand_hz", "steps"}, w)
    move_s = c.num(d, "move_s", w, 0.6, lo=0.0, hi=60.0)
    hand = c.num(d, "hand_hz", w, 0.0, lo=-MAX_HZ, hi=MAX_HZ)
    raw = d.get("steps")
    if not isinstance(raw, list) or not raw:
        c.fail(w, "'steps' must be a non-empty list")
    flat: list[tuple[str, float, float, float | None]] = []
    for i, item in enumerate(raw):
        sw = f"{w}.steps[{i}]"
        if not isinstance(item, dict):
            c.fail(sw, "expected a JSON object")
        if "sweep" in item:
            c.unknown(item, {"sweep"}, sw)
            sp = c.obj(item, "sweep", sw, required=True)
            spw = f"{sw}.sweep"
            c.unknown(sp, {"targets", "distances_mm", "hold_s", "baseline_s"}, spw)
            names, dists = sp.get("targets"), sp.get("distances_mm")
            if not isinstance(names, list) or not names or not all(isinstance(n, str) for n in names):
                c.fail(spw, "'targets' must be a non-empty list of target names")
            if not isinstance(dists, list) or not dists:
                c.fail(spw, "'distances_mm' must be a non-empty list of numbers")
            dl = [c.num({"distances_mm": v}, "distances_mm", spw, lo=0.0, hi=MAX_MM) for v in dists]
            hold = c.num(sp, "hold_s", spw, 3.0, lo=0.0, lo_open=True, hi=MAX_S)
            base = c.num(sp, "baseline_s", spw, 2.0, lo=0.0, lo_open=True, hi=MAX_S)
            if not flat or flat[-1][0] != BASELINE:
                flat.append((BASELINE, math.nan, base, None))
            for n in names:
                for dist in dl:
                    flat.append((n, dist, hold, None))
                    flat.append((BASELINE, math.nan, base, None))
            continue
        c.unknown(item, {"target", "distance_mm", "hold_s", "move_s"}, sw)
        tname = item.get("target")
        if not isinstance(tname, str) or not tname:
            c.fail(sw, "missing 'target' (a target name or 'baseline')")
        dist = math.nan if tname == BASELINE else c.num(item, "distance_mm", sw, lo=0.0, hi=MAX_MM)
        hold = c.num(item, "hold_s", sw, lo=0.0, lo_open=True, hi=MAX_S)
        mv = c.num(item, "move_s", sw, lo=0.0, hi=60.0) if "move_s" in item else None
        flat.append((tname, dist, hold, mv))
    steps = []
    for i, (tname, dist, hold, mv) in enumerate(flat):
        if tname != BASELINE and tname not in targets:
            c.fail(f"{w}.steps", f"target '{tname}' is not defined under 'targets'")
        steps.append(Step(tname, dist, hold, 0.0 if i == 0 else (move_s if mv is None else mv)))
    return steps, hand


def parse_script(obj: Any, name: str = "script") -> Script:
    """Check a decoded JSON script and build a :class:`Script`; one-line :class:`InputError` on fault."""
    c = _Checker(name)
    if not isinstance(obj, dict):
        raise InputError(f"{name}: expected a JSON object at the top level")
    c.unknown(obj, {"seed", "recording", "oscillator", "targets", "session", "truth", "comment"}, "top level")
    seed = c.num(obj, "seed", "top level", 0, lo=0, integer=True)
    rec = _recording(c, c.obj(obj, "recording", "top level"))
    osc = _oscillator(c, c.obj(obj, "oscillator", "top level", required=True))
    targets = _targets(c, c.obj(obj, "targets", "top level"))
    steps, hand = _steps(c, c.obj(obj, "session", "top level", required=True), targets)
    truth = c.obj(obj, "truth", "top level")
    c.unknown(truth, {"thresholds_hz", "class_floor_hz"}, "truth")
    thr = truth.get("thresholds_hz", [0.5])
    if not isinstance(thr, list) or not thr:
        c.fail("truth.thresholds_hz", "expected a non-empty list of numbers")
    thr_t = tuple(c.num({"t": v}, "t", "truth.thresholds_hz", lo=0.0, lo_open=True, hi=MAX_HZ) for v in thr)
    floor = c.num(truth, "class_floor_hz", "truth", 0.1, lo=0.0, hi=MAX_HZ)
    if any(t.spec is not None for t in targets.values()) and osc.coil is None:
        c.fail("targets", "physical targets (with 'material') need the oscillator's 'coil'")
    out_hz = osc.freq_hz / osc.prescaler
    if rec.anti_alias and out_hz >= 0.45 * rec.sample_rate_hz:
        c.fail("recording", f"the line-in sees {out_hz:.6g} Hz, above the anti-alias cutoff "
                            f"(0.45 x {rec.sample_rate_hz:g} Hz); add a prescaler or set anti_alias false")
    script = Script(oscillator=osc, recording=rec, targets=targets, steps=steps, seed=seed,
                    hand_hz=hand, thresholds_hz=thr_t, class_floor_hz=floor, name=name, raw=obj)
    if script.duration_s * rec.sample_rate_hz > 2 ** 31:
        c.fail("session", f"too long ({script.duration_s:.4g} s at {rec.sample_rate_hz:g} Hz)")
    # build every target's response now, so a bad physical spec fails before any audio is written
    from coilshift.sim.response import build_responses

    build_responses(script)
    return script


def load_script(path: str | os.PathLike) -> Script:
    """Read and check a script file."""
    return parse_script(read_json(path, "script file"), str(path))
