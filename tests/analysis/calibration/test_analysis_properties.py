"""Property tests for the analysis-side readers (hypothesis).

* Random bytes and random mutations of a valid log, run.json, coil JSON, simulation script and
  temperature CSV make the readers fail with ``InputError`` only (one line naming the file).
* JSON files whose values are replaced by arbitrary JSON values (wrong types, NaN-like numbers,
  nesting) are refused the same way or accepted as a design that analyses to finite numbers.
* A run log cut at any byte (a crash mid-write) reads back as the first rows of the full log,
  marked interrupted. (The round trip of a complete log is in test_logread.py.)

(Not called test_properties.py: tests/logger has a property module and the test folders are
not packages, so two files of one name would clash.)
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from coilshift.analysis.models.coil import analyse_coil, load_coil
from coilshift.logger.runfolder.reader import read_log
from coilshift.analysis.stability.tempco import read_temperature_csv
from coilshift.analysis.models.target import parse_target_spec
from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.folders import prepare_run_dir
from coilshift.logger.runfolder.writer import RunWriter
from coilshift.sim.script import load_script
from mutations import mutated

SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
START = "2026-03-01T12:00:00.000Z"
SCRIPT = (Path(__file__).parents[3] / "sample_data" / "calibration.json").read_bytes()
COIL = {"turns": 20, "inner_diameter_mm": 100, "length_mm": 10, "awg": 26, "cap_nf": 100}
TEMPS = b"time_s,temp_c\n0,20.0\n60,20.5\n120,21.0\n180,21.2\n"


@pytest.fixture(scope="module")
def work(tmp_path_factory):
    return tmp_path_factory.mktemp("aprops")


@pytest.fixture(scope="module")
def run(work):
    n = 300
    t = (np.arange(n) + 0.5) * 0.02
    f = 20000.0 + 0.01 * np.sin(t)
    f[::37] = np.nan
    fl = np.zeros(n, np.int64)
    fl[::37] = 4  # NO_TONE where the frequency is empty
    frames = FrameTable(t, f, np.full(n, -20.0), np.full(n, 40.0), fl)
    r = prepare_run_dir(work / "run")
    with RunWriter(r, {"start_utc": START, "baseline": {"freq_hz": 20000.0, "method": "test"}}) as w:
        w.append(frames)
    return r


def _refused_or_ok(fn, path: Path, data: bytes):
    path.write_bytes(data)
    try:
        return fn(path)
    except InputError as exc:
        assert "\n" not in str(exc)
        assert path.name in str(exc) or str(path.parent) in str(exc), str(exc)
        return None


def _check_log(path):
    log = read_log(path)
    t = log.t_s
    assert len(t) >= 1 and np.all(np.isfinite(t)) and np.all(np.diff(t) > 0)
    assert not np.isinf(log.freq_hz).any()
    log.usable()
    return log


@SETTINGS
@given(data=st.binary(max_size=1500))
def test_random_bytes_as_log(work, data):
    _refused_or_ok(_check_log, work / "random_log.csv", data)


@SETTINGS
@given(data=st.data())
def test_mutated_log_csv(work, run, data):
    folder = work / "mrun"
    folder.mkdir(exist_ok=True)
    (folder / "run.json").write_bytes((run / "run.json").read_bytes())
    blob = data.draw(mutated((run / "log.csv").read_bytes()))
    _refused_or_ok(lambda p: _check_log(p.parent), folder / "log.csv", blob)


@SETTINGS
@given(data=st.data())
def test_mutated_run_json(work, run, data):
    folder = work / "jrun"
    folder.mkdir(exist_ok=True)
    (folder / "log.csv").write_bytes((run / "log.csv").read_bytes())
    blob = data.draw(mutated((run / "run.json").read_bytes()))
    _refused_or_ok(lambda p: _check_log(p.parent), folder / "run.json", blob)


json_values = st.recursive(
    st.none() | st.booleans() | st.integers(-10 ** 6, 10 ** 6) | st.floats(allow_nan=False) | st.text(max_size=8),
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=6), inner, max_size=3),
    max_leaves=8)


def _coil_ok(path):
    report = analyse_coil(load_coil(path))
    assert math.isfinite(report.inductance_uh) and report.inductance_uh > 0
    if report.resistance_ohm is not None:  # None when no wire is given (inductance only)
        assert math.isfinite(report.resistance_ohm) and report.resistance_ohm > 0


@SETTINGS
@given(data=mutated(json.dumps(COIL).encode()) | st.binary(max_size=200))
def test_mutated_coil_file(work, data):
    _refused_or_ok(_coil_ok, work / "coil.json", data)


@SETTINGS
@given(key=st.sampled_from(sorted(COIL) + ["depth_mm", "temp_c", "wire_diameter_mm", "insulation", "x"]),
       value=json_values)
def test_coil_with_any_value(work, key, value):
    obj = {**COIL, key: value}
    if key == "wire_diameter_mm":
        obj.pop("awg")
    _refused_or_ok(_coil_ok, work / "coilv.json", json.dumps(obj).encode())


@SETTINGS
@given(data=mutated(SCRIPT) | st.binary(max_size=200))
def test_mutated_simulation_script(work, data):
    _refused_or_ok(load_script, work / "script.json", data)


def _script_paths():
    obj = json.loads(SCRIPT)
    paths = []

    def walk(o, path):
        if isinstance(o, dict):
            for k, v in o.items():
                walk(v, path + (k,))
        elif isinstance(o, list):
            for i, v in enumerate(o):
                walk(v, path + (i,))
        paths.append(path)

    walk(obj, ())
    return [p for p in paths if p]


@SETTINGS
@given(path=st.sampled_from(_script_paths()), value=json_values)
def test_script_with_any_value_anywhere(work, path, value):
    obj = json.loads(SCRIPT)
    node = obj
    for k in path[:-1]:
        node = node[k]
    node[path[-1]] = value
    _refused_or_ok(load_script, work / "scriptv.json", json.dumps(obj).encode())


@SETTINGS
@given(data=mutated(TEMPS) | st.binary(max_size=200))
def test_mutated_temperature_csv(work, data):
    def check(path):
        ts, tc = read_temperature_csv(path)
        assert len(ts) >= 2 and np.all(np.diff(ts) > 0) and np.all(np.isfinite(tc))

    _refused_or_ok(check, work / "temps.csv", data)


@SETTINGS
@given(text=st.text(max_size=60) | st.sampled_from(["copper:diameter_mm=nan", "steel:diameter_mm=-1",
                                                    "sigma=1e400,mu_r=1,diameter_mm=5", "copper:", ":=",
                                                    "aluminium:diameter_mm=20,mu_r=0"]))
def test_target_spec_parser(text):
    try:
        spec = parse_target_spec(text)
    except InputError as exc:
        assert "\n" not in str(exc)
    else:
        for v in vars(spec).values():
            if isinstance(v, float):
                assert math.isfinite(v)


@SETTINGS
@given(cut=st.integers(0, 10 ** 6))
def test_log_cut_anywhere_reads_as_a_prefix(work, run, cut):
    # a crash can stop the writer at any byte: the reader gets the complete rows before it
    full = (run / "log.csv").read_bytes()
    cut = min(cut % (len(full) + 1), len(full))
    folder = work / "cut"
    folder.mkdir(exist_ok=True)
    meta = json.loads((run / "run.json").read_text())
    meta["status"] = "running"  # what run.json says until close() replaces it
    (folder / "run.json").write_text(json.dumps(meta))
    (folder / "log.csv").write_bytes(full[:cut])
    whole = read_log(run)
    complete_rows = full[:cut].count(b"\n") - 1
    if complete_rows < 1:  # nothing but (part of) the header: refused in one line
        with pytest.raises(InputError, match="log.csv"):
            read_log(folder)
        return
    got = read_log(folder)
    assert got.interrupted
    k = len(got.table)
    assert k == complete_rows
    np.testing.assert_array_equal(got.t_s, whole.t_s[:k])
    np.testing.assert_array_equal(got.freq_hz, whole.freq_hz[:k])
