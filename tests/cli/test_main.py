"""The command dispatcher: every refusal is one line on stderr and a non-zero exit."""

from __future__ import annotations

import subprocess
import sys

import pytest

from coilshift.cli import main as cli_main
from coilshift.logger.errors import InputError


def run_cli(*args, **kw):
    return subprocess.run([sys.executable, "-m", "coilshift.cli.main", *args],
                          capture_output=True, text=True, timeout=120, **kw)


def test_help_lists_commands():
    r = run_cli("--help")
    assert r.returncode == 0 and "COMMAND" in r.stdout


@pytest.mark.parametrize("args", [["no-such-command"], [], ["--no-such-option"]])
def test_usage_errors_are_one_line(args):
    r = run_cli(*args)
    assert r.returncode == 2
    assert r.stderr.count("\n") == 1 and "Traceback" not in r.stderr


def _fake_module(func):
    class M:
        ORDER = 1

        @staticmethod
        def register(sub):
            p = sub.add_parser("boom")
            p.set_defaults(func=func)
    return M


@pytest.mark.parametrize("exc, code, text", [
    (InputError("in.wav: truncated file"), 2, "coilshift: error: in.wav: truncated file"),
    (OSError(28, "No space left on device", "out/log.csv"), 1, "out/log.csv: No space left on device"),
    (RuntimeError("bug"), 3, "internal error: RuntimeError: bug"),
])
def test_errors_become_one_line(monkeypatch, capsys, exc, code, text):
    def boom(args):
        raise exc

    real_build = cli_main.build_parser

    def build():
        parser = real_build()
        sub = next(a for a in parser._actions if a.dest == "command")
        _fake_module(boom).register(sub)
        return parser

    monkeypatch.setattr(cli_main, "build_parser", build)
    monkeypatch.delenv("COILSHIFT_DEBUG", raising=False)
    assert cli_main.main(["boom"]) == code
    err = capsys.readouterr().err
    assert text in err and err.count("\n") == 1
