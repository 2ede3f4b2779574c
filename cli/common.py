"""Small helpers shared by the subcommands (JSON printing; output folders are
:func:`coilshift.logger.runfolder.folders.new_output_dir`)."""

from __future__ import annotations

import json
import sys

from coilshift.logger.runfolder.atomic import to_jsonable  # noqa: F401  (re-exported for the commands)


def print_json(obj) -> None:
    """Print one JSON object on stdout."""
    sys.stdout.write(json.dumps(to_jsonable(obj), indent=2, allow_nan=False) + "\n")

