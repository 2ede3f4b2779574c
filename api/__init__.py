"""coilshift from Python (notebooks, scripts): a few functions that take paths and return pandas
tables and small dataclasses, with the same defaults and checks as the command line.

    >>> import coilshift
    >>> run = coilshift.read_run("my-run")              # a run folder: log, markers, run.json
    >>> cal = coilshift.analyse_calibration("my-run")   # shifts, fits, ranges, calls
    >>> coilshift.calibration_table(cal)                # one row per target and distance

Everything is imported on first use, so ``import coilshift`` is cheap. The sub-packages
(``coilshift.logger``, ``coilshift.analysis``, ...) are the library underneath; their layout may
change between releases, these names will not without a deprecation. See docs/api.md.
"""

from __future__ import annotations

__all__ = ["read_run", "track_file", "analyse_calibration", "analyse_stability", "calibration_table",
           "stability_table", "Run", "InputError", "__version__"]

_LAZY = {name: "coilshift._api" for name in __all__ if name not in ("InputError", "__version__")}
_LAZY["InputError"] = "coilshift.logger.errors"


def __getattr__(name: str):
    if name == "__version__":
        from coilshift.logger.runfolder.writer import software_version

        return software_version()
    if name in _LAZY:
        import importlib

        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value  # later look-ups skip this function
        return value
    raise AttributeError(f"module 'coilshift' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
