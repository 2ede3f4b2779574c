"""The column table drives the frame table, the writer and the reader (one owner of the format)."""

from __future__ import annotations

import json

import numpy as np
import pytest

from coilshift.logger.runfolder import columns
from coilshift.logger.runfolder.folders import prepare_run_dir
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.reader import read_log
from coilshift.logger.runfolder.writer import RunWriter


def _table(n=4):
    t = 0.02 * np.arange(1, n + 1)
    return FrameTable(t, 1000.0 + t, np.full(n, -6.0), np.full(n, 40.0), np.array([0, 2, 0, 4][:n]))


def test_frame_fields_are_the_frame_columns_in_order():
    names = [c.name for c in columns.FRAME_COLUMNS]
    assert names[:5] == ["t_s", "freq_hz", "amp_dbfs", "snr_db", "flags"]
    assert list(_table().columns()) == names


def test_positional_and_keyword_construction_agree():
    a = _table()
    b = FrameTable(t_s=a.t_s, freq_hz=a.freq_hz, amp_dbfs=a.amp_dbfs, snr_db=a.snr_db, flags=a.flags)
    for name, value in a.columns().items():
        np.testing.assert_array_equal(getattr(b, name), value)
    assert FrameTable([0.1], [1.0], [2.0], [3.0]).flags.tolist() == [0]  # flags may be left out
    with pytest.raises(TypeError):
        FrameTable([0.1], [1.0], [2.0])  # snr_db is required
    with pytest.raises(TypeError):
        FrameTable([0.1], [1.0], [2.0], [3.0], no_such_column=[1.0])
    with pytest.raises(ValueError):
        FrameTable([0.1, 0.2], [1.0], [2.0], [3.0])


def test_replace_changes_what_is_given_and_shares_nothing_else():
    a = _table()
    b = a.replace(t_s=a.t_s + 1.0)
    np.testing.assert_array_equal(b.t_s, a.t_s + 1.0)
    b.flags[0] = 99
    b.freq_hz[0] = -1.0
    assert a.flags[0] == 0 and a.freq_hz[0] == pytest.approx(1000.02)
    with pytest.raises(TypeError):
        a.replace(freq=1.0)


def test_select_concat_and_blank_keep_every_column():
    a = _table()
    both = FrameTable.concat([a.select(slice(0, 2)), FrameTable.empty(), a.select(slice(2, None))])
    for name, value in a.columns().items():
        np.testing.assert_array_equal(getattr(both, name), value)
    gap = FrameTable.blank([0.5], [16])
    assert gap.t_s.tolist() == [0.5] and gap.flags.tolist() == [16] and np.isnan(gap.freq_hz[0])


def test_writer_and_reader_follow_the_table(tmp_path):
    run = prepare_run_dir(tmp_path / "run")
    w = RunWriter(run, {"start_utc": "2026-03-01T12:00:00.000Z", "baseline": {"freq_hz": 1000.0, "method": "t"}})
    w.append(_table())
    w.close()
    lines = (run / "log.csv").read_text().splitlines()
    assert lines[0] == ",".join(c.name for c in columns.COLUMNS)
    # written by hand from the table: 6 decimals for t_s/freq/shift, 2 for amp/snr, words for flags
    assert lines[2] == "0.040000,2026-03-01T12:00:00.040Z,1000.040000,0.040000,-6.00,40.00,low_snr"
    meta = json.loads((run / "run.json").read_text())
    assert meta["columns"] == list(columns.LOG_COLUMNS)
    assert meta["units"] == {c.name: c.unit for c in columns.COLUMNS}
    log = read_log(run)
    assert {c: str(log.table[c].dtype) for c in log.table} == {
        **{c: "float64" for c in columns.NUMERIC}, **{c: "int64" for c in columns.FLAG_COLUMNS}}


def test_units_override_keeps_the_order_and_refuses_unknown_columns():
    u = columns.units(amp_dbfs="dB re 1 V peak")
    assert list(u) == list(columns.LOG_COLUMNS) and u["amp_dbfs"] == "dB re 1 V peak"
    with pytest.raises(ValueError):
        columns.units(amp_db="x")
