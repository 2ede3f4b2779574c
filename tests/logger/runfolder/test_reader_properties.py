"""Property tests for the capture-side readers and the tracker (hypothesis).

* Random bytes, and random mutations (flipped bytes, cuts, insertions) of a valid WAV, scope CSV
  export and markers file, never make a reader fail with anything but ``InputError``: opening
  and streaming every block either works or is refused with one line naming the file.
* The tracker, fed any finite signal, never raises; it returns one row per hop with arrays of
  one length, times increasing by the hop, and every frame without a usable frequency flagged.

(The file is not called test_properties.py because tests/analysis has one of that name and the
test folders are not packages.)
"""

from __future__ import annotations

import io
import wave

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from coilshift.logger.runfolder import flags
from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.markers import parse_markers, read_markers
from coilshift.logger.sources import open_source
from coilshift.logger.tracking.tracker import TrackerSettings, track_array
from mutations import mutated

FS = 8000
SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])


def _valid_wav() -> bytes:
    x = 0.4 * np.sin(2 * np.pi * 1000 * np.arange(FS // 4) / FS)
    buf = io.BytesIO()
    with wave.open(buf, "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(FS)
        w.writeframes(np.round(x * 32767).astype("<i2").tobytes())
    return buf.getvalue()


def _valid_scope_csv() -> bytes:
    t = np.arange(800) / FS
    rows = "".join(f"{a:.7f},{b:.5f}\n" for a, b in zip(t, 0.5 * np.sin(2 * np.pi * 1000 * t)))
    return ("Model,DSO-X\nSample Interval,1.25e-4\nTime (s),CH1 (V)\n" + rows).encode()


VALID_MARKERS = b"start_s,end_s,target,distance_mm\n0,1,baseline,\n1,2,coin,10\n2,3,baseline,\n"
WAV = _valid_wav()
CSV = _valid_scope_csv()


def _consume(path) -> None:
    """Open a recording and stream all of it, as track does."""
    src = open_source(path)
    for block in src.blocks(4096):
        assert block.ndim == 1 and np.all(np.isfinite(block))


def _only_input_errors(fn, path, data: bytes) -> None:
    path.write_bytes(data)
    try:
        fn(path)
    except InputError as exc:
        line = str(exc)
        assert "\n" not in line and path.name in line, line


@pytest.fixture(scope="module")
def work(tmp_path_factory):
    return tmp_path_factory.mktemp("props")


@SETTINGS
@given(data=st.binary(max_size=2048), ext=st.sampled_from([".wav", ".flac", ".csv", ".txt", ".dat", ""]))
def test_random_bytes_give_input_error_only(work, data, ext):
    _only_input_errors(_consume, work / f"random{ext}", data)


@SETTINGS
@given(data=mutated(WAV))
def test_mutated_wav_gives_input_error_only(work, data):
    _only_input_errors(_consume, work / "mutated.wav", data)


@SETTINGS
@given(data=mutated(CSV))
def test_mutated_scope_csv_gives_input_error_only(work, data):
    _only_input_errors(_consume, work / "mutated.csv", data)


@SETTINGS
@given(data=mutated(VALID_MARKERS) | st.binary(max_size=300))
def test_mutated_markers_give_input_error_only(work, data):
    def check(path):
        ms = read_markers(path)
        # whatever is accepted is a valid set: ordered, non-overlapping, 0 <= start < end
        for a, b in zip(ms, ms[1:]):
            assert a.end_s <= b.start_s
        assert all(0 <= m.start_s < m.end_s for m in ms)

    _only_input_errors(check, work / "markers.csv", data)


@SETTINGS
@given(text=st.text(max_size=200))
def test_marker_text_gives_input_error_only(text):
    try:
        parse_markers(text, "m.csv")
    except InputError as exc:
        assert str(exc).startswith("m.csv")


def test_valid_originals_are_accepted(work):
    # the mutation tests start from files that do read (otherwise they prove little)
    for name, data in (("ok.wav", WAV), ("ok.csv", CSV)):
        (work / name).write_bytes(data)
        _consume(work / name)
    (work / "ok_markers.csv").write_bytes(VALID_MARKERS)
    assert len(read_markers(work / "ok_markers.csv")) == 3


finite = st.floats(-1.0, 1.0, allow_nan=False, allow_infinity=False, width=32)


@st.composite
def signals(draw):
    """Arbitrary finite signals: random samples, a tone with junk, constants, or impulses."""
    n = draw(st.integers(700, 3000))
    kind = draw(st.sampled_from(["random", "tone", "constant", "impulses"]))
    if kind == "random":
        return draw(arrays(np.float64, n, elements=finite))
    if kind == "constant":
        return np.full(n, draw(finite))
    x = np.zeros(n)
    if kind == "tone":
        f = draw(st.floats(10.0, FS / 2 - 10.0))
        x = draw(st.floats(1e-6, 1.0)) * np.sin(2 * np.pi * f * np.arange(n) / FS)
    idx = draw(st.lists(st.integers(0, n - 1), max_size=20))
    x[idx] = draw(finite)
    return x


@settings(max_examples=30, deadline=None)
@given(x=signals(), band=st.none() | st.just((500.0, 1500.0)))
def test_tracker_never_raises_and_flags_what_it_cannot_measure(x, band):
    s = TrackerSettings(band_hz=band)
    fr = track_array(x, FS, s)
    n = len(fr)
    for name in ("t_s", "freq_hz", "amp_dbfs", "snr_db", "flags"):
        assert len(getattr(fr, name)) == n
    frame = int(round(s.frame_ms * 1e-3 * FS))
    hop = int(round(s.hop_ms * 1e-3 * FS))
    assert n >= 1 + (len(x) - frame) // hop - 1  # one row a hop once a frame is full
    if n > 1:
        assert np.allclose(np.diff(fr.t_s), hop / FS, rtol=0.02)
    no_freq = ~np.isfinite(fr.freq_hz)
    assert np.all(fr.flags[no_freq] & flags.UNUSABLE), "a frame without a frequency is not flagged"
    got = np.isfinite(fr.freq_hz)
    assert np.all((fr.freq_hz[got] > 0) & (fr.freq_hz[got] < FS / 2))
    if band is not None:  # a frequency outside the band is never reported as usable
        ok = got & ((fr.flags & flags.UNUSABLE) == 0)
        assert np.all((fr.freq_hz[ok] >= band[0] - 1) & (fr.freq_hz[ok] <= band[1] + 1))


def test_tracker_flags_silence_as_no_tone():
    fr = track_array(np.zeros(FS), FS, TrackerSettings())
    assert len(fr) > 0 and np.all(fr.flags & flags.NO_TONE) and np.all(np.isnan(fr.freq_hz))
