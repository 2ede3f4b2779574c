"""Guided calibration: the step sequence of a calibration run, independent of any device.

A session is a list of stretches: a first target-free baseline (2.5 times the dwell, so the noise
at the dwell time, which needs two dwells of unbroken baseline, can be measured), then for every repeat, target and distance a target stretch
followed by a baseline stretch. So every target position has a baseline right before and right
after it, and the analysis can interpolate the baseline across it (drift cancels).

:class:`CalibrationGuide` walks the plan with any engine-like object that has ``elapsed_s``
(audio seconds since the start, the log's time scale) and ``add_marker(label)`` (the live
capture engine, or a fake in the tests): it prompts, waits for Enter, waits the settling time
after the move, marks the stretch, waits the dwell (showing the live frequency and shift through
``show``), closes the stretch and reads the measured shift back through ``readback`` (a function
the command line gives it: the calibration analysis' own step statistic, which this module must
not import). It does no I/O except through the functions it is given.
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
#: answer that records the last target stretch again (asked before the baseline that follows it)
REDO_WORDS = ("r", "redo")
#: what the keys do, for --help and the first prompt
KEYS_HELP = ("Answers at each prompt: Enter goes on; s skips this target position; r (before the baseline "
             "that follows a target) records that target stretch again; q ends the session (the stretches "
             "recorded so far are kept and analysed). While a stretch records, the live frequency and shift "
             "are shown; after it, the measured shift with its standard error and whether it is significant.")
#: seconds between two live readouts while a stretch records
SHOW_EVERY_S = 0.5


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


@dataclass(frozen=True)
class StepReading:
    """The measured shift of the latest target stretch, as the readback function found it.

    Attributes
    ----------
    target, distance_mm : the stretch
    shift_hz, stderr_hz : its shift against the baselines recorded so far, with its standard error
    significant : the shift passes the analysis' significance test for one point
    bracketed : a baseline after the stretch was used too (drift removed)
    baseline_hz : the baseline the shift is taken from (for the ppm figure)
    note : why the reading is weak ('' when clean)
    """

    target: str
    distance_mm: float
    shift_hz: float
    stderr_hz: float
    significant: bool
    bracketed: bool = False
    baseline_hz: float = math.nan
    note: str = ""


def reading_text(r: StepReading, unit: str = "mm") -> str:
    """One line for a reading: shift +- error in Hz and ppm, and what it means."""
    ppm = (f" ({1e6 * r.shift_hz / r.baseline_hz:+.4g} ppm)"
           if math.isfinite(r.baseline_hz) and r.baseline_hz > 0 else "")
    against = "baselines before and after" if r.bracketed else "the baseline before"
    verdict = "significant" if r.significant else "NOT significant"
    # the shift to the decimals its error supports (two significant digits of the error)
    places = (min(max(1 - math.floor(math.log10(r.stderr_hz)), 0), 7)
              if math.isfinite(r.stderr_hz) and r.stderr_hz > 0 else 3)
    text = (f"  {r.target} at {_fmt_distance(r.distance_mm, unit)}: shift {r.shift_hz:+.{places}f} +- "
            f"{r.stderr_hz:.2g} Hz{ppm} against {against}: {verdict}")
    return text + (f" ({r.note})" if r.note else "")


def no_response_warning(r: StepReading) -> str:
    """The warning after a target stretch that shows no response."""
    return (f"  warning: the {r.target} showed no response at this distance. Check the target is on the "
            "coil's axis and the tone is tracked; press r at the next prompt to record it again")


def live_text(snap, label: str, left_s: float) -> str:
    """The live readout while a stretch records: time left, frequency (or NO TONE) and shift."""
    from coilshift.logger.runfolder import flags as _flags

    freq = getattr(snap, "freq_hz", math.nan)
    if getattr(snap, "frame_flags", 0) & _flags.NO_TONE or not math.isfinite(freq):
        f_txt = "NO TONE"
    else:
        f_txt = f"{freq:.3f} Hz"
    shift = getattr(snap, "shift_hz", math.nan)
    s_txt = f"shift {shift:+.3f} Hz" if math.isfinite(shift) else "shift ---"
    return f"  recording {label}: {max(left_s, 0):4.1f} s left  {f_txt}  {s_txt}"


@dataclass
class GuideResult:
    """What a guided session produced."""

    markers: list[Marker] = field(default_factory=list)
    completed: bool = False
    reason: str = ""
    skipped: list[tuple[str, float]] = field(default_factory=list)
    readings: list[StepReading] = field(default_factory=list)
    redone: int = 0

    def summary_lines(self, unit: str = "mm") -> list[str]:
        """The readings at the end of the session (the latest of each target stretch)."""
        if not self.readings:
            return []
        lines = ["step readings (each against the baselines recorded around it):"]
        lines += [reading_text(r, unit) for r in self.readings]
        quiet = sum(1 for r in self.readings if not r.significant)
        if quiet:
            lines.append(f"  {quiet} of {len(self.readings)} target stretch(es) showed no significant response")
        return lines


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
    readback : ``f(markers so far) -> StepReading | None``: the shift of the latest target stretch
    show : live readout while a stretch records (one line, rewritten; the engine's ``snapshot()``)
    """

    def __init__(self, engine, plan: list[Stretch], settle_s: float = DEFAULT_SETTLE_S,
                 ask: Callable[[str], str] = input, say: Callable[[str], None] = print,
                 sleep: Callable[[float], None] = time.sleep, unit: str = "mm",
                 readback: Callable[[list[Marker]], StepReading | None] | None = None,
                 show: Callable[[str], None] | None = None):
        if not (math.isfinite(settle_s) and settle_s >= 0):
            raise InputError(f"{setting('settle_s')} {settle_s}: must be zero or positive seconds")
        self.engine = engine
        self.plan = list(plan)
        self.settle_s = float(settle_s)
        self.ask, self.say, self.sleep = ask, say, sleep
        self.unit = unit
        self.readback, self.show = readback, show
        self.result = GuideResult()

    def _ended(self) -> bool:
        w = getattr(self.engine, "wait", None)
        return bool(w(0)) if callable(w) else False

    def _wait(self, seconds: float, label: str = "") -> None:
        # audio time, not wall time: the stretch must hold `seconds` of signal
        until = float(self.engine.elapsed_s) + seconds
        shown = -math.inf
        snapshot = getattr(self.engine, "snapshot", None)
        while True:
            now = float(self.engine.elapsed_s)
            left = until - now
            if label and self.show is not None and callable(snapshot) and now - shown >= SHOW_EVERY_S:
                self.show(live_text(snapshot(), label, left))
                shown = now
            if left <= 0:
                return
            if self._ended():
                raise CaptureEnded("the capture stopped")
            self.sleep(min(0.05, left))

    def _mark(self, label: str) -> float:
        t = self.engine.add_marker(label)
        return float(t) if isinstance(t, (int, float)) else float(self.engine.elapsed_s)

    def _read_back(self, after_target: bool) -> None:
        """Say the latest target stretch's shift (after it, and again once its closing baseline
        is in); warn when a target stretch shows no response."""
        if self.readback is None:
            return
        r = self.readback(list(self.result.markers))
        if r is None:
            if after_target:
                self.say("  no reading: too few usable frames in the stretch (is the tone tracked?)")
            return
        self.say(reading_text(r, self.unit))
        if after_target:
            if not r.significant:
                self.say(no_response_warning(r))
        else:  # the bracketed reading replaces the one-sided one
            rs = self.result.readings
            if rs and (rs[-1].target, rs[-1].distance_mm) == (r.target, r.distance_mm):
                rs.pop()
            rs.append(r)
            return
        self.result.readings.append(r)

    def _record(self, st: Stretch) -> None:
        """Settle, mark, record one stretch (with the live readout), close it."""
        if self.settle_s > 0:
            self.say(f"  settling {self.settle_s:g} s ...")
            self._wait(self.settle_s)
        start = self._mark(marker_label(st))
        label = "baseline" if st.is_baseline else f"{st.target} at {_fmt_distance(st.distance_mm, self.unit)}"
        self.say(f"  recording {label} for {st.dwell_s:g} s ...")
        self._wait(st.dwell_s, label)
        end = self._mark("end")
        self.result.markers.append(Marker(start, end, st.target, st.distance_mm))

    def _redo(self) -> None:
        """Forget the last target stretch (and its reading) so it is recorded again."""
        res = self.result
        last = res.markers.pop()
        if res.readings and (res.readings[-1].target, res.readings[-1].distance_mm) == (last.target,
                                                                                         last.distance_mm):
            res.readings.pop()
        res.redone += 1
        self.say(f"  the {last.target} at {_fmt_distance(last.distance_mm, self.unit)} will be recorded again")

    def run(self) -> GuideResult:
        """Run the whole session; returns the stretches recorded (also on quit or engine stop).

        The result is also kept in ``self.result`` as it grows, so a caller interrupted by
        Ctrl-C still has every finished stretch.
        """
        res = self.result = GuideResult()
        total = len(self.plan)
        skip_next_baseline = False
        i = 0
        while i < total:
            st = self.plan[i]
            i += 1
            if st.is_baseline and skip_next_baseline:
                skip_next_baseline = False
                continue
            redo_ok = st.is_baseline and bool(st.after) and bool(res.markers) and not res.markers[-1].is_baseline
            prompt = prompt_for(st, self.unit, i, total)
            if redo_ok:
                prompt += " (r = record the " + st.after + " again, q = stop)"
            try:
                answer = self.ask(prompt + " ")
            except EOFError:
                answer = "q"
            word = str(answer).strip().lower()
            if word in QUIT_WORDS:
                res.reason = "stopped by the user"
                return res
            if word in REDO_WORDS and redo_ok:
                self._redo()
                i -= 2  # back to the target stretch
                continue
            if word in SKIP_WORDS and not st.is_baseline:
                res.skipped.append((st.target, st.distance_mm))
                self.say(f"  skipped {st.target} at {_fmt_distance(st.distance_mm, self.unit)}")
                # the baseline after a skipped position would sit next to the previous one: merge them
                skip_next_baseline = True
                continue
            try:
                self._record(st)
            except CaptureEnded as exc:
                res.reason = str(exc)
                return res
            if not st.is_baseline or st.after:
                self._read_back(after_target=not st.is_baseline)
        res.completed = True
        return res
