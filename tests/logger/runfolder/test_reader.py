"""Reading logs back: run folders, bare CSV exports, interrupted files, bad files."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from coilshift.logger.runfolder.reader import read_log
from coilshift.logger.runfolder import flags
from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.frames import FrameTable
from coilshift.logger.runfolder.folders import prepare_run_dir
from coilshift.logger.runfolder.writer import RunWriter

START = "2026-03-01T12:00:00.000Z"


def _write(run_dir, frames, baseline=1000.0):
    run = prepare_run_dir(run_dir)
    with RunWriter(run, {"start_utc": START, "baseline": {"freq_hz": baseline, "method": "test"}}) as w:
        w.append(frames)
    return run


freqs = st.floats(1.0, 1e6, allow_nan=False) | st.just(float("nan"))


@settings(max_examples=40, deadline=None)
@given(data=st.data())
def test_any_valid_log_reads_back_equal(tmp_path_factory, data):
    n = data.draw(st.integers(1, 40))
    steps = data.draw(arrays(float, n, elements=st.floats(1e-3, 10.0)))
    t = np.cumsum(steps)
    f = data.draw(arrays(float, n, elements=freqs))
    a = data.draw(arrays(float, n, elements=st.floats(-150, 0)))
    s = data.draw(arrays(float, n, elements=st.floats(-20, 120)))
    fl = data.draw(arrays(np.int64, n, elements=st.integers(0, 127)))
    run = _write(tmp_path_factory.mktemp("r") / "run", FrameTable(t, f, a, s, fl))
    log = read_log(run)
    assert not log.interrupted
    # the file keeps 6 decimals for t_s and freq_hz, 2 for amp and SNR
    np.testing.assert_allclose(log.t_s, t, atol=5e-7, rtol=0)
    np.testing.assert_allclose(log.freq_hz, f, atol=5e-7, rtol=0, equal_nan=True)
    np.testing.assert_allclose(log.table["amp_dbfs"], a, atol=5e-3)
    np.testing.assert_allclose(log.table["snr_db"], s, atol=5e-3)
    np.testing.assert_array_equal(log.table["flags"].to_numpy(), fl)


def test_foreign_csv_with_only_time_and_frequency(tmp_path):
    p = tmp_path / "counter.csv"
    p.write_text("t_s,freq_hz,comment\n0,1000.5,a\n1,1000.7,b\n2,1000.6,c\n")
    log = read_log(p)
    assert log.meta == {} and log.markers == []
    np.testing.assert_allclose(log.freq_hz, [1000.5, 1000.7, 1000.6])
    assert log.baseline_hz == pytest.approx(1000.6)  # median of the first 2 s


def test_incomplete_last_line_dropped_and_reported(tmp_path):
    run = _write(tmp_path / "run", FrameTable([0.1, 0.2, 0.3], [1000, 1001, 1002], [-6] * 3, [40] * 3))
    with open(run / "log.csv", "a") as fh:
        fh.write("0.4,2026-03-01T12:00:00.4")
    log = read_log(run)
    assert log.interrupted and len(log.table) == 3


def test_usable_mask_excludes_gaps_and_no_tone(tmp_path):
    fl = [0, flags.GAP, flags.NO_TONE, flags.CLIPPED]
    run = _write(tmp_path / "run", FrameTable([0.1, 0.2, 0.3, 0.4], [1000, 1001, np.nan, 1003], [-6] * 4, [40] * 4, fl))
    assert read_log(run).usable().tolist() == [True, False, False, True]


@pytest.mark.parametrize("content, why", [
    ("", "empty file"),
    ("time,volts\n0,1\n", "no t_s or freq_hz column"),
    ("t_s,amp\n0,1\n", "no freq_hz column"),
    ("t_s,freq_hz\n", "no rows"),
    ("t_s,freq_hz\n0,1000\n1,abc\n", "non-numeric"),
    ("t_s,freq_hz\n0,1000\n0,1001\n", "does not increase"),
    ("t_s,freq_hz\n1,1000\n0,1001\n", "does not increase"),
    ("t_s,freq_hz\n0,1000\n1,inf\n", "infinite"),
])
def test_bad_logs_give_one_line(tmp_path, content, why):
    p = tmp_path / "log.csv"
    p.write_text(content)
    with pytest.raises(InputError) as exc:
        read_log(p)
    assert why in str(exc.value) and "\n" not in str(exc.value)


def test_missing_path_and_folder_without_log(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        read_log(tmp_path / "nothing")
    with pytest.raises(InputError, match="not a run folder"):
        read_log(tmp_path)


def test_reader_never_modifies_the_run(tmp_path):
    run = _write(tmp_path / "run", FrameTable([0.1, 0.2], [1000, 1001], [-6] * 2, [40] * 2))
    before = {p.name: p.read_bytes() for p in run.iterdir()}
    read_log(run)
    assert {p.name: p.read_bytes() for p in run.iterdir()} == before


# --------------------------------------------------------------------------- round two

PLAIN = "t_s,freq_hz,shift_hz\n0.02,1000.25,0.25\n0.04,1000.5,0.5\n0.06,999.75,-0.25\n"


@pytest.mark.parametrize("text", [
    '"t_s","freq_hz","shift_hz"\n0.02,1000.25,0.25\n0.04,1000.5,0.5\n0.06,999.75,-0.25\n',  # quoted names
    't_s;freq_hz;shift_hz\n0,02;1000,25;0,25\n0,04;1000,5;0,5\n0,06;999,75;-0,25\n',  # ';' and decimal ','
    't_s;freq_hz;shift_hz\n0.02;1000.25;0.25\n0.04;1000.5;0.5\n0.06;999.75;-0.25\n',  # ';' and '.'
    '"t_s";"freq_hz";"shift_hz"\r\n"0,02";"1000,25";"0,25"\r\n"0,04";"1000,5";"0,5"\r\n"0,06";"999,75";"-0,25"\r\n',
    't_s\tfreq_hz\tshift_hz\n0.02\t1000.25\t0.25\n0.04\t1000.5\t0.5\n0.06\t999.75\t-0.25\n',  # tab-separated
    '\ufeff t_s , freq_hz , shift_hz\n0.02, 1000.25, 0.25\n0.04, 1000.5, 0.5\n0.06, 999.75, -0.25\n',  # BOM, spaces
])
def test_a_log_saved_by_a_spreadsheet_reads_like_the_plain_one(tmp_path, text):
    plain, saved = tmp_path / "plain.csv", tmp_path / "saved.csv"
    plain.write_text(PLAIN)
    saved.write_bytes(text.encode("utf-8"))
    a, b = read_log(plain), read_log(saved)
    for col in ("t_s", "freq_hz", "shift_hz"):
        np.testing.assert_array_equal(b.table[col].to_numpy(), a.table[col].to_numpy())


def _window_run(run_dir, finished: bool):
    """A live-style run: rows of two baseline windows written before their baselines were known."""
    from coilshift.logger.pipeline.stage import LogFeed

    run = prepare_run_dir(run_dir)
    w = RunWriter(run, {"start_utc": START, "baseline": {"method": "pending", "window_s": 1.0, "pending": True}})
    feed = LogFeed(w, window_s=1.0)
    t = np.round(np.arange(1, 301) * 0.02, 6)
    f = np.where(t < 3.0, 1000.0, 1004.0) + 0.001 * np.sin(t)
    frames = FrameTable(t, f, np.full(t.size, -6.0), np.full(t.size, 40.0))
    for i in range(0, 149, 10):  # 0 .. 2.98 s: the start window closes after 1 s
        feed.emit(frames.select(slice(i, min(i + 10, 149))))
        feed.flush()
    feed.rezero(2.99)  # (a re-zero comes after the frames already tracked)
    for i in range(149, 300, 10):  # the re-zero window 2.99 .. 3.99 s, then rows after it
        feed.emit(frames.select(slice(i, i + 10)))
        feed.flush()
    if finished:
        feed.finish()
        w.close({"baselines": feed.baselines})
    else:  # killed: run.json as it was last written, the log without its end
        w._fh.close()
    return run, t, f


@pytest.mark.parametrize("finished", [True, False], ids=["complete", "crashed"])
def test_rows_of_a_baseline_window_get_their_shift_from_run_json(tmp_path, finished):
    run, t, f = _window_run(tmp_path / "run", finished)
    raw = np.genfromtxt(run / "log.csv", delimiter=",", names=True, dtype=None, encoding="utf-8")
    in_window = ((t >= 0) & (t <= 1.0)) | ((t >= 2.99) & (t <= 3.99))
    assert np.isnan(raw["shift_hz"][in_window]).all()  # written before the baseline was known
    assert not np.isnan(raw["shift_hz"][~in_window]).any()
    log = read_log(run)
    # the reference: each row's frequency minus the median of its own window (numpy, by hand)
    first = np.median(f[t <= 1.0])
    second = np.median(f[(t >= 2.99) & (t <= 3.99)])
    want = np.where(t < 2.99, f - first, f - second)
    np.testing.assert_allclose(log.table["shift_hz"].to_numpy(), want, atol=1e-6)  # 6 decimals in the file


@pytest.mark.parametrize("header", ["t_s,freq\rhz", "t_s\r,freq_hz", "t_s,\"freq_hz"])
def test_a_header_that_is_not_one_csv_line_is_refused_in_one_line(tmp_path, header):
    # a carriage return inside the header (a file cut and pasted between systems) or an unclosed
    # quote: Python's csv module refuses the line; the reader says so as an InputError
    (tmp_path / "log.csv").write_bytes((header + "\n0.0,1000\n0.02,1000\n").encode())
    with pytest.raises(InputError, match="log.csv"):
        read_log(tmp_path)


def test_windows_line_endings_are_read(tmp_path):
    # CRLF, as a spreadsheet on Windows saves a CSV (RFC 4180 line ends)
    (tmp_path / "log.csv").write_bytes(b"t_s,freq_hz\r\n0.0,1000.5\r\n0.02,1000.25\r\n")
    log = read_log(tmp_path)
    np.testing.assert_array_equal(log.freq_hz, [1000.5, 1000.25])
