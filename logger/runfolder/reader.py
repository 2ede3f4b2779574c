"""Read a shift log back: the core data object of the analysis side.

Accepts a run folder (log.csv + run.json [+ markers.csv]) or any CSV file with at least
``t_s`` and ``freq_hz`` columns, so a frequency log exported by another instrument can be
analysed too. Reads only the columns asked for; drops an incomplete last line and says the
run was interrupted; never modifies what it reads.
"""

from __future__ import annotations

import csv
import io
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from coilshift.logger.runfolder import flags as _flags
from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.columns import FLAG_COLUMNS, NUMERIC
from coilshift.logger.runfolder.folders import LOG_NAME, MARKERS_NAME, META_NAME
from coilshift.logger.runfolder.markers import Marker, read_markers
from coilshift.logger.textfile import read_json, require_regular_file

#: columns every log must have (a bare CSV from another instrument too)
REQUIRED = ("t_s", "freq_hz")
#: largest magnitude accepted in a numeric column: beyond it a value is a damaged cell, not a
#: reading (10 GHz, 300 years, 10 000 dB), and squaring it in the analysis would overflow
LIMITS = {"t_s": 1e10, "freq_hz": 1e10, "shift_hz": 1e10, "amp_dbfs": 1e4, "snr_db": 1e4}
#: field separators a log may use (a spreadsheet saves ';' where the decimal mark is ',')
SEPARATORS = (",", ";", "\t")


@dataclass
class FrequencyLog:
    """A frequency log: a table plus a metadata dict, SI units inside.

    Attributes
    ----------
    table : DataFrame with ``t_s`` and ``freq_hz`` (float, NaN where no tone) and whichever of
        ``shift_hz``, ``amp_dbfs``, ``snr_db``, ``flags`` (int mask) were read.
    meta : run.json contents ({} for a bare CSV)
    markers : the run's markers (empty list when none)
    interrupted : True when the log ended mid-line or run.json does not say complete
    source : the path read
    """

    table: pd.DataFrame
    meta: dict = field(default_factory=dict)
    markers: list[Marker] = field(default_factory=list)
    interrupted: bool = False
    source: str = ""

    @property
    def t_s(self) -> np.ndarray:
        return self.table["t_s"].to_numpy(float)

    @property
    def freq_hz(self) -> np.ndarray:
        return self.table["freq_hz"].to_numpy(float)

    @property
    def baseline_hz(self) -> float:
        """Baseline from run.json, else the median frequency of the first 2 s (or of the live
        run's first baseline window, when it ended before the window closed)."""
        base = self.meta.get("baseline") if isinstance(self.meta.get("baseline"), dict) else {}
        b = base.get("freq_hz")
        if isinstance(b, (int, float)) and np.isfinite(b):
            return float(b)
        w = base.get("window_s")
        window_s = float(w) if isinstance(w, (int, float)) and 0 < w < LIMITS["t_s"] else 2.0
        t, f = self.t_s, self.freq_hz
        sel = (t <= t[0] + window_s) & np.isfinite(f) if len(t) else np.zeros(0, bool)
        return float(np.median(f[sel])) if sel.any() else float("nan")

    @property
    def shift_hz(self) -> np.ndarray:
        """Frequency minus baseline, derived (not trusted from the file)."""
        return self.freq_hz - self.baseline_hz

    def usable(self) -> np.ndarray:
        """Boolean mask of frames whose frequency is usable (finite, not gap/no-tone/out-of-band)."""
        ok = np.isfinite(self.freq_hz)
        if "flags" in self.table:
            ok &= (self.table["flags"].to_numpy(np.int64) & _flags.UNUSABLE) == 0
        return ok


def _resolve(path: Path) -> tuple[Path, Path | None, Path | None]:
    if path.is_dir():
        log = path / LOG_NAME
        if not log.is_file():
            raise InputError(f"{path}: no {LOG_NAME} in this folder (not a run folder)")
        meta = path / META_NAME
        markers = path / MARKERS_NAME
        return log, meta if meta.is_file() else None, markers if markers.is_file() else None
    if path.exists():
        return require_regular_file(path, "log file"), None, None
    raise InputError(f"{path}: no such file or folder")


class _Limited(io.RawIOBase):
    """A read-only view of the first ``limit`` bytes of a binary file."""

    def __init__(self, fh, limit: int):
        self._fh, self._left = fh, limit

    def readable(self) -> bool:
        return True

    def readinto(self, buf) -> int:
        n = min(len(buf), self._left)
        if n <= 0:
            return 0
        data = self._fh.read(n)
        buf[: len(data)] = data
        self._left -= len(data)
        return len(data)


def _inspect(log_path: Path) -> tuple[int, bool, tuple[list[str], str, str]]:
    """Size of the whole-line part of the file, whether a partial last line was cut, and the
    header with the field separator and decimal mark."""
    try:
        with open(log_path, "rb") as fh:
            head = fh.read(65536)
            fh.seek(0, os.SEEK_END)
            size = fh.tell()
            if size == 0:
                raise InputError(f"{log_path}: empty file (a log needs a header with t_s and freq_hz)")
            fh.seek(max(0, size - 65536))
            tail = fh.read()
    except OSError as exc:
        raise InputError(f"{log_path}: cannot read ({exc.strerror})") from None
    interrupted = not tail.endswith(b"\n")
    if interrupted:
        cut = tail.rfind(b"\n")
        size = size - len(tail) + cut + 1 if cut >= 0 else 0
    lines = head.split(b"\n", 2)
    try:
        first = lines[0].decode("utf-8-sig")
        second = lines[1].decode("utf-8") if len(lines) > 1 else ""
    except UnicodeDecodeError:
        raise InputError(f"{log_path}: not a text CSV file") from None
    sep, decimal = _separator(first, second)
    try:
        header = [h.strip() for h in next(csv.reader([first.strip()], delimiter=sep), [])]
    except csv.Error as exc:  # a carriage return or a broken quote inside the header line
        raise InputError(f"{log_path}: the header line cannot be read as CSV ({_short(exc)})") from None
    return size, interrupted, (header, sep, decimal)


def _separator(header: str, first_row: str) -> tuple[str, str]:
    """The field separator (the one splitting the header into most fields; ',' on a tie) and the
    decimal mark (',' when fields are ';'-separated and the first row has commas)."""
    sep = max(SEPARATORS, key=lambda c: (header.count(c), c == ","))
    decimal = "," if sep == ";" and "," in first_row else "."
    return sep, decimal


def _unique(names: list[str]) -> list[str]:
    """Header names made unique (a repeated name gets .1, .2 ...), as pandas would."""
    seen: dict[str, int] = {}
    out = []
    for n in names:
        k = seen.get(n, 0)
        seen[n] = k + 1
        out.append(n if k == 0 else f"{n}.{k}")
    return out


def _short(text: str, limit: int = 80) -> str:
    """A library message cut to one short printable line (a damaged cell can hold anything)."""
    line = str(text).splitlines()[0] if str(text) else ""
    line = "".join(c if c.isprintable() else repr(c)[1:-1] for c in line)
    return line if len(line) <= limit else line[:limit] + "..."


def _check_ranges(table: pd.DataFrame, log_path: Path) -> None:
    """Refuse values no log can hold (a damaged cell, a foreign column in other units)."""
    for name, limit in LIMITS.items():
        if name not in table:
            continue
        v = table[name].to_numpy(float)
        bad = np.isfinite(v) & (np.abs(v) > limit)
        if name == "freq_hz":
            bad |= np.isfinite(v) & (v < 0)
        if bad.any():
            k = int(np.argmax(bad))
            raise InputError(f"{log_path}: {name} {v[k]:g} on row {k + 2} is out of range "
                             f"(a {name} value lies within {'0' if name == 'freq_hz' else f'{-limit:g}'}..{limit:g})")


def _window_baselines(meta: dict) -> tuple[np.ndarray, np.ndarray]:
    """Start times and frequencies of the live run's baseline windows that found a baseline,
    from run.json (``totals.baselines`` of a finished run, else ``baseline`` and its history)."""
    totals = meta.get("totals") if isinstance(meta.get("totals"), dict) else {}
    base = meta.get("baseline") if isinstance(meta.get("baseline"), dict) else {}
    entries = totals.get("baselines")
    if not isinstance(entries, list):
        history = base.get("history")
        entries = (list(history) if isinstance(history, list) else []) + [base]
    found = []
    for e in entries:
        if not isinstance(e, dict):
            continue
        t0, f0 = e.get("window_start_s"), e.get("freq_hz")
        if all(isinstance(v, (int, float)) and not isinstance(v, bool) and np.isfinite(v) for v in (t0, f0)):
            found.append((float(t0), float(f0)))
    found.sort()
    return np.array([t for t, _ in found]), np.array([f for _, f in found])


def _fill_window_shifts(table: pd.DataFrame, meta: dict) -> None:
    """Fill the empty shift_hz cells of rows written inside a baseline window: freq_hz minus the
    baseline of the latest window that found one and started at or before the row."""
    if "shift_hz" not in table or not meta:
        return
    shift = table["shift_hz"].to_numpy(float)
    freq = table["freq_hz"].to_numpy(float)
    blank = np.isnan(shift) & np.isfinite(freq)
    if not blank.any():
        return
    starts, freqs = _window_baselines(meta)
    if starts.size == 0:
        return
    t = table["t_s"].to_numpy(float)
    k = np.searchsorted(starts, t, side="right") - 1
    fill = blank & (k >= 0)
    if fill.any():
        shift = shift.copy()
        shift[fill] = freq[fill] - freqs[k[fill]]
        table["shift_hz"] = shift


def read_log(path: str | os.PathLike, columns: tuple[str, ...] | None = None) -> FrequencyLog:
    """Read a run folder or a log CSV.

    Parameters
    ----------
    path : run folder or CSV file
    columns : columns to load (``t_s`` and ``freq_hz`` always); ``None`` loads the standard
        numeric columns and flags when present.

    Raises
    ------
    InputError : missing file, missing ``t_s``/``freq_hz``, non-numeric cells, time not increasing
    """
    path = Path(path)
    log_path, meta_path, markers_path = _resolve(path)
    meta: dict = {}
    if meta_path is not None:
        meta = read_json(meta_path, "run.json")
        if not isinstance(meta, dict):
            raise InputError(f"{meta_path}: expected a JSON object")
    size, interrupted, (header, sep, decimal) = _inspect(log_path)
    if meta and meta.get("status") not in (None, "complete"):
        interrupted = True
    for c in REQUIRED:
        if header.count(c) > 1:
            raise InputError(f"{log_path}: two columns named {c}")
    missing = [c for c in REQUIRED if c not in header]
    if missing:
        raise InputError(f"{log_path}: no {' or '.join(missing)} column (a log needs t_s and freq_hz)")
    wanted = list(REQUIRED) + [c for c in (columns or NUMERIC + FLAG_COLUMNS) if c not in REQUIRED]
    use = [c for c in wanted if c in header]
    dtypes = {c: ("category" if c in FLAG_COLUMNS else "float64") for c in use if c in NUMERIC + FLAG_COLUMNS}
    try:
        with open(log_path, "rb") as fh:
            # read only whole lines: an interrupted writer may have left half a row at the end
            table = pd.read_csv(io.BufferedReader(_Limited(fh, size), buffer_size=1 << 20), header=0,
                                names=_unique(header), usecols=use, dtype=dtypes, skipinitialspace=True,
                                sep=sep, decimal=decimal, encoding="utf-8-sig", keep_default_na=True)
    except pd.errors.EmptyDataError:
        raise InputError(f"{log_path}: no complete lines in the log") from None
    except pd.errors.ParserError as exc:
        raise InputError(f"{log_path}: malformed CSV ({_short(exc)})") from None
    except (ValueError, UnicodeDecodeError) as exc:
        raise InputError(f"{log_path}: non-numeric or unreadable value in a column "
                         f"({_short(exc) or type(exc).__name__})") from None
    for name in FLAG_COLUMNS:
        if name in table:
            cats = table[name].cat.categories
            codes = np.array([_flags.from_text(str(c)) for c in cats] + [0], dtype=np.int64)
            table[name] = codes[table[name].cat.codes.to_numpy()]  # code -1 (empty) -> last -> 0
    t = table["t_s"].to_numpy(float)
    if len(t) == 0:
        raise InputError(f"{log_path}: the log has no rows")
    if not np.all(np.isfinite(t)):
        raise InputError(f"{log_path}: t_s has empty or non-finite values")
    if np.any(np.diff(t) <= 0):
        k = int(np.argmax(np.diff(t) <= 0))
        raise InputError(f"{log_path}: t_s does not increase (row {k + 3}: {t[k + 1]} after {t[k]})")
    if np.isinf(table["freq_hz"].to_numpy(float)).any():
        raise InputError(f"{log_path}: freq_hz has infinite values")
    _check_ranges(table, log_path)
    _fill_window_shifts(table, meta)
    markers = read_markers(markers_path) if markers_path is not None else []
    return FrequencyLog(table=table, meta=meta, markers=markers, interrupted=interrupted, source=str(path))
