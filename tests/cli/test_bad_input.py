"""Every command, fed bad files and bad numbers, refuses in one line and writes nothing.

The contract (docs/reliability.md): exit status non-zero, exactly one non-empty line on stderr
that names the offending file (or option), no traceback, no output folder created, and files
that were already there (inputs, and an old run in the output folder given with --force) are
byte-identical afterwards.

Each case runs the real command line in its own interpreter. The cases are launched together
(a small process pool) by a module fixture, then checked one test per case, so the sweep costs
about as many seconds as CPU cores allow rather than one interpreter start after another.
"""

from __future__ import annotations

import json
import os
import shutil
import struct
import subprocess
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
import soundfile as sf
from reliability_helpers import FS, cli, one_line_error, snapshot, tone, wav16, write_small_run

# ~180 interpreter starts: tens of seconds on two cores, so the module is marked slow (still run)
pytestmark = pytest.mark.slow


# --------------------------------------------------------------------------- the inputs

def _patch(data: bytes, offset: int, fmt: str, value) -> bytes:
    b = bytearray(data)
    struct.pack_into(fmt, b, offset, value)
    return bytes(b)


def _scope_rows(n=4000, f=1000.0, fs=FS):
    t = np.arange(n) / fs
    v = 0.5 * np.sin(2 * np.pi * f * t)
    return [f"{a:.7f},{b:.5f}" for a, b in zip(t, v)]


def make_inputs(d: Path) -> None:
    good = wav16(d / "good.wav", tone(1.0))
    data = good.read_bytes()
    # -- recordings
    (d / "empty.wav").write_bytes(b"")
    (d / "cut.wav").write_bytes(data[: len(data) // 3])  # header promises more than is there
    (d / "random.wav").write_bytes(np.random.default_rng(0).integers(0, 256, 5000, dtype=np.uint8).tobytes())
    (d / "lying_size.wav").write_bytes(_patch(data, 40, "<I", 4 * (len(data) - 44)))
    (d / "zero_channels.wav").write_bytes(_patch(data, 22, "<H", 0))
    (d / "zero_rate.wav").write_bytes(_patch(_patch(data, 24, "<I", 0), 28, "<I", 0))
    (d / "three_channels.wav").write_bytes(_patch(data, 22, "<H", 3))
    (d / "header_only.wav").write_bytes(_patch(data[:44], 40, "<I", 0))
    (d / "random.flac").write_bytes(b"fLaC" + bytes(range(256)) * 4)
    sf.write(d / "adpcm.wav", tone(0.5), FS, subtype="IMA_ADPCM")  # a valid WAV in an encoding we refuse
    sf.write(d / "flac_named.wav", tone(0.5), FS, format="FLAC")
    for name, bad in (("nan_sample.wav", np.nan), ("inf_sample.wav", np.inf)):
        x = tone(1.0)
        x[5000] = bad
        sf.write(d / name, x, FS, subtype="FLOAT")  # a float WAV can hold them
    sf.write(d / "rate100.wav", tone(1.0, freq_hz=20.0, fs=100), 100, subtype="PCM_16")
    (d / "binary.csv").write_bytes(bytes(range(256)) * 8)
    wav16(d / "short.wav", tone(0.02))  # 20 ms: shorter than an 85 ms frame
    wav16(d / "silence.wav", np.zeros(FS))
    wav16(d / "noise.wav", 0.3 * np.random.default_rng(2).standard_normal(FS).clip(-1, 1))
    wav16(d / "stereo.wav", np.stack([tone(0.5), tone(0.5)], axis=1), channels=2)
    # -- scope exports
    rows = _scope_rows()
    head = "Time (s),CH1 (V)\n"
    (d / "scope.csv").write_text(head + "\n".join(rows) + "\n")
    (d / "notime.csv").write_text("CH1,CH2\n" + "".join(f"{np.sin(i):.4f},{np.cos(i):.4f}\n" for i in range(200)))
    (d / "novolt.csv").write_text("Time (s)\n" + "".join(f"{i / FS:.7f}\n" for i in range(200)))
    r = list(rows)
    r[100] = r[100].split(",")[0] + ",abc"
    (d / "nonnumeric.csv").write_text(head + "\n".join(r) + "\n")
    r = list(rows)
    r[100] = r[100].split(",")[0] + ",nan"
    (d / "nan.csv").write_text(head + "\n".join(r) + "\n")
    r = list(rows)
    r[120] = "inf," + r[120].split(",")[1]
    (d / "inf.csv").write_text(head + "\n".join(r) + "\n")
    r = list(rows)
    r[60] = r[58]
    (d / "backwards.csv").write_text(head + "\n".join(r) + "\n")
    r = list(rows)
    r[60] = r[59].split(",")[0] + "," + r[60].split(",")[1]
    (d / "repeated.csv").write_text(head + "\n".join(r) + "\n")
    (d / "units.csv").write_text("Time (fortnights),CH1 (V)\n" + "\n".join(rows) + "\n")
    (d / "vunits.csv").write_text("Time (s),CH1 (furlongs)\n" + "\n".join(rows) + "\n")
    (d / "scope_short.csv").write_text(head + "\n".join(rows[:40]) + "\n")
    (d / "empty.csv").write_bytes(b"")
    # -- markers (for the 1 s good.wav)
    (d / "m_outside.csv").write_text("start_s,end_s,target,distance_mm\n0,0.5,baseline,\n0.5,5,coin,10\n")
    (d / "m_overlap.csv").write_text("start_s,end_s,target,distance_mm\n0,0.5,baseline,\n0.4,0.8,coin,10\n")
    (d / "m_nonnum.csv").write_text("start_s,end_s,target,distance_mm\n0,half,baseline,\n")
    (d / "m_columns.csv").write_text("begin,finish,what\n0,0.5,baseline\n")
    (d / "m_negdist.csv").write_text("start_s,end_s,target,distance_mm\n0,0.5,coin,-3\n")
    (d / "m_empty.csv").write_bytes(b"")
    (d / "m_beyond_log.csv").write_text("start_s,end_s,target,distance_mm\n0,20,baseline,\n20,40,coin,10\n"
                                        "40,200,baseline,\n")  # the small run is 60 s long
    # -- logs
    (d / "nofreq.csv").write_text("t_s,frequency\n" + "".join(f"{i * 0.02:.2f},{1000 + i % 3}\n" for i in range(500)))
    (d / "log_nan_t.csv").write_text("t_s,freq_hz\n" + "".join(
        f"{'nan' if i == 50 else f'{i * 0.02:.2f}'},1000.0\n" for i in range(500)))
    (d / "log_backwards.csv").write_text("t_s,freq_hz\n" + "".join(
        f"{(i if i != 50 else 10) * 0.02:.2f},1000.0\n" for i in range(500)))
    (d / "log_text.csv").write_text("t_s,freq_hz\n" + "".join(
        f"{i * 0.02:.2f},{'loud' if i == 70 else '1000.0'}\n" for i in range(500)))
    (d / "log_inf.csv").write_text("t_s,freq_hz\n" + "".join(
        f"{i * 0.02:.2f},{'inf' if i == 70 else '1000.0'}\n" for i in range(500)))
    (d / "log_empty.csv").write_bytes(b"")
    (d / "log_random.csv").write_bytes(np.random.default_rng(5).integers(0, 256, 3000, dtype=np.uint8).tobytes())
    write_small_run(d / "run")
    write_small_run(d / "run_nomarkers", with_markers=False)
    bad_meta = write_small_run(d / "run_badmeta")
    (bad_meta / "run.json").write_text("{not json")
    (d / "notarun").mkdir()
    (d / "temp_bad.csv").write_text("when,degrees\n1,20\n2,21\n")
    # -- coils and scripts
    coil = {"turns": 20, "inner_diameter_mm": 100, "length_mm": 10, "awg": 26}
    (d / "coil.json").write_text(json.dumps(coil))
    (d / "coil_negative.json").write_text(json.dumps({**coil, "inner_diameter_mm": -5}))
    (d / "coil_crowded.json").write_text(json.dumps({**coil, "turns": 500, "length_mm": 1, "depth_mm": 0}))
    (d / "coil_zero_turns.json").write_text(json.dumps({**coil, "turns": 0}))
    (d / "coil_awg.json").write_text(json.dumps({**coil, "awg": 99}))
    (d / "coil_bad.json").write_text("{turns: 20")
    (d / "coil_list.json").write_text("[1, 2]")
    (d / "script_bad.json").write_text("{\"recording\": ")
    (d / "script_empty.json").write_bytes(b"")
    script = json.loads((Path(__file__).parents[2] / "sample_data" / "calibration.json").read_text())
    (d / "script_unknown.json").write_text(json.dumps({**script, "colour": "blue"}))
    (d / "script_rate.json").write_text(json.dumps({**script, "recording": {**script["recording"],
                                                                            "sample_rate_hz": -16000}}))
    (d / "script_list.json").write_text("[]")
    # -- not regular files: named pipes block the reader until someone writes, for ever here
    for name in ("fifo.wav", "fifo_markers.csv", "fifo_log.csv", "fifo.json", "fifo_temp.csv"):
        os.mkfifo(d / name)
    # -- units written with non-ASCII characters (UTF-8): unknown ones are refused by name
    (d / "micro_furlong.csv").write_text("Time (s),CH1 (\u00b5furlong)\n" + "\n".join(rows) + "\n", encoding="utf-8")
    (d / "volts_per_div.csv").write_text("Time (s),CH1 (V/div)\n" + "\n".join(rows) + "\n")
    r = list(rows)
    r[100] = r[100].split(",")[0] + ",\x00\x00\x00"
    (d / "nul_cell.csv").write_text(head + "\n".join(r) + "\n")
    # -- nesting and numbers no file of ours holds
    deep = "[" * 100_000 + "]" * 100_000  # far beyond the interpreter's recursion limit
    (d / "nested.json").write_text(deep)
    nested_run = write_small_run(d / "run_nested")
    (nested_run / "run.json").write_text('{"baseline": ' + deep + "}")
    (d / "log_huge.csv").write_text("t_s,freq_hz\n" + "".join(
        f"{i * 0.02:.2f},{'1e300' if i == 70 else '1000.0'}\n" for i in range(500)))
    (d / "log_nul.csv").write_text("t_s,freq_hz\n" + "".join(
        f"{i * 0.02:.2f},{chr(0) * 3 if i == 70 else '1000.0'}\n" for i in range(500)))
    (d / "m_huge.csv").write_text("start_s,end_s,target,distance_mm\n0,20,baseline,\n20,40,coin,1e300\n"
                                  "40,60,baseline,\n")
    (d / "m_nul.csv").write_text("start_s,end_s,target,distance_mm\n0,0.5,baseline,\n0.5,1,co\x00in,10\n")
    (d / "coil_awg_zeros.json").write_text(json.dumps({**coil, "awg": "00000", "length_mm": 500}))  # room to wind it
    (d / "coil_awg_nan.json").write_text(json.dumps({**coil, "awg": "nan"}))
    (d / "coil_huge.json").write_text(json.dumps({**coil, "turns": 1e300}))
    sf.write(d / "unfinished_adpcm.wav", tone(0.5), FS, subtype="IMA_ADPCM")
    adpcm = bytearray((d / "unfinished_adpcm.wav").read_bytes())
    at = adpcm.find(b"data")
    struct.pack_into("<I", adpcm, at + 4, 0)  # the writer never came back to fill in the size
    (d / "unfinished_adpcm.wav").write_bytes(bytes(adpcm))


# --------------------------------------------------------------------------- the cases

@dataclass(frozen=True)
class Case:
    id: str
    args: tuple  # "{in}" -> the inputs folder, "{out}" -> this case's output path
    names: str | tuple  # the error line must contain this (the file or the option), or one of these
    forced: bool = False  # output folder exists, holds an old run and keep.txt; --force is given


C = Case
CASES = [
    # track: recordings
    C("track-empty-wav", ("track", "{in}/empty.wav", "-o", "{out}"), "empty.wav"),
    C("track-truncated-wav", ("track", "{in}/cut.wav", "-o", "{out}"), "cut.wav"),
    C("track-random-bytes-wav", ("track", "{in}/random.wav", "-o", "{out}"), "random.wav"),
    C("track-lying-data-size", ("track", "{in}/lying_size.wav", "-o", "{out}"), "lying_size.wav", True),
    C("track-zero-channels", ("track", "{in}/zero_channels.wav", "-o", "{out}"), "zero_channels.wav"),
    C("track-zero-rate", ("track", "{in}/zero_rate.wav", "-o", "{out}"), "zero_rate.wav"),
    C("track-wrong-channel-count", ("track", "{in}/three_channels.wav", "-o", "{out}"), "three_channels.wav"),
    C("track-header-only", ("track", "{in}/header_only.wav", "-o", "{out}"), "header_only.wav"),
    C("track-random-flac", ("track", "{in}/random.flac", "-o", "{out}"), "random.flac"),
    C("track-unsupported-encoding", ("track", "{in}/adpcm.wav", "-o", "{out}"), "adpcm.wav", True),
    C("track-flac-named-wav", ("track", "{in}/flac_named.wav", "-o", "{out}"), "flac_named.wav"),
    C("track-nan-sample", ("track", "{in}/nan_sample.wav", "-o", "{out}"), "nan_sample.wav", True),
    C("track-inf-sample", ("track", "{in}/inf_sample.wav", "-o", "{out}"), "inf_sample.wav"),
    C("track-rate-too-low", ("track", "{in}/rate100.wav", "-o", "{out}"), "rate100.wav"),
    C("clock-nan-sample", ("clock-error", "{in}/nan_sample.wav", "--reference-hz", "1000"), "nan_sample.wav"),
    C("track-binary-csv", ("track", "{in}/binary.csv", "-o", "{out}"), "binary.csv"),
    C("track-missing-file", ("track", "{in}/nothere.wav", "-o", "{out}"), "nothere.wav"),
    C("track-folder-as-input", ("track", "{in}/notarun", "-o", "{out}"), "notarun"),
    C("track-shorter-than-frame", ("track", "{in}/short.wav", "-o", "{out}"), "short.wav"),
    C("track-silence", ("track", "{in}/silence.wav", "-o", "{out}"), "silence.wav", True),
    C("track-pure-noise", ("track", "{in}/noise.wav", "-o", "{out}"), "noise.wav"),
    C("track-tone-outside-band", ("track", "{in}/good.wav", "-o", "{out}", "--band", "2000", "3000"), "good.wav"),
    # track: scope exports
    C("track-csv-no-time", ("track", "{in}/notime.csv", "-o", "{out}"), "notime.csv"),
    C("track-csv-no-voltage", ("track", "{in}/novolt.csv", "-o", "{out}"), "novolt.csv"),
    C("track-csv-non-numeric", ("track", "{in}/nonnumeric.csv", "-o", "{out}"), "nonnumeric.csv", True),
    C("track-csv-nan", ("track", "{in}/nan.csv", "-o", "{out}"), "nan.csv"),
    C("track-csv-inf", ("track", "{in}/inf.csv", "-o", "{out}"), "inf.csv"),
    C("track-csv-backwards-time", ("track", "{in}/backwards.csv", "-o", "{out}"), "backwards.csv"),
    C("track-csv-repeated-time", ("track", "{in}/repeated.csv", "-o", "{out}"), "repeated.csv"),
    C("track-csv-unknown-time-unit", ("track", "{in}/units.csv", "-o", "{out}"), "units.csv"),
    C("track-csv-unknown-voltage-unit", ("track", "{in}/vunits.csv", "-o", "{out}"), "vunits.csv"),
    C("track-csv-shorter-than-frame", ("track", "{in}/scope_short.csv", "-o", "{out}"), "scope_short.csv"),
    C("track-csv-empty", ("track", "{in}/empty.csv", "-o", "{out}"), "empty.csv"),
    # track: markers
    C("track-markers-outside", ("track", "{in}/good.wav", "-o", "{out}", "--markers", "{in}/m_outside.csv"),
      "m_outside.csv", True),
    C("track-markers-overlap", ("track", "{in}/good.wav", "-o", "{out}", "--markers", "{in}/m_overlap.csv"),
      "m_overlap.csv"),
    C("track-markers-non-numeric", ("track", "{in}/good.wav", "-o", "{out}", "--markers", "{in}/m_nonnum.csv"),
      "m_nonnum.csv"),
    C("track-markers-columns", ("track", "{in}/good.wav", "-o", "{out}", "--markers", "{in}/m_columns.csv"),
      "m_columns.csv"),
    C("track-markers-negative-distance", ("track", "{in}/good.wav", "-o", "{out}", "--markers",
                                          "{in}/m_negdist.csv"), "m_negdist.csv"),
    C("track-markers-empty", ("track", "{in}/good.wav", "-o", "{out}", "--markers", "{in}/m_empty.csv"),
      "m_empty.csv"),
    C("track-markers-missing", ("track", "{in}/good.wav", "-o", "{out}", "--markers", "{in}/nothere.csv"),
      "nothere.csv"),
    # track: options
    C("track-channel-negative", ("track", "{in}/good.wav", "-o", "{out}", "--channel", "-1"), "--channel"),
    C("track-channel-absent", ("track", "{in}/good.wav", "-o", "{out}", "--channel", "1"), "good.wav"),
    C("track-frame-ms-zero", ("track", "{in}/good.wav", "-o", "{out}", "--frame-ms", "0"), "--frame-ms"),
    C("track-frame-ms-nan", ("track", "{in}/good.wav", "-o", "{out}", "--frame-ms", "nan"), "--frame-ms"),
    C("track-hop-ms-negative", ("track", "{in}/good.wav", "-o", "{out}", "--hop-ms", "-5"), "--hop-ms"),
    C("track-frame-longer-than-file", ("track", "{in}/good.wav", "-o", "{out}", "--frame-ms", "5000"), "good.wav"),
    C("track-band-reversed", ("track", "{in}/good.wav", "-o", "{out}", "--band", "3000", "100"), "--band"),
    C("track-band-above-nyquist", ("track", "{in}/good.wav", "-o", "{out}", "--band", "100", "9000"), "--band"),
    C("track-near-negative", ("track", "{in}/good.wav", "-o", "{out}", "--near", "-5"), "--near"),
    C("track-clock-ppm-nan", ("track", "{in}/good.wav", "-o", "{out}", "--clock-ppm", "nan"), "--clock-ppm"),
    C("track-clock-ppm-huge", ("track", "{in}/good.wav", "-o", "{out}", "--clock-ppm", "1e7"), "--clock-ppm"),
    C("track-divide-zero", ("track", "{in}/good.wav", "-o", "{out}", "--divide", "0"), "--divide"),
    C("track-nyquist-zone-zero", ("track", "{in}/good.wav", "-o", "{out}", "--nyquist-zone", "0"), "--nyquist-zone"),
    C("track-baseline-s-zero", ("track", "{in}/good.wav", "-o", "{out}", "--baseline-s", "0"), "--baseline-s"),
    C("track-baseline-s-nan", ("track", "{in}/good.wav", "-o", "{out}", "--baseline-s", "nan"), "--baseline-s"),
    C("track-min-snr-nan", ("track", "{in}/good.wav", "-o", "{out}", "--min-snr-db", "nan"), "--min-snr-db"),
    C("track-frame-ms-text", ("track", "{in}/good.wav", "-o", "{out}", "--frame-ms", "long"), "--frame-ms"),
    C("track-out-is-a-file", ("track", "{in}/good.wav", "-o", "{in}/coil.json"), "coil.json"),
    # clock-error
    C("clock-reference-zero", ("clock-error", "{in}/good.wav", "--reference-hz", "0"), "--reference-hz"),
    C("clock-reference-nan", ("clock-error", "{in}/good.wav", "--reference-hz", "nan"), "--reference-hz"),
    C("clock-reference-above-nyquist", ("clock-error", "{in}/good.wav", "--reference-hz", "5000"), "--reference-hz"),
    C("clock-empty", ("clock-error", "{in}/empty.wav", "--reference-hz", "1000"), "empty.wav"),
    C("clock-silence", ("clock-error", "{in}/silence.wav", "--reference-hz", "1000"), "silence.wav"),
    C("clock-wrong-tone", ("clock-error", "{in}/good.wav", "--reference-hz", "1100"), "good.wav"),
    C("clock-short", ("clock-error", "{in}/short.wav", "--reference-hz", "1000"), "short.wav"),
    C("clock-frame-ms-zero", ("clock-error", "{in}/good.wav", "--reference-hz", "1000", "--frame-ms", "0"),
      "--frame-ms"),
    C("clock-channel-absent", ("clock-error", "{in}/good.wav", "--reference-hz", "1000", "--channel", "2"),
      "good.wav"),
    # analyze
    C("analyze-log-without-freq", ("analyze", "{in}/nofreq.csv", "--markers", "{in}/m_overlap.csv", "-o", "{out}"),
      "nofreq.csv"),
    C("analyze-missing-run", ("analyze", "{in}/nothere", "-o", "{out}"), "nothere"),
    C("analyze-folder-without-log", ("analyze", "{in}/notarun", "-o", "{out}"), "notarun"),
    C("analyze-run-without-markers", ("analyze", "{in}/run_nomarkers", "-o", "{out}"), "run_nomarkers", True),
    C("analyze-bad-run-json", ("analyze", "{in}/run_badmeta", "-o", "{out}"), "run.json"),
    C("analyze-log-nan-time", ("analyze", "{in}/log_nan_t.csv", "--markers", "{in}/m_outside.csv", "-o", "{out}"),
      "log_nan_t.csv"),
    C("analyze-log-backwards", ("analyze", "{in}/log_backwards.csv", "--markers", "{in}/m_outside.csv",
                                "-o", "{out}"), "log_backwards.csv"),
    C("analyze-log-text-cell", ("analyze", "{in}/log_text.csv", "--markers", "{in}/m_outside.csv", "-o", "{out}"),
      "log_text.csv"),
    C("analyze-log-inf", ("analyze", "{in}/log_inf.csv", "--markers", "{in}/m_outside.csv", "-o", "{out}"),
      "log_inf.csv"),
    C("analyze-log-empty", ("analyze", "{in}/log_empty.csv", "--markers", "{in}/m_outside.csv", "-o", "{out}"),
      "log_empty.csv"),
    C("analyze-log-random", ("analyze", "{in}/log_random.csv", "--markers", "{in}/m_outside.csv", "-o", "{out}"),
      "log_random.csv"),
    C("analyze-markers-overlap", ("analyze", "{in}/run", "--markers", "{in}/m_overlap.csv", "-o", "{out}"),
      "m_overlap.csv", True),
    C("analyze-markers-columns", ("analyze", "{in}/run", "--markers", "{in}/m_columns.csv", "-o", "{out}"),
      "m_columns.csv"),
    C("analyze-markers-beyond-log", ("analyze", "{in}/run", "--markers", "{in}/m_beyond_log.csv", "-o", "{out}"),
      "m_beyond_log.csv"),
    C("analyze-markers-two-runs", ("analyze", "{in}/run", "{in}/run", "--markers", "{in}/m_overlap.csv"),
      "m_overlap.csv"),
    C("analyze-coil-impossible", ("analyze", "{in}/run", "--coil", "{in}/coil_negative.json", "-o", "{out}"),
      "coil_negative.json"),
    C("analyze-coil-not-json", ("analyze", "{in}/run", "--coil", "{in}/coil_bad.json", "-o", "{out}"),
      "coil_bad.json"),
    C("analyze-model-without-coil", ("analyze", "{in}/run", "--target-model", "coin=copper:diameter_mm=20"),
      "--target-model"),
    C("analyze-model-bad-spec", ("analyze", "{in}/run", "--coil", "{in}/coil.json", "--target-model",
                                 "coin=unobtainium:diameter_mm=20", "-o", "{out}"), "unobtainium"),
    C("analyze-bootstrap-negative", ("analyze", "{in}/run", "--bootstrap", "-1", "-o", "{out}"), "--bootstrap"),
    C("analyze-threshold-negative", ("analyze", "{in}/run", "--threshold-hz", "-1"), "--threshold-hz"),
    C("analyze-threshold-nan", ("analyze", "{in}/run", "--threshold-hz", "nan"), "--threshold-hz"),
    C("analyze-noise-factor-zero", ("analyze", "{in}/run", "--noise-factor", "0"), "--noise-factor"),
    C("analyze-settle-negative", ("analyze", "{in}/run", "--trim-s", "-2"), "--trim-s"),
    C("analyze-reference-kind", ("analyze", "{in}/run", "--reference-target", "coin=shiny"), "--reference-target"),
    C("analyze-out-is-a-file", ("analyze", "{in}/run", "-o", "{in}/coil.json"), "coil.json"),
    # stability
    C("stability-log-without-freq", ("stability", "{in}/nofreq.csv", "-o", "{out}"), "nofreq.csv", True),
    C("stability-log-nan-time", ("stability", "{in}/log_nan_t.csv", "-o", "{out}"), "log_nan_t.csv"),
    C("stability-log-backwards", ("stability", "{in}/log_backwards.csv", "-o", "{out}"), "log_backwards.csv"),
    C("stability-log-text-cell", ("stability", "{in}/log_text.csv", "-o", "{out}"), "log_text.csv"),
    C("stability-log-inf", ("stability", "{in}/log_inf.csv", "-o", "{out}"), "log_inf.csv"),
    C("stability-log-empty", ("stability", "{in}/log_empty.csv", "-o", "{out}"), "log_empty.csv"),
    C("stability-log-random", ("stability", "{in}/log_random.csv", "-o", "{out}"), "log_random.csv"),
    C("stability-recording-given", ("stability", "{in}/good.wav", "-o", "{out}"), "good.wav"),
    C("stability-missing", ("stability", "{in}/nothere.csv", "-o", "{out}"), "nothere.csv"),
    C("stability-bad-run-json", ("stability", "{in}/run_badmeta", "-o", "{out}"), "run.json"),
    C("stability-temperature-columns", ("stability", "{in}/run", "--temperature", "{in}/temp_bad.csv",
                                        "-o", "{out}"), "temp_bad.csv"),
    C("stability-temperature-missing", ("stability", "{in}/run", "--temperature", "{in}/nothere.csv",
                                        "-o", "{out}"), "nothere.csv"),
    C("stability-confidence", ("stability", "{in}/run", "--confidence", "2", "-o", "{out}"), "--confidence"),
    C("stability-confidence-nan", ("stability", "{in}/run", "--confidence", "nan"), "--confidence"),
    C("stability-nominal-zero", ("stability", "{in}/run", "--nominal-hz", "0", "-o", "{out}"), "--nominal-hz"),
    C("stability-nominal-nan", ("stability", "{in}/run", "--nominal-hz", "nan"), "--nominal-hz"),
    C("stability-settle-nan", ("stability", "{in}/run", "--settled-hz-per-min", "nan"), "--settled-hz-per-min"),
    C("stability-start-outside", ("stability", "{in}/run", "--start-s", "-3"), "--start-s"),
    C("stability-start-inf", ("stability", "{in}/run", "--start-s", "inf"), "--start-s"),
    # coil
    C("coil-negative-diameter", ("coil", "--coil", "{in}/coil_negative.json"), "coil_negative.json"),
    C("coil-crowded-winding", ("coil", "--coil", "{in}/coil_crowded.json"), "coil_crowded.json"),
    C("coil-zero-turns", ("coil", "--coil", "{in}/coil_zero_turns.json"), "coil_zero_turns.json"),
    C("coil-unknown-awg", ("coil", "--coil", "{in}/coil_awg.json"), "coil_awg.json"),
    C("coil-not-json", ("coil", "--coil", "{in}/coil_bad.json"), "coil_bad.json"),
    C("coil-json-list", ("coil", "--coil", "{in}/coil_list.json"), "coil_list.json"),
    C("coil-missing-file", ("coil", "--coil", "{in}/nothere.json"), "nothere.json"),
    C("coil-empty-file", ("coil", "--coil", "{in}/empty.csv"), "empty.csv"),
    C("coil-turns-negative", ("coil", "--turns", "-3", "--inner-diameter-mm", "100", "--length-mm", "10",
                              "--awg", "26"), "turns"),
    C("coil-diameter-nan", ("coil", "--turns", "20", "--inner-diameter-mm", "nan", "--length-mm", "10",
                            "--awg", "26"), ("inner_diameter_mm", "--inner-diameter-mm")),
    C("coil-temp-absurd", ("coil", "--coil", "{in}/coil.json", "--temp-c", "-500"), "temp"),
    C("coil-cap-negative", ("coil", "--coil", "{in}/coil.json", "--cap-nf", "-1"), "cap"),
    C("coil-for-freq-negative", ("coil", "--coil", "{in}/coil.json", "--for-freq-hz", "-1"), "--for-freq-hz"),
    C("coil-awg-text", ("coil", "--coil", "{in}/coil.json", "--awg", "thick"), ("--awg", "AWG")),
    # target
    C("target-coil-impossible", ("target", "--coil", "{in}/coil_negative.json", "--sphere", "copper:diameter_mm=20",
                                 "--cap-nf", "10"), "coil_negative.json"),
    C("target-unknown-material", ("target", "--coil", "{in}/coil.json", "--material", "unobtainium",
                                  "--diameter-mm", "20", "--freq-hz", "10000"), "unobtainium"),
    C("target-zero-diameter", ("target", "--coil", "{in}/coil.json", "--material", "copper",
                               "--diameter-mm", "0", "--freq-hz", "10000"), "diameter"),
    C("target-bad-spec", ("target", "--coil", "{in}/coil.json", "--sphere", "copper:size=big",
                          "--freq-hz", "10000"), "copper:size=big"),
    C("target-negative-distance", ("target", "--coil", "{in}/coil.json", "--sphere", "copper:diameter_mm=20",
                                   "--freq-hz", "10000", "--distances", "-5,10"), ("--distances", "distances")),
    C("target-freq-nan", ("target", "--coil", "{in}/coil.json", "--sphere", "copper:diameter_mm=20",
                          "--freq-hz", "nan"), ("--freq-hz", "frequency")),
    C("target-noise-log-without-freq", ("target", "--coil", "{in}/coil.json", "--sphere", "copper:diameter_mm=20",
                                        "--freq-hz", "10000", "--noise-log", "{in}/nofreq.csv"), "nofreq.csv"),
    C("target-noise-negative", ("target", "--coil", "{in}/coil.json", "--sphere", "copper:diameter_mm=20",
                                "--freq-hz", "10000", "--noise-hz", "-1"), "--noise-hz"),
    # astable
    C("astable-negative-r1", ("astable", "--r1-ohm", "-1", "--r2-ohm", "1000", "--cap-nf", "10"), ("--r1-ohm", "r1_ohm")),
    C("astable-zero-cap", ("astable", "--r1-ohm", "1000", "--r2-ohm", "1000", "--cap-nf", "0"), ("--cap-nf", "cap_nf")),
    C("astable-freq-nan", ("astable", "--freq-hz", "nan"), ("--freq-hz", "freq_hz")),
    C("astable-freq-inf", ("astable", "--freq-hz", "inf"), ("--freq-hz", "freq_hz")),
    C("astable-duty-impossible", ("astable", "--freq-hz", "10000", "--duty", "0.3"), ("--duty", "duty")),
    C("astable-nothing-given", ("astable",), "astable"),
    C("astable-series-unknown", ("astable", "--freq-hz", "10000", "--series", "E7"), "--series"),
    # simulate
    C("simulate-not-json", ("simulate", "{in}/script_bad.json", "-o", "{out}"), "script_bad.json"),
    C("simulate-empty", ("simulate", "{in}/script_empty.json", "-o", "{out}"), "script_empty.json", True),
    C("simulate-unknown-key", ("simulate", "{in}/script_unknown.json", "-o", "{out}"), "script_unknown.json"),
    C("simulate-negative-rate", ("simulate", "{in}/script_rate.json", "-o", "{out}"), "script_rate.json"),
    C("simulate-json-list", ("simulate", "{in}/script_list.json", "-o", "{out}"), "script_list.json"),
    C("simulate-missing", ("simulate", "{in}/nothere.json", "-o", "{out}"), "nothere.json"),
    C("simulate-recording-given", ("simulate", "{in}/good.wav", "-o", "{out}"), "good.wav"),
    # capture and devices: option errors found before any device is opened
    C("capture-seconds-zero", ("capture", "-o", "{out}", "--seconds", "0"), "--seconds"),
    C("capture-seconds-nan", ("capture", "-o", "{out}", "--seconds", "nan"), "--seconds"),
    C("capture-rate-negative", ("capture", "-o", "{out}", "--rate", "-48000"), "--rate"),
    C("capture-baseline-zero", ("capture", "-o", "{out}", "--baseline-s", "0"), "--baseline-s"),
    C("capture-channel-negative", ("capture", "-o", "{out}", "--channel", "-1", "--synthetic", "1000"), "--channel"),
    C("capture-frame-ms-zero", ("capture", "-o", "{out}", "--frame-ms", "0", "--synthetic", "1000"), "--frame-ms"),
    C("capture-band-above-nyquist", ("capture", "-o", "{out}", "--band", "100", "30000", "--synthetic", "1000"),
      "--band"),
    C("capture-divide-zero", ("capture", "-o", "{out}", "--divide", "0", "--synthetic", "1000"), "--divide"),
    C("capture-out-is-a-file", ("capture", "-o", "{in}/coil.json", "--synthetic", "1000", "--seconds", "1"),
      "coil.json"),
    C("capture-no-out", ("capture",), "--out"),
    C("devices-unknown-option", ("devices", "--colour"), "--colour"),
    # calibrate: plan errors found before any device is opened
    C("calibrate-distances-text", ("calibrate", "-o", "{out}", "--target", "coin", "--distances", "near,far"),
      "--distances"),
    C("calibrate-distances-negative", ("calibrate", "-o", "{out}", "--target", "coin", "--distances", "10,-5"),
      "--distances"),
    C("calibrate-dwell-zero", ("calibrate", "-o", "{out}", "--target", "coin", "--distances", "10,20",
                               "--dwell", "0"), "--dwell"),
    C("calibrate-repeats-zero", ("calibrate", "-o", "{out}", "--target", "coin", "--distances", "10,20",
                                 "--repeats", "0"), "--repeats"),
    C("calibrate-coil-impossible", ("calibrate", "-o", "{out}", "--target", "coin", "--distances", "10,20",
                                    "--coil", "{in}/coil_negative.json"), "coil_negative.json"),
    # demo
    C("demo-out-is-a-file", ("demo", "-o", "{in}/coil.json"), "coil.json"),
    # class: inputs that are not regular files (named pipes) are refused at once, never read
    C("track-fifo-recording", ("track", "{in}/fifo.wav", "-o", "{out}"), "fifo.wav", True),
    C("clock-fifo-recording", ("clock-error", "{in}/fifo.wav", "--reference-hz", "1000"), "fifo.wav"),
    C("track-fifo-markers", ("track", "{in}/good.wav", "-o", "{out}", "--markers", "{in}/fifo_markers.csv"),
      "fifo_markers.csv"),
    C("analyze-fifo-log", ("analyze", "{in}/fifo_log.csv", "--markers", "{in}/m_outside.csv", "-o", "{out}"),
      "fifo_log.csv"),
    C("stability-fifo-log", ("stability", "{in}/fifo_log.csv", "-o", "{out}"), "fifo_log.csv"),
    C("coil-fifo-file", ("coil", "--coil", "{in}/fifo.json"), "fifo.json"),
    C("simulate-fifo-script", ("simulate", "{in}/fifo.json", "-o", "{out}"), "fifo.json"),
    C("stability-fifo-temperature", ("stability", "{in}/run", "--temperature", "{in}/fifo_temp.csv"), "fifo_temp.csv"),
    C("target-fifo-noise-log", ("target", "--coil", "{in}/coil.json", "--material", "copper", "--diameter-mm", "20",
                                "--freq-hz", "10000", "--noise-log", "{in}/fifo_log.csv"), "fifo_log.csv"),
    C("analyze-fifo-coil", ("analyze", "{in}/run", "--coil", "{in}/fifo.json", "-o", "{out}"), "fifo.json"),
    # class: control characters in a file's name never reach the terminal raw either
    C("track-control-characters-in-name", ("track", "{in}/gone\n\x1b[2Jfile.wav", "-o", "{out}"), "gone"),
    # class: units outside the ASCII letters (UTF-8) are read as written; unknown ones refused by name
    C("track-csv-unknown-unicode-unit", ("track", "{in}/micro_furlong.csv", "-o", "{out}"), "micro_furlong.csv",
      True),
    C("track-csv-unit-not-a-unit", ("track", "{in}/volts_per_div.csv", "-o", "{out}"), "volts_per_div.csv"),
    # class: a recording whose header was never finished, in an encoding that needs it
    C("track-unfinished-compressed-wav", ("track", "{in}/unfinished_adpcm.wav", "-o", "{out}"),
      "unfinished_adpcm.wav"),
    # class: JSON nested beyond reason, in every kind of JSON file read
    C("coil-json-nested-deep", ("coil", "--coil", "{in}/nested.json"), "nested.json"),
    C("simulate-json-nested-deep", ("simulate", "{in}/nested.json", "-o", "{out}"), "nested.json"),
    C("analyze-run-json-nested-deep", ("analyze", "{in}/run_nested", "-o", "{out}"), "run.json", True),
    C("stability-run-json-nested-deep", ("stability", "{in}/run_nested", "-o", "{out}"), "run.json"),
    # class: numbers far outside the physics, from options and from files
    C("coil-for-freq-hz-huge", ("coil", "--coil", "{in}/coil.json", "--for-freq-hz", "1e300"), "--for-freq-hz"),
    C("astable-parts-tiny", ("astable", "--r1-ohm", "1e-200", "--r2-ohm", "1e-200", "--cap-nf", "1e-200"),
      "--r1-ohm"),
    C("target-diameter-huge", ("target", "--coil", "{in}/coil.json", "--material", "copper", "--diameter-mm",
                               "1e300", "--freq-hz", "10000"), "--diameter-mm"),
    C("capture-rate-absurd", ("capture", "-o", "{out}", "--rate", "7", "--synthetic", "1000"), "--rate", True),
    C("analyze-log-huge-frequency", ("analyze", "{in}/log_huge.csv", "--markers", "{in}/m_outside.csv",
                                     "-o", "{out}"), "log_huge.csv"),
    C("stability-log-huge-frequency", ("stability", "{in}/log_huge.csv", "-o", "{out}"), "log_huge.csv", True),
    C("analyze-markers-huge-distance", ("analyze", "{in}/run", "--markers", "{in}/m_huge.csv", "-o", "{out}"),
      "m_huge.csv"),
    C("coil-json-huge-turns", ("coil", "--coil", "{in}/coil_huge.json"), "coil_huge.json"),
    # class: a wire gauge that is not written like one
    C("coil-awg-five-zeros", ("coil", "--turns", "20", "--inner-diameter-mm", "100", "--length-mm", "200",
                              "--awg", "00000"), "--awg"),
    C("coil-json-awg-five-zeros", ("coil", "--coil", "{in}/coil_awg_zeros.json"), "coil_awg_zeros.json"),
    C("coil-json-awg-nan", ("coil", "--coil", "{in}/coil_awg_nan.json"), "coil_awg_nan.json"),
    # class: control characters in a damaged cell never reach the terminal raw (checked for every case)
    C("analyze-log-nul-cell", ("analyze", "{in}/log_nul.csv", "--markers", "{in}/m_outside.csv", "-o", "{out}"),
      "log_nul.csv"),
    C("stability-log-nul-cell", ("stability", "{in}/log_nul.csv", "-o", "{out}"), "log_nul.csv"),
    C("track-csv-nul-cell", ("track", "{in}/nul_cell.csv", "-o", "{out}"), "nul_cell.csv"),
    C("track-markers-nul", ("track", "{in}/good.wav", "-o", "{out}", "--markers", "{in}/m_nul.csv"), "m_nul.csv"),
    C("capture-option-with-escape", ("capture", "-o", "{out}", "--synthetic", "10\x1b[2J00"), "--synthetic"),
]

OLD_RUN = {"log.csv": "t_s,freq_hz\n0.0,1000.0\n", "run.json": '{"status": "complete"}\n',
           "markers.csv": "start_s,end_s,target,distance_mm\n", "keep.txt": "my notes\n"}


@dataclass
class Outcome:
    res: object
    out: Path
    before_out: dict | None


def _run_case(case: Case, inputs: Path, work: Path) -> Outcome:
    out = work / case.id
    before = None
    args = [a.replace("{in}", str(inputs)).replace("{out}", str(out)) for a in case.args]
    if case.forced:
        out.mkdir()
        for name, text in OLD_RUN.items():
            (out / name).write_text(text)
        before = snapshot(out)
        args.append("--force")
    try:
        res = cli(*args, timeout=60)
    except subprocess.TimeoutExpired:  # a hang (a named pipe read for ever) fails this case alone
        res = SimpleNamespace(returncode=None, stdout="", stderr="hung: no answer within 60 s")
    return Outcome(res, out, before)


@pytest.fixture(scope="module")
def sweep(request, tmp_path_factory):
    inputs = tmp_path_factory.mktemp("inputs")
    make_inputs(inputs)
    work = tmp_path_factory.mktemp("outputs")
    before = snapshot(inputs)
    # run only the cases pytest selected (-k), all of them at once
    chosen = {getattr(item, "callspec", None) and item.callspec.id for item in request.session.items}
    todo = [c for c in CASES if c.id in chosen]
    with ThreadPoolExecutor(max_workers=3) as pool:
        futures = {c.id: pool.submit(_run_case, c, inputs, work) for c in todo}
        results = {k: f.result() for k, f in futures.items()}
    return {"results": results, "inputs_before": before, "inputs_after": snapshot(inputs), "inputs": inputs}


def test_case_ids_unique():
    assert len({c.id for c in CASES}) == len(CASES)


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_refused_in_one_line_and_nothing_written(sweep, case):
    o = sweep["results"][case.id]
    assert o.res.returncode is not None, o.res.stderr
    line = one_line_error(o.res)
    names = (case.names,) if isinstance(case.names, str) else case.names
    assert any(n in line for n in names), f"{names!r} not named in {line!r}"
    assert line.isprintable(), f"control characters in {line!r}"
    if o.before_out is None:
        assert not o.out.exists(), f"{o.out} was created: {sorted(p.name for p in o.out.iterdir())}"
    else:
        assert snapshot(o.out) == o.before_out, "files already in the output folder were changed"


def test_inputs_untouched_by_the_whole_sweep(sweep):
    assert sweep["inputs_after"] == sweep["inputs_before"]


def test_clipped_recording_is_accepted_and_flagged(tmp_path):
    # a clipped tone still has a frequency: it is tracked, every frame carries the CLIPPED flag,
    # and the user is told (a warning line), rather than the run being refused. 1100 Hz at
    # fs = 8 kHz: the harmonics that clipping makes fold back well clear of the tone and of its
    # unfolded harmonics (a tone at 1000 Hz = fs/8 puts them right under those, where no tracker
    # can tell them apart, and its frames rightly carry alias_close)
    x = np.clip(1.6 * np.sin(2 * np.pi * 1100 * np.arange(FS) / FS), -1, 1)
    wav = wav16(tmp_path / "clipped.wav", x)
    res = cli("track", wav, "-o", tmp_path / "run", "--quiet")
    assert res.returncode == 0, res.stderr
    assert "Traceback" not in res.stderr
    assert "clip" in res.stderr.lower()
    log = (tmp_path / "run" / "log.csv").read_text().splitlines()
    rows = [r.split(",") for r in log[1:]]
    col = log[0].split(",").index("flags")  # by name: new columns are added after flags
    assert rows and all("clipped" in r[col].lower() for r in rows)
    assert all(abs(float(r[2]) - 1100.0) < 1.0 for r in rows)  # the frequency is still right


def test_inputs_build_cleanly(tmp_path):
    # the good inputs of the sweep are good: each bad case differs from a working one in one way
    make_inputs(tmp_path)
    ok = [("track", tmp_path / "good.wav", "-o", tmp_path / "a", "--quiet"),
          ("track", tmp_path / "scope.csv", "-o", tmp_path / "b", "--quiet"),
          ("coil", "--coil", tmp_path / "coil.json")]
    with ThreadPoolExecutor(max_workers=3) as pool:
        results = list(pool.map(lambda a: cli(*a), ok))
    for args, res in zip(ok, results):
        assert res.returncode == 0, (args, res.stderr)
    shutil.rmtree(tmp_path / "a")


def test_standard_input_as_the_recording(tmp_path):
    # `track /dev/stdin` fed by a pipe names a FIFO: refused at once in one line, nothing written
    # (reading a pipe to its end would hold a whole recording in memory to seek in it); fed by a
    # redirected file it is that regular file, and is tracked like it
    import sys

    wav = wav16(tmp_path / "rec.wav", tone(1.0))
    env = {k: v for k, v in os.environ.items() if k != "COILSHIFT_DEBUG"}
    argv = [sys.executable, "-m", "coilshift.cli.main", "track", "/dev/stdin", "--quiet", "-o"]
    piped = subprocess.run([*argv, str(tmp_path / "piped")], input=wav.read_bytes(), capture_output=True, env=env,
                           timeout=60)
    line = one_line_error(SimpleNamespace(returncode=piped.returncode, stdout="", stderr=piped.stderr.decode()))
    assert "/dev/stdin" in line and "pipe" in line, line
    assert not (tmp_path / "piped").exists()
    with open(wav, "rb") as fh:
        redirected = subprocess.run([*argv, str(tmp_path / "redirected")], stdin=fh, capture_output=True, env=env,
                                    timeout=60)
    assert redirected.returncode == 0, redirected.stderr
    direct = cli("track", wav, "--quiet", "-o", tmp_path / "direct")
    assert direct.returncode == 0, direct.stderr

    def rows(run):  # t_s and freq_hz of every row (utc depends on the file's time, stdin's has none)
        head, *lines = (run / "log.csv").read_text().splitlines()
        t, f = head.split(",").index("t_s"), head.split(",").index("freq_hz")
        return [(c[t], c[f]) for c in (line.split(",") for line in lines)]

    assert rows(tmp_path / "redirected") == rows(tmp_path / "direct") and rows(tmp_path / "direct")
