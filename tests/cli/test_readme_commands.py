"""The README's quick-start commands parse with the real command line, and the files they name exist."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

import pytest

from coilshift.cli.main import build_parser

ROOT = Path(__file__).resolve().parents[2]
README = ROOT / "README.md"


def _readme_commands() -> list[list[str]]:
    blocks = re.findall(r"```sh\n(.*?)```", README.read_text(encoding="utf-8"), flags=re.S)
    out = []
    for block in blocks:
        for line in block.splitlines():
            words = shlex.split(line.split("  #")[0])
            if words and words[0].endswith("bin/coilshift"):
                out.append(words[1:])
    return out


def test_readme_runs_the_main_job():
    cmds = _readme_commands()
    assert ["demo", "-o", "demo-run"] in cmds  # the main job, no soundcard needed
    assert {"demo", "track", "analyze", "stability"} <= {c[0] for c in cmds}


@pytest.mark.parametrize("args", _readme_commands(), ids=lambda a: " ".join(a[:2]))
def test_readme_command_parses_and_its_inputs_exist(args):
    parsed = build_parser().parse_args(args)
    assert callable(parsed.func)
    for word in args:
        if word.startswith("sample_data/"):
            assert (ROOT / word).is_file(), word
