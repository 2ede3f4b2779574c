"""The text of one table cell in the CSV files and HTML tables the reports write."""

from __future__ import annotations

import math


def cell_text(x, fmt: str = "{:.6g}") -> str:
    """``x`` formatted with ``fmt``; an empty cell for None or a float that is not finite."""
    return "" if x is None or (isinstance(x, float) and not math.isfinite(x)) else fmt.format(x)
