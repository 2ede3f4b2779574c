"""Crash-safe file writing: a finished file appears whole or not at all."""

from __future__ import annotations

import json
import math
import os
import tempfile
from pathlib import Path


def write_bytes_atomic(path: str | os.PathLike, data: bytes) -> None:
    """Write ``data`` to ``path`` via a temp file in the same folder, fsync, then rename.

    An interrupted call leaves either the old file or the new one, never half of either.
    An OSError (disk full, read-only folder) names ``path``, whatever step failed.
    """
    path = Path(path)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    except OSError as exc:
        raise named_error(exc, path) from None
    try:
        # mkstemp makes the file private (0600); give it the mode a plain open() would
        os.chmod(tmp, 0o666 & ~_umask())
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(exc, OSError):
            raise named_error(exc, path) from None
        raise
    _fsync_dir(path.parent)


def named_error(exc: OSError, path: str | os.PathLike) -> OSError:
    """``exc`` as an OSError that names ``path`` (a write to an open file names no file)."""
    return OSError(exc.errno, exc.strerror or str(exc), str(path))


def write_text_atomic(path: str | os.PathLike, text: str) -> None:
    """Text version of :func:`write_bytes_atomic` (UTF-8)."""
    write_bytes_atomic(path, text.encode("utf-8"))


def write_json_atomic(path: str | os.PathLike, obj) -> None:
    """Write ``obj`` as indented JSON, atomically (NaN and inf become null, see :func:`to_jsonable`)."""
    write_text_atomic(path, json.dumps(to_jsonable(obj), indent=2, sort_keys=False, allow_nan=False) + "\n")


def to_jsonable(obj):
    """Replace NaN/inf by None and numpy scalars/arrays by Python values, recursively."""
    import numpy as np

    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [to_jsonable(v) for v in obj.tolist()]
    if isinstance(obj, np.generic):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def _read_umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


# read once at import: os.umask can only be read by setting it, which is not thread-safe later
_UMASK = _read_umask()


def _umask() -> int:
    return _UMASK


def _fsync_dir(folder: Path) -> None:
    # make the rename itself durable; not every platform lets a folder be opened
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)
