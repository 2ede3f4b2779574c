"""The shift log: a run folder with ``log.csv`` (rows) and ``run.json`` (metadata).

``log.csv`` has a header row first, then one frame a row, whole lines only; its columns, their
units and their text format are the table in :mod:`coilshift.logger.runfolder.columns`
(``t_s,utc,freq_hz,shift_hz,amp_dbfs,snr_db,flags`` today). ``utc`` and ``shift_hz`` are
computed here, from ``t_s`` and ``start_utc`` and from ``freq_hz`` and the baseline.

``run.json`` is written before the first row (``"status": "running"``) and replaced
atomically at the end (``"status": "complete"`` with totals). Rows are appended, flushed
after every write and fsync'ed about once a second, so a crash loses at most about a
second and leaves a readable file whose incomplete last line a reader drops.
"""

from __future__ import annotations

import datetime as _dt
import os
import time
from pathlib import Path

import numpy as np

from coilshift.logger.runfolder.atomic import write_json_atomic, write_text_atomic
from coilshift.logger.runfolder.columns import COLUMNS, FLAGS, LOG_COLUMNS, UNITS, RowContext, cells
from coilshift.logger.runfolder.folders import LOG_NAME, MARKERS_NAME, META_NAME
from coilshift.logger.runfolder.frames import FrameTable

FORMAT_NAME = "coilshift-run"
FORMAT_VERSION = 1
#: bytes set aside while a run is written, so the final run.json fits on a disk that fills up
RESERVE_BYTES = 64 * 1024


def software_version() -> str:
    try:
        from importlib.metadata import version

        return version("coilshift")
    except Exception:  # running from a source tree that is not installed
        return "unknown"


class RunWriter:
    """Append frames to a run folder's log.csv; keep run.json current.

    Parameters
    ----------
    run_dir : folder prepared by :func:`~coilshift.logger.runfolder.folders.prepare_run_dir`
    meta : metadata for run.json (source, sample_rate_hz, tracker, corrections, baseline, ...);
        ``start_utc`` is required as an ISO 8601 string.
    fsync_interval_s : how often appended rows are forced to disk.

    The writer never holds more than the current batch of rows in memory.
    """

    def __init__(self, run_dir: str | os.PathLike, meta: dict, fsync_interval_s: float = 1.0):
        self.run_dir = Path(run_dir)
        self.meta = {"format": FORMAT_NAME, "format_version": FORMAT_VERSION,
                     "software_version": software_version(), "units": UNITS,
                     "columns": list(LOG_COLUMNS), "status": "running", **meta}
        if "start_utc" not in self.meta:
            raise ValueError("meta needs start_utc")
        self._start = _dt.datetime.fromisoformat(self.meta["start_utc"].replace("Z", "+00:00"))
        self.baseline_hz = float(self.meta.get("baseline", {}).get("freq_hz", np.nan))
        self.fsync_interval_s = fsync_interval_s
        self.rows_written = 0
        self._write_error: OSError | None = None
        self._flag_counts: dict[str, int] = {}
        write_json_atomic(self.run_dir / META_NAME, self.meta)
        # room kept for the final run.json: if the disk fills up during the run, deleting this
        # lets run.json still say how the run ended (the name matches the temp-file clean-ups)
        self._reserve = self.run_dir / f".{META_NAME}.reserve.tmp"
        try:
            self._reserve.write_bytes(b"\0" * RESERVE_BYTES)
        except OSError:
            self._reserve.unlink(missing_ok=True)
        self._fh = open(self.run_dir / LOG_NAME, "x", encoding="utf-8", newline="\n")
        self._fh.write(",".join(LOG_COLUMNS) + "\n")
        self._fh.flush()
        os.fsync(self._fh.fileno())
        self._last_sync = time.monotonic()

    def set_baseline(self, freq_hz: float, method: str, persist: bool = True, **details) -> None:
        """Set (or re-zero) the baseline used for ``shift_hz`` of rows written from now on, and
        rewrite run.json with it (``persist=False``: only at :meth:`close`, e.g. after the disk
        filled up, when only the room kept for the final run.json is left)."""
        self.baseline_hz = float(freq_hz)
        self.meta["baseline"] = {"freq_hz": self.baseline_hz, "method": method, **details}
        if persist:
            try:
                write_json_atomic(self.run_dir / META_NAME, self.meta)
            except OSError as exc:
                self._write_error = self._write_error or exc  # no more rows: run.json lags behind them
                raise

    def append(self, frames: FrameTable, baseline_hz: float | None = None) -> None:
        """Write whole rows for ``frames``, flush, and fsync if the interval has passed.

        ``shift_hz`` is taken against ``baseline_hz`` when given (NaN: not known yet, the cells
        are left empty), else against the current baseline.
        """
        if len(frames) == 0:
            return
        context = RowContext(self._start, self.baseline_hz if baseline_hz is None else float(baseline_hz))
        columns = [cells(c, frames, context) for c in COLUMNS]
        for c, texts in zip(COLUMNS, columns):
            if c.kind == FLAGS:
                self._count_flags(texts)
        lines = [",".join(row) + "\n" for row in zip(*columns)]
        if self._write_error is not None:
            # after a failed write the file may end in part of a row: never append behind it
            raise self._write_error
        try:
            self._fh.write("".join(lines))
            self._fh.flush()
            self.rows_written += len(lines)
            now = time.monotonic()
            if now - self._last_sync >= self.fsync_interval_s:
                os.fsync(self._fh.fileno())
                self._last_sync = now
        except OSError as exc:  # disk full, folder gone, ...: say which file
            self._write_error = self._named(exc)
            raise self._write_error from None

    def _count_flags(self, texts: list[str]) -> None:
        counts = self._flag_counts
        for words in texts:
            if words:
                for w in words.split(";"):
                    counts[w] = counts.get(w, 0) + 1

    def _named(self, exc: OSError) -> OSError:
        if exc.filename:
            return exc
        return OSError(exc.errno, exc.strerror or str(exc), str(self.run_dir / LOG_NAME))

    def close(self, totals: dict | None = None, status: str = "complete") -> None:
        """fsync the log and replace run.json with the final status and totals."""
        if self._fh.closed:
            return
        prior = self._write_error  # already raised by append
        error = None
        try:
            self._fh.flush()
            os.fsync(self._fh.fileno())
        except OSError as exc:
            error = error or self._named(exc)
        finally:
            try:
                self._fh.close()  # closes the file even when the final flush fails
            except OSError as exc:
                error = error or self._named(exc)
        failed = error or prior
        if failed is not None and status == "complete":
            status = "interrupted"  # rows are missing at the end: the run is not complete
        self.meta["status"] = status
        self.meta["totals"] = {"rows": self.rows_written, "flag_counts": self._flag_counts, **(totals or {})}
        if failed is not None:
            self.meta["totals"]["write_error"] = f"{failed.filename}: {failed.strerror}"
        try:
            self._reserve.unlink(missing_ok=True)  # frees the room kept for this write
        except OSError:
            pass
        # should even this fail, run.json still says "running", which readers take as interrupted
        write_json_atomic(self.run_dir / META_NAME, self.meta)
        if error is not None:
            raise error

    def amend_totals(self, **entries) -> None:
        """Add entries to ``totals`` of a closed run's run.json (rewritten atomically)."""
        self.meta.setdefault("totals", {}).update(entries)
        write_json_atomic(self.run_dir / META_NAME, self.meta)

    def __enter__(self) -> "RunWriter":
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        self.close(status="complete" if exc_type is None else "interrupted")


def write_markers_copy(run_dir: str | os.PathLike, markers_csv_text: str) -> None:
    """Store the run's markers as markers.csv (atomically)."""
    write_text_atomic(Path(run_dir) / MARKERS_NAME, markers_csv_text)
