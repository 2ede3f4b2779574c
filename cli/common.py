"""Small helpers shared by the subcommands (output folders, JSON printing)."""

from __future__ import annotations

import json
import sys
from pathlib import Path

from coilshift.logger.runfolder.atomic import to_jsonable  # noqa: F401  (re-exported for the commands)
from coilshift.logger.errors import InputError


def print_json(obj) -> None:
    """Print one JSON object on stdout."""
    sys.stdout.write(json.dumps(to_jsonable(obj), indent=2, allow_nan=False) + "\n")


def new_output_dir(path: str | Path, force: bool) -> Path:
    """An output folder that must not already hold anything, unless --force."""
    path = Path(path)
    if path.exists() and not path.is_dir():
        raise InputError(f"{path}: exists and is not a folder")
    if path.is_dir() and any(path.iterdir()) and not force:
        raise InputError(f"{path}: folder exists and is not empty (use --force to replace its contents)")
    try:
        path.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"{path}: cannot create folder ({exc.strerror})") from None
    return path
