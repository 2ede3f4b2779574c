"""Numbers far outside the physics, given by a file rather than an option.

The class (docs/reliability.md, round two): every number a file gives (a coil description, a
target description, a simulation script, a temperature record, a scope export, run.json, a
markers file, a log) at 1e300, 1e30, -1e300 or 1e-300 is either refused in one readable line
(exit 2, naming the file) or answered with finite numbers: never an internal error, never a
NumPy warning (the suite turns warnings into errors, so a warning shows up here as exit 3),
never ``nan``/``inf`` printed. The options themselves are checked the same way in test_main.py.

A number that lies outside every range (1e300, 1e30, -1e300) must be refused, except where it
is not a measurement (a whole-number seed) or not read (a log column stability does not use),
and run.json, the program's own record, may instead leave a field no run can have unused.

The commands run in this process (``main(argv)``), which keeps about 190 cases within a few
seconds; the files are small (a 3 s simulation at 8 kHz, a 60 s log of 20 ms frames).
"""

from __future__ import annotations

import copy
import json
from pathlib import Path

import numpy as np
import pytest
from reliability_helpers import FS, write_small_run

from coilshift.cli import main as cli_main

HUGE = ("1e300", "1e30", "-1e300", "1e-300")

COIL = {"turns": 20, "inner_diameter_mm": 100, "length_mm": 200, "awg": 26, "cap_nf": 10}
COIL_KEYS = ("turns", "inner_diameter_mm", "length_mm", "depth_mm", "wire_diameter_mm",
             "outer_wire_diameter_mm", "temp_c", "cap_nf", "lead_length_mm")

SCRIPT = {"seed": 1, "recording": {"sample_rate_hz": 8000, "hum": {"mains_hz": 50, "level_dbfs": -70}},
          "oscillator": {"freq_hz": 1000.0, "temperature": {"start_c": 21.0}},
          "targets": {"coin": {"peak_shift_hz": 2.0, "coil_radius_mm": 50}},
          "session": {"move_s": 0.2, "steps": [{"target": "baseline", "hold_s": 1.0},
                                               {"target": "coin", "distance_mm": 20, "hold_s": 1.0},
                                               {"target": "baseline", "hold_s": 1.0}]},
          "truth": {"thresholds_hz": [0.5], "class_floor_hz": 0.1}}
#: every number a script may hold (a path of keys and list indices)
SCRIPT_KEYS = [("seed",), *(("recording", k) for k in ("sample_rate_hz", "level_dbfs", "noise_dbfs", "clock_ppm",
                                                          "max_harmonic")),
               ("recording", "hum", "mains_hz"), ("recording", "hum", "level_dbfs"),
               *(("oscillator", k) for k in ("freq_hz", "duty", "edge_tau_us", "prescaler", "warmup_hz",
                                             "warmup_tau_s", "tempco_hz_per_c", "white_fm_hz", "random_walk_hz")),
               *(("oscillator", "temperature", k) for k in ("start_c", "rate_c_per_h", "swing_c", "swing_period_s")),
               ("targets", "coin", "peak_shift_hz"), ("targets", "coin", "coil_radius_mm"),
               ("session", "move_s"), ("session", "hand_hz"), ("session", "steps", 0, "hold_s"),
               ("session", "steps", 1, "distance_mm"), ("truth", "thresholds_hz", 0), ("truth", "class_floor_hz")]


def _put(obj, path, value):
    obj = copy.deepcopy(obj)
    node = obj
    for k in path[:-1]:
        node = node[k]
    node[path[-1]] = value
    return obj


def _scope(path: Path, time_of=lambda i: i / FS, volts_of=None) -> Path:
    v = 0.5 * np.sin(2 * np.pi * 1000.0 * np.arange(4000) / FS)
    rows = [f"{time_of(i):.9g},{v[i] if volts_of is None else volts_of(i, v[i]):.6g}" for i in range(4000)]
    path.write_text("Time (s),CH1 (V)\n" + "\n".join(rows) + "\n")
    return path


def _coil_case(key, x):
    def make(d):
        base = {k: v for k, v in COIL.items() if not (key == "wire_diameter_mm" and k == "awg")}
        f = d / f"coil-{key}-{x}.json"
        f.write_text(json.dumps({**base, key: float(x)}))
        return ["coil", "--coil", f], f.name
    return make


def _target_case(key, x):
    spec = f"copper:diameter_mm={x}" if key == "diameter_mm" else f"copper:diameter_mm=20,{key}={x}"
    return lambda d: (["target", "--turns", "20", "--inner-diameter-mm", "100", "--length-mm", "200", "--awg", "26",
                       "--cap-nf", "10", "--sphere", spec], repr(spec))  # as the model names it, quoted


def _script_case(path, x):
    def make(d):
        name = ".".join(map(str, path))
        f = d / f"script-{name}-{x}.json"
        f.write_text(json.dumps(_put(SCRIPT, path, float(x))))
        return ["simulate", f, "-o", d / f"sim-{name}-{x}"], f.name
    return make


def _temperature_case(col, x):
    row = 59 if col == "t_s" else 5  # t_s on the last row, so that the times still increase

    def make(d):
        f = d / f"temperature-{col}-{x}.csv"
        # the time column under its older name, which every version reads
        f.write_text("time_s,temp_c\n" + "".join(
            f"{x if (col == 't_s' and i == row) else i},{x if (col == 'temp_c' and i == row) else 20 + 0.01 * i}\n"
            for i in range(60)))
        return ["stability", d / "run", "--temperature", f], f.name
    return make


def _scope_case(kind, x):
    def make(d):
        f = d / f"scope-{kind}-{x}.csv"
        if kind == "voltage":
            _scope(f, volts_of=lambda i, v: float(x) if i == 100 else v)
        else:
            _scope(f, time_of=lambda i: i * float(x))
        return ["track", f, "-o", d / f"track-{kind}-{x}", "--quiet"], f.name
    return make


def _run_json_case(section, key, x):
    def make(d):
        folder = write_small_run(d / f"run-{key}-{x}")
        meta = json.loads((folder / "run.json").read_text())
        meta.setdefault(section, {})[key] = float(x)
        (folder / "run.json").write_text(json.dumps(meta))
        return ["stability", folder], folder.name
    return make


def _markers_case(col, x):
    def make(d):
        f = d / f"markers-{col}-{x}.csv"
        end, dist = (x, "10") if col == "end_s" else ("40", x)
        f.write_text(f"start_s,end_s,target,distance_mm\n0,20,baseline,\n20,{end},coin,{dist}\n")
        return ["analyze", d / "run", "--markers", f, "--bootstrap", "0"], f.name
    return make


LOG_COLUMNS = ("t_s", "freq_hz", "shift_hz", "amp_dbfs", "snr_db")


def _log_case(col):
    def make(d):
        f = d / f"log-{col}.csv"
        rows = [[f"{i * 0.02:.2f}", "1000.0", "0.0", "-20", "40"] for i in range(500)]
        rows[-1 if col == "t_s" else 70][LOG_COLUMNS.index(col)] = "1e300"
        f.write_text(",".join(LOG_COLUMNS) + "\n" + "".join(",".join(r) + "\n" for r in rows))
        return ["stability", f], f.name
    return make


FAR = ("1e300", "1e30", "-1e300")  # outside every range: a file giving one of these must be refused

#: case id -> (a function that writes the case's file into a folder and returns the command line
#: and the name its refusal must carry, whether the case must be refused)
CASES = {
    **{f"coil-json-{k}={x}": (_coil_case(k, x), x in FAR) for k in COIL_KEYS for x in HUGE},
    **{f"target-spec-{k}={x}": (_target_case(k, x), x in FAR) for k in ("diameter_mm", "sigma", "mu_r")
       for x in HUGE},
    # a whole-number seed of any size seeds the generator: accepted
    **{f"script-{'.'.join(map(str, p))}={x}": (_script_case(p, x), x in FAR and not (p == ("seed",) and x[0] != "-"))
       for p in SCRIPT_KEYS for x in HUGE},
    **{f"temperature-{c}={x}": (_temperature_case(c, x), True) for c, x in (
        ("temp_c", "1e300"), ("temp_c", "-1e300"), ("t_s", "1e300"))},
    **{f"scope-voltage={x}": (_scope_case("voltage", x), True) for x in ("1e300", "-1e300", "1e30")},
    **{f"scope-time-step={x}": (_scope_case("step", x), True) for x in ("1e300", "1e30", "1e-300", "1e-30")},
    # run.json is the program's own record: a field no run can have is not used (or refused)
    **{f"run-json-{s}.{k}={x}": (_run_json_case(s, k, x), False) for s, k, x in (
        ("tracker", "frame_ms", "1e300"), ("tracker", "frame_ms", "1e-300"), ("tracker", "frame_ms", "-1e300"),
        ("baseline", "freq_hz", "1e300"), ("baseline", "freq_hz", "-1e300"), ("baseline", "window_s", "1e300"))},
    **{f"markers-{c}={x}": (_markers_case(c, x), True) for c, x in (("end_s", "1e300"), ("distance_mm", "1e30"))},
    # stability reads t_s, freq_hz and flags only: a damaged cell elsewhere does not concern it
    **{f"log-{c}=1e300": (_log_case(c), c in ("t_s", "freq_hz")) for c in LOG_COLUMNS},
}


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    d = tmp_path_factory.mktemp("numbers")
    write_small_run(d / "run")
    return d


@pytest.mark.parametrize("case", list(CASES))
def test_a_number_no_file_should_hold_is_refused_or_answered(folder, capsys, monkeypatch, case):
    monkeypatch.delenv("COILSHIFT_DEBUG", raising=False)
    make, must_refuse = CASES[case]
    argv, named = make(folder)
    try:
        rc = cli_main.main([str(a) for a in argv])
    except SystemExit as exc:  # an older main let argparse exit
        rc = exc.code
    cap = capsys.readouterr()
    assert rc in ((2,) if must_refuse else (0, 2)), f"exit {rc}: {cap.err.strip()[-300:]}"
    if rc == 2:
        lines = cap.err.splitlines()
        assert len(lines) == 1 and lines[0].isprintable(), lines
        assert named in lines[0], f"{named!r} not named in {lines[0]!r}"
        assert len(lines[0].replace(str(folder), "")) < 250, f"not a readable line: {lines[0]!r}"
    else:
        words = cap.out.replace(",", " ").replace("(", " ").replace(")", " ").split()
        assert not {"nan", "inf", "-inf", "+inf"} & {w.lower() for w in words}, cap.out[-600:]
