"""Read a shift log back: the core data object of the analysis side.

Accepts a run folder (log.csv + run.json [+ markers.csv]) or any CSV file with at least
``t_s`` and ``freq_hz`` columns, so a frequency log exported by another instrument can be
analysed too. Reads only the columns asked for; drops an incomplete last line and says the
run was interrupted; never modifies what it reads.
"""

from __future__ import annotations

import io
import json
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

#: columns every log must have (a bare CSV from another instrument too)
REQUIRED = ("t_s", "freq_hz")


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
        """Baseline from run.json, else the median frequency of the first 2 s."""
        b = self.meta.get("baseline", {}).get("freq_hz")
        if b is not None and np.isfinite(b):
            return float(b)
        t, f = self.t_s, self.freq_hz
        sel = (t <= t[0] + 2.0) & np.isfinite(f) if len(t) else np.zeros(0, bool)
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
    if path.is_file():
        return path, None, None
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


def _inspect(log_path: Path) -> tuple[int, bool, list[str]]:
    """Size of the whole-line part of the file, whether a partial last line was cut, the header."""
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
    first = head.split(b"\n", 1)[0]
    try:
        header = [h.strip() for h in first.decode("utf-8-sig").strip().split(",")]
    except UnicodeDecodeError:
        raise InputError(f"{log_path}: not a text CSV file") from None
    return size, interrupted, header


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
        try:
            meta = json.loads(meta_path.read_text(encoding="utf-8"))
        except (ValueError, UnicodeDecodeError):
            raise InputError(f"{meta_path}: not valid JSON") from None
        if not isinstance(meta, dict):
            raise InputError(f"{meta_path}: expected a JSON object")
    size, interrupted, header = _inspect(log_path)
    if meta and meta.get("status") not in (None, "complete"):
        interrupted = True
    missing = [c for c in REQUIRED if c not in header]
    if missing:
        raise InputError(f"{log_path}: no {' or '.join(missing)} column (a log needs t_s and freq_hz)")
    wanted = list(REQUIRED) + [c for c in (columns or NUMERIC + FLAG_COLUMNS) if c not in REQUIRED]
    use = [c for c in wanted if c in header]
    dtypes = {c: ("category" if c in FLAG_COLUMNS else "float64") for c in use if c in NUMERIC + FLAG_COLUMNS}
    try:
        with open(log_path, "rb") as fh:
            # read only whole lines: an interrupted writer may have left half a row at the end
            table = pd.read_csv(io.BufferedReader(_Limited(fh, size), buffer_size=1 << 20), usecols=use, dtype=dtypes, skipinitialspace=True,
                                encoding="utf-8-sig", keep_default_na=True)
    except pd.errors.EmptyDataError:
        raise InputError(f"{log_path}: no complete lines in the log") from None
    except pd.errors.ParserError as exc:
        raise InputError(f"{log_path}: malformed CSV ({str(exc).splitlines()[0]})") from None
    except (ValueError, UnicodeDecodeError) as exc:
        first = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise InputError(f"{log_path}: non-numeric or unreadable value in a column ({first})") from None
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
    markers = read_markers(markers_path) if markers_path is not None else []
    return FrequencyLog(table=table, meta=meta, markers=markers, interrupted=interrupted, source=str(path))
