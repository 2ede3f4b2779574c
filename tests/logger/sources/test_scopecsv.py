"""Oscilloscope CSV source: layout detection, streaming, and bad exports named by file and line."""

from __future__ import annotations

import io

import numpy as np
import pytest

from coilshift.logger.errors import InputError
from coilshift.logger.sources import open_source
from coilshift.logger.sources.csvlayout import detect_csv_layout
from coilshift.logger.sources.scopecsv import ScopeCsvSource


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
    import coilshift.logger.sources.scopecsv as sources

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


# --------------------------------------------------------------------------- round two: units in UTF-8

@pytest.mark.parametrize("time_unit, volt_unit, encoding", [
    ("\u00b5s", "\u00b5V", "utf-8"),   # MICRO SIGN
    ("\u03bcs", "\u03bcV", "utf-8"),   # GREEK SMALL LETTER MU
    ("\u00b5s", "\u00b5V", "utf-8-sig"),  # with a byte-order mark
    ("\u00b5s", "\u00b5V", "latin-1"),  # one byte 0xB5
])
def test_micro_units_are_read_as_written(tmp_path, time_unit, volt_unit, encoding):
    # the same export written with "us"/"uV" is the reference: the unit's spelling and the file's
    # encoding must not change the sample rate or the voltages
    n, dt = 400, 1e-5
    v = 2.5 * np.sin(2 * np.pi * 1000 * np.arange(n) * dt)
    rows = "".join(f"{i * dt * 1e6:.3f},{1e6 * v[i]:.1f}\n" for i in range(n))
    ref = tmp_path / "ascii.csv"
    ref.write_text("Time (us),CH1 (uV)\n" + rows)
    p = tmp_path / "micro.csv"
    p.write_bytes(f"Time ({time_unit}),CH1 ({volt_unit})\n{rows}".encode(encoding))
    a, b = open_source(ref), open_source(p)
    assert b.sample_rate_hz == pytest.approx(a.sample_rate_hz, rel=1e-12) == pytest.approx(1e5, rel=1e-6)
    assert b.full_scale_v == a.full_scale_v == 5.0
    np.testing.assert_array_equal(np.concatenate(list(b.blocks(128))), np.concatenate(list(a.blocks(128))))


@pytest.mark.parametrize("header, unit", [("Time (s),CH1 (\u00b5furlong)", "\u00b5furlong"),
                                          ("Time (s),CH1 (V/div)", "V/div"),
                                          ("Time (\u00b5fortnight),CH1 (V)", "\u00b5fortnight")])
def test_unknown_units_are_refused_by_name(tmp_path, header, unit):
    text, _ = _scope_text(header=header, preamble=())
    p = tmp_path / "odd.csv"
    p.write_text(text, encoding="utf-8")
    with pytest.raises(InputError) as exc:
        open_source(p)
    assert unit in str(exc.value) and "odd.csv" in str(exc.value)
