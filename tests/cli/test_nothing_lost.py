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
import tempfile
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
import pytest
from reliability_helpers import cli, on_a_terminal, one_line_error, snapshot, tone, wav16, write_small_run

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
            ("target", "--coil", d / "coil.json", "--sphere", "copper:diameter_mm=20", "--noise-log", d / "run",
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
        "target": (("target", "--coil", d / "coil.json", "--sphere", "copper:diameter_mm=20", "-o", "{out}"),
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


# --------------------------------------------------------------------------- round two

def _old_capture(out: Path) -> dict:
    out.mkdir()
    (out / "log.csv").write_text("t_s,freq_hz\n0.0,1000.0\n")
    (out / "run.json").write_text('{"status": "complete"}\n')
    (out / "markers.csv").write_text("start_s,end_s,target,distance_mm\n")
    (out / "audio.wav").write_bytes(b"RIFF an older capture's audio")
    (out / "keep.txt").write_text("mine\n")
    return snapshot(out)


def _shown_config(tmp_path: Path) -> dict:
    cfg = tmp_path / "cfg" / "coilshift"
    cfg.mkdir(parents=True)
    (cfg / "state.json").write_text(json.dumps({"wiring_caution_shown": True}))
    return {"XDG_CONFIG_HOME": str(tmp_path / "cfg")}


@pytest.mark.parametrize("argv", [
    # the tracker refuses the rate once the input is open (an 85 ms frame is 17 samples at 200 Hz)
    ("capture", "-o", "{out}", "--force", "--synthetic", "1000", "--rate", "200", "--seconds", "1", "--no-view"),
    ("capture", "-o", "{out}", "--force", "--synthetic", "1000", "--rate", "200", "--save-audio", "--no-view"),
    ("calibrate", "-o", "{out}", "--force", "--target", "coin", "--distances", "10", "--synthetic", "1000",
     "--rate", "200"),
    # the input cannot be opened at all (no such device; no sound server either, in a test)
    ("capture", "-o", "{out}", "--force", "--device", "no such device here", "--seconds", "1", "--no-view"),
    ("calibrate", "-o", "{out}", "--force", "--target", "coin", "--distances", "10", "--device",
     "no such device here"),
], ids=["capture", "capture-save-audio", "calibrate", "capture-no-device", "calibrate-no-device"])
def test_a_refused_start_leaves_the_old_run_whole(tmp_path, argv):
    out = tmp_path / "out"
    before = _old_capture(out)
    res = cli(*[str(a).replace("{out}", str(out)) for a in argv], env=_shown_config(tmp_path))
    one_line_error(res)
    assert snapshot(out) == before
    assert sorted(p.name for p in out.iterdir()) == sorted(before)  # no hidden set-aside files either


def test_a_locked_run_folder_is_refused_before_the_input_opens(tmp_path):
    from coilshift.logger.runfolder.locking import FolderLock

    out = tmp_path / "out"
    before = _old_capture(out)
    lock = FolderLock(out)  # another coilshift command is writing there
    try:
        res = cli("capture", "-o", out, "--force", "--synthetic", "1000", "--rate", "8000", "--seconds", "1",
                  "--no-view", env=_shown_config(tmp_path))
    finally:
        lock.release()
    assert "another coilshift command" in one_line_error(res)
    assert snapshot(out) == before


@pytest.mark.slow
def test_ctrl_c_at_the_first_run_caution_leaves_the_old_run_whole(tmp_path):
    out = tmp_path / "out"
    before = _old_capture(out)
    res = on_a_terminal("Press Enter", "ctrl-c", "capture", "-o", out, "--force", "--synthetic", "1000",
                        "--rate", "8000", env={"XDG_CONFIG_HOME": str(tmp_path / "fresh")})  # never shown yet
    assert res.returncode == 2 and "cancelled" in res.stdout, (res.returncode, res.stdout, res.stderr)
    assert snapshot(out) == before


OUTPUT_COMMANDS = {
    "analyze": (("analyze", "{run}", "--bootstrap", "20", "-o", "{out}", "--force"), 2),
    "stability": (("stability", "{run}", "-o", "{out}", "--force"), 2),
    "target": (("target", "--coil", "{coil}", "--sphere", "copper:diameter_mm=20", "-o", "{out}", "--force"), 2),
    "simulate": (("simulate", "{script}", "-o", "{out}", "--force"), 1),
    "demo": (("demo", "-o", "{out}", "--force", "--json"), 3),
}


@pytest.mark.parametrize("name", list(OUTPUT_COMMANDS))
def test_an_output_folder_interrupted_while_written_is_left_as_it_was(inputs, tmp_path, monkeypatch, capsys, name):
    # Ctrl-C (or SIGTERM, which the command line turns into the same) after a few outputs are
    # written: the folder keeps exactly what it had, old outputs and the user's files
    from coilshift.cli.main import main
    from coilshift.logger.runfolder import atomic

    argv, after_writes = OUTPUT_COMMANDS[name]
    out = tmp_path / "out"
    _prefill(out, ("report.html", "stability.json", "prediction.csv", "truth.json", "summary.json"))
    before = snapshot(out)
    calls = []

    class Interrupting:  # every finished output starts with a temp file from mkstemp (atomic.py)
        def __getattr__(self, name):
            return getattr(tempfile, name)

        @staticmethod
        def mkstemp(*args, **kwargs):
            calls.append(kwargs.get("prefix"))
            if len(calls) > after_writes:
                raise KeyboardInterrupt
            return tempfile.mkstemp(*args, **kwargs)

    # the module's own name lookup, not a function object other modules may have imported
    monkeypatch.setattr(atomic, "tempfile", Interrupting())
    d = inputs
    args = [str(a).replace("{run}", str(d / "run")).replace("{coil}", str(d / "coil.json"))
            .replace("{script}", str(d / "script.json")).replace("{out}", str(out)) for a in argv]
    assert main(args) == 130
    capsys.readouterr()
    assert len(calls) > after_writes, "the command wrote less than expected: the test proves nothing"
    assert snapshot(out) == before
    assert not [p for p in tmp_path.iterdir() if ".building-" in p.name]


def test_analyze_names_every_run_uniquely(inputs, tmp_path):
    # a/run, b/run and c/run-2: each keeps its own outputs and its own column in the comparison
    runs = []
    for parent, name in (("a", "run"), ("b", "run"), ("c", "run-2")):
        runs.append(tmp_path / parent / name)
        shutil.copytree(inputs / "run", runs[-1])
    out = tmp_path / "out"
    res = cli("analyze", *runs, "--bootstrap", "20", "-o", out, "--json")
    assert res.returncode == 0, res.stderr
    names = [r["run"] for r in json.loads(res.stdout)["runs"]]
    assert len(set(names)) == 3 and names[0] == "run" and names[2] == "run-2"
    assert json.loads((out / "comparison.json").read_text())["runs"] == names
    assert {p.name for p in out.iterdir() if p.is_dir()} == set(names)


def test_analyze_keeps_every_run_in_its_own_folder_inside_the_output(inputs, tmp_path):
    # runs named by '..' and '.' (analyze run from inside a run folder), and a name that differs
    # from another only in case (one folder on macOS and Windows): every run gets a plain, unique
    # output folder inside OUT, and nothing is written beside OUT
    home = tmp_path / "bench" / "run"
    shutil.copytree(inputs / "run", home)
    shutil.copytree(inputs / "run", home / "inner")
    shutil.copytree(inputs / "run", home / "inner" / "RUN")
    (tmp_path / "bench" / "notes.txt").write_text("mine\n")
    before = snapshot(tmp_path / "bench")
    out = tmp_path / "bench" / "out"
    res = cli("analyze", "..", ".", "RUN", "--bootstrap", "20", "-o", out, "--json", cwd=home / "inner")
    assert res.returncode == 0, res.stderr
    names = [r["run"] for r in json.loads(res.stdout)["runs"]]
    assert len({n.casefold() for n in names}) == 3 and not {".", ".."} & set(names), names
    assert {p.name for p in out.iterdir() if p.is_dir()} == set(names)
    assert snapshot(tmp_path / "bench") == {**before, **{f"out/{k}": v for k, v in snapshot(out).items()}}
