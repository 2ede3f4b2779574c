"""Small helpers shared by the subcommands (output folders, JSON printing)."""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

from coilshift.logger.errors import InputError


def to_jsonable(obj):
    """Replace NaN/inf by None and numpy scalars/arrays by Python values, recursively."""
    try:
        import numpy as np
    except ImportError:  # pragma: no cover
        np = None
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if np is not None and isinstance(obj, np.ndarray):
        return [to_jsonable(v) for v in obj.tolist()]
    if np is not None and isinstance(obj, np.generic):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


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
