"""The ``coilshift`` command: a thin layer over library functions; may import logger, analysis and sim.

Each subcommand lives in its own module ``cmd_<name>.py`` exposing ``ORDER`` (int, for the
help listing), ``register(subparsers)`` which adds its parser and sets ``func=run``, and
``run(args) -> int``. Heavy imports go inside ``run`` so ``coilshift --help`` stays fast.
A command module never imports another: an option two commands take is declared once in
``options.py``; what its value means lives in a shared module (``tracking_args``,
``analysis_args``, ``coil_args``, ``inputs``, ``cautions``, ``common``).
"""
