"""The ``coilshift`` command: a thin layer over library functions.

Each subcommand lives in its own module ``cmd_<name>.py`` exposing ``ORDER`` (int, for the
help listing), ``register(subparsers)`` which adds its parser and sets ``func=run``, and
``run(args) -> int``. Heavy imports go inside ``run`` so ``coilshift --help`` stays fast.
"""
