"""The log's utc column, formed for all frames at once, against the standard library's datetime arithmetic."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from coilshift.logger.runfolder.columns import COLUMNS, RowContext, cells, utc_iso
from coilshift.logger.runfolder.frames import FrameTable

UTC_COLUMN = next(c for c in COLUMNS if c.name == "utc")


def _by_datetime(start, t_s):
    # independent computation: Python's datetime + timedelta, frame by frame, then utc_iso
    return [utc_iso(start + dt.timedelta(seconds=float(t))) for t in t_s]


@pytest.mark.parametrize("start", [
    dt.datetime(2026, 12, 1, 18, 1, 8, 123456, tzinfo=dt.timezone.utc),
    # a local start just before a day, month and year change once converted to UTC
    dt.datetime(2026, 1, 1, 0, 59, 59, 999500, tzinfo=dt.timezone(dt.timedelta(hours=1))),
    dt.datetime(2028, 2, 29, 23, 59, 59, 999999, tzinfo=dt.timezone(dt.timedelta(hours=-5, minutes=-30))),
])
def test_utc_cells_match_datetime_arithmetic(start):
    rng = np.random.default_rng(15)
    t_s = np.concatenate([
        0.0425 + 0.02 * np.arange(3000),  # the tracker's frame centres
        rng.uniform(0.0, 3e6, 3000),  # any time within a month
        # near millisecond and microsecond boundaries, where rounding and truncation differ
        np.arange(1, 2001) * 1e-3 - 4e-7, np.arange(1, 2001) * 1e-3 + 4e-7, np.arange(2000) * 5e-7,
    ])
    frames = FrameTable(t_s, np.full(t_s.size, 1000.0), np.zeros(t_s.size), np.zeros(t_s.size))
    got = cells(UTC_COLUMN, frames, RowContext(start, 1000.0))
    assert got == _by_datetime(start, t_s)
