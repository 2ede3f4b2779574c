"""``import coilshift``: cheap to import, the same package from the repo root and elsewhere, and
the worked example of docs/api.md runs as written and finds the sample run's truth."""

from __future__ import annotations

import contextlib
import io
import json
import math
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
DOC = ROOT / "docs" / "api.md"


def _python(code: str, cwd) -> str:
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    r = subprocess.run([sys.executable, "-c", code], cwd=cwd, capture_output=True, text=True, timeout=60, env=env)
    assert r.returncode == 0, r.stderr
    return r.stdout


@pytest.mark.parametrize("where", ["root", "elsewhere"])
def test_import_is_cheap_and_finds_the_package(where, tmp_path):
    cwd = ROOT if where == "root" else tmp_path
    out = _python("import sys, coilshift; print(coilshift.__file__); "
                  "print(sorted(m for m in ('numpy', 'pandas', 'scipy', 'matplotlib') if m in sys.modules)); "
                  "print(coilshift.__version__); import coilshift.logger.errors, coilshift.cli.main; "
                  "print(callable(coilshift.read_run), 'numpy' in sys.modules)", cwd)
    path, heavy, version, used = out.splitlines()
    assert Path(path).parent.name in ("api", "coilshift") and heavy == "[]"
    assert re.fullmatch(r"\d+\.\d+\.\d+.*", version)
    assert used == "True True"  # the functions load their libraries when first used


def test_unknown_names_are_refused():
    import coilshift

    with pytest.raises(AttributeError):
        coilshift.no_such_function  # noqa: B018
    assert {"read_run", "track_file", "analyse_calibration", "analyse_stability"} <= set(dir(coilshift))


def _example() -> str:
    blocks = re.findall(r"```python\n(.*?)```", DOC.read_text(encoding="utf-8"), flags=re.S)
    assert len(blocks) == 1
    return blocks[0]


@pytest.mark.slow
def test_the_worked_example_runs_and_finds_the_truth(monkeypatch):
    monkeypatch.chdir(ROOT)
    scope: dict = {}
    printed = io.StringIO()
    with contextlib.redirect_stdout(printed):
        exec(compile(_example(), str(DOC), "exec"), scope)  # the block exactly as documented
    text = printed.getvalue()
    assert "frames, baseline" in text and "tau_s" in text
    cal, table = scope["cal"], scope["table"]
    # the simulator's truth for the sample (sample_data/calibration/truth.json, written by
    # 'coilshift simulate' with the script): each target's class and its shift at each distance
    truth = json.loads((ROOT / "sample_data" / "calibration" / "truth.json").read_text())["targets"]
    calls = {t.target: t.cls for t in cal.targets}
    assert calls == {name: t["class"] for name, t in truth.items()}
    worst = 0.0
    for name, t in truth.items():
        rows = table[table.target == name].sort_values("distance_mm")
        assert list(rows.distance_mm) == t["distances_mm"]
        z = (rows.shift_hz.to_numpy() - t["shift_hz_at_distances"]) / rows.stderr_hz.to_numpy()
        worst = max(worst, float(abs(z).max()))
        # ppm of the analysis' baseline frequency, computed here from the table's own columns
        base = cal.baseline_hz
        assert rows.shift_ppm.to_numpy() == pytest.approx(1e6 * rows.shift_hz.to_numpy() / base, rel=1e-9)
    # 15 points: at honest errors P(max |z| > 4.5) = 1 - (1 - 6.8e-6)^15 ~ 1e-4 (normal tails)
    assert worst < 4.5, worst
    stab = scope["stab"]
    assert stab.tau_s.size > 3 and all(math.isfinite(x) for x in stab.oadev_hz[:3])
