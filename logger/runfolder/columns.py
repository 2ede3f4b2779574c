"""The columns of ``log.csv``, in one table that every other part of the format follows.

Each :class:`Column` says what a column holds (name, unit, one-line description), how it is
stored (``kind``: a float written with ``digits`` decimals, a flag mask written as words, or
text) and where its value comes from (``origin``): a **frame** column is a field of
:class:`~coilshift.logger.runfolder.frames.FrameTable`, filled by the tracker and the
post-processing; a **derived** column is computed when the row is written, from the frame
columns and the run's :class:`RowContext` (the start time and the baseline).

The table drives the frame table's fields, the writer's header and row format, run.json's
``columns`` and ``units``, and the reader's column types. Adding a column is one entry here
plus the code that computes its value (and a line in the docs). A new column goes at the end:
the frame table's positional arguments follow this order, and so may other programs' readers.
"""

from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from coilshift.logger.runfolder import flags as _flags

#: value kinds: a float written with ``digits`` decimals (empty when not finite), a flag bit mask
#: written as ``;``-separated words, or text written as it is
FLOAT, FLAGS, TEXT = "float", "flags", "text"
#: value origins: a field of the frame table, or computed when the row is written
FRAME, DERIVED = "frame", "derived"


@dataclass(frozen=True)
class RowContext:
    """What a derived column may use besides the frames: the run's start time and baseline."""

    start: _dt.datetime
    baseline_hz: float


@dataclass(frozen=True)
class Column:
    """One column of log.csv (see the module notes).

    ``required`` frame columns must be given when a frame table is built; the others default to
    NaN (float) or 0 (flags). ``derive(frames, context)`` computes a derived column's values.
    """

    name: str
    unit: str
    kind: str
    digits: int | None
    origin: str
    description: str
    required: bool = False
    derive: Callable | None = None

    @property
    def dtype(self):
        """The in-memory type of a frame column's array."""
        return np.int64 if self.kind == FLAGS else float

    def fill(self, n: int) -> np.ndarray:
        """The value of ``n`` frames for which this column was not given."""
        return np.zeros(n, dtype=np.int64) if self.kind == FLAGS else np.full(n, np.nan)


def utc_iso(t: _dt.datetime) -> str:
    """ISO 8601 with milliseconds and a Z, e.g. ``2026-12-01T18:01:08.123Z``."""
    t = t.astimezone(_dt.timezone.utc)
    return t.strftime("%Y-%m-%dT%H:%M:%S.") + f"{t.microsecond // 1000:03d}Z"


def _utc_of_frames(frames, context: RowContext) -> list[str]:
    # what utc_iso(start + timedelta(seconds=t)) gives, for all frames at once: timedelta rounds
    # t * 1e6 half to even (as rint does), the text truncates to milliseconds
    start = context.start.astimezone(_dt.timezone.utc).replace(tzinfo=None)
    micros = np.rint(np.asarray(frames.t_s, dtype=float) * 1e6).astype(np.int64)
    stamps = (np.datetime64(start, "us") + micros.astype("timedelta64[us]")).astype("datetime64[ms]")
    return [text + "Z" for text in np.datetime_as_string(stamps, unit="ms").tolist()]


def _shift_of_frames(frames, context: RowContext) -> np.ndarray:
    return frames.freq_hz - context.baseline_hz


COLUMNS: tuple[Column, ...] = (
    Column("t_s", "s", FLOAT, 6, FRAME, "seconds from the start of the recording to the frame centre",
           required=True),
    Column("utc", "ISO 8601 UTC", TEXT, None, DERIVED, "ISO 8601 UTC time of the frame centre (start_utc + t_s)",
           derive=_utc_of_frames),
    Column("freq_hz", "Hz", FLOAT, 6, FRAME, "tracked frequency after corrections (empty when no tone)",
           required=True),
    Column("shift_hz", "Hz", FLOAT, 6, DERIVED, "freq_hz minus the baseline frequency",
           derive=_shift_of_frames),
    Column("amp_dbfs", "dB re full-scale sine", FLOAT, 2, FRAME, "tone amplitude in dB re full-scale sine",
           required=True),
    Column("snr_db", "dB", FLOAT, 2, FRAME, "tone-to-noise ratio in the frame, dB", required=True),
    Column("flags", "words", FLAGS, None, FRAME,
           "';'-separated words from coilshift.logger.runfolder.flags (empty when clean)"),
)

#: the header of log.csv, in order
LOG_COLUMNS: tuple[str, ...] = tuple(c.name for c in COLUMNS)
#: the columns that are fields of a frame table, in the order of its positional arguments
FRAME_COLUMNS: tuple[Column, ...] = tuple(c for c in COLUMNS if c.origin == FRAME)
#: run.json ``units``: column name -> unit
UNITS: dict[str, str] = {c.name: c.unit for c in COLUMNS}
#: columns the reader loads as float64
NUMERIC: tuple[str, ...] = tuple(c.name for c in COLUMNS if c.kind == FLOAT)
#: columns the reader turns from words back into flag masks
FLAG_COLUMNS: tuple[str, ...] = tuple(c.name for c in COLUMNS if c.kind == FLAGS)


def units(**overrides: str) -> dict[str, str]:
    """run.json ``units``, with some replaced (e.g. ``amp_dbfs`` of a scope export is dB re 1 V)."""
    unknown = set(overrides) - set(UNITS)
    if unknown:
        raise ValueError(f"no log column named {', '.join(sorted(unknown))}")
    return {**UNITS, **overrides}


def _float_cells(values, digits: int) -> list[str]:
    spec = f".{digits}f"
    return ["" if not math.isfinite(x) else format(x, spec) for x in np.asarray(values, dtype=float).tolist()]


def _flag_cells(masks) -> list[str]:
    words: dict[int, str] = {}  # a log holds few distinct masks: spell each once
    out = []
    for m in np.asarray(masks, dtype=np.int64).tolist():
        w = words.get(m)
        if w is None:
            w = words[m] = _flags.to_text(m)
        out.append(w)
    return out


def cells(column: Column, frames, context: RowContext) -> list[str]:
    """The log.csv text of ``column`` for every frame, top to bottom."""
    values = column.derive(frames, context) if column.origin == DERIVED else getattr(frames, column.name)
    if column.kind == FLOAT:
        return _float_cells(values, column.digits)
    if column.kind == FLAGS:
        return _flag_cells(values)
    return [str(v) for v in values]
