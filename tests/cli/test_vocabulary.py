"""One vocabulary of options across every command: one name per meaning, one meaning per name.

The table below is the project's own rule (issue: option names differed between commands); the
test reads every option of every command from the real parser.
"""

from __future__ import annotations

import argparse

import pytest

from coilshift.cli.main import build_parser, main
from coilshift.cli.options import OLD_SPELLINGS

#: meaning -> (the one option that carries it, spellings that must not be visible anywhere)
MEANINGS = {
    "folder a command writes": ("--out", ("--output", "--report", "--report-dir", "--outdir", "--out-dir")),
    "seconds waited after a move before recording": ("--settle-s", ("--settle", "--wait", "--settle-time")),
    "seconds dropped at each end of a stretch": ("--trim-s", ("--settle", "--trim")),
    "warm-up rate below which an oscillator is settled": ("--settled-hz-per-min", ("--settle",)),
    "distances from the coil face, with their unit": ("--distances", ("--distances-mm", "--unit", "--distance")),
    "threshold = K x the Allan deviation at the reading time": ("--noise-factor", ("--sigmas", "--k", "--nsigma")),
    "a calibration target's name": ("--target", ()),
    "a sphere's description (material, size)": ("--sphere", ("--target-spec",)),
    "a fixed detection threshold": ("--threshold-hz", ("--threshold",)),
}


def _commands() -> dict[str, argparse.ArgumentParser]:
    sub = next(a for a in build_parser()._actions if isinstance(a, argparse._SubParsersAction))
    out: dict[int, tuple[str, argparse.ArgumentParser]] = {}
    for name, parser in sub.choices.items():
        out.setdefault(id(parser), (name, parser))  # an alias ('analyse') is the same parser
    return dict(out.values())


COMMANDS = _commands()


def _visible(parser) -> list[argparse.Action]:
    return [a for a in parser._actions if a.option_strings and a.help is not argparse.SUPPRESS]


def test_every_command_is_read():
    assert {"analyze", "calibrate", "capture", "stability", "target", "track", "demo"} <= set(COMMANDS)


def test_no_meaning_has_two_spellings():
    seen = {}
    for cmd, parser in COMMANDS.items():
        for action in _visible(parser):
            for opt in action.option_strings:
                for meaning, (one, others) in MEANINGS.items():
                    if opt in others and opt != one:
                        seen.setdefault(meaning, []).append(f"{cmd} {opt}")
    assert not seen, f"old or second spellings visible: {seen}"


def test_each_option_name_means_one_thing():
    # the same option string in two commands must store the same thing with the same unit
    meaning: dict[str, tuple] = {}
    clash = []
    for cmd, parser in COMMANDS.items():
        for action in _visible(parser):
            unit = getattr(action.type, "unit", None)
            key = (action.dest, unit, action.nargs)
            for opt in action.option_strings:
                if opt in meaning and meaning[opt][0] != key:
                    clash.append(f"{opt}: {meaning[opt][1]} {meaning[opt][0]} vs {cmd} {key}")
                meaning.setdefault(opt, (key, cmd))
    assert not clash, clash


def test_every_command_that_writes_a_folder_uses_dash_o_out():
    writers = [c for c, p in COMMANDS.items() if any("-o" in a.option_strings for a in _visible(p))]
    assert {"analyze", "stability", "target", "demo", "simulate", "track", "capture", "calibrate"} <= set(writers)
    for cmd in writers:
        action = next(a for a in _visible(COMMANDS[cmd]) if "-o" in a.option_strings)
        assert action.option_strings == ["-o", "--out"], cmd


def test_one_default_threshold_rule():
    # analyze, calibrate and target share --noise-factor with one default and say the rule
    defaults = {}
    for cmd in ("analyze", "calibrate", "target"):
        action = next(a for a in _visible(COMMANDS[cmd]) if "--noise-factor" in a.option_strings)
        defaults[cmd] = action.default
        assert "Allan deviation" in action.help and "K x" in action.help
    assert len(set(defaults.values())) == 1, defaults


@pytest.mark.parametrize("key", sorted(OLD_SPELLINGS), ids=lambda k: " ".join(k))
def test_old_spellings_are_hidden_and_say_what_to_type(key):
    cmd, old = key
    action = next(a for a in COMMANDS[cmd]._actions if old in a.option_strings)
    assert action.help is argparse.SUPPRESS
    assert old not in COMMANDS[cmd].format_help().split()


def test_an_old_spelling_works_and_prints_a_note(tmp_path, capsys):
    # stability --settle X is --settled-hz-per-min X for one release; the note goes to stderr
    log = tmp_path / "log.csv"
    log.write_text("t_s,freq_hz\n" + "".join(f"{0.1 * i:.1f},{1000 + 0.001 * ((i * 7919) % 13):.4f}\n"
                                              for i in range(400)))
    code = main(["stability", str(log), "--settle", "-1"])
    err = capsys.readouterr().err
    assert code == 2 and "--settle" in err  # refused by the same range check as the new name
    code = main(["stability", str(log), "--settle", "0.5", "--json"])
    err = capsys.readouterr().err
    assert "--settle is now --settled-hz-per-min" in err


def test_distances_take_one_unit_for_the_list():
    from coilshift.cli.options import distance_list

    assert list(distance_list("10,20,40")) == [10.0, 20.0, 40.0] and distance_list("10,20").unit == "mm"
    d = distance_list("1,2,4cm")
    assert list(d) == [10.0, 20.0, 40.0] and d.unit == "cm"
    assert list(distance_list("1in,2in")) == pytest.approx([25.4, 50.8])  # 1 in = 25.4 mm exactly (NIST)
    with pytest.raises(argparse.ArgumentTypeError):
        distance_list("1cm,2in")
