"""Where the samples are in an oscilloscope CSV/text export, found from the file's first lines.

:func:`detect_csv_layout` reads a sample of lines (the preamble, the header and the first data
rows) and returns a :class:`CsvLayout`: the separator and decimal mark, the line the data starts
on, which field is time and which carry voltages, and the unit scale of each (``(ms)``,
``[mV]``, ...). Nothing here reads a file; :mod:`coilshift.logger.sources.scopecsv` does.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from coilshift.logger.errors import InputError

_TIME_NAME = re.compile(r"(^|[^a-z])(time|t|x-axis|x|sec|secs|second|seconds|s)([^a-z]|$)", re.I)
_INDEX_NAME = re.compile(r"^(index|sample|samples|sequence|no\.?|n|#)$", re.I)
#: a bracketed unit in a column name, whatever it holds (an unknown unit is refused, not ignored)
_UNIT_IN_NAME = re.compile(r"[\(\[]\s*([^\(\)\[\]]*?)\s*[\)\]]")
#: bracketed unit in a column name -> factor to seconds / to volts
TIME_UNITS = {"s": 1.0, "sec": 1.0, "second": 1.0, "seconds": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6,
              "μs": 1e-6, "ns": 1e-9}
VOLT_UNITS = {"v": 1.0, "volt": 1.0, "volts": 1.0, "mv": 1e-3, "uv": 1e-6, "µv": 1e-6, "μv": 1e-6, "kv": 1e3}
_SETTLE_ROWS = 16  # consecutive numeric rows that mark the start of the data
_TAIL_ROWS = 40  # last lines of the sample that decide the separator and the data columns
#: (separator, decimal mark) pairs tried, in order of preference when they tie
_SEPARATORS = ((",", "."), ("\t", "."), (";", "."), (None, "."), (";", ","), ("\t", ","), (None, ","))

#: the sample's lines split into cells, None for a blank line
Rows = list[list[str] | None]


@dataclass(frozen=True)
class CsvLayout:
    """Where the samples are in a scope export, found by reading its first lines.

    Attributes
    ----------
    data_line : 1-based line number of the first data row
    sep : field separator (``","``, ``";"``, ``"\\t"`` or ``None`` for runs of whitespace)
    decimal : decimal mark (``"."`` or ``","``)
    n_fields : fields per data row (trailing empty fields included)
    time_col : 0-based field index of time
    volt_cols : 0-based field indices of the voltage columns, in file order
    names : header names of all fields ('' when the file has no header)
    time_scale : multiply the time column by this to get seconds (from a unit like ``(ms)``)
    volt_scales : same for each voltage column, to volts
    """

    data_line: int
    sep: str | None
    decimal: str
    n_fields: int
    time_col: int
    volt_cols: tuple[int, ...]
    names: tuple[str, ...]
    time_scale: float
    volt_scales: tuple[float, ...]


def _split(line: str, sep: str | None) -> list[str]:
    fields = line.split() if sep is None else [c.strip() for c in line.split(sep)]
    return [c.strip().strip('"').strip("'").strip() for c in fields]


def _is_number(cell: str, decimal: str) -> bool:
    if not cell:
        return False
    if decimal == ",":
        cell = cell.replace(",", ".")
    try:
        float(cell)
    except ValueError:
        return False
    return True


def _choose_separator(lines: list[str]) -> tuple[str | None, str]:
    """Pick the separator and decimal mark that make the most of the sample's last lines numeric."""
    tail = [ln for ln in lines if ln.strip()][-_TAIL_ROWS:]
    best: tuple[int, int, str | None, str] | None = None
    for rank, (sep, dec) in enumerate(_SEPARATORS):
        score = 0
        for ln in tail:
            cells = [c for c in _split(ln, sep) if c]
            if len(cells) >= 2 and all(_is_number(c, dec) for c in cells):
                score += 1
        if best is None or score > best[0]:
            best = (score, -rank, sep, dec)
    assert best is not None
    return best[2], best[3]


def _unit_key(unit: str) -> str:
    """A unit as the tables spell it: lower case, the Greek mu and 'u' read as the micro sign."""
    return unit.strip().lower().replace("μ", "µ")


def _unit_scale(name: str, table: dict[str, float]) -> float | None:
    m = _UNIT_IN_NAME.search(name)
    if m:
        return table.get(_unit_key(m.group(1)))
    return None


def _column_unit(header: str, table: dict[str, float], what: str, known: str, name: str) -> float:
    """Scale factor of a column's bracketed unit; no unit means s or V; an unknown unit is refused."""
    m = _UNIT_IN_NAME.search(header)
    if not m:
        return 1.0
    scale = table.get(_unit_key(m.group(1)))
    if scale is None:
        raise InputError(f"{name}: unknown {what} unit {m.group(1)[:20]!r} in column {header[:40]!r} "
                         f"(known: {known})")
    return scale


def _data_columns(split: Rows, dec: str, name: str) -> tuple[int, list[int]]:
    """Rule 2: the row width and the fields numeric in the last lines of the data block."""
    # the data block is what follows the last line without a single number (header/preamble);
    # a stray bad cell inside the data must not hide its column, hence the 75 % vote
    rows = [s for s in split if s is not None]
    last_text = max((k for k, s in enumerate(rows) if not any(_is_number(c, dec) for c in s)), default=-1)
    tail = rows[last_text + 1:][-_TAIL_ROWS:]
    if not tail:
        raise InputError(f"{name}: no numeric data rows found (not a scope CSV export?)")
    width = max(len(s) for s in tail)
    data_cols = [j for j in range(width)
                 if sum(j < len(s) and _is_number(s[j], dec) for s in tail) >= 0.75 * len(tail)]
    if len(data_cols) == 0:
        raise InputError(f"{name}: no numeric data rows found (not a scope CSV export?)")
    if len(data_cols) == 1:
        raise InputError(f"{name}: only one numeric column; a scope export needs a time column "
                         f"and a voltage column")
    return width, data_cols


def _data_start(split: Rows, data_cols: list[int], dec: str, name: str) -> int:
    """Rule 3: index of the first line from which most of the next lines are numeric."""

    def numeric_row(s):
        return s is not None and all(j < len(s) and _is_number(s[j], dec) for j in data_cols)

    for i, s in enumerate(split):
        if s is None:
            continue
        window = [t for t in split[i:] if t is not None][:_SETTLE_ROWS]
        if numeric_row(s) and sum(numeric_row(t) for t in window) >= 0.75 * len(window):
            return i
    # the tail that chose the data columns always qualifies, so this is never reached
    raise InputError(f"{name}: cannot find where the data starts")  # pragma: no cover


def _header_above(split: Rows, start: int, data_cols: list[int], dec: str) -> list[str]:
    """Rule 4: the nearest non-blank line above the data, if it has text in the data columns."""
    for s in reversed(split[:start]):
        if s is None:
            continue
        if any(j < len(s) and s[j] and not _is_number(s[j], dec) for j in data_cols):
            return s
        break
    return []


def _columns_by_name(names: tuple[str, ...], data_cols: list[int], name: str) -> tuple[int, list[int]]:
    """Rule 4: the time column is the first data column named like time; the rest carry voltages."""
    time_col = None
    for j in data_cols:
        label = _UNIT_IN_NAME.sub(" ", names[j]).strip()
        if _INDEX_NAME.match(label):
            continue
        if _TIME_NAME.search(label) or _unit_scale(names[j], TIME_UNITS) is not None:
            time_col = j
            break
    if time_col is None:
        shown = ", ".join(names[j] or "?" for j in data_cols)
        raise InputError(f"{name}: no time column (header names the data columns: {shown})")
    return time_col, [j for j in data_cols if j != time_col and not _INDEX_NAME.match(names[j].strip())]


def _columns_by_values(split: Rows, start: int, data_cols: list[int], dec: str,
                       name: str) -> tuple[int, list[int]]:
    """Rule 5: without a header, time is the first column that strictly increases in the sample."""
    sample = [s for s in split[start:] if s is not None]
    for j in data_cols:
        # a stray bad cell is skipped here; the full scan then names its line
        vals = np.array([float(s[j].replace(",", ".") if dec == "," else s[j]) for s in sample
                         if j < len(s) and _is_number(s[j], dec)])
        if len(vals) >= 2 and np.all(np.diff(vals) > 0):
            return j, [k for k in data_cols if k != j]
    raise InputError(f"{name}: no time column (no header, and no column increases steadily)")


def detect_csv_layout(lines: list[str], name: str) -> CsvLayout:
    """Find the data start, separator, and the time and voltage columns from a file's first lines.

    The rules, applied in order:

    1. the separator and decimal mark are the ones under which the last lines of the sample
       split into all-numeric cells;
    2. the data columns are the fields that are numeric in all of those last lines;
    3. the data start is the first line from which :data:`_SETTLE_ROWS` consecutive lines are
       numeric in all the data columns (scope preambles of ``key,value`` lines come before it);
    4. the nearest non-blank line above the data, if it has text in the data columns, names
       them: a name like ``Time``, ``t``, ``x-axis`` or ``second`` (optionally with a unit
       such as ``(ms)``) marks the time column; ``Index``/``Sequence``/``Sample`` columns are
       sample counters, not time; the remaining data columns carry voltages;
    5. without a header, the time column is the first whose values strictly increase in the
       sample and the others are voltages.

    Raises InputError naming the file when no time or no voltage column can be found.
    """
    if not any(ln.strip() for ln in lines):
        raise InputError(f"{name}: no data lines")
    sep, dec = _choose_separator(lines)
    split = [_split(ln, sep) if ln.strip() else None for ln in lines]
    width, data_cols = _data_columns(split, dec, name)
    start = _data_start(split, data_cols, dec, name)
    header = _header_above(split, start, data_cols, dec)
    names = tuple((header[j] if j < len(header) else "") for j in range(width))
    if header:
        time_col, volt_cols = _columns_by_name(names, data_cols, name)
    else:
        time_col, volt_cols = _columns_by_values(split, start, data_cols, dec, name)
    if not volt_cols:
        raise InputError(f"{name}: no voltage column (only a time column was found)")
    time_scale = _column_unit(names[time_col], TIME_UNITS, "time", "s, ms, us, ns", name)
    volt_scales = tuple(_column_unit(names[j], VOLT_UNITS, "voltage", "V, mV, uV, kV", name)
                        for j in volt_cols)
    return CsvLayout(data_line=start + 1, sep=sep, decimal=dec, n_fields=width, time_col=time_col,
                     volt_cols=tuple(volt_cols), names=names, time_scale=time_scale,
                     volt_scales=volt_scales)
