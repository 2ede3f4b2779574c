"""Every command shown in the user guide parses with the real command line (docs match the code)."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

import pytest

from coilshift.cli.main import build_parser

GUIDE = Path(__file__).resolve().parents[2] / "docs" / "guide.md"


def _guide_commands() -> list[str]:
    text = GUIDE.read_text(encoding="utf-8")
    blocks = re.findall(r"```sh\n(.*?)```", text, flags=re.S)
    return [line.strip() for b in blocks for line in b.splitlines() if line.strip().startswith("coilshift ")]


def test_guide_has_commands():
    cmds = _guide_commands()
    assert len(cmds) >= 10
    for sub in ("demo", "track", "analyze", "capture", "calibrate", "stability", "simulate", "devices"):
        assert any(c.split()[1] == sub for c in cmds), sub


@pytest.mark.parametrize("command", _guide_commands())
def test_guide_command_parses(command):
    args = build_parser().parse_args(shlex.split(command)[1:])
    assert callable(args.func)


def test_guide_images_exist():
    for rel in re.findall(r"!\[[^\]]*\]\(([^)]+)\)", GUIDE.read_text(encoding="utf-8")):
        assert (GUIDE.parent / rel).is_file(), rel
