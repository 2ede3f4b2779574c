"""The tracker's output: per-frame arrays of one length, in SI units.

The fields are the frame columns of :mod:`coilshift.logger.runfolder.columns` (``t_s``,
``freq_hz``, ``amp_dbfs``, ``snr_db``, ``flags`` today), so a column added there is a field here,
carried through :meth:`FrameTable.concat`, :meth:`FrameTable.select` and
:meth:`FrameTable.replace` without further code.
"""

from __future__ import annotations

import numpy as np

from coilshift.logger.runfolder.columns import FRAME_COLUMNS

_NAMES = tuple(c.name for c in FRAME_COLUMNS)


class FrameTable:
    """Frames produced by the tracker, one entry per analysis frame.

    Built from the frame columns positionally, in order, or by name:
    ``FrameTable(t_s, freq_hz, amp_dbfs, snr_db, flags)``. Columns the table says are not
    required (``flags``, and any added later) may be left out: they start as 0 (flags) or NaN.

    Attributes
    ----------
    t_s : seconds from the first sample of the recording to the frame centre
    freq_hz : tracked frequency (NaN when no tone); corrections already applied by the caller
    amp_dbfs : tone amplitude, dB relative to a full-scale sine (0 dBFS = peak 1.0)
    snr_db : tone power over the noise power in the frame's analysis bandwidth, dB
    flags : bit mask per frame (see :mod:`coilshift.logger.runfolder.flags`)
    """

    __slots__ = _NAMES

    def __init__(self, *values, **named):
        if len(values) > len(_NAMES):
            raise TypeError(f"FrameTable takes at most {len(_NAMES)} columns ({', '.join(_NAMES)}), "
                            f"got {len(values)}")
        given = dict(zip(_NAMES, values))
        for name in named:
            if name not in _NAMES:
                raise TypeError(f"FrameTable has no column {name!r}")
            if name in given:
                raise TypeError(f"FrameTable got column {name!r} twice")
        given.update(named)
        missing = [c.name for c in FRAME_COLUMNS if c.required and given.get(c.name) is None]
        if missing:
            raise TypeError(f"FrameTable is missing column(s) {', '.join(missing)}")
        n = None
        for col in FRAME_COLUMNS:
            value = given.get(col.name)
            if value is None:
                value = col.fill(n if n is not None else 0)
            value = np.asarray(value, dtype=col.dtype)
            if n is None:
                n = value.shape[0]
            elif value.shape != (n,):
                raise ValueError(f"FrameTable.{col.name} has shape {value.shape}, expected ({n},)")
            setattr(self, col.name, value)

    def __len__(self) -> int:
        return int(self.t_s.shape[0])

    def __repr__(self) -> str:
        return f"FrameTable({len(self)} frames: {', '.join(_NAMES)})"

    def columns(self) -> dict[str, np.ndarray]:
        """Column name -> array, in the table's order."""
        return {name: getattr(self, name) for name in _NAMES}

    @classmethod
    def empty(cls) -> "FrameTable":
        return cls(**{c.name: np.zeros(0, dtype=c.dtype) for c in FRAME_COLUMNS})

    @classmethod
    def blank(cls, t_s, flags) -> "FrameTable":
        """Frames that hold no measurement (where the input had a gap): every column but
        ``t_s`` and ``flags`` empty (NaN)."""
        t_s = np.asarray(t_s, dtype=float)
        return cls(**{c.name: c.fill(t_s.shape[0]) for c in FRAME_COLUMNS}
                   | {"t_s": t_s, "flags": np.asarray(flags, dtype=np.int64)})

    @classmethod
    def concat(cls, tables) -> "FrameTable":
        tables = [t for t in tables if len(t)]
        if not tables:
            return cls.empty()
        return cls(**{name: np.concatenate([getattr(t, name) for t in tables]) for name in _NAMES})

    def select(self, index) -> "FrameTable":
        """The frames at ``index`` (a slice, a boolean mask or positions)."""
        return FrameTable(**{name: getattr(self, name)[index] for name in _NAMES})

    def replace(self, **changes) -> "FrameTable":
        """A new table with the columns in ``changes`` replaced and copies of all the others.

        The result shares no array with this table except those passed in, so either may be
        changed in place afterwards without touching the other.
        """
        for name in changes:
            if name not in _NAMES:
                raise TypeError(f"FrameTable has no column {name!r}")
        return FrameTable(**{name: changes[name] if name in changes else getattr(self, name).copy()
                             for name in _NAMES})
