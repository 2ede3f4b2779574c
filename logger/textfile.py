"""Reading the user's small text files (markers, scripts, coil descriptions) with one-line errors."""

from __future__ import annotations

import json
import os
from pathlib import Path

from coilshift.logger.errors import InputError


def read_text(path: str | os.PathLike, what: str = "file") -> str:
    """The text of ``path`` (UTF-8, a byte-order mark dropped); :class:`InputError` naming it otherwise.

    ``what`` names the kind of file in the message, e.g. ``"markers file"``.
    """
    path = Path(path)
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


def read_json(path: str | os.PathLike, what: str = "JSON file"):
    """The parsed JSON of ``path``; :class:`InputError` with the line of a syntax error otherwise."""
    text = read_text(path, what)
    try:
        return json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(f"{Path(path)}: not valid JSON (line {exc.lineno}: {exc.msg})") from None
