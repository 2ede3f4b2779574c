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


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    debug = bool(os.environ.get("COILSHIFT_DEBUG"))
    try:
        return int(args.func(args) or 0)
    except InputError as exc:
        from coilshift.cli.options import option_for

        print(f"{PROG}: error: {exc.render(option_for)}", file=sys.stderr)
        return 2
    except BrokenPipeError:
        # the reader went away (e.g. `coilshift ... | head`): nothing to say, stop quietly
        try:
            sys.stdout = open(os.devnull, "w")
        except OSError:
            pass
        return 0
    except KeyboardInterrupt:
        print(f"{PROG}: interrupted", file=sys.stderr)
        return 130
    except OSError as exc:
        if debug:
            raise
        where = f"{exc.filename}: " if getattr(exc, "filename", None) else ""
        print(f"{PROG}: error: {where}{exc.strerror or exc}", file=sys.stderr)
        return 1
    except Exception as exc:  # a bug: still one line, with a way to get the traceback
        if debug:
            raise
        print(f"{PROG}: internal error: {type(exc).__name__}: {exc} (set COILSHIFT_DEBUG=1 for details)",
              file=sys.stderr)
        return 3


if __name__ == "__main__":
    sys.exit(main())
