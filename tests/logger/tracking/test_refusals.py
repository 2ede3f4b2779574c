"""No silent wrong numbers: DC, a tone at fs/2, tones that start, stop or jump inside a frame.

Each case is refused (NO_TONE, no frequency) or flagged with a flag in
:data:`~coilshift.logger.runfolder.flags.UNUSABLE`, and the run folder that ``coilshift track``
writes leaves those frames out of ``FrequencyLog.usable()``, which calibration analysis and
``coilshift stability`` use.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import soundfile as sf

from coilshift.cli.main import main
from coilshift.logger.runfolder import flags as fl
from coilshift.logger.runfolder.reader import read_log
from coilshift.logger.tracking.settings import TrackerSettings
from coilshift.logger.tracking.tracker import FrameTracker, track_array

FS = 48000.0
#: the project's bias goal for a tone (benchmarks/tracker_accuracy.py): 0.001 bin
BIAS_GOAL_BINS = 1e-3


def _bin_hz(fs=FS):
    return fs / FrameTracker(fs).frame_len


@pytest.mark.parametrize("fs", [44100.0, 48000.0, 96000.0])
@pytest.mark.parametrize("level", [0.3, -0.7, 1e-3])
def test_dc_alone_is_no_tone(fs, level):
    # a constant holds no tone: only single-precision rounding shows in the searched bins
    tab = track_array(np.full(int(fs), level), fs)
    assert len(tab) > 0 and np.all(tab.flags & fl.NO_TONE) and np.all(np.isnan(tab.freq_hz))


@pytest.mark.parametrize("fs", [44100.0, 48000.0, 96000.0])
@pytest.mark.parametrize("offset", [0.0, 0.2])
def test_tone_at_half_the_sample_rate_is_refused(fs, offset):
    # a tone exactly at fs/2 (x[n] = A cos(pi n + phi)) or within the top guard bins: nothing in the
    # searched range is a tone, the strongest line lies above it
    n = np.arange(int(fs))
    for f in (fs / 2, fs / 2 - 1.5 * _bin_hz(fs)):
        tab = track_array(0.5 * np.cos(2 * np.pi * f * n / fs + 0.3) + offset, fs)
        assert np.all(tab.flags & fl.NO_TONE), f
        assert np.all(tab.flags & fl.OUT_OF_BAND), f
        assert np.all(np.isnan(tab.freq_hz)), f


def _on_off(f, on_s, off_s, seconds=1.6, noise=1e-4, seed=0):
    t = np.arange(int(seconds * FS)) / FS
    x = noise * np.random.default_rng(seed).standard_normal(t.size)
    on = (t >= on_s) & (t < off_s)
    x[on] += 0.5 * np.cos(2 * np.pi * f * t[on] + 0.3)
    return x


def _straddles(tab, t_edge):
    half_s = FrameTracker(FS).frame_len / 2 / FS
    return np.abs(tab.t_s - t_edge) < half_s


@pytest.mark.parametrize("f", [300.7, 4000.3])
def test_tone_start_and_stop_are_flagged(f):
    tab = track_array(_on_off(f, 0.5, 1.1), FS)
    edge = (tab.flags & fl.EDGE) != 0
    across = _straddles(tab, 0.5) | _straddles(tab, 1.1)
    # a frame with the tone in most of it (it starts or stops within its first or last few %)
    # may pass; the rest of the straddling frames must be flagged
    inside = np.isfinite(tab.freq_hz) & across
    assert np.sum(edge & across) >= np.sum(inside) - 2
    assert not np.any(edge & ~across)
    # what is left unflagged is within the bias goal
    kept = np.isfinite(tab.freq_hz) & ((tab.flags & fl.UNUSABLE) == 0)
    assert np.all(np.abs(tab.freq_hz[kept] - f) < BIAS_GOAL_BINS * _bin_hz())


def test_jump_larger_than_the_frame_resolves_is_flagged():
    # a 200 Hz step (17 bins): frames holding both parts would follow whichever line is stronger,
    # cut short; every frame left unflagged is within the bias goal of the tone at its centre
    t = np.arange(int(1.6 * FS)) / FS
    f_t = np.where(t < 0.8, 3000.0, 3200.0)
    x = 0.5 * np.cos(2 * np.pi * np.cumsum(f_t) / FS) + 1e-4 * np.random.default_rng(1).standard_normal(t.size)
    tab = track_array(x, FS)
    truth = np.where(tab.t_s < 0.8, 3000.0, 3200.0)
    kept = (tab.flags & fl.UNUSABLE) == 0
    assert np.all(np.abs(tab.freq_hz[kept] - truth[kept]) < BIAS_GOAL_BINS * _bin_hz())
    assert np.sum((tab.flags & fl.EDGE) != 0) >= 3


def test_smooth_drift_and_noise_are_not_edges():
    # a target passing the coil moves the frequency smoothly: 100 Hz/s (8.5 Hz, 0.7 bin, across one
    # frame) is no edge; nor is noise at 0 dB. The edge threshold sits 5 noise scales above the
    # misfit's noise level: in 600 noise-only frames a false alarm rate of 1e-3 would give 3 or
    # more with probability 2 % (binomial), so at most 2 are allowed.
    t = np.arange(int(3 * FS)) / FS
    chirp = 0.5 * np.cos(2 * np.pi * (1234.5 * t + 50 * t * t))
    chirp += 1e-4 * np.random.default_rng(2).standard_normal(t.size)
    assert not np.any(track_array(chirp, FS).flags & fl.EDGE)
    hop = FrameTracker(FS).frame_len
    n_frames = 600
    s = 0.5 / math.sqrt(2)  # eta = 0 dB
    x = 0.5 * np.cos(2 * np.pi * 2345.6 * np.arange(n_frames * hop) / FS)
    x += s * np.random.default_rng(3).standard_normal(n_frames * hop)
    tab = track_array(x, FS, TrackerSettings(frame_ms=1000 * hop / FS, hop_ms=1000 * hop / FS))
    assert np.sum((tab.flags & fl.EDGE) != 0) <= 2


def test_analysis_and_stability_leave_the_flagged_frames_out(tmp_path):
    # through coilshift track: the run folder keeps every frame, usable() drops the flagged ones,
    # and the stability analysis counts them as unusable
    from coilshift.analysis.stability.analyse import analyse_stability

    wav = tmp_path / "burst.wav"
    sf.write(wav, _on_off(2222.2, 0.5, 3.3, seconds=4.0), int(FS), subtype="PCM_24")
    run = tmp_path / "run"
    assert main(["track", str(wav), "-o", str(run), "--quiet"]) == 0
    log = read_log(run)
    flags_col = log.table["flags"].to_numpy(np.int64)
    usable = log.usable()
    assert np.any(flags_col & fl.EDGE) and np.any(flags_col & fl.NO_TONE)
    assert not np.any(usable & ((flags_col & fl.UNUSABLE) != 0))
    assert np.all(np.abs(log.freq_hz[usable] - 2222.2) < BIAS_GOAL_BINS * _bin_hz())
    res = analyse_stability(log.t_s, log.freq_hz, usable)
    assert res.n_used == int(usable.sum()) and res.n_unusable == len(usable) - int(usable.sum())


def test_dc_recording_is_refused_by_track(tmp_path, capsys):
    # a constant (a scope export of a stopped oscillator) used to give "tone" frames; now there is
    # no tone in any frame, and track refuses the recording with one line and writes nothing
    wav = tmp_path / "dc.wav"
    sf.write(wav, np.full(int(FS), 0.3), int(FS), subtype="FLOAT")
    run = tmp_path / "run"
    assert main(["track", str(wav), "-o", str(run), "--quiet"]) != 0
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "no tone" in err[0]
    assert not run.exists()
