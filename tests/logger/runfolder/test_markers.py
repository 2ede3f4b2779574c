"""Markers files: the documented format, validation with one-line reasons, round trip."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.markers import Marker, check_within, markers_to_csv, parse_markers, read_markers

GOOD = """start_s,end_s,target,distance_mm
0,10,baseline,
10.5,20,steel bolt,15
21,30,baseline,
"""


def test_parse_good_file():
    m = parse_markers(GOOD)
    assert [x.target for x in m] == ["baseline", "steel bolt", "baseline"]
    assert m[1].distance_mm == 15.0 and math.isnan(m[0].distance_mm)
    assert m[0].is_baseline and not m[1].is_baseline


@pytest.mark.parametrize("text, why", [
    ("", "empty"),
    ("start_s,end_s,target\n0,1,baseline\n", "missing column"),
    ("start_s,end_s,target,distance_mm\n", "header only"),
    ("start_s,end_s,target,distance_mm\n0,x,baseline,\n", "must be numbers"),
    ("start_s,end_s,target,distance_mm\n5,2,baseline,\n", "start_s < end_s"),
    ("start_s,end_s,target,distance_mm\n0,2,steel,\n", "distance_mm must be a number"),
    ("start_s,end_s,target,distance_mm\n0,2,steel,-4\n", ">= 0"),
    ("start_s,end_s,target,distance_mm\n0,2,steel,nan\n", ">= 0"),
    ("start_s,end_s,target,distance_mm\n0,5,baseline,\n4,8,steel,10\n", "overlap"),
    ("start_s,end_s,target,distance_mm\n0,5,,10\n", "empty target"),
])
def test_bad_markers_give_one_line(text, why):
    with pytest.raises(InputError) as exc:
        parse_markers(text, "m.csv")
    msg = str(exc.value)
    assert why in msg and "\n" not in msg and msg.startswith("m.csv")


def test_markers_outside_recording_refused():
    with pytest.raises(InputError, match="ends after the recording"):
        check_within(parse_markers(GOOD), duration_s=25.0)
    check_within(parse_markers(GOOD), duration_s=30.0)


def test_missing_and_binary_files(tmp_path):
    with pytest.raises(InputError, match="no such markers file"):
        read_markers(tmp_path / "nope.csv")
    p = tmp_path / "bin.csv"
    p.write_bytes(b"\xff\xfe\x00\x81\x92" * 10)
    with pytest.raises(InputError):
        read_markers(p)


names = st.text(alphabet=st.characters(whitelist_categories=("L", "N"), whitelist_characters=" -_"),
                min_size=1, max_size=12).map(str.strip).filter(bool)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.floats(0.01, 50), st.floats(0.01, 50), names | st.just("baseline"),
                          st.integers(0, 2000)), min_size=1, max_size=8))
def test_round_trip(rows):
    t = 0.0
    markers = []
    for gap, length, name, dist in rows:
        start = round(t + gap, 6)
        end = round(start + length, 6)
        markers.append(Marker(start, end, name, math.nan if name == "baseline" else float(dist)))
        t = end
    back = parse_markers(markers_to_csv(markers))
    assert len(back) == len(markers)
    for a, b in zip(markers, back):
        assert (a.start_s, a.end_s, a.target) == (b.start_s, b.end_s, b.target)
        assert (math.isnan(a.distance_mm) and math.isnan(b.distance_mm)) or a.distance_mm == b.distance_mm
