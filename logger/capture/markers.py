"""Markers set during a live capture: labels typed by the user, the open stretch, markers.csv.

A marker starts a stretch (``baseline`` or a target at a distance); the stretch ends where the
next one starts, at an ``end`` marker, or at the end of the run. markers.csv is rewritten
atomically whenever a marker is set (and now and then while a stretch is open), so a crash keeps
the stretches marked so far.
"""

from __future__ import annotations

import math
import re
import time
from pathlib import Path

from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.markers import BASELINE, Marker, markers_to_csv
from coilshift.logger.runfolder.writer import write_markers_copy

END = "end"

_LABEL_RE = re.compile(r"^(?P<target>.+?)[\s@]+(?P<dist>[0-9]+(?:\.[0-9]*)?)\s*(?:mm)?$", re.IGNORECASE)


def parse_marker_label(label: str, distance_mm: float | None = None) -> tuple[str, float]:
    """Split a live marker label into (target, distance_mm).

    ``baseline`` -> (``baseline``, NaN); ``end`` -> (``end``, NaN) closes the open stretch;
    ``coin 50``, ``coin@50``, ``coin 50mm`` -> (``coin``, 50.0); ``distance_mm`` overrides.
    Raises :class:`InputError` for a target without a distance or a bad name.
    """
    text = " ".join(str(label).split())
    if not text:
        raise InputError("marker: empty label")
    if text.lower() in (BASELINE, END):
        return text.lower(), math.nan
    if distance_mm is not None:
        target, dist = text, float(distance_mm)
    else:
        m = _LABEL_RE.match(text)
        if not m:
            raise InputError(f"marker {text!r}: give 'baseline', 'end' or a target and its distance in mm, "
                             "e.g. 'coin 50'")
        target, dist = m.group("target").strip(), float(m.group("dist"))
    if "," in target or '"' in target:
        raise InputError(f"marker {text!r}: no commas or quotes in a target name")
    if not math.isfinite(dist) or dist < 0:
        raise InputError(f"marker {text!r}: distance must be >= 0 mm")
    return target, dist


class LiveMarkers:
    """The stretches marked so far and the open one, kept in markers.csv in ``run_dir``.

    Not thread-safe by itself: the capture session calls it under its lock.
    """

    def __init__(self, run_dir: str | Path):
        self.run_dir = Path(run_dir)
        self.closed: list[Marker] = []
        self._open: tuple[str, float, float] | None = None  # (target, distance_mm, start_s)
        self.last_write = time.monotonic()

    @property
    def is_open(self) -> bool:
        return self._open is not None

    def __len__(self) -> int:
        """Stretches marked, the open one included."""
        return len(self.closed) + (self._open is not None)

    def start(self, target: str, distance_mm: float, t_s: float) -> None:
        """Close the open stretch at ``t_s``; open a new one there unless ``target`` is ``end``."""
        self.close_open(t_s)
        if target != END:
            self._open = (target, distance_mm, t_s)

    def close_open(self, t_s: float) -> None:
        """End the open stretch at ``t_s`` (a stretch of no length is dropped)."""
        if self._open is None:
            return
        target, dist, start = self._open
        self._open = None
        if t_s > start:
            self.closed.append(Marker(start, t_s, target, math.nan if target == BASELINE else dist))

    def latest_s(self) -> float:
        """Where the latest stretch starts or ends (-inf before the first): a new marker never
        starts before it, so a marker timed in the past cannot swallow a later stretch."""
        if self._open is not None:
            return self._open[2]
        return self.closed[-1].end_s if self.closed else -math.inf

    def describe_open(self) -> str:
        """The open stretch for a live readout: ``baseline``, ``coin @ 50 mm``, or ''."""
        if self._open is None:
            return ""
        target, dist, _start = self._open
        return target if target == BASELINE else f"{target} @ {dist:g} mm"

    def write(self, now_s: float) -> None:
        """Rewrite markers.csv: the closed stretches and the open one up to ``now_s``."""
        rows = list(self.closed)
        if self._open is not None:
            target, dist, start = self._open
            if now_s > start:
                rows.append(Marker(start, now_s, target, math.nan if target == BASELINE else dist))
        if rows:
            write_markers_copy(self.run_dir, markers_to_csv(rows))
        self.last_write = time.monotonic()
