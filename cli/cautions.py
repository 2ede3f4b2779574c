"""The wiring caution of the live commands (capture, calibrate), and the per-user state file that
remembers it has been shown."""

from __future__ import annotations

import argparse
import json
import os
import sys
import textwrap
from pathlib import Path

WIRING_CAUTION = (
    "CAUTION - wiring an oscillator to a line input: a line input takes only about 1-2 V peak. "
    "Bring the signal down with a resistive divider to stay within that, put a DC-blocking "
    "capacitor in series, and never connect the input to a circuit tied to the mains without "
    "proper isolation (a battery-powered oscillator, or an isolating transformer or probe). "
    "Work on mains-powered equipment follows your local electrical codes; leave it to, or have "
    "it checked by, a licensed electrician. A wrong connection can damage the soundcard, the "
    "computer, and you."
)

_STATE_KEY = "wiring_caution_shown"


class CautionApart(argparse.HelpFormatter):
    """``--help`` formatter of the live commands: the description wraps as usual, the epilog's
    paragraphs (keys, then the caution) stay apart, so the caution never runs into the text."""

    def add_text(self, text):
        if text and "CAUTION" in text:
            paragraphs = [textwrap.fill(" ".join(p.split()), width=78) for p in text.split("\n\n")]
            self._add_item(lambda t: t + "\n", ["\n\n".join(paragraphs)])
        else:
            super().add_text(text)


def state_path() -> Path:
    """Small per-user state file (remembers that the wiring caution has been shown)."""
    base = os.environ.get("XDG_CONFIG_HOME") or os.path.join(os.path.expanduser("~"), ".config")
    return Path(base) / "coilshift" / "state.json"


def show_caution_once(err=None) -> bool:
    """Print the wiring caution the first time capture runs for this user; True if printed."""
    from coilshift.logger.runfolder.atomic import write_json_atomic

    err = err or sys.stderr
    path = state_path()
    try:
        state = json.loads(path.read_text(encoding="utf-8"))
        if not isinstance(state, dict):
            state = {}
    except (OSError, ValueError):
        state = {}
    if state.get(_STATE_KEY):
        return False
    err.write(textwrap.fill(WIRING_CAUTION, width=78) + "\n(shown once; see also 'coilshift capture --help')\n\n")
    err.flush()
    state[_STATE_KEY] = True
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        write_json_atomic(path, state)
    except OSError:
        pass  # an unwritable config folder only means the caution shows again next time
    return True


def show_caution(err=None) -> None:
    """Print the wiring caution every time (calibrate: a session about to wire up a detector)."""
    print(textwrap.fill(WIRING_CAUTION, width=78) + "\n", file=err or sys.stderr)
