"""The live side: events written to events.csv as they end, and the engine hook."""

import csv
import types

import numpy as np

from coilshift.logger.events.detector import DetectorSettings
from coilshift.logger.events.live import EVENT_COLUMNS, EVENTS_FILE, LiveEvents, with_live_events
from coilshift.logger.runfolder.frames import FrameTable


def _frames(seed=0):
    rng = np.random.default_rng(seed)
    t = (np.arange(6000) + 0.5) * 0.02
    y = 15000.0 + 0.004 * rng.standard_normal(t.size)
    for t0, a in ((50.0, 0.1), (80.0, -0.2), (105.0, 0.05)):
        y += a * np.exp(-0.5 * ((t - t0) / 0.3) ** 2)
    z = np.zeros(t.size)
    return FrameTable(t, y, z - 6.0, z + 60.0)


def test_events_are_written_whole_as_they_end(tmp_path):
    ft = _frames()
    live = LiveEvents(tmp_path)
    found = []
    for i in range(0, len(ft), 13):  # small blocks, as the capture worker hands them over
        found += live.push(ft.select(slice(i, i + 13)))
        if found:
            rows = list(csv.DictReader((tmp_path / EVENTS_FILE).read_text().splitlines()))
            assert len(rows) == len(found)  # on disk as soon as it is returned
    found += live.finish()
    rows = list(csv.DictReader((tmp_path / EVENTS_FILE).read_text().splitlines()))
    assert tuple(rows[0].keys()) == EVENT_COLUMNS
    assert [r["class"] for r in rows] == ["non-ferrous", "ferrous", "non-ferrous"]
    assert [round(float(r["peak_t_s"])) for r in rows] == [50, 80, 105]
    assert live.lines()[-1].endswith("non-ferrous") and "3 found" in live.status()


def test_a_noiseless_tone_gives_no_events(tmp_path):
    t = (np.arange(4000) + 0.5) * 0.02
    ft = FrameTable(t, np.full(t.size, 1000.0) + 1e-9 * np.sin(t), np.zeros(t.size), np.zeros(t.size))
    live = LiveEvents(tmp_path)
    assert live.push(ft) + live.finish() == []
    assert not (tmp_path / EVENTS_FILE).exists()


def test_engine_hook_wraps_the_feed_and_the_snapshots(tmp_path):
    seen, snaps = [], []
    feed = types.SimpleNamespace(emit=seen.append, finish=lambda: seen.append("finished"))
    session = types.SimpleNamespace(snapshot=lambda *a: types.SimpleNamespace(events=(), events_status=""))
    engine = types.SimpleNamespace(events=DetectorSettings(), run_dir=tmp_path, session=session)
    assert with_live_events(engine, feed) is feed
    ft = _frames()
    feed.emit(ft)
    feed.finish()
    assert seen[0] is ft and seen[-1] == "finished"
    assert len(engine.events.found) == 3
    snap = engine.session.snapshot(1.0, 0.0)
    assert len(snap.events) == 3 and "found" in snap.events_status
    off = types.SimpleNamespace(events=None, run_dir=tmp_path, session=session)
    assert with_live_events(off, feed) is feed and off.events is None
