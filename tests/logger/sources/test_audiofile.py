"""Audio-file source and format sniffing: WAV files written independently of soundfile, bad inputs.

Reference WAV files are built here with Python's stdlib ``wave`` module (integer PCM) or byte by
byte with ``struct``/numpy following the Microsoft RIFF/WAVE layout (IEEE float, format tag 3),
so the reader is checked against bytes that soundfile/libsndfile did not produce.
Expected sample values follow the usual PCM scaling (common practice, as libsndfile documents
it): signed n-bit integers divide by 2**(n-1); 8-bit WAV is unsigned with 128 as zero.
"""

from __future__ import annotations

import io
import os
import struct
import wave

import numpy as np
import pytest

from coilshift.logger.errors import InputError
from coilshift.logger.sources import START_FROM_FILE, START_FROM_MTIME, open_source
from coilshift.logger.sources.audiofile import AudioFileSource
from coilshift.logger.sources.sniff import sniff_format

FS = 8000


def _pcm_wav_bytes(ints: np.ndarray, bits: int, fs: int = FS) -> bytes:
    """Integer PCM WAV via the stdlib wave module; ``ints`` is (frames, channels)."""
    frames, ch = ints.shape
    if bits == 8:
        raw = (ints + 128).astype(np.uint8).tobytes()
    elif bits == 24:
        raw = ints.astype("<i4").view(np.uint8).reshape(-1, 4)[:, :3].tobytes()
    else:
        raw = ints.astype({16: "<i2", 32: "<i4"}[bits]).tobytes()
    buf = io.BytesIO()
    with wave.open(buf, "wb") as w:
        w.setnchannels(ch)
        w.setsampwidth(bits // 8)
        w.setframerate(fs)
        w.writeframes(raw)
    return buf.getvalue()


def _riff(fmt_tag: int, ch: int, fs: int, bits: int, data: bytes, extra_chunks: bytes = b"",
          declared_data: int | None = None) -> bytes:
    """A RIFF/WAVE file assembled by hand (Microsoft WAVE layout)."""
    block = ch * bits // 8
    fmt = struct.pack("<HHIIHH", fmt_tag, ch, fs, fs * block, block, bits)
    body = b"WAVE" + b"fmt " + struct.pack("<I", len(fmt)) + fmt + extra_chunks
    size = len(data) if declared_data is None else declared_data
    body += b"data" + struct.pack("<I", size) + data
    return b"RIFF" + struct.pack("<I", len(body)) + body


def _float_wav_bytes(x: np.ndarray, fs: int = FS) -> bytes:
    return _riff(3, x.shape[1], fs, 32, x.astype("<f4").tobytes())


def _reference(kind: str, channels: int, n: int = 1000):
    rng = np.random.default_rng(7)
    if kind == "float":
        x = rng.uniform(-1, 1, (n, channels)).astype(np.float32)
        return _float_wav_bytes(x), x.astype(np.float64)
    bits = int(kind)
    top = 2 ** (bits - 1)
    ints = rng.integers(-top, top, (n, channels), dtype=np.int64)
    ints[0, :] = -top  # both extremes present
    ints[1, :] = top - 1
    return _pcm_wav_bytes(ints, bits), ints / top


@pytest.mark.parametrize("kind", ["8", "16", "24", "32", "float"])
@pytest.mark.parametrize("channels", [1, 2])
@pytest.mark.parametrize("opener", ["path", "fileobj"])
def test_wav_samples_read_back(tmp_path, kind, channels, opener):
    data, expected = _reference(kind, channels)
    p = tmp_path / "ref.wav"
    p.write_bytes(data)
    for ch in range(channels):
        if opener == "path":
            src = open_source(p, channel=ch)
        else:
            src = open_source(io.BytesIO(data), channel=ch)
        assert src.sample_rate_hz == FS
        assert src.channels == channels
        assert src.n_frames == len(expected)
        got = np.concatenate(list(src.blocks(333)))
        # exact: every PCM code and float32 value is representable in float64
        np.testing.assert_array_equal(got, expected[:, ch])


def test_wav_describe_and_mtime_start(tmp_path):
    data, _ = _reference("16", 2, n=FS)
    p = tmp_path / "a.wav"
    p.write_bytes(data)
    os.utime(p, (1_700_000_000, 1_700_000_000))
    src = open_source(p, channel=1)
    d = src.describe()
    assert d["encoding"] == "PCM_16" and d["channel"] == 1 and d["duration_s"] == 1.0
    start, how = src.start_time()
    assert how == START_FROM_MTIME
    assert start.timestamp() == pytest.approx(1_700_000_000 - 1.0)


def test_bwf_origination_time_used(tmp_path):
    # EBU Tech 3285 bext chunk: Description(256) Originator(32) OriginatorReference(32)
    # OriginationDate(10) OriginationTime(8) ... (602 bytes minimum body)
    body = b"\0" * 320 + b"2025-03-04" + b"05:06:07" + b"\0" * (602 - 338)
    bext = b"bext" + struct.pack("<I", len(body)) + body
    data = _riff(1, 1, FS, 16, np.zeros(FS, "<i2").tobytes(), extra_chunks=bext)
    p = tmp_path / "b.wav"
    p.write_bytes(data)
    start, how = open_source(p).start_time()
    assert how.startswith(START_FROM_FILE)
    local = start.astimezone()  # the stamp is local time of the recorder (this machine's zone)
    assert (local.year, local.month, local.day, local.hour, local.minute, local.second) == (2025, 3, 4, 5, 6, 7)


@pytest.mark.parametrize("content, message", [
    (b"", "empty file"),
    (bytes(np.random.default_rng(1).integers(0, 256, 4000, dtype=np.uint8)), "not a WAV file"),
    (b"RIFF\x10\x00\x00\x00WAVEfmt ", "truncated WAV header"),
])
def test_bad_wav_bytes(tmp_path, content, message):
    p = tmp_path / "bad.wav"
    p.write_bytes(content)
    with pytest.raises(InputError, match=message) as err:
        open_source(p)
    assert str(p) in str(err.value) and "\n" not in str(err.value)


def test_truncated_wav_refused(tmp_path):
    data, _ = _reference("16", 1, n=4000)
    p = tmp_path / "cut.wav"
    p.write_bytes(data[: len(data) // 2])
    with pytest.raises(InputError, match="truncated WAV"):
        open_source(p)


def test_lying_sample_rate_refused(tmp_path):
    p = tmp_path / "zero.wav"
    p.write_bytes(_riff(1, 1, 0, 16, np.zeros(100, "<i2").tobytes()))
    with pytest.raises(InputError, match=str(p)):
        open_source(p)


@pytest.mark.parametrize("field, offset, value, message", [
    ("channels", 22, 3, "3 channel\\(s\\) of 16 bits need 6-byte frames"),
    ("byte rate", 28, 1234, "byte rate 1234"),
    ("channels", 22, 0, "zero channels"),
])
def test_inconsistent_wav_header_refused(tmp_path, field, offset, value, message):
    # Microsoft WAVE fmt chunk: block_align = channels * bytes per sample, byte_rate = rate * block_align
    data = bytearray(_reference("16", 1)[0])
    fmt = "<H" if offset == 22 else "<I"
    struct.pack_into(fmt, data, offset, value)
    p = tmp_path / "lies.wav"
    p.write_bytes(bytes(data))
    with pytest.raises(InputError, match=message):
        open_source(p)


def test_unsupported_encoding_refused(tmp_path):
    # format tag 0x1234 is not a registered WAVE encoding
    p = tmp_path / "odd.wav"
    p.write_bytes(_riff(0x1234, 1, FS, 16, np.zeros(100, "<i2").tobytes()))
    with pytest.raises(InputError, match=str(p)):
        open_source(p)


def test_channel_out_of_range(tmp_path):
    data, _ = _reference("16", 2)
    p = tmp_path / "st.wav"
    p.write_bytes(data)
    with pytest.raises(InputError, match="channel 2 requested.*2 channel"):
        open_source(p, channel=2)


def test_extension_and_magic_must_agree(tmp_path):
    data, _ = _reference("16", 1)
    p = tmp_path / "x.flac"
    p.write_bytes(data)
    with pytest.raises(InputError, match="named .flac but holds WAV"):
        sniff_format(p)
    q = tmp_path / "noext"
    q.write_bytes(data)
    assert sniff_format(q) == "WAV"
    r = tmp_path / "scope.bin"
    r.write_text("t,v\n0,1\n1,2\n")
    assert sniff_format(r) == "CSV"
    w = tmp_path / "wave.csv"
    w.write_bytes(data)
    with pytest.raises(InputError, match="named .csv but holds WAV"):
        sniff_format(w)
    b = tmp_path / "junk.csv"
    b.write_bytes(bytes(range(256)) * 4)
    with pytest.raises(InputError, match="not a text file"):
        sniff_format(b)
    u = tmp_path / "utf16.csv"
    u.write_text("t,v\n0,1\n", encoding="utf-16")
    with pytest.raises(InputError, match="UTF-16"):
        sniff_format(u)


def test_audio_block_size_validated(tmp_path):
    data, _ = _reference("16", 1)
    p = tmp_path / "a.wav"
    p.write_bytes(data)
    src = AudioFileSource(p)
    with pytest.raises(ValueError):
        next(src.blocks(0))


# --------------------------------------------------------------------------- round two: hostile inputs

#: how a writer can leave the sizes of a WAV it did not finish: never written back (0), the
#: streaming placeholder (0xFFFFFFFF), or rewritten now and then and stopped between two rewrites
#: (the data size counts only the first 1000 sample frames)
UNFINISHED = {"zero": (0, 0), "placeholder": (0xFFFFFFFF, 0xFFFFFFFF), "stale": ("1000 frames", "1000 frames")}


@pytest.mark.parametrize("how", list(UNFINISHED))
@pytest.mark.parametrize("kind", ["8", "16", "24", "float"])
def test_wav_whose_writer_never_finished_the_header_reads_to_the_end(tmp_path, kind, how):
    # the reader takes the samples to the end of the file, bit for bit, and says the header was
    # unfinished where it had to read past what the header counts
    data, expected = _reference(kind, 2, n=3000)
    b = bytearray(data)
    at = b.find(b"data")
    frame = 2 * (4 if kind == "float" else int(kind) // 8)
    for offset, size in zip((at + 4, 4), UNFINISHED[how]):
        struct.pack_into("<I", b, offset, 1000 * frame if size == "1000 frames" else size)
    p = tmp_path / "unfinished.wav"
    p.write_bytes(bytes(b) + b"\x01")  # half a sample frame after the last whole one is dropped
    src = open_source(p, channel=1)
    assert src.n_frames == 3000
    got = np.concatenate(list(src.blocks(700)))
    np.testing.assert_array_equal(got, expected[:, 1])
    if how != "placeholder":  # libsndfile reads the placeholder to the end itself
        assert src.warnings and "unfinished WAV header" in src.warnings[0]
        assert "unfinished" in src.describe()["header_note"]


@pytest.mark.parametrize("after", [b"LIST" + struct.pack("<I", 10) + b"INFOab\0\0cd", b"\0" * 4096],
                         ids=["a-chunk", "zero-padding"])
def test_a_finished_wav_with_something_after_its_data_reads_only_the_data(tmp_path, after):
    # what follows a finished data chunk is another chunk, or padding: not samples
    data, expected = _reference("16", 2, n=3000)
    p = tmp_path / "finished.wav"
    p.write_bytes(data + after)
    src = open_source(p, channel=1)
    assert src.n_frames == 3000 and not getattr(src, "warnings", [])
    np.testing.assert_array_equal(np.concatenate(list(src.blocks(700))), expected[:, 1])


@pytest.mark.parametrize("stamp", [b"0001-01-01", b"9999-12-31"])
def test_bwf_placeholder_dates_fall_back_to_the_file_time(tmp_path, stamp):
    # year 1 and 9999 are what some recorders write when the clock is unset; neither is a date
    # the clock arithmetic can use (year 9999 plus the run's length overflows)
    body = b"\0" * 320 + stamp + b"23:59:59" + b"\0" * (602 - 338)
    bext = b"bext" + struct.pack("<I", len(body)) + body
    p = tmp_path / "b.wav"
    p.write_bytes(_riff(1, 1, FS, 16, np.zeros(FS, "<i2").tobytes(), extra_chunks=bext))
    os.utime(p, (1_700_000_000, 1_700_000_000))
    start, how = open_source(p).start_time()
    assert how == START_FROM_MTIME and start.timestamp() == pytest.approx(1_700_000_000 - 1.0)


def test_mp3_is_recognised_and_read(tmp_path):
    import soundfile as sf

    if "MP3" not in sf.available_formats():
        pytest.skip("this libsndfile reads no MP3")
    fs = 44100
    x = 0.3 * np.sin(2 * np.pi * 1000.0 * np.arange(2 * fs) / fs)
    p = tmp_path / "tone.mp3"
    sf.write(p, x, fs, format="MP3", subtype="MPEG_LAYER_III")
    assert sniff_format(p) == "MP3"
    src = open_source(p)
    assert src.sample_rate_hz == fs and src.describe()["container"] == "MP3"
    # lossy coding changes the spectrum's detail, not where the tone is: the median frequency
    # of the tracked frames is the tone (0.05 Hz is several times the tracker's spread here)
    from coilshift.logger.pipeline.batch import run_tracker
    from coilshift.logger.tracking.tracker import TrackerSettings

    frames, _ = run_tracker(src, TrackerSettings())
    assert np.nanmedian(frames.freq_hz) == pytest.approx(1000.0, abs=0.05)


@pytest.mark.parametrize("make", ["fifo", "device"])
def test_not_a_regular_file_is_refused_at_once(tmp_path, make):
    # a named pipe would block the reader until some program writes to it; a device may never end
    if make == "fifo":
        p = tmp_path / "pipe.wav"
        os.mkfifo(p)
    else:
        p = "/dev/zero"
    with pytest.raises(InputError, match="not a recording"):
        open_source(p)
