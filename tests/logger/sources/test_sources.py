"""Sources: WAV files written independently of soundfile, scope CSV exports, bad inputs.

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
from coilshift.logger.sources.recorded import (START_FROM_FILE, START_FROM_MTIME, AudioFileSource, ScopeCsvSource,
                                      detect_csv_layout, open_source, sniff_format)

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


# ----------------------------------------------------------------------------- scope CSV

def _scope_text(n=400, dt=1e-5, header="Time (s),CH1 (V)", preamble=("Model,DSO-X", "Points,400"),
                sep=",", fmt="{t:.8e}{sep}{v:.6f}", decimal="."):
    rows = list(preamble) + ([header] if header else [])
    v = 2.5 * np.sin(2 * np.pi * 1000 * np.arange(n) * dt)
    for i in range(n):
        line = fmt.format(t=-1e-3 + i * dt, v=v[i], sep=sep)
        rows.append(line.replace(".", decimal) if decimal != "." else line)
    return "\n".join(rows) + "\n", v


def test_scope_csv_with_preamble(tmp_path):
    text, v = _scope_text()
    p = tmp_path / "scope.csv"
    p.write_text(text)
    src = open_source(p)
    assert isinstance(src, ScopeCsvSource)
    # sample rate from the time column: 1 / 10 us
    assert src.sample_rate_hz == pytest.approx(100_000.0, rel=1e-9)
    assert src.n_frames == 400 and src.layout.data_line == 4
    assert src.full_scale_v == 5.0  # 1-2-5 step above the 2.5 V peak
    got = np.concatenate(list(src.blocks(64))) * src.full_scale_v
    np.testing.assert_allclose(got, v, atol=5e-7)  # cells printed with 6 decimals
    assert src.amp_offset_db == pytest.approx(20 * np.log10(5.0))
    assert "1 V peak" in src.describe()["amplitude_reference"]


@pytest.mark.parametrize("variant", ["semicolon_decimal_comma", "whitespace_no_header", "ms_and_mv",
                                     "two_header_lines", "tab_trailing_sep"])
def test_scope_csv_variants(tmp_path, variant):
    if variant == "semicolon_decimal_comma":
        text, v = _scope_text(header="Zeit (s);Kanal 1 (V)", preamble=("Gerät;Scope",), sep=";", decimal=",")
        scale = 1.0
    elif variant == "whitespace_no_header":
        text, v = _scope_text(header=None, preamble=(), sep="   ")
        scale = 1.0
    elif variant == "ms_and_mv":
        n, dt = 400, 1e-5
        vv = 2.5 * np.sin(2 * np.pi * 1000 * np.arange(n) * dt)
        text = "time [ms],signal [mV]\n" + "".join(f"{i * dt * 1e3:.5f},{1e3 * vv[i]:.3f}\n" for i in range(n))
        v, scale = vv, 1.0
    elif variant == "two_header_lines":
        text, v = _scope_text(header="second,Volt", preamble=("x-axis,1",))
        scale = 1.0
    else:
        text, v = _scope_text(header="TIME\tCH1\t", preamble=("Source\tCH1",), sep="\t",
                              fmt="{t:.8e}{sep}{v:.6f}\t")
        scale = 1.0
    p = tmp_path / "s.txt"
    p.write_text(text, encoding="utf-8")
    src = open_source(p)
    assert src.sample_rate_hz == pytest.approx(100_000.0, rel=1e-6)
    got = np.concatenate(list(src.blocks(100))) * src.full_scale_v * scale
    np.testing.assert_allclose(got, v, atol=1e-5)


def test_scope_two_voltage_columns_channel(tmp_path):
    n = 200
    lines = ["Time,CH1,CH2"] + [f"{i * 1e-4:.6f},{np.sin(i):.6f},{0.1 * i:.6f}" for i in range(n)]
    p = tmp_path / "two.csv"
    p.write_text("\n".join(lines) + "\n")
    src = open_source(p, channel=1)
    assert src.channels == 2
    got = np.concatenate(list(src.blocks(50))) * src.full_scale_v
    np.testing.assert_allclose(got, 0.1 * np.arange(n), atol=1e-6)


@pytest.mark.parametrize("lines, message", [
    (["CH1,CH2"] + [f"{np.sin(i):.4f},{np.cos(i):.4f}" for i in range(50)], "no time column"),
    (["Time"] + [f"{i * 1e-3}" for i in range(50)], "only one numeric column"),
    (["Time,Volt"] + [f"{i * 1e-3:.6f},0.1" for i in range(30)] + ["0.0285,0.2"]
     + [f"{i * 1e-3:.6f},0.1" for i in range(31, 60)], "line 32: time goes backwards"),
    (["Time,Volt"] + [f"{i * 1e-3:.6f},0.1" for i in range(30)] + ["0.029000,0.2"]
     + [f"{i * 1e-3:.6f},0.1" for i in range(31, 60)], "line 32: time repeats"),
    (["Time,Volt"] + [f"{i * 1e-3:.6f},0.1" for i in range(40) if i != 20], "line 22: non-uniform time step"),
    (["Time,Volt"] + [f"{i * 1e-3:.6f},0.1" for i in range(30)] + ["0.030,abc"]
     + [f"{i * 1e-3:.6f},0.1" for i in range(31, 60)], "line 32: non-numeric cell 'abc'"),
    (["Time,Volt"] + [f"{i * 1e-3:.6f},0.1" for i in range(30)] + ["0.030,nan"]
     + [f"{i * 1e-3:.6f},0.1" for i in range(31, 60)], "line 32: non-finite value 'nan'"),
    (["Time,Volt"] + [f"{i * 1e-3:.6f},0.1" for i in range(30)] + ["0.030,inf"]
     + [f"{i * 1e-3:.6f},0.1" for i in range(31, 60)], "line 32: non-finite value 'inf'"),
    (["Time,Volt"] + [f"{i * 1e-3:.6f},0.1" for i in range(30)] + ["", "0.030,0.1", "", "0.0305,0.1"]
     + [f"{i * 1e-3:.6f},0.1" for i in range(32, 60)], "line 35: non-uniform time step"),
    (["Time,Volt"] + [f"{i * 1e-3:.6f},0.1" for i in range(30)] + ["0.030,True"]
     + [f"{i * 1e-3:.6f},0.1" for i in range(31, 60)], "line 32: non-numeric cell 'True'"),
    (["Time,Volt"] + [f"{i * 1e-3:.6f},0.1" for i in range(30)] + ["0.030,"]
     + [f"{i * 1e-3:.6f},0.1" for i in range(31, 60)], "line 32: empty cell in the voltage column"),
    (["Time,Volt", "0.0,0.1"], "only one data row"),
    (["Model,X", "Serial,Y"], "no numeric data rows"),
    (["Time (fortnights),CH1 (V)"] + [f"{i},0.1" for i in range(40)], "unknown time unit 'fortnights'"),
    (["Time (s),CH1 (furlongs)"] + [f"{i},0.1" for i in range(40)], "unknown voltage unit 'furlongs'"),
])
def test_scope_csv_errors_name_file_and_line(tmp_path, lines, message):
    p = tmp_path / "bad.csv"
    p.write_text("\n".join(lines) + "\n")
    with pytest.raises(InputError, match=message) as err:
        open_source(p)
    assert str(err.value).startswith(str(p)) and "\n" not in str(err.value)


def test_scope_csv_error_beyond_first_chunk(tmp_path, monkeypatch):
    # streaming: an error far into the file is found by the chunked scan with the right line
    import coilshift.logger.sources.recorded as sources

    monkeypatch.setattr(sources, "_CSV_CHUNK_ROWS", 1000)
    n = 5000
    lines = ["Time,Volt"] + [f"{i * 1e-4:.6f},0.1" for i in range(n)]
    lines[3501] = f"{3498 * 1e-4:.6f},0.1"  # line 3502 goes back one step
    p = tmp_path / "long.csv"
    p.write_text("\n".join(lines) + "\n")
    with pytest.raises(InputError, match="line 3502: time goes backwards"):
        open_source(p)


def test_layout_detection_tek_style_columns():
    # metadata in the first three fields of the first rows, samples in fields 3 and 4
    lines = [f"Record Length,100,,{i * 1e-6:.3e},{0.01 * i:.3f}," if i == 0 else
             f",,,{i * 1e-6:.3e},{0.01 * i:.3f}," for i in range(60)]
    lay = detect_csv_layout(lines, "tek.csv")
    assert lay.time_col == 3 and lay.volt_cols == (4,) and lay.data_line == 1


def test_csv_needs_a_path():
    with pytest.raises(InputError, match="given as a path"):
        open_source(io.BytesIO(b"t,v\n0,1\n1,2\n"))


def test_audio_block_size_validated(tmp_path):
    data, _ = _reference("16", 1)
    p = tmp_path / "a.wav"
    p.write_bytes(data)
    src = AudioFileSource(p)
    with pytest.raises(ValueError):
        next(src.blocks(0))
