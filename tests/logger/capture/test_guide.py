"""Guided calibration: plan, prompts and marker timing against a scripted fake engine."""

from __future__ import annotations

import math

import pytest

from coilshift.logger.errors import InputError
from coilshift.logger.capture.guide import (CalibrationGuide, marker_label, parse_distances, plan_session)
from coilshift.logger.runfolder.markers import BASELINE, markers_to_csv, parse_markers


class FakeEngine:
    """Audio clock that advances only when the guide sleeps (so the test runs instantly)."""

    def __init__(self, stop_at_s: float = math.inf):
        self.t = 0.0
        self.labels: list[tuple[float, str]] = []
        self.stop_at_s = stop_at_s

    @property
    def elapsed_s(self) -> float:
        return self.t

    def add_marker(self, label: str) -> float:
        self.labels.append((self.t, label))
        return self.t

    def sleep(self, dt: float) -> None:
        assert 0 < dt <= 0.05 + 1e-12  # short polls, never a long blind sleep
        self.t += dt

    def wait(self, timeout: float) -> bool:
        return self.t >= self.stop_at_s


class Script:
    """Scripted answers; the test fails if one is left unused or one too many is asked for."""

    def __init__(self, answers):
        self.answers = list(answers)
        self.prompts: list[str] = []

    def __call__(self, prompt: str) -> str:
        self.prompts.append(prompt)
        assert self.answers, f"unexpected prompt: {prompt}"
        return self.answers.pop(0)

    def done(self):
        assert not self.answers, f"unused answers: {self.answers}"


@pytest.mark.parametrize("text, unit, expected", [
    ("10,20,40,80", "mm", [10, 20, 40, 80]),
    ("1, 2.5", "cm", [10, 25]),
    ("1,3", "in", [25.4, 76.2]),  # 1 in = 25.4 mm exactly (international inch, 1959)
])
def test_distances_in_any_unit_become_millimetres(text, unit, expected):
    assert parse_distances(text, unit) == pytest.approx(expected)


@pytest.mark.parametrize("text, unit", [("10,x", "mm"), ("10,-5", "mm"), ("", "mm"), ("10,10", "mm"),
                                        ("10", "ft")])
def test_bad_distances_refused(text, unit):
    with pytest.raises(InputError):
        parse_distances(text, unit)


def test_plan_brackets_every_position_with_baselines():
    plan = plan_session(["steel", "coin"], [10.0, 20.0], repeats=2, dwell_s=5.0)
    kinds = ["B" if s.is_baseline else "T" for s in plan]
    assert kinds == ["B"] + ["T", "B"] * 8
    assert plan[0].dwell_s == 12.5  # first baseline: 2.5 x dwell, so the noise at the dwell is measurable
    assert [(s.target, s.distance_mm, s.repeat) for s in plan if not s.is_baseline][:3] == [
        ("steel", 10.0, 1), ("steel", 20.0, 1), ("coin", 10.0, 1)]


@pytest.mark.parametrize("names", [["baseline"], ["end"], ["a,b"], ["bolt 8"], ["x", "x"], [""]])
def test_bad_target_names_refused(names):
    with pytest.raises(InputError):
        plan_session(names, [10.0])


def test_full_session_marks_settled_stretches_of_the_dwell_length():
    eng = FakeEngine()
    script = Script([""] * 5)  # first baseline, 2 positions, 2 baselines
    plan = plan_session(["M8 bolt"], parse_distances("1,2", "cm"), dwell_s=3.0)
    res = CalibrationGuide(eng, plan, settle_s=1.5, ask=script, say=lambda s: None, sleep=eng.sleep,
                           unit="cm").run()
    script.done()
    assert res.completed and not res.skipped
    assert "2 cm" in script.prompts[3] and "M8 bolt" in script.prompts[1]
    assert [m.target for m in res.markers] == [BASELINE, "M8 bolt", BASELINE, "M8 bolt", BASELINE]
    # each stretch starts after the settling time and lasts the dwell (first baseline 2.5 x dwell);
    # times are the engine's audio clock, advanced in polls of at most 50 ms
    t = 0.0
    for m, dwell in zip(res.markers, (7.5, 3.0, 3.0, 3.0, 3.0)):
        assert m.start_s == pytest.approx(t + 1.5, abs=1e-9)
        assert m.end_s - m.start_s == pytest.approx(dwell, abs=1e-9)
        t = m.end_s
    # the engine got a start label and an 'end' for every stretch, labels it can parse
    labels = [lab for _, lab in eng.labels]
    assert labels == ["baseline", "end", "M8 bolt 10", "end", "baseline", "end", "M8 bolt 20", "end",
                      "baseline", "end"]
    # and the markers survive the markers.csv round trip
    assert parse_markers(markers_to_csv(res.markers)) == res.markers


def test_skip_merges_baselines_and_quit_keeps_what_was_recorded():
    eng = FakeEngine()
    script = Script(["", "s", "", "q"])  # baseline, skip 10 mm, record 20 mm, quit at next baseline
    plan = plan_session(["coin"], [10.0, 20.0], dwell_s=2.0)
    res = CalibrationGuide(eng, plan, settle_s=0.0, ask=script, say=lambda s: None, sleep=eng.sleep).run()
    script.done()
    assert not res.completed and res.reason == "stopped by the user"
    assert res.skipped == [("coin", 10.0)]
    assert [(m.target, m.distance_mm) for m in res.markers][1] == ("coin", 20.0)
    assert len(res.markers) == 2


def test_engine_stopping_ends_the_session():
    eng = FakeEngine(stop_at_s=5.0)
    script = Script([""])
    res = CalibrationGuide(eng, plan_session(["coin"], [10.0], dwell_s=3.0), settle_s=0.0, ask=script,
                           say=lambda s: None, sleep=eng.sleep).run()
    script.done()
    assert not res.completed and "stopped" in res.reason
    assert len(res.markers) == 0  # the first baseline (7.5 s) never finished


def test_end_of_input_stops_like_quit():
    eng = FakeEngine()

    def eof(prompt):
        raise EOFError

    res = CalibrationGuide(eng, plan_session(["coin"], [10.0]), ask=eof, say=lambda s: None, sleep=eng.sleep).run()
    assert not res.completed and res.markers == []


def test_marker_label_is_parsed_back_by_the_capture_engine():
    from coilshift.logger.capture.markers import parse_marker_label

    st = plan_session(["brass key"], [12.5])[1]
    assert parse_marker_label(marker_label(st)) == ("brass key", 12.5)
