"""Guided calibration: the step sequence of a calibration run, independent of any device.

A session is a list of stretches: a first target-free baseline (2.5 times the dwell, so the noise
at the dwell time, which needs two dwells of unbroken baseline, can be measured), then for every repeat, target and distance a target stretch
followed by a baseline stretch. So every target position has a baseline right before and right
after it, and the analysis can interpolate the baseline across it (drift cancels).

:class:`CalibrationGuide` walks the plan with any engine-like object that has ``elapsed_s``
(audio seconds since the start, the log's time scale) and ``add_marker(label)`` (the live
capture engine, or a fake in the tests): it prompts, waits for Enter, waits the settling time
after the move, marks the stretch, waits the dwell, closes the stretch. It never imports the
analysis side and does no I/O except through the ``ask``/``say`` functions it is given.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from typing import Callable

from coilshift.logger.errors import InputError, setting
from coilshift.logger.runfolder.markers import BASELINE, Marker

UNITS_MM = {"mm": 1.0, "cm": 10.0, "in": 25.4}
DEFAULT_DWELL_S = 10.0
DEFAULT_SETTLE_S = 2.0
#: the first baseline lasts this many dwells: the Allan deviation at the dwell needs two
#: unbroken dwells, plus margin for the analysis' own trimming
FIRST_BASELINE_FACTOR = 2.5
#: answers to a prompt that end the session early (the stretches done so far are kept)
QUIT_WORDS = ("q", "quit", "stop")
#: answer that skips a target position (its closing baseline is still recorded)
SKIP_WORDS = ("s", "skip")


def parse_distances(text: str, unit: str = "mm") -> list[float]:
    """Comma-separated distances in ``unit`` (mm, cm or in) -> millimetres.

    Raises InputError for an unknown unit, a non-number, a negative value or a repeat.
    """
    if unit not in UNITS_MM:
        raise InputError(f"{setting('unit')} {unit}: use one of {', '.join(UNITS_MM)}")
    out = []
    for part in filter(None, (p.strip() for p in str(text).split(","))):
        try:
            x = float(part)
        except ValueError:
            raise InputError(f"{setting('distances')} {text}: {part!r} is not a number") from None
        if not math.isfinite(x) or x < 0:
            raise InputError(f"{setting('distances')} {text}: {part!r} must be zero or positive")
        out.append(x * UNITS_MM[unit])
    if not out:
        raise InputError(f"{setting('distances')} {text!r}: give at least one distance, e.g. 10,20,40,80")
    if len(set(out)) != len(out):
        raise InputError(f"{setting('distances')} {text}: a distance is listed twice "
                         f"(use {setting('repeats')} to repeat)")
    return out


@dataclass(frozen=True)
class Stretch:
    """One planned stretch: a baseline or a target at a distance, recorded for ``dwell_s``."""

    target: str  # "baseline" for target-free stretches
    distance_mm: float  # NaN for baselines
    dwell_s: float
    repeat: int
    after: str = ""  # for a baseline: the target just removed ('' for the first one)

    @property
    def is_baseline(self) -> bool:
        return self.target == BASELINE


def _check_name(name: str) -> str:
    n = " ".join(str(name).split())
    if not n:
        raise InputError(f"{setting('targets')}: empty target name")
    if n.lower() in (BASELINE, "end"):
        raise InputError(f"{setting('targets')} {n}: '{n}' is reserved; name the target by what it is")
    if "," in n or '"' in n:
        raise InputError(f"{setting('targets')} {n}: no commas or quotes in a target name")
    if n[-1].isdigit():
        # a live marker label is 'NAME DISTANCE': a trailing number would be read as the distance
        raise InputError(f"{setting('targets')} {n}: a name must not end in a digit (e.g. 'M8 bolt', not 'bolt M8')")
    return n


def plan_session(targets: list[str], distances_mm: list[float], repeats: int = 1,
                 dwell_s: float = DEFAULT_DWELL_S, first_baseline_s: float | None = None) -> list[Stretch]:
    """The stretches of a calibration session, in order.

    First baseline (``first_baseline_s``, default 2.5 x the dwell), then for every repeat, target
    and distance: target stretch, baseline stretch.
    """
    if not targets:
        raise InputError(f"give at least one {setting('targets')}")
    names = [_check_name(t) for t in targets]
    if len(set(names)) != len(names):
        raise InputError(f"{setting('targets')}: a target is listed twice")
    if not (math.isfinite(dwell_s) and dwell_s > 0):
        raise InputError(f"{setting('dwell_s')} {dwell_s}: must be positive seconds")
    if repeats < 1:
        raise InputError(f"{setting('repeats')} {repeats}: must be at least 1")
    first = FIRST_BASELINE_FACTOR * dwell_s if first_baseline_s is None else float(first_baseline_s)
    plan = [Stretch(BASELINE, math.nan, first, 0)]
    for r in range(1, repeats + 1):
        for name in names:
            for d in distances_mm:
                plan.append(Stretch(name, float(d), dwell_s, r))
                plan.append(Stretch(BASELINE, math.nan, dwell_s, r, after=name))
    return plan


def _fmt_distance(d_mm: float, unit: str) -> str:
    v = d_mm / UNITS_MM[unit]
    return f"{v:.4f}".rstrip("0").rstrip(".") + f" {unit}"


def marker_label(stretch: Stretch) -> str:
    """Label for the capture engine: ``baseline`` or ``NAME DISTANCE`` (mm, plain decimal)."""
    if stretch.is_baseline:
        return BASELINE
    return f"{stretch.target} " + f"{stretch.distance_mm:.3f}".rstrip("0").rstrip(".")


def prompt_for(stretch: Stretch, unit: str = "mm", index: int = 0, total: int = 0) -> str:
    """What the user is asked to do before the stretch."""
    step = f"[{index}/{total}] " if total else ""
    if stretch.is_baseline and not stretch.after:
        return (f"{step}Keep the coil clear of metal (tools, rings, watch, table fittings). "
                f"Press Enter to record the first baseline ({stretch.dwell_s:g} s)")
    if stretch.is_baseline:
        return f"{step}Remove the {stretch.after} and keep your hands away from the coil. Press Enter"
    return (f"{step}Place the {stretch.target} at {_fmt_distance(stretch.distance_mm, unit)} from the coil face, "
            f"on the coil's axis, then take your hands away. Press Enter (s = skip, q = stop)")


@dataclass
class GuideResult:
    """What a guided session produced."""

    markers: list[Marker] = field(default_factory=list)
    completed: bool = False
    reason: str = ""
    skipped: list[tuple[str, float]] = field(default_factory=list)


class CaptureEnded(Exception):
    """The capture engine stopped by itself (device fault, end of a paced source)."""


class CalibrationGuide:
    """Walk a session plan with an engine, prompting the user at every move.

    Parameters
    ----------
    engine : object with ``elapsed_s`` (s, audio time) and ``add_marker(label)``; if it also has
        ``wait(timeout)`` (True once the run has ended by itself) the guide stops when it does
    plan : stretches from :func:`plan_session`
    settle_s : seconds waited after each Enter before the stretch starts (the move settles)
    ask : prompt function returning the user's answer (``input``); EOFError ends the session
    say : message function (``print``)
    sleep : wall-clock sleep used while waiting for audio time to pass
    unit : unit shown in prompts
    """

    def __init__(self, engine, plan: list[Stretch], settle_s: float = DEFAULT_SETTLE_S,
                 ask: Callable[[str], str] = input, say: Callable[[str], None] = print,
                 sleep: Callable[[float], None] = time.sleep, unit: str = "mm"):
        if not (math.isfinite(settle_s) and settle_s >= 0):
            raise InputError(f"{setting('settle_s')} {settle_s}: must be zero or positive seconds")
        self.engine = engine
        self.plan = list(plan)
        self.settle_s = float(settle_s)
        self.ask, self.say, self.sleep = ask, say, sleep
        self.unit = unit
        self.result = GuideResult()

    def _ended(self) -> bool:
        w = getattr(self.engine, "wait", None)
        return bool(w(0)) if callable(w) else False

    def _wait(self, seconds: float) -> None:
        # audio time, not wall time: the stretch must hold `seconds` of signal
        until = float(self.engine.elapsed_s) + seconds
        while True:
            left = until - float(self.engine.elapsed_s)
            if left <= 0:
                return
            if self._ended():
                raise CaptureEnded("the capture stopped")
            self.sleep(min(0.05, left))

    def _mark(self, label: str) -> float:
        t = self.engine.add_marker(label)
        return float(t) if isinstance(t, (int, float)) else float(self.engine.elapsed_s)

    def run(self) -> GuideResult:
        """Run the whole session; returns the stretches recorded (also on quit or engine stop).

        The result is also kept in ``self.result`` as it grows, so a caller interrupted by
        Ctrl-C still has every finished stretch.
        """
        res = self.result = GuideResult()
        total = len(self.plan)
        skip_next_baseline = False
        for i, st in enumerate(self.plan, start=1):
            if st.is_baseline and skip_next_baseline:
                skip_next_baseline = False
                continue
            try:
                answer = self.ask(prompt_for(st, self.unit, i, total) + " ")
            except EOFError:
                answer = "q"
            word = str(answer).strip().lower()
            if word in QUIT_WORDS:
                res.reason = "stopped by the user"
                return res
            if word in SKIP_WORDS and not st.is_baseline:
                res.skipped.append((st.target, st.distance_mm))
                self.say(f"  skipped {st.target} at {_fmt_distance(st.distance_mm, self.unit)}")
                # the baseline after a skipped position would sit next to the previous one: merge them
                skip_next_baseline = True
                continue
            try:
                if self.settle_s > 0:
                    self.say(f"  settling {self.settle_s:g} s ...")
                    self._wait(self.settle_s)
                start = self._mark(marker_label(st))
                self.say(f"  recording {'baseline' if st.is_baseline else st.target} for {st.dwell_s:g} s ...")
                self._wait(st.dwell_s)
                end = self._mark("end")
            except CaptureEnded as exc:
                res.reason = str(exc)
                return res
            res.markers.append(Marker(start, end, st.target, st.distance_mm))
        res.completed = True
        return res
