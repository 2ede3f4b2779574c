"""track_source end to end: recording file -> tracker -> corrections -> baseline -> run folder.

Recordings are synthetic (ToneSource, scripted truth) written to WAV with the stdlib ``wave``
module, so the whole file path is exercised. Tolerances come from the Cramer-Rao bound for one
real sinusoid in white noise (Kay 1993, Vol. 1, ex. 3.14; Rife & Boorstyn 1974):
var(f) >= 12 fs^2 / ((2 pi)^2 eta N (N^2 - 1)), eta = A^2 / (2 s^2).
"""

from __future__ import annotations

import datetime as dt
import json
import math
import os
import wave

import numpy as np
import pytest

from coilshift.logger.runfolder.reader import read_log
from coilshift.logger.runfolder import flags
from coilshift.logger.runfolder import writer as runlog
from coilshift.logger.runfolder.columns import utc_iso
from coilshift.logger.pipeline.corrections import Corrections
from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.markers import Marker
from coilshift.logger.pipeline.batch import measure_clock, track_source
from coilshift.logger.sources import START_FROM_MTIME, open_source
from coilshift.logger.sources.synthetic import ToneSource
from coilshift.logger.tracking.tracker import TrackerSettings

FS = 48000


def crb_std_hz(fs, amp, noise_std, n):
    """Cramer-Rao bound on the frequency std of one real sinusoid (Kay 1993, ex. 3.14)."""
    eta = amp ** 2 / (2 * noise_std ** 2)
    return math.sqrt(12 * fs ** 2 / ((2 * math.pi) ** 2 * eta * n * (n ** 2 - 1)))


def write_wav16(path, x, fs=FS):
    """16-bit mono WAV through the stdlib wave module (independent of soundfile)."""
    ints = np.clip(np.round(np.asarray(x) * 32767), -32768, 32767).astype("<i2")
    with wave.open(str(path), "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(fs)
        w.writeframes(ints.tobytes())
    return path


def test_pulse_wave_steps_within_20_mhz(tmp_path):
    """Acceptance: 48 kHz pulse wave, 30 dB SNR, steps of a few tenths of a hertz.

    0.02 Hz is the acceptance figure of the requirement. For scale: the fundamental of a duty-0.3
    pulse of amplitude 0.4 has peak 4 (0.4) sin(0.3 pi) / pi = 0.41; with the noise set by a 30 dB
    SNR on the whole wave the per-frame CRB is about 5 mHz (computed below), and each steady
    stretch holds 30+ independent frames, so the median should land within a few mHz.
    Around 1003 Hz rather than 1000: within about 0.2 Hz of fs/48 the folded harmonics of a pulse
    wave, if it had any, would land under its own harmonics, and the tracker flags alias_close.
    """
    steps = [(0.0, 1003.0), (3.0, 1003.3), (6.0, 1002.8), (9.0, 1003.1)]
    src = ToneSource(steps, 12.0, FS, wave="pulse", duty=0.3, amplitude=0.4, snr_db=30.0, seed=4)
    path = write_wav16(tmp_path / "pulse.wav", src.read_all())
    settings = TrackerSettings()
    summary = track_source(open_source(path), settings, Corrections(), tmp_path / "run")
    log = read_log(tmp_path / "run")
    fund = 4 * 0.4 * math.sin(0.3 * math.pi) / math.pi
    frame_len = log.meta["tracker"]["frame_len"]
    crb = crb_std_hz(FS, fund, src.noise_std, frame_len)
    assert crb < 0.01  # the acceptance tolerance is loose against theory
    half_frame_s = frame_len / FS / 2
    ends = [t for t, _ in steps[1:]] + [12.0]
    for (start, f_true), end in zip(steps, ends):
        sel = (log.t_s > start + half_frame_s) & (log.t_s < end - half_frame_s) & log.usable()
        assert sel.sum() > 100
        assert abs(np.median(log.freq_hz[sel]) - f_true) < 0.02
    assert summary["baseline_hz"] == pytest.approx(1003.0, abs=0.02)


def test_log_round_trip_through_read_log(tmp_path):
    src = ToneSource([(0.0, 2000.0), (2.5, 2000.5)], 5.0, FS, amplitude=0.3, snr_db=40.0, seed=1,
                     start_utc=dt.datetime(2026, 5, 6, 7, 8, 9, tzinfo=dt.timezone.utc))
    markers = [Marker(0.0, 2.0, "baseline", math.nan), Marker(3.0, 4.5, "nail", 25.0)]
    summary = track_source(src, TrackerSettings(), None, tmp_path / "run", markers=markers)
    log = read_log(tmp_path / "run")
    assert not log.interrupted
    assert len(log.table) == summary["frames"]
    assert not np.any(log.table["flags"].to_numpy() & (flags.NO_TONE | flags.CLIPPED))
    meta = log.meta
    assert meta["status"] == "complete"
    assert meta["baseline"]["method"] == "median over the markers' baseline stretches"
    assert meta["start_utc"] == "2026-05-06T07:08:09.000Z"
    assert meta["tracker"]["frame_ms"] == 85.0 and meta["source"]["kind"] == "synthetic tone"
    assert log.markers == markers
    # shift in the file = freq - baseline (6 decimals written)
    np.testing.assert_allclose(log.table["shift_hz"], log.freq_hz - meta["baseline"]["freq_hz"], atol=2e-6)
    late = log.t_s > 3.0
    assert np.median(log.table["shift_hz"][late]) == pytest.approx(0.5, abs=0.01)
    # times are frame centres: (start + (frame_len - 1)/2) / fs with start = k hop
    fl, hop = meta["tracker"]["frame_len"], meta["tracker"]["hop_len"]
    np.testing.assert_allclose(log.t_s[:3], (np.arange(3) * hop + (fl - 1) / 2) / FS, atol=1e-6)


def test_corrections_reach_the_log(tmp_path):
    # a 160 kHz oscillator through divide-by-4: 40 kHz, zone 2 at 48 kHz -> recorded at 8 kHz;
    # a +2 Hz oscillator step is +0.5 Hz after the divider and -0.5 Hz in the recording
    recorded = [(0.0, 8000.0), (2.0, 7999.5)]
    src = ToneSource(recorded, 4.0, FS, amplitude=0.3, snr_db=40.0, seed=2)
    corr = Corrections(clock_ppm=0.0, divide=4, nyquist_zone=2)
    s = track_source(src, TrackerSettings(), corr, tmp_path / "run", baseline_s=1.5)
    assert s["baseline_hz"] == pytest.approx(160_000.0, abs=0.05)
    assert s["shift_max_hz"] == pytest.approx(2.0, abs=0.05)
    assert any("INVERTED" in w for w in s["warnings"])
    meta = json.loads((tmp_path / "run" / "run.json").read_text())
    assert meta["corrections"]["apparent_shift_sign_inverted"] is True


def test_clock_correction_scales_time_and_frequency(tmp_path):
    src = ToneSource(1000.0, 3.0, FS, amplitude=0.3, snr_db=40.0, seed=3)
    s = track_source(src, TrackerSettings(), Corrections(clock_ppm=500.0), tmp_path / "run")
    assert s["baseline_hz"] == pytest.approx(1000.0 * (1 + 500e-6), abs=0.01)
    assert s["duration_s"] == pytest.approx(3.0 / (1 + 500e-6), rel=1e-12)
    assert s["sample_rate_true_hz"] == pytest.approx(FS * 1.0005)


def test_silence_refused_and_nothing_written(tmp_path):
    path = write_wav16(tmp_path / "quiet.wav", np.zeros(FS))
    with pytest.raises(InputError, match="quiet.wav: no tone found"):
        track_source(open_source(path), TrackerSettings(), None, tmp_path / "run")
    assert not (tmp_path / "run").exists()


def test_shorter_than_one_frame_refused(tmp_path):
    path = write_wav16(tmp_path / "blip.wav", 0.5 * np.sin(2 * np.pi * 1000 * np.arange(1000) / FS))
    with pytest.raises(InputError, match="blip.wav: the recording is 20.8 ms long, shorter than one analysis frame"):
        track_source(open_source(path), TrackerSettings(), None, tmp_path / "run")


def test_markers_beyond_the_recording_refused(tmp_path):
    src = ToneSource(1000.0, 2.0, FS, amplitude=0.3)
    mk = tmp_path / "m.csv"
    mk.write_text("start_s,end_s,target,distance_mm\n0,1,baseline,\n1.5,2.5,coin,10\n")
    with pytest.raises(InputError, match="ends after the recording"):
        track_source(src, TrackerSettings(), None, tmp_path / "run", markers=mk)
    assert not (tmp_path / "run").exists()


def test_markers_without_baseline_rows_fall_back_with_warning(tmp_path):
    src = ToneSource(1000.0, 3.0, FS, amplitude=0.3, snr_db=40.0)
    s = track_source(src, TrackerSettings(), None, tmp_path / "run", markers=[Marker(2.0, 3.0, "coin", 5.0)])
    assert s["baseline_method"] == "median of the first seconds"
    assert any("no baseline rows" in w for w in s["warnings"])


def test_existing_run_dir_needs_force(tmp_path):
    run = tmp_path / "run"
    run.mkdir()
    (run / "notes.txt").write_text("mine")
    src = ToneSource(1000.0, 1.0, FS, amplitude=0.3)
    with pytest.raises(InputError, match="not empty"):
        track_source(src, TrackerSettings(), None, run)
    track_source(src, TrackerSettings(), None, run, force=True)
    assert (run / "notes.txt").read_text() == "mine" and (run / "log.csv").is_file()


@pytest.mark.parametrize("existed", [False, True])
def test_failure_while_writing_leaves_no_run(tmp_path, monkeypatch, existed):
    run = tmp_path / "run"
    old = {"notes.txt": "mine", "log.csv": "t_s,freq_hz\n0.1,1000\n", "run.json": "{}\n"}
    if existed:
        run.mkdir()
        for name, text in old.items():
            (run / name).write_text(text)
    calls = []

    def broken_append(self, frames, baseline_hz=None):
        calls.append(len(frames))
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(runlog.RunWriter, "append", broken_append)
    with pytest.raises(OSError):
        track_source(ToneSource(1000.0, 1.0, FS, amplitude=0.3), TrackerSettings(), None, run, force=True)
    assert calls
    if existed:  # the old run replaced under --force is back, byte for byte, and nothing else
        assert {p.name: p.read_text() for p in run.iterdir()} == old
    else:
        assert not run.exists()


def test_scope_csv_amplitude_in_dbv(tmp_path):
    # 2.5 V peak sine at 1 kHz sampled at 20 kHz: 20 log10(2.5) = 7.96 dB re 1 V peak
    fs, n = 20000.0, 20000
    t = np.arange(n) / fs
    v = 2.5 * np.sin(2 * np.pi * 1000.0 * t) + 0.002 * np.random.default_rng(0).standard_normal(n)
    lines = ["Model,Bench scope", "Vertical Units,V", "", "Time (s),CH1 (V)"]
    lines += [f"{ti:.7f},{vi:.5f}" for ti, vi in zip(t, v)]
    path = tmp_path / "scope.csv"
    path.write_text("\n".join(lines) + "\n")
    s = track_source(open_source(path), TrackerSettings(), None, tmp_path / "run")
    log = read_log(tmp_path / "run")
    assert s["sample_rate_hz"] == pytest.approx(fs, rel=1e-9)
    # the tracker's amplitude estimate is unbiased to well below 0.1 dB at this SNR
    assert np.median(log.table["amp_dbfs"]) == pytest.approx(20 * math.log10(2.5), abs=0.1)
    assert "1 V peak" in log.meta["units"]["amp_dbfs"]
    assert log.meta["source"]["full_scale_v"] == 5.0


def test_start_time_from_mtime(tmp_path):
    path = write_wav16(tmp_path / "a.wav", 0.3 * np.sin(2 * np.pi * 1000 * np.arange(2 * FS) / FS))
    os.utime(path, (1_750_000_000, 1_750_000_000))
    track_source(open_source(path), TrackerSettings(), None, tmp_path / "run")
    meta = json.loads((tmp_path / "run" / "run.json").read_text())
    assert meta["start_utc_from"] == START_FROM_MTIME
    expected = dt.datetime.fromtimestamp(1_750_000_000 - 2.0, tz=dt.timezone.utc)
    assert meta["start_utc"] == utc_iso(expected)


def test_progress_reaches_the_end(tmp_path):
    seen = []
    track_source(ToneSource(1000.0, 2.5, FS, amplitude=0.3), TrackerSettings(), None, tmp_path / "run",
                 progress=lambda done, total: seen.append((done, total)))
    assert seen[-1] == (2.5, 2.5) and all(a <= b for (a, _), (b, _) in zip(seen, seen[1:]))


def test_measure_clock_against_crb():
    ppm_true, ref = 37.0, 1000.0
    amp, snr_db = 0.5, 40.0
    src = ToneSource(ref / (1 + ppm_true * 1e-6), 10.0, FS, amplitude=amp, snr_db=snr_db, seed=9)
    settings = TrackerSettings(frame_ms=200.0, hop_ms=100.0, near_hz=ref, refine=True)
    r = measure_clock(src, ref, settings)
    # the median of n_eff independent frames has std ~ 1.2533 CRB / sqrt(n_eff) (Gaussian median
    # efficiency); allow 5 of those, with a factor 2 for the estimator's distance from the bound
    n = int(round(0.2 * FS))
    crb = crb_std_hz(FS, amp, src.noise_std, n)
    n_eff = r["frames_used"] * 0.5
    tol_ppm = 5 * 2 * 1.2533 * crb / math.sqrt(n_eff) / ref * 1e6
    assert abs(r["clock_ppm"] - ppm_true) < tol_ppm
    assert r["clock_ppm_stderr"] < tol_ppm


def test_measure_clock_refuses_wrong_reference():
    src = ToneSource(1010.0, 3.0, FS, amplitude=0.5, snr_db=40.0)
    with pytest.raises(InputError, match="not a recording of that reference"):
        measure_clock(src, 1000.0, TrackerSettings(near_hz=1000.0))
