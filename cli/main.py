"""Entry point: discover ``cmd_*`` modules, parse, run, and turn errors into one line."""

from __future__ import annotations

import argparse
import importlib
import os
import pkgutil
import sys

from coilshift.logger.errors import InputError

PROG = "coilshift"


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # one line on stderr, exit 2, like every other refusal
        self.exit(2, f"{self.prog}: error: {message}\n")


class _Version(argparse.Action):
    """``--version``, looked up only when asked for: the module that knows it imports NumPy, which
    ``coilshift --help`` does not need."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS,
                 help="show program's version number and exit"):
        super().__init__(option_strings=option_strings, dest=dest, default=default, nargs=0, help=help)

    def __call__(self, parser, namespace, values, option_string=None):
        from coilshift.logger.runfolder.writer import software_version

        sys.stdout.write(f"{PROG} {software_version()}\n")
        parser.exit()


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog=PROG,
        description="Track an oscillator's frequency from a line-in, a recording or a scope export; "
                    "log shifts; analyse calibration runs, stability and coil designs.",
    )
    parser.add_argument("--version", action=_Version)
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sub.required = True
    import coilshift.cli as pkg

    modules = []
    for info in pkgutil.iter_modules(pkg.__path__):
        if info.name.startswith("cmd_"):
            modules.append(importlib.import_module(f"coilshift.cli.{info.name}"))
    for mod in sorted(modules, key=lambda m: (getattr(m, "ORDER", 100), m.__name__)):
        mod.register(sub)
    return parser


def _printable(text: str) -> str:
    """One line of plain text: control characters (a NUL-filled cell, a newline in a file name)
    shown as escapes, so an error message is always exactly one readable line."""
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in text)


def _drop_stdout() -> None:
    """Point stdout at the null device, so the text still buffered for it is not written (and
    fails again) when the interpreter exits."""
    try:
        fd = sys.__stdout__.fileno()
        null = os.open(os.devnull, os.O_WRONLY)
        os.dup2(null, fd)
        os.close(null)
    except (OSError, ValueError, AttributeError):
        pass


def _error(text: str) -> None:
    print(f"{PROG}: {_printable(text)}", file=sys.stderr)


def main(argv: list[str] | None = None) -> int:
    """Run one command; every failure is one line on stderr and a non-zero exit status.

    SIGTERM and SIGHUP (a closed terminal) end a command the way Ctrl-C does: work in progress
    is undone or closed cleanly, and the exit status is 128 + the signal's number.
    """
    from coilshift.cli.common import guarded_stdout, handle_ending_signals

    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # a refused option (one line already printed), --help, --version
        return exc.code if isinstance(exc.code, int) else 2
    import shlex

    import coilshift.analysis.report.html_page as page  # light: the standard library only

    # reports name the command as it was typed (main() may be called with argv, not sys.argv)
    page.COMMAND_LINE = shlex.join([PROG, *(sys.argv[1:] if argv is None else argv)])
    with handle_ending_signals(), guarded_stdout() as done:
        return _run(args, done)


def _run(args, done: list[str]) -> int:
    from coilshift.cli.common import Interrupted, OutputLost

    debug = bool(os.environ.get("COILSHIFT_DEBUG"))
    try:
        code = int(args.func(args) or 0)
        sys.stdout.flush()  # a full disk or a closed pipe behind stdout shows up here, not at exit
        return code
    except InputError as exc:
        from coilshift.cli.options import option_for

        _error(f"error: {exc.render(option_for)}")
        return 2
    except BrokenPipeError:
        # the reader went away (e.g. `coilshift ... | head`): nothing to say, stop quietly
        try:
            sys.stdout = open(os.devnull, "w")
        except OSError:
            pass
        return 0
    except Interrupted as exc:
        _error(f"ended by {exc.name}")
        return 128 + exc.signum
    except KeyboardInterrupt:
        _error("interrupted")
        return 130
    except OutputLost as exc:
        _drop_stdout()
        kept = "; ".join(done) if done else "nothing else was affected"
        _error(f"error: standard output: {exc.strerror}: the printed result was lost ({kept})")
        return 1
    except OSError as exc:
        if debug:
            raise
        where = f"{exc.filename}: " if getattr(exc, "filename", None) else ""
        _error(f"error: {where}{exc.strerror or exc}")
        return 1
    except Exception as exc:  # a bug: still one line, with a way to get the traceback
        if debug:
            raise
        _error(f"internal error: {type(exc).__name__}: {exc} (set COILSHIFT_DEBUG=1 for details)")
        return 3


if __name__ == "__main__":
    sys.exit(main())
