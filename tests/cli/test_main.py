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


# --------------------------------------------------------------------------- round two: numbers

def _numeric_options():
    """(command, option, action) of every option whose value is a number, for every command."""
    import argparse

    from coilshift.cli.options import Bounded

    parser = cli_main.build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    found = []
    for name, p in sub.choices.items():
        for act in p._actions:
            if not act.option_strings:
                continue
            numeric = isinstance(act.type, Bounded) or act.type in (int, float) or \
                isinstance(act.default, (int, float)) and not isinstance(act.default, bool)
            if numeric:
                found.append((name, act.option_strings[-1], act))
    return found


NUMERIC = _numeric_options()


def test_every_numeric_option_has_a_range():
    from coilshift.cli.options import Bounded

    assert len(NUMERIC) > 50
    plain = [f"{c} {o}" for c, o, a in NUMERIC if not isinstance(a.type, Bounded)]
    assert not plain, f"numeric options without a range (use a Bounded type from cli/options.py): {plain}"


def _outside(t) -> list[str]:
    """Values just outside, far outside and beside the range of Bounded ``t``."""
    vals = ["nan", "inf", "-inf", "1e300", "-1e300", "text"]
    vals.append(repr(t.hi * 10 + 1) if not t.integer else str(int(t.hi) + 1))
    vals.append(repr(t.lo - 1 - abs(t.lo)) if not t.integer else str(int(t.lo) - 1))
    if t.lo_open:
        vals.append(str(t.lo))
    elif t.lo > 0:
        vals.append("1e-300")
    if t.integer:
        vals.append("1.5")
    return vals


@pytest.mark.parametrize("cmd, opt, act", NUMERIC, ids=[f"{c}{o}" for c, o, _ in NUMERIC])
def test_numbers_outside_an_options_range_are_refused_in_one_line(capsys, cmd, opt, act):
    # parsing alone: the refusal comes before any file is read or any device opened
    n = act.nargs if isinstance(act.nargs, int) else 1
    for value in _outside(act.type):
        rc = cli_main.main([cmd, opt, *[value] * n])
        err = capsys.readouterr().err.splitlines()
        assert rc == 2 and len(err) == 1 and opt in err[0], (value, err)


COIL = ["--turns", "20", "--inner-diameter-mm", "100", "--length-mm", "200", "--awg", "26", "--cap-nf", "10"]
MODEL_COMMANDS = {  # commands that compute from numbers alone: run them at the ends of every range
    "coil": ["coil", *COIL],
    "astable": ["astable", "--r1-ohm", "1000", "--r2-ohm", "1000", "--cap-nf", "10"],
    "target": ["target", *COIL, "--sphere", "copper:diameter_mm=20", "--threshold-hz", "1"],
}
#: the company an option needs (options that only make sense with others, or exclude others)
CONTEXT = {
    ("coil", "--wire-diameter-mm"): ["coil", *COIL[:6], "--cap-nf", "10"],
    ("target", "--wire-diameter-mm"): ["target", *COIL[:6], "--cap-nf", "10", "--sphere", "copper:diameter_mm=20"],
    ("astable", "--r-ohm"): ["astable", "--one-resistor", "--cap-nf", "10"],
    ("astable", "--freq-hz"): ["astable"],
    ("astable", "--duty"): ["astable", "--freq-hz", "10000"],
    ("target", "--noise-hz"): ["target", *COIL, "--sphere", "copper:diameter_mm=20"],
    ("target", "--noise-factor"): ["target", *COIL, "--sphere", "copper:diameter_mm=20", "--noise-hz", "0.01"],
    ("target", "--diameter-mm"): ["target", *COIL, "--material", "copper"],
    ("target", "--conductivity-s-per-m"): ["target", *COIL, "--diameter-mm", "20", "--mu-r", "1"],
    ("target", "--mu-r"): ["target", *COIL, "--diameter-mm", "20", "--conductivity-s-per-m", "5.8e7"],
}
# --tau-s reads a noise log (a file, checked elsewhere); --depth-mm at its top makes the filament
# sum take minutes (a speed matter of the coil model, not a wrong answer)
ENDS = [(c, o, a, end) for c, o, a in NUMERIC if c in MODEL_COMMANDS and o not in ("--tau-s", "--depth-mm")
        for end in ("lo", "hi")]


@pytest.mark.parametrize("cmd, opt, act, end", ENDS, ids=[f"{c}{o}-{e}" for c, o, _, e in ENDS])
def test_model_commands_at_the_ends_of_each_range_answer_or_refuse(capsys, cmd, opt, act, end):
    # warnings are errors in the tests: a NumPy overflow warning or an inf/nan result fails here
    t = act.type
    x = t.lo if end == "lo" else t.hi
    if (t.lo_open and end == "lo") or (t.hi_open and end == "hi"):
        x = x + (1e-6 if end == "lo" else -1e-6) * max(1.0, abs(x))
    argv = list(CONTEXT.get((cmd, opt), MODEL_COMMANDS[cmd]))
    if opt in argv:
        del argv[argv.index(opt):argv.index(opt) + 2]
    value = str(int(x)) if t.integer else repr(float(x))
    rc = cli_main.main(argv + [opt] + [value] * (act.nargs if isinstance(act.nargs, int) else 1))
    cap = capsys.readouterr()
    assert rc in (0, 2), cap.err
    if rc == 2:
        assert len(cap.err.splitlines()) == 1
    else:
        words = cap.out.replace(",", " ").split()
        assert "nan" not in words and "inf" not in words and "-inf" not in words, cap.out
