"""Nothing the user has is modified or lost.

* Reading commands (analyze, stability, target --noise-log, track, clock-error, simulate,
  coil) never change their inputs: every file of the run folder, recording, markers, coil and
  script is hashed before and after.
* Every command that writes a folder refuses an existing non-empty one without ``--force``
  (one line, nothing touched); with ``--force`` it replaces its own outputs and keeps the
  user's other files byte for byte.
"""

from __future__ import annotations

import json
import shutil
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
import pytest
from reliability_helpers import cli, one_line_error, snapshot, tone, wav16, write_small_run

SAMPLE_SCRIPT = Path(__file__).parents[2] / "sample_data" / "calibration.json"
COIL = {"turns": 20, "inner_diameter_mm": 100, "length_mm": 10, "awg": 26, "cap_nf": 10}


def _small_script(path: Path) -> Path:
    """The sample session cut down to one target at one distance, 8 kHz WAV (about 5 s)."""
    s = json.loads(SAMPLE_SCRIPT.read_text())
    s["recording"].update(sample_rate_hz=8000, encoding="wav")
    s["oscillator"]["freq_hz"] = 1500.0
    s["session"] = {"move_s": 0.5, "hand_hz": 0.05,
                    "steps": [{"sweep": {"targets": ["steel"], "distances_mm": [30], "hold_s": 1.0,
                                         "baseline_s": 1.0}}]}
    path.write_text(json.dumps(s))
    return path


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    d = tmp_path_factory.mktemp("mine")
    write_small_run(d / "run")
    wav16(d / "rec.wav", tone(2.0))
    (d / "rec_markers.csv").write_text("start_s,end_s,target,distance_mm\n0,1,baseline,\n1,2,coin,10\n")
    (d / "coil.json").write_text(json.dumps(COIL))
    _small_script(d / "script.json")
    return d


def test_reading_commands_never_modify_their_inputs(inputs, tmp_path):
    before = snapshot(inputs)
    d = inputs
    runs = [("analyze", d / "run", "--bootstrap", "20", "-o", tmp_path / "a"),
            ("stability", d / "run", "-o", tmp_path / "s"),
            ("target", "--coil", d / "coil.json", "--target", "copper:diameter_mm=20", "--noise-log", d / "run",
             "-o", tmp_path / "t"),
            ("track", d / "rec.wav", "--markers", d / "rec_markers.csv", "-o", tmp_path / "k", "--quiet"),
            ("clock-error", d / "rec.wav", "--reference-hz", "1000", "--quiet"),
            ("simulate", d / "script.json", "-o", tmp_path / "m"),
            ("coil", "--coil", d / "coil.json")]
    with ThreadPoolExecutor(max_workers=3) as pool:
        results = list(pool.map(lambda a: cli(*a), runs))
    for args, res in zip(runs, results):
        assert res.returncode == 0, (args[0], res.stderr)
    assert snapshot(inputs) == before
    # outputs went to their own folders, none into the inputs
    assert set(before) == set(snapshot(inputs))


# --------------------------------------------------------------------------- existing outputs

def _commands(d: Path):
    """name -> (argv with {out}, files the command writes there)."""
    return {
        "track": (("track", d / "rec.wav", "-o", "{out}", "--quiet"), ("log.csv", "run.json")),
        "capture": (("capture", "-o", "{out}", "--synthetic", "1000", "--rate", "8000", "--seconds", "1",
                     "--no-view"), ("log.csv", "run.json")),
        "analyze": (("analyze", d / "run", "--bootstrap", "20", "-o", "{out}"), ("report.html", "steps.csv")),
        "stability": (("stability", d / "run", "-o", "{out}"), ("stability.json", "sigma_tau.png")),
        "simulate": (("simulate", d / "script.json", "-o", "{out}"), ("recording.wav", "truth.json")),
        "target": (("target", "--coil", d / "coil.json", "--target", "copper:diameter_mm=20", "-o", "{out}"),
                   ("prediction.csv", "prediction.json")),
        "calibrate": (("calibrate", "-o", "{out}", "--target", "coin", "--distances", "10,20"), None),
        "demo": (("demo", "-o", "{out}"), None),
    }


NAMES = ["track", "capture", "analyze", "stability", "simulate", "target", "calibrate", "demo"]


def _prefill(out: Path, produced) -> None:
    out.mkdir()
    (out / "keep.txt").write_text("my notes, not an output\n")
    (out / "sub").mkdir()
    (out / "sub" / "data.bin").write_bytes(bytes(range(256)))
    for name in produced or ("log.csv",):
        (out / name).write_text("an older output\n")


@pytest.mark.parametrize("name", NAMES)
def test_existing_output_refused_without_force(inputs, tmp_path, name, monkeypatch):
    argv, produced = _commands(inputs)[name]
    out = tmp_path / "out"
    _prefill(out, produced)
    before = snapshot(out)
    res = cli(*[str(a).replace("{out}", str(out)) for a in argv],
              env={"XDG_CONFIG_HOME": str(tmp_path / "cfg")})
    line = one_line_error(res)
    assert str(out) in line and "--force" in line, line
    assert snapshot(out) == before


@pytest.mark.slow
@pytest.mark.parametrize("name", [n for n in NAMES if _commands(Path("."))[n][1] is not None])
def test_force_replaces_outputs_and_keeps_other_files(inputs, tmp_path, name):
    argv, produced = _commands(inputs)[name]
    out = tmp_path / "out"
    _prefill(out, produced)
    before = snapshot(out)
    cfg = tmp_path / "cfg" / "coilshift"
    cfg.mkdir(parents=True)
    (cfg / "state.json").write_text(json.dumps({"wiring_caution_shown": True}))
    res = cli(*[str(a).replace("{out}", str(out)) for a in argv], "--force",
              env={"XDG_CONFIG_HOME": str(tmp_path / "cfg")})
    assert res.returncode == 0, res.stderr
    after = snapshot(out)
    for keep in ("keep.txt", "sub/data.bin"):
        assert after[keep] == before[keep]
    for fname in produced:
        assert after[fname] != before[fname]
        assert (out / fname).read_bytes() != b"an older output\n"
    assert not [k for k in after if k.endswith(".tmp")]  # no temp file left behind


def test_force_never_follows_into_a_file(inputs, tmp_path):
    # -o naming an existing file is refused even with --force; the file is untouched
    victim = tmp_path / "precious.csv"
    victim.write_bytes(np.arange(100, dtype=np.int16).tobytes())
    before = victim.read_bytes()
    res = cli("stability", inputs / "run", "-o", victim, "--force")
    line = one_line_error(res)
    assert "precious.csv" in line
    assert victim.read_bytes() == before
    shutil.rmtree(tmp_path / "cfg", ignore_errors=True)
