"""Oscilloscope CSV source: a scope's waveform export (a time column and voltage columns), streamed.

The layout (separator, data start, columns, units) comes from
:func:`~coilshift.logger.sources.csvlayout.detect_csv_layout`; pandas' C parser then reads the
numbers in chunks, once to validate the time axis and find the peak voltage, and again for each
pass over the samples. :mod:`pandas` is imported inside the functions that need it.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import math
import os
from pathlib import Path
from typing import Iterator

import numpy as np

from coilshift.logger.errors import InputError
from coilshift.logger.sources.csvlayout import detect_csv_layout
from coilshift.logger.sources.protocol import mtime_start, one_line

_HEAD_BYTES = 1 << 18  # the sample of first lines the layout is found from
_CSV_CHUNK_ROWS = 1 << 17
#: beyond these a cell is damaged, not a measurement: volts no probe gives (1 MV), and a sample
#: rate above any oscilloscope's (1 THz; the fastest sample at a few hundred GS/s, from memory)
MAX_VOLTS = 1e6
MAX_SAMPLE_RATE_HZ = 1e12


def _full_scale_v(peak_v: float) -> float:
    """The 1-2-5 step at or above ``peak_v`` with 1 % headroom, so no sample sits at full scale."""
    if not peak_v > 0:
        return 1.0
    target = peak_v * 1.01
    decade = 10.0 ** math.floor(math.log10(target))
    for step in (1.0, 2.0, 5.0, 10.0):
        if step * decade >= target:
            return step * decade
    return 10.0 * decade  # pragma: no cover


def _text_encoding(head: bytes, whole: bool) -> str:
    """``"utf-8-sig"`` when the sample of first bytes is UTF-8 (a multi-byte character cut at its
    end allowed, unless it is the whole file), else ``"latin-1"``."""
    try:
        head.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        if whole or exc.start < len(head) - 3:
            return "latin-1"
    return "utf-8-sig"


class ScopeCsvSource:
    """An oscilloscope waveform exported as CSV/text: a time column and voltage column(s).

    Opening reads the file once, in chunks, to validate it: every cell numeric and finite, time
    strictly increasing with a uniform step (within 25 % of the first step; a missing or repeated
    sample is an error naming the line). The sample rate is (rows - 1) / (last time - first time).

    Voltages are scaled to [-1, 1] by a full scale ``full_scale_v`` chosen as the 1-2-5 step just
    above the largest |voltage| in the file. The tracker's dBFS amplitudes are then re-referenced
    to 1 V peak by adding ``amp_offset_db = 20 log10(full_scale_v)``: amp_dbfs in the log of a
    scope run is dB re 1 V peak (dBV peak), and run.json says so. Clipping flags mean nothing here
    (the scope's own range clipping cannot be seen after export). Offers the
    :class:`~coilshift.logger.sources.protocol.Source` interface.

    Parameters
    ----------
    path : the export (a path, not a file object: it is read more than once)
    channel : 0-based voltage column to deliver, among the voltage columns in file order
    """

    amp_reference = "dB re 1 V peak (scope voltages; the amp_dbfs column keeps its name)"

    def __init__(self, path: str | os.PathLike, channel: int = 0):
        self.path = Path(path)
        self.name = str(path)
        try:
            with open(self.path, "rb") as fh:
                head = fh.read(_HEAD_BYTES)
                at_eof = not fh.read(1)
        except OSError as exc:
            raise InputError(f"{self.name}: cannot read ({exc.strerror})") from None
        # UTF-8 first (a 'µV' header is two bytes there); an export that is not UTF-8 is Latin-1
        # (where 'µ' is one byte), which never fails to decode
        self.encoding = _text_encoding(head, at_eof)
        lines = head.decode(self.encoding, errors="replace").splitlines()
        if not at_eof and lines:
            lines = lines[:-1]  # the last line of the sample may be cut
        self.layout = detect_csv_layout(lines, self.name)
        self.channels = len(self.layout.volt_cols)
        if not 0 <= channel < self.channels:
            raise InputError(f"{self.name}: channel {channel} requested but the export has "
                             f"{self.channels} voltage column(s), numbered from 0")
        self.channel = int(channel)
        self._scan()
        self.full_scale_v = _full_scale_v(self._peak_v)
        self.amp_offset_db = 20.0 * math.log10(self.full_scale_v)

    # pandas streams the numbers; the layout decides what it is told to read
    def _chunks(self):
        import pandas as pd

        lay = self.layout
        vcol = lay.volt_cols[self.channel]
        kw = dict(header=None, skiprows=lay.data_line - 1, usecols=[lay.time_col, vcol],
                  names=list(range(lay.n_fields)), chunksize=_CSV_CHUNK_ROWS, decimal=lay.decimal,
                  encoding=self.encoding, encoding_errors="replace", skip_blank_lines=False, na_filter=False,
                  engine="c")
        if lay.sep is None:
            kw["sep"] = r"\s+"
        else:
            kw["sep"] = lay.sep
        try:
            with pd.read_csv(self.path, **kw) as reader:
                row0 = 0
                for chunk in reader:
                    tcells, vcells = chunk[lay.time_col].to_numpy(), chunk[vcol].to_numpy()
                    # blank lines are kept by the parser so that line numbers stay exact; drop them here
                    # clean chunks arrive as numbers from the C parser; any odd cell makes a column text
                    if tcells.dtype.kind not in "fiu" or vcells.dtype.kind not in "fiu":
                        keep = np.flatnonzero((tcells.astype(str) != "") | (vcells.astype(str) != ""))
                        tcells, vcells = tcells[keep].astype(str), vcells[keep].astype(str)
                    else:
                        keep = np.arange(len(tcells))
                    yield lay.data_line + row0 + keep, tcells, vcells
                    row0 += len(chunk)
        except (pd.errors.ParserError, ValueError) as exc:
            raise InputError(f"{self.name}: malformed data ({one_line(exc)})") from None

    def _numbers(self, lines: np.ndarray, cells: np.ndarray, what: str) -> np.ndarray:
        import pandas as pd

        if cells.dtype.kind in "fiu":
            vals = cells.astype(float)
        else:
            if self.layout.decimal == ",":
                cells = np.char.replace(cells.astype(str), ",", ".")
            vals = pd.to_numeric(pd.Series(cells), errors="coerce").to_numpy(float)
        bad = ~np.isfinite(vals)
        if bad.any():
            k = int(np.argmax(bad))
            cell = str(cells[k]).strip()
            line = int(lines[k])
            if not cell:
                why = "empty cell"
            elif np.isnan(vals[k]) and cell.lower().lstrip("+-") not in ("nan",):
                why = f"non-numeric cell {cell[:20]!r}"
            else:
                why = f"non-finite value {cell[:20]!r}"
            raise InputError(f"{self.name}: line {line}: {why} in the {what} column")
        return vals

    def _scan(self) -> None:
        with contextlib.closing(self._chunks()) as chunks:
            self._scan_chunks(chunks)

    def _scan_chunks(self, chunks) -> None:
        lay = self.layout
        n = 0
        t_first = t_last = math.nan
        dt0 = math.nan
        peak = 0.0
        for lines, tcells, vcells in chunks:
            t = self._numbers(lines, tcells, "time") * lay.time_scale
            v = self._numbers(lines, vcells, "voltage") * lay.volt_scales[self.channel]
            if len(t) == 0:
                continue
            loud = np.abs(v) > MAX_VOLTS
            if loud.any():
                k = int(np.argmax(loud))
                raise InputError(f"{self.name}: line {int(lines[k])}: voltage {v[k]:.6g} V is beyond any probe "
                                 f"(at most {MAX_VOLTS:g} V); a damaged cell?")
            if n == 0:
                t_first = t[0]
                d_start = np.diff(t[: min(len(t), 1025)])
                if len(d_start):
                    dt0 = float(np.median(d_start))
            steps = np.diff(np.concatenate(([t_last], t)) if n else t)
            offset = 0 if n else 1  # row index of steps[0]'s later sample within this chunk
            if len(steps):
                back = steps <= 0
                if back.any():
                    k = int(np.argmax(back))
                    line = int(lines[k + offset])
                    prev = t_last if (n and k == 0) else t[k + offset - 1]
                    word = "repeats" if steps[k] == 0 else "goes backwards"
                    raise InputError(f"{self.name}: line {line}: time {word} "
                                     f"({t[k + offset]:.9g} s after {prev:.9g} s)")
                if np.isfinite(dt0):
                    off = np.abs(steps - dt0) > 0.25 * dt0
                    if off.any():
                        k = int(np.argmax(off))
                        line = int(lines[k + offset])
                        raise InputError(f"{self.name}: line {line}: non-uniform time step "
                                         f"{steps[k]:.6g} s (the file starts with {dt0:.6g} s steps)")
            t_last = float(t[-1])
            peak = max(peak, float(np.max(np.abs(v))))
            n += len(t)
        if n == 0:
            raise InputError(f"{self.name}: no data rows")
        if n < 2:
            raise InputError(f"{self.name}: only one data row; a sample rate needs two")
        self.n_frames = n
        self.t_first_s = float(t_first)
        self.sample_rate_hz = float((n - 1) / (t_last - t_first))
        if not self.sample_rate_hz <= MAX_SAMPLE_RATE_HZ:  # also inf, from steps too small for a float
            raise InputError(f"{self.name}: time steps of {(t_last - t_first) / (n - 1):.3g} s make a sample rate "
                             f"above {MAX_SAMPLE_RATE_HZ:g} Hz, beyond any oscilloscope; check the time column's unit")
        self._peak_v = peak

    @property
    def duration_s(self) -> float:
        return self.n_frames / self.sample_rate_hz

    def blocks(self, block_frames: int) -> Iterator[np.ndarray]:
        """Yield the chosen voltage column divided by ``full_scale_v``, ``block_frames`` at a time."""
        block_frames = int(block_frames)
        if block_frames <= 0:
            raise ValueError("block_frames must be positive")
        scale = self.layout.volt_scales[self.channel] / self.full_scale_v
        pending: list[np.ndarray] = []
        have = 0
        with contextlib.closing(self._chunks()) as chunks:
            for lines, _t, vcells in chunks:
                v = self._numbers(lines, vcells, "voltage") * scale
                pending.append(v)
                have += len(v)
                if have >= block_frames:
                    buf = np.concatenate(pending)
                    cut = (have // block_frames) * block_frames
                    for k in range(0, cut, block_frames):
                        yield buf[k:k + block_frames]
                    pending, have = [buf[cut:]], have - cut
        if have:
            yield np.concatenate(pending)

    def describe(self) -> dict:
        lay = self.layout
        return {
            "kind": "oscilloscope CSV export",
            "path": self.name,
            "name": self.path.name,
            "data_starts_at_line": lay.data_line,
            "separator": {None: "whitespace", "\t": "tab"}.get(lay.sep, lay.sep),
            "decimal_mark": lay.decimal,
            "text_encoding": "UTF-8" if self.encoding.startswith("utf") else "Latin-1",
            "time_column": {"index": lay.time_col, "name": lay.names[lay.time_col],
                            "to_seconds": lay.time_scale},
            "voltage_columns": [lay.names[j] or f"field {j}" for j in lay.volt_cols],
            "channel": self.channel,
            "channel_numbering": "0-based, among the voltage columns",
            "channels": self.channels,
            "sample_rate_hz": self.sample_rate_hz,
            "sample_rate_from": "time column: (rows - 1) / (last time - first time)",
            "frames": self.n_frames,
            "duration_s": self.duration_s,
            "first_sample_time_in_file_s": self.t_first_s,
            "full_scale_v": self.full_scale_v,
            "normalisation": "voltage / full_scale_v (1-2-5 step above the largest |voltage|)",
            "amplitude_reference": self.amp_reference,
        }

    def start_time(self, duration_s: float | None = None) -> tuple[_dt.datetime, str]:
        """Scope exports carry no reliable absolute time: mtime minus duration."""
        return mtime_start(self.path, self.duration_s if duration_s is None else duration_s)
