"""Script checking: every fault is one line naming the file and the key; the CLI never half-writes."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from coilshift.logger.errors import InputError
from coilshift.sim.script import load_script, parse_script
from sim_helpers import script_dict


def _bad(**changes):
    return script_dict(**changes)


@pytest.mark.parametrize("obj,needle", [
    ([1, 2], "top level"),
    (_bad(colour="red"), "unknown key 'colour'"),
    (_bad(recording={"sample_rate_hz": "fast"}), "recording.sample_rate_hz: expected a number"),
    (_bad(recording={"bits": 12}), "recording.bits"),
    (_bad(recording={"encoding": "mp3"}), "recording.encoding"),
    (_bad(oscillator={"duty": 1.0}), "oscillator.duty"),
    (_bad(oscillator={"freq_hz": 30000.0}), "anti-alias cutoff"),
    (_bad(oscillator={"freq_hz": 9000.0, "coil": {"turns": 10}}), "exactly one of 'freq_hz' or 'coil'"),
    (_bad(targets={"x": {"peak_shift_hz": 1.0}}), "targets.x: missing 'coil_radius_mm'"),
    (_bad(targets={"baseline": {"peak_shift_hz": 1.0, "coil_radius_mm": 5}}), "targets.baseline"),
    (_bad(session={"steps": []}), "non-empty list"),
    (_bad(session={"steps": [{"target": "gold", "distance_mm": 5, "hold_s": 1}]}), "'gold' is not defined"),
    (_bad(session={"steps": [{"target": "steel", "hold_s": 1}]}), "missing 'distance_mm'"),
    (_bad(session={"steps": [{"target": "steel", "distance_mm": -3, "hold_s": 1}]}), "must be >= 0"),
    (_bad(session={"steps": [{"sweep": {"targets": ["steel"], "distances_mm": []}}]}), "distances_mm"),
    (_bad(truth={"thresholds_hz": [0]}), "truth.thresholds_hz"),
])
def test_bad_scripts_one_line(obj, needle):
    with pytest.raises(InputError) as err:
        parse_script(obj, "bench.json")
    msg = str(err.value)
    assert msg.startswith("bench.json: ") and needle in msg and "\n" not in msg


def test_sweep_expands_bracketed_by_baselines():
    s = parse_script(_bad(session={"move_s": 0.5, "steps": [
        {"sweep": {"targets": ["steel", "alu"], "distances_mm": [10, 20], "hold_s": 3, "baseline_s": 2}}]}), "s")
    names = [(st.target, st.distance_mm) for st in s.steps]
    assert names[0][0] == "baseline" and names[-1][0] == "baseline"
    assert [n for n in names if n[0] != "baseline"] == [("steel", 10), ("steel", 20), ("alu", 10), ("alu", 20)]
    assert len(s.steps) == 9
    # every move but the first takes move_s; 4 holds of 3 s, 5 of 2 s, 8 moves of 0.5 s
    assert s.duration_s == pytest.approx(4 * 3 + 5 * 2 + 8 * 0.5)


@pytest.mark.parametrize("content,needle", [
    (None, "no such script file"),
    ("{not json", r"not valid JSON \(line 1"),
    (b"\xff\xfe\x00bad", "not a text file"),
])
def test_load_script_file_faults(tmp_path, content, needle):
    p = tmp_path / "s.json"
    if isinstance(content, str):
        p.write_text(content)
    elif isinstance(content, bytes):
        p.write_bytes(content)
    with pytest.raises(InputError, match=needle):
        load_script(p)


def _cli(*args):
    return subprocess.run([sys.executable, "-m", "coilshift.cli.main", *args],
                          capture_output=True, text=True, timeout=120)


def test_cli_simulate_writes_and_refuses(tmp_path):
    script = tmp_path / "s.json"
    script.write_text(json.dumps(script_dict()))
    out = tmp_path / "out"
    r = _cli("simulate", str(script), "-o", str(out), "--json")
    assert r.returncode == 0, r.stderr
    summary = json.loads(r.stdout)
    assert summary["apparent_freq_hz"] == pytest.approx(11000.0)
    assert sorted(p.name for p in out.iterdir()) == ["markers.csv", "recording.wav", "truth.json"]
    before = (out / "recording.wav").read_bytes()
    r = _cli("simulate", str(script), "-o", str(out))
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and "not empty" in r.stderr
    assert (out / "recording.wav").read_bytes() == before
    r = _cli("simulate", str(script), "-o", str(out), "--force")
    assert r.returncode == 0 and "synthetic" in r.stdout


def test_cli_bad_script_leaves_no_output(tmp_path):
    script = tmp_path / "s.json"
    script.write_text(json.dumps(_bad(recording={"bits": 8})))
    r = _cli("simulate", str(script), "-o", str(tmp_path / "out"))
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and str(script) in r.stderr
    assert "Traceback" not in r.stderr
    assert not (tmp_path / "out").exists()
