"""The capture engine on scripted block sources: timeline, faults, baseline, re-zero, markers.

Signals come from :class:`coilshift.logger.sources.synthetic.ToneSource` (continuous phase across
blocks and steps). Frequency tolerances are 10x the Cramer-Rao bound of one frame (Kay 1993,
Vol. 1, ex. 3.14: var >= 12 fs^2 / ((2 pi)^2 eta N (N^2 - 1)), eta = A^2 / (2 s^2)); the tracker
is documented to come close to the bound, and the faults tested here (a frame on the wrong
side of a gap or step, a wrong time offset) would show as errors of whole Hz.
"""

from __future__ import annotations

import json
import math
import threading
import time

import numpy as np
import pytest
import soundfile as sf

from coilshift.logger.runfolder.reader import read_log
from coilshift.logger.runfolder import flags as F
from coilshift.logger.capture.engine import CaptureEngine
from coilshift.logger.capture.markers import parse_marker_label
from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.markers import read_markers
from coilshift.logger.runfolder.folders import prepare_run_dir
from coilshift.logger.sources.synthetic import ToneSource
from coilshift.logger.tracking.tracker import FrameTracker, TrackerSettings

FS = 48000.0
BLOCK = 480  # 10 ms blocks, a typical soundcard callback size
SNR_DB = 40.0
AMP = 0.5


def crb_std_hz(fs: float, n: int, snr_db: float) -> float:
    # Kay 1993, Vol. 1, ex. 3.14 (real sinusoid in white Gaussian noise); snr = A^2 / (2 s^2)
    eta = 10 ** (snr_db / 10)
    return math.sqrt(12 * fs**2 / ((2 * math.pi) ** 2 * eta * n * (n**2 - 1)))


SETTINGS = TrackerSettings()
N = FrameTracker(FS, SETTINGS).frame_len
HOP = FrameTracker(FS, SETTINGS).hop_len
TOL_HZ = 10 * crb_std_hz(FS, N, SNR_DB)


def tone_blocks(script, seconds: float, seed: int = 3) -> list[np.ndarray]:
    src = ToneSource(script, seconds, FS, amplitude=AMP, snr_db=SNR_DB, seed=seed)
    return list(src.blocks(BLOCK))


def frame_times(first_sample: int, count: int) -> np.ndarray:
    # the tracker's documented frame centre: (first + (frame_len - 1)/2) / fs
    return (first_sample + np.arange(count) * HOP + (N - 1) / 2) / FS


def run_engine(src, tmp_path, **kw):
    run_dir = prepare_run_dir(tmp_path / "run")
    eng = CaptureEngine(src, run_dir, SETTINGS, **kw)
    eng.start()
    return eng, run_dir


def finish(eng, src, timeout=20.0):
    assert src.done.wait(timeout), "the scripted source did not finish"
    return eng.stop()


def test_clean_run_keeps_the_sample_timeline_and_the_step(scripted_source, tmp_path):
    blocks = tone_blocks([(0.0, 1000.0), (1.0, 1010.0)], 2.0)
    src = scripted_source(FS, [("block", b, False) for b in blocks])
    eng, run_dir = run_engine(src, tmp_path, baseline_s=0.5)
    summary = finish(eng, src)
    log = read_log(run_dir)
    t, f = log.t_s, log.freq_hz
    count = (len(blocks) * BLOCK - N) // HOP + 1
    np.testing.assert_allclose(t, frame_times(0, count), atol=1e-6)  # log.csv keeps 6 decimals
    before = t + N / 2 / FS < 1.0
    after = t - N / 2 / FS > 1.0
    assert np.all(np.abs(f[before] - 1000.0) < TOL_HZ)
    assert np.all(np.abs(f[after] - 1010.0) < TOL_HZ)
    assert abs(log.meta["baseline"]["freq_hz"] - 1000.0) < TOL_HZ
    assert np.all(np.abs(log.table["shift_hz"].to_numpy()[after] - 10.0) < 2 * TOL_HZ)
    assert not log.interrupted and log.meta["status"] == "complete"
    assert summary["overflows"] == summary["gaps"] == summary["device_errors"] == 0
    assert summary["samples"] == len(blocks) * BLOCK
    fl = log.table["flags"].to_numpy()
    assert (fl[before | after] == 0).all()
    # the frames that hold the 10 Hz step (about a bin) carry the edge flag and nothing else
    assert np.isin(fl[~(before | after)], [0, F.EDGE]).all() and (fl[~(before | after)] == F.EDGE).any()


def test_input_overflow_flags_the_frames_over_that_block(scripted_source, tmp_path):
    blocks = tone_blocks(1000.0, 1.5)
    k = 80  # the block starting at 0.8 s carries the overflow flag
    src = scripted_source(FS, [("block", b, i == k) for i, b in enumerate(blocks)])
    eng, run_dir = run_engine(src, tmp_path, baseline_s=0.3)
    summary = finish(eng, src)
    log = read_log(run_dir)
    flagged = (log.table["flags"].to_numpy() & F.OVERFLOW) != 0
    centre = log.t_s * FS
    lo, hi = k * BLOCK - 1, (k + 1) * BLOCK  # samples lost before the block, and the block
    expect = (centre + N / 2 > lo) & (centre - N / 2 < hi)
    assert flagged.any()
    np.testing.assert_array_equal(flagged, expect)
    assert summary["overflows"] == 1
    assert summary["faults"][0]["kind"] == "overflow"
    assert summary["faults"][0]["t_s"] == pytest.approx(k * BLOCK / FS)
    assert np.all(np.abs(log.freq_hz - 1000.0) < TOL_HZ)  # overflow is flagged, data kept


def test_queue_overrun_becomes_a_gap_row_at_the_right_time(scripted_source, tmp_path):
    blocks = tone_blocks(1000.0, 1.0)
    holder = {}

    def drained():  # later blocks wait for an empty queue, so only the pre-roll overruns
        while holder["eng"].snapshot().queue_fill > 0:
            time.sleep(0.001)

    steps = [s for b in blocks[10:] for s in (("call", drained), ("block", b, False))]
    # the device hands over 10 blocks before the worker runs; the queue holds 4: 6 are lost
    src = scripted_source(FS, steps, preroll=blocks[:10])
    run_dir = prepare_run_dir(tmp_path / "run")
    eng = holder["eng"] = CaptureEngine(src, run_dir, SETTINGS, baseline_s=0.2, queue_blocks=4, save_audio=True)
    eng.start()
    summary = finish(eng, src)
    lost = 6 * BLOCK
    assert summary["lost_samples"] == lost and summary["gaps"] == 1 and summary["queue_overruns"] == 1
    assert summary["dropped_blocks"] == 6
    log = read_log(run_dir)
    fl = log.table["flags"].to_numpy()
    gap_rows = np.flatnonzero(fl & F.GAP)
    assert len(gap_rows) == 1
    g = gap_rows[0]
    assert log.t_s[g] == pytest.approx((4 * BLOCK + lost / 2) / FS, abs=1e-6)
    assert math.isnan(log.freq_hz[g])
    # nothing before the gap (4 blocks < one frame); after it the tracker restarts at sample 10*BLOCK
    after = log.t_s[g + 1:]
    np.testing.assert_allclose(after, frame_times(10 * BLOCK, len(after)), atol=1e-6)
    assert np.all(np.abs(log.freq_hz[g + 1:] - 1000.0) < TOL_HZ)
    assert summary["faults"][0]["t_s"] == pytest.approx(4 * BLOCK / FS)
    # the saved audio keeps the timeline: zeros where samples were lost
    audio, rate = sf.read(run_dir / "audio.wav", dtype="float32")
    assert rate == FS and len(audio) == len(blocks) * BLOCK
    assert not audio[4 * BLOCK:10 * BLOCK].any()
    np.testing.assert_array_equal(audio[10 * BLOCK:], np.concatenate(blocks[10:]).astype(np.float32))


def test_device_error_ends_the_run_and_keeps_the_data(scripted_source, tmp_path):
    blocks = tone_blocks(1000.0, 1.23)  # not a whole number of the engine's 50 ms tracker batches
    src = scripted_source(FS, [("block", b, False) for b in blocks] + [("error", "USB device unplugged")])
    eng, run_dir = run_engine(src, tmp_path, baseline_s=0.3)
    assert eng.wait(10), "a device error must end the run by itself"
    summary = finish(eng, src)
    assert summary["status"] == "device_error" and "unplugged" in summary["message"]
    assert summary["device_errors"] == 1
    log = read_log(run_dir)
    assert log.interrupted  # run.json does not say complete
    assert log.meta["totals"]["ended_by"] == "device_error"
    fl = log.table["flags"].to_numpy()
    assert fl[-1] & F.GAP and log.t_s[-1] == pytest.approx(len(blocks) * BLOCK / FS, abs=1e-5)
    assert np.all(np.abs(log.freq_hz[:-1] - 1000.0) < TOL_HZ)
    assert len(log.t_s) - 1 == (len(blocks) * BLOCK - N) // HOP + 1


def test_a_source_that_stops_delivering_is_a_device_error(scripted_source, tmp_path):
    blocks = tone_blocks(1000.0, 0.5)
    src = scripted_source(FS, [("block", b, False) for b in blocks] + [("stall",)])
    eng, run_dir = run_engine(src, tmp_path, baseline_s=0.2, stall_timeout_s=0.3)
    assert eng.wait(10)
    summary = finish(eng, src)
    assert summary["status"] == "device_error" and "no audio" in summary["message"]
    assert read_log(run_dir).freq_hz[0] == pytest.approx(1000.0, abs=TOL_HZ)


def test_rezero_and_markers(scripted_source, tmp_path):
    blocks = tone_blocks([(0.0, 1000.0), (1.5, 1004.0)], 3.0)
    steps = []
    holder = {}
    for i, b in enumerate(blocks):
        n = i * BLOCK
        if n == 48000:  # 1.0 s
            steps.append(("call", lambda: holder["eng"].add_marker("coin 50")))
        if n == 96000:  # 2.0 s
            steps.append(("call", lambda: holder["eng"].rezero()))
        if n == 124800:  # 2.6 s
            steps.append(("call", lambda: holder["eng"].add_marker("end")))
        steps.append(("block", b, False))
    src = scripted_source(FS, steps, pace_s=0.0005)
    run_dir = prepare_run_dir(tmp_path / "run")
    eng = holder["eng"] = CaptureEngine(src, run_dir, SETTINGS, baseline_s=0.5)
    eng.start()
    summary = finish(eng, src)
    log = read_log(run_dir)
    t, shift = log.t_s, log.table["shift_hz"].to_numpy()
    base = log.meta["baseline"]
    assert base["freq_hz"] == pytest.approx(1004.0, abs=TOL_HZ)
    assert base["reason"] == "rezero" and base["window_start_s"] == pytest.approx(2.0)
    assert base["history"][0]["freq_hz"] == pytest.approx(1000.0, abs=TOL_HZ)
    settled = (t - N / 2 / FS > 1.5) & (t < 2.0)
    assert settled.any() and np.all(np.abs(shift[settled] - 4.0) < 2 * TOL_HZ)  # old baseline
    assert np.all(np.abs(shift[t >= 2.0]) < 2 * TOL_HZ)  # rows of the re-zero window onwards
    assert len(summary["baselines"]) == 2
    markers = read_markers(run_dir / "markers.csv")
    assert [(m.start_s, m.end_s, m.target, m.distance_mm) for m in markers] == [(1.0, 2.6, "coin", 50.0)]
    marked = t[(log.table["flags"].to_numpy() & F.MARKER) != 0]
    # the first frame whose centre is at or after each marker
    assert marked == pytest.approx([t[t >= 1.0][0], t[t >= 2.6][0]])


def test_duration_limit_and_run_json(scripted_source, tmp_path):
    blocks = tone_blocks(1000.0, 1.0)
    src = scripted_source(FS, [("block", b, False) for b in blocks])
    eng, run_dir = run_engine(src, tmp_path, baseline_s=0.2, max_seconds=0.5)
    assert eng.wait(10)
    summary = finish(eng, src)
    meta = json.loads((run_dir / "run.json").read_text())
    assert meta["status"] == "complete" and meta["totals"]["ended_by"] == "duration"
    assert meta["totals"]["duration_s"] == pytest.approx(0.5)
    assert meta["source"]["kind"] == "scripted test source"
    assert read_log(run_dir).t_s[-1] < 0.5
    assert summary["rows"] == (24000 - N) // HOP + 1


def test_no_tone_in_the_baseline_window_leaves_the_baseline_unset(scripted_source, tmp_path):
    rng = np.random.default_rng(5)
    blocks = [0.01 * rng.standard_normal(BLOCK) for _ in range(60)]
    src = scripted_source(FS, [("block", b, False) for b in blocks])
    eng, run_dir = run_engine(src, tmp_path, baseline_s=0.2)
    summary = finish(eng, src)
    log = read_log(run_dir)
    assert "freq_hz" not in log.meta["baseline"] and summary["rows"] > 0
    assert "no usable tone" in summary["baselines"][0]["note"]


@pytest.mark.parametrize("label, expect", [
    ("baseline", ("baseline", None)),
    ("coin 50", ("coin", 50.0)),
    ("steel ball@12.5", ("steel ball", 12.5)),
    ("nail 30mm", ("nail", 30.0)),
    ("END", ("end", None)),
])
def test_marker_labels(label, expect):
    target, dist = parse_marker_label(label)
    assert target == expect[0]
    assert (math.isnan(dist) if expect[1] is None else dist == expect[1])


@pytest.mark.parametrize("label", ["", "coin", "a,b 5", "coin -5"])
def test_bad_marker_labels_are_refused(label):
    with pytest.raises(InputError):
        parse_marker_label(label)


# --------------------------------------------------------------------------- round two

class _HungDriverSource:
    """A device that delivers some audio, then nothing; its close() never returns (a hung driver)."""

    def __init__(self, blocks):
        self.sample_rate_hz = FS
        self.blocks = blocks
        self.release = threading.Event()  # set at the end of the test so the thread can go

    def open(self, deliver, fail):
        for b in self.blocks:
            deliver(np.asarray(b, dtype=np.float32), 0.0, False)

    def close(self):
        self.release.wait()

    def describe(self):
        return {"kind": "hung driver"}


def test_a_stream_that_will_not_close_is_abandoned_and_the_run_ends(tmp_path):
    src = _HungDriverSource(tone_blocks(1000.0, 0.5))
    run_dir = prepare_run_dir(tmp_path / "run")
    eng = CaptureEngine(src, run_dir, SETTINGS, baseline_s=0.2, stall_timeout_s=0.3, close_timeout_s=0.5)
    try:
        eng.start()
        assert eng.wait(15), "the stalled input was not noticed"
        t0 = time.monotonic()
        summary = eng.stop()
        waited = time.monotonic() - t0
    finally:
        src.release.set()
    assert waited < 0.5 + 1.0  # the close timeout, plus the worker's last rows
    assert summary["status"] == "device_error" and "abandoned" in summary["stream_close"]
    meta = json.loads((run_dir / "run.json").read_text())
    assert meta["status"] == "device_error" and "abandoned" in meta["totals"]["stream_close"]
    assert len(read_log(run_dir).table) > 0


def test_soundcard_close_aborts_then_abandons_a_hung_stream(monkeypatch):
    import atexit

    from coilshift.logger.sources import soundcard

    class Stuck:
        calls = []

        def stop(self):
            self.calls.append("stop")
            threading.Event().wait()

        def abort(self):
            self.calls.append("abort")
            threading.Event().wait()

        def close(self):
            self.calls.append("close")

    unregistered = []
    monkeypatch.setattr(atexit, "unregister", lambda fn: unregistered.append(fn))
    monkeypatch.setattr(soundcard, "CLOSE_TIMEOUT_S", 0.2)
    src = object.__new__(soundcard.SoundcardSource)
    src._stream, src._closing, src.abandoned = Stuck(), False, False
    t0 = time.monotonic()
    src.close()
    assert time.monotonic() - t0 < 1.0
    assert Stuck.calls == ["stop", "abort"] and src.abandoned
    assert unregistered, "PortAudio's exit handler would hang on the abandoned stream"


@pytest.mark.parametrize("rezero_every_s", [None, 0.3], ids=["start-window", "re-zero-windows"])
def test_rows_reach_the_disk_while_a_baseline_window_is_open(scripted_source, tmp_path, rezero_every_s):
    # a window far longer than the run (or re-zeroed before it can close): before, every row of
    # it waited in memory and a crash lost them all; now they are on disk within the append interval
    blocks = tone_blocks(1000.0, 3.0)
    holder, seen = {}, []
    steps = []
    log = tmp_path / "run" / "log.csv"
    for i, b in enumerate(blocks):
        n = i * BLOCK
        if rezero_every_s and n and n % int(rezero_every_s * FS) == 0:
            steps.append(("call", lambda: holder["eng"].rezero()))
        if n == int(2.0 * FS):  # 2 s into the run: what is on disk now?
            steps.append(("call", lambda: (time.sleep(0.6), seen.append(log.read_text().count("\n") - 1))))
        steps.append(("block", b, False))
    src = scripted_source(FS, steps, pace_s=0.002)
    run_dir = prepare_run_dir(tmp_path / "run")
    eng = holder["eng"] = CaptureEngine(src, run_dir, SETTINGS, baseline_s=60.0)
    eng.start()
    finish(eng, src)
    frames_by_2s = int((2.0 * FS - N) // HOP) + 1
    # the rows of 2 s of audio, less what the last append interval (0.25 s) and batch may hold
    assert seen[0] >= frames_by_2s - int(0.35 * FS / HOP)
    rows = read_log(run_dir)
    assert len(rows.table) == (len(blocks) * BLOCK - N) // HOP + 1
