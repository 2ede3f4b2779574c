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

from coilshift.logger import flags as _flags
from coilshift.logger.errors import InputError
from coilshift.logger.markers import Marker, read_markers
from coilshift.logger.runlog import LOG_NAME, MARKERS_NAME, META_NAME

REQUIRED = ("t_s", "freq_hz")
NUMERIC = ("t_s", "freq_hz", "shift_hz", "amp_dbfs", "snr_db")


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
    try:
        raw = log_path.read_bytes()
    except OSError as exc:
        raise InputError(f"{log_path}: cannot read ({exc.strerror})") from None
    interrupted = False
    if raw and not raw.endswith(b"\n"):
        raw = raw[: raw.rfind(b"\n") + 1]  # drop the incomplete last line
        interrupted = True
    if meta and meta.get("status") not in (None, "complete"):
        interrupted = True
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(f"{log_path}: not a text CSV file") from None
    header_line = text.split("\n", 1)[0] if text else ""
    header = [h.strip() for h in header_line.split(",")]
    missing = [c for c in REQUIRED if c not in header]
    if missing:
        raise InputError(f"{log_path}: no {' or '.join(missing)} column (a log needs t_s and freq_hz)")
    wanted = list(REQUIRED) + [c for c in (columns or NUMERIC + ("flags",)) if c not in REQUIRED]
    use = [c for c in wanted if c in header]
    dtypes = {c: "float64" for c in use if c in NUMERIC or c in (columns or ())} | (
        {"flags": "string"} if "flags" in use else {})
    try:
        table = pd.read_csv(io.StringIO(text), usecols=use, dtype=dtypes, skipinitialspace=True,
                            keep_default_na=True)
    except ValueError as exc:
        raise InputError(f"{log_path}: non-numeric value in a numeric column ({str(exc).splitlines()[0]})") from None
    if "flags" in table:
        table["flags"] = _flags.column_from_text(table["flags"].fillna("").to_numpy(object))
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
