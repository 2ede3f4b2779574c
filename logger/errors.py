"""The one exception type that the command line turns into a one-line message.

Library code names *settings*, not command-line options: a message may carry a marker made by
:func:`setting` (``f"{setting('clock_ppm')}: must be finite"``). Printed from Python the marker
reads as the setting's name (``clock_ppm: must be finite``); the command line renders it as the
option that sets it (``--clock-ppm: must be finite``), so no library message hard-codes a flag.
"""

from __future__ import annotations

import re
from typing import Callable

_MARK = re.compile(r"\{setting:([A-Za-z_][A-Za-z0-9_]*)\}")


def setting(name: str) -> str:
    """A marker for the setting ``name`` inside an :class:`InputError` message."""
    return "{setting:%s}" % name


class InputError(Exception):
    """Bad input or a refused request, explained in one line for the user.

    The CLI prints ``coilshift: error: <message>`` on stderr and exits non-zero,
    without a traceback. The message should name the file or the setting and the problem.
    """

    def render(self, name_of: Callable[[str], str] | None = None) -> str:
        """The message with every setting marker replaced by ``name_of(setting)``
        (default: the setting's own name)."""
        text = str(self.args[0]) if self.args else ""
        return _MARK.sub(lambda m: (name_of or str)(m.group(1)), text)

    def __str__(self) -> str:
        return self.render()
