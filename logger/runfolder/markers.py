"""Markers: labelled stretches of a run (target at a distance, or a target-free baseline).

File format ``markers.csv``: header ``start_s,end_s,target,distance_mm``; one row a stretch;
``target`` is ``baseline`` for target-free stretches (``distance_mm`` empty there).
Times are seconds from the start of the recording, like ``t_s`` in log.csv.
"""

from __future__ import annotations

import csv
import io
import math
import os
from dataclasses import dataclass

from coilshift.logger.errors import InputError
from coilshift.logger.textfile import read_text

COLUMNS = ("start_s", "end_s", "target", "distance_mm")
BASELINE = "baseline"
#: largest times and distances a marker may give (a damaged cell, not a bench, beyond them)
MAX_TIME_S = 1e10
MAX_DISTANCE_MM = 1e6


@dataclass(frozen=True)
class Marker:
    start_s: float
    end_s: float
    target: str
    distance_mm: float  # NaN for baseline rows

    @property
    def is_baseline(self) -> bool:
        return self.target == BASELINE


def parse_markers(text: str, name: str = "markers") -> list[Marker]:
    """Parse and validate markers CSV text; raise :class:`InputError` naming ``name`` and the row."""
    try:
        # newline=None: any line ending (\n, \r\n, a lone \r) ends a row, as when reading a file
        rows = list(csv.reader(io.StringIO(text, newline=None)))
    except csv.Error as exc:
        raise InputError(f"{name}: not a readable CSV ({exc})") from None
    rows = [r for r in rows if r and any(c.strip() for c in r) and not r[0].lstrip().startswith("#")]
    if not rows:
        raise InputError(f"{name}: no markers (empty file)")
    header = [c.strip() for c in rows[0]]
    missing = [c for c in COLUMNS if c not in header]
    if missing:
        raise InputError(f"{name}: missing column(s) {', '.join(missing)}; expected header {','.join(COLUMNS)}")
    idx = {c: header.index(c) for c in COLUMNS}
    out: list[Marker] = []
    for lineno, r in enumerate(rows[1:], start=2):
        try:
            cells = {c: (r[idx[c]].strip() if idx[c] < len(r) else "") for c in COLUMNS}
            start, end = float(cells["start_s"]), float(cells["end_s"])
        except ValueError:
            raise InputError(f"{name}: row {lineno}: start_s and end_s must be numbers") from None
        target = cells["target"]
        if not target:
            raise InputError(f"{name}: row {lineno}: empty target name")
        if not target.isprintable():  # a damaged cell; it would reach reports and terminals raw
            raise InputError(f"{name}: row {lineno}: control characters in the target name {target[:20]!r}")
        if not (math.isfinite(start) and math.isfinite(end)) or start < 0 or end <= start:
            raise InputError(f"{name}: row {lineno}: need 0 <= start_s < end_s, got {start}, {end}")
        if end > MAX_TIME_S:
            raise InputError(f"{name}: row {lineno}: end_s {end:g} is beyond any run ({MAX_TIME_S:g} s)")
        if target == BASELINE:
            dist = math.nan
        else:
            try:
                dist = float(cells["distance_mm"])
            except ValueError:
                raise InputError(f"{name}: row {lineno}: distance_mm must be a number for target {target!r}") from None
            if not math.isfinite(dist) or dist < 0:
                raise InputError(f"{name}: row {lineno}: distance_mm must be >= 0, got {cells['distance_mm']}")
            if dist > MAX_DISTANCE_MM:
                raise InputError(f"{name}: row {lineno}: distance_mm {dist:g} is beyond any bench "
                                 f"(at most {MAX_DISTANCE_MM:g} mm)")
        out.append(Marker(start, end, target, dist))
    if not out:
        raise InputError(f"{name}: header only, no markers")
    ordered = sorted(out, key=lambda m: m.start_s)
    for a, b in zip(ordered, ordered[1:]):
        if b.start_s < a.end_s:
            raise InputError(f"{name}: markers overlap ({a.target} {a.start_s}-{a.end_s} s and "
                             f"{b.target} {b.start_s}-{b.end_s} s)")
    return ordered


def read_markers(path: str | os.PathLike) -> list[Marker]:
    """Read and validate a markers CSV file."""
    return parse_markers(read_text(path, "markers file"), str(path))


def markers_to_csv(markers: list[Marker]) -> str:
    """Serialise markers in the canonical format."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(COLUMNS)
    for m in markers:
        w.writerow([f"{m.start_s:.6f}", f"{m.end_s:.6f}", m.target,
                    "" if m.is_baseline else f"{m.distance_mm:g}"])
    return buf.getvalue()


def check_within(markers: list[Marker], duration_s: float, name: str = "markers") -> None:
    """Refuse markers that end after the recording does."""
    for m in markers:
        if m.end_s > duration_s + 1e-9:
            raise InputError(f"{name}: marker {m.target} {m.start_s:g}-{m.end_s:g} s ends after the "
                             f"recording ({duration_s:.3f} s)")
