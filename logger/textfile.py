"""Reading the user's small text files (markers, scripts, coil descriptions, run.json) with
one-line errors, and the checks every input path gets before it is opened."""

from __future__ import annotations

import json
import os
import stat
from pathlib import Path

from coilshift.logger.errors import InputError

#: deepest nesting of lists and objects accepted in a JSON file (ours use 4 or 5 levels)
MAX_JSON_DEPTH = 64


def require_regular_file(path: str | os.PathLike, what: str = "file") -> Path:
    """``path`` as a Path if it names a regular file (or a link to one); InputError otherwise.

    A named pipe, a terminal or a device is refused before it is opened: reading one would
    block until some other program writes to it, or never end.
    """
    path = Path(path)
    try:
        mode = os.stat(path).st_mode
    except FileNotFoundError:
        raise InputError(f"{path}: no such {what}") from None
    except OSError as exc:
        raise InputError(f"{path}: cannot read ({exc.strerror})") from None
    if stat.S_ISDIR(mode):
        raise InputError(f"{path}: is a folder, expected a {what}")
    if not stat.S_ISREG(mode):
        kind = ("a named pipe (FIFO)" if stat.S_ISFIFO(mode) else "a device" if stat.S_ISCHR(mode) or stat.S_ISBLK(mode)
                else "a socket" if stat.S_ISSOCK(mode) else "not a regular file")
        raise InputError(f"{path}: is {kind}, not a {what}; save the data to a file first")
    return path


def read_text(path: str | os.PathLike, what: str = "file") -> str:
    """The text of ``path`` (UTF-8, a byte-order mark dropped); :class:`InputError` naming it otherwise.

    ``what`` names the kind of file in the message, e.g. ``"markers file"``.
    """
    path = require_regular_file(path, what)
    try:
        return path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise InputError(f"{path}: no such {what}") from None
    except IsADirectoryError:
        raise InputError(f"{path}: is a folder, expected a {what}") from None
    except UnicodeDecodeError:
        raise InputError(f"{path}: not a text file (expected a {what})") from None
    except OSError as exc:
        raise InputError(f"{path}: cannot read ({exc.strerror})") from None


def json_depth(obj) -> int:
    """How deeply lists and objects nest in parsed JSON (a scalar is 0), counted without recursion."""
    deepest = 0
    stack = [(obj, 1)]
    while stack:
        node, depth = stack.pop()
        if isinstance(node, dict):
            children = node.values()
        elif isinstance(node, list):
            children = node
        else:
            continue
        deepest = max(deepest, depth)
        if depth > MAX_JSON_DEPTH:
            break
        stack.extend((c, depth + 1) for c in children if isinstance(c, (dict, list)))
    return deepest


def parse_json(text: str, name: str):
    """Parsed JSON of ``text``; InputError naming ``name`` for a syntax error or absurd nesting."""
    try:
        obj = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(f"{name}: not valid JSON (line {exc.lineno}: {exc.msg})") from None
    except RecursionError:  # thousands of nested brackets
        raise InputError(f"{name}: JSON nested too deeply (more than {MAX_JSON_DEPTH} levels)") from None
    if json_depth(obj) > MAX_JSON_DEPTH:
        raise InputError(f"{name}: JSON nested too deeply (more than {MAX_JSON_DEPTH} levels)")
    return obj


def read_json(path: str | os.PathLike, what: str = "JSON file"):
    """The parsed JSON of ``path``; :class:`InputError` with the line of a syntax error otherwise."""
    return parse_json(read_text(path, what), str(Path(path)))
