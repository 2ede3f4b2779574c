"""Folding-aware parts of the tracker: where harmonics fold, which fundamental a line belongs to,
the bound on what unseparated folded lines can do, and frame independence with aliased input."""

from __future__ import annotations

import numpy as np
import pytest

from coilshift.logger.runfolder import flags as fl
from coilshift.logger.tracking.aliasbias import _D_GRID, line_sensitivity
from coilshift.logger.tracking.folding import fold
from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import TrackerSettings
from coilshift.logger.tracking.subbin import FINE_STEPS
from coilshift.logger.tracking.tracker import FrameTracker, track_array

FS = 48000.0


@pytest.mark.parametrize("f_hz, k", [(7512.25, 3), (7512.25, 6), (3333.3, 29), (1000.37, 47), (11987.6, 2)])
def test_fold_matches_the_spectrum_of_the_sampled_harmonic(f_hz, k):
    # common practice (the sampling theorem): a cosine at k f0 sampled at fs shows at |k f0 - m fs|;
    # checked against numpy's FFT of the sampled cosine itself, one-second record (1 Hz bins)
    n = int(FS)
    x = np.cos(2 * np.pi * k * f_hz * np.arange(n) / FS)
    peak_hz = np.argmax(np.abs(np.fft.rfft(x * np.hanning(n)))) * FS / n
    pos_bins, _ = fold(np.array([k * f_hz * n / FS]), n)
    assert abs(pos_bins[0] * FS / n - peak_hz) <= 1.0


def test_fold_leaves_frequencies_below_half_the_rate_unchanged():
    f = np.array([0.0, 12.25, 1000.5, 2048.0])
    pos, image = fold(f, 4096)
    np.testing.assert_array_equal(pos, f)
    assert not image.any()
    pos, image = fold(np.array([4096 - 10.5, 4096 + 10.5]), 4096)
    np.testing.assert_allclose(pos, [10.5, 10.5])
    assert image.tolist() == [True, False]


def naive_pulse(f0, duty, seconds, fs=FS, amp=0.45):
    """A pulse wave sampled without a filter (the value at each sampling instant), like a scope
    export of a logic-level oscillator; computed here, not with the tracker's code."""
    phase = np.mod(f0 * np.arange(int(seconds * fs)) / fs, 1.0)
    x = np.where(phase < duty, 1.0, 0.0)
    return amp * (x - x.mean())


def band_limited_pulse(f0, duty, seconds, ac_coupling_hz=None, amp=0.45, fs=FS):
    """Fourier series of a pulse train up to fs/2 (common practice), optionally AC coupled."""
    t = np.arange(int(seconds * fs)) / fs
    h = np.arange(1, int((fs / 2 - 1) // f0) + 1)
    coef = 2 / (np.pi * h) * np.sin(np.pi * h * duty)
    if ac_coupling_hz:
        coef = coef * (1j * h * f0 / (1j * h * f0 + ac_coupling_hz))
    x = np.zeros(t.size)
    for hh, c in zip(h, coef):
        x += abs(c) * np.cos(2 * np.pi * hh * f0 * t + np.angle(c) + 0.3 * hh)
    return amp * x / np.abs(x).max(), np.abs(coef)


def test_exact_multiple_rate_band_limited_pulse_keeps_its_fundamental():
    # 1000 Hz at 48 kHz: every folded place of a 5 kHz line falls on a multiple of 1 kHz, where
    # the AC-coupled 5 % pulse's own harmonics are; they are far stronger than folded harmonics of
    # 5 kHz could be, so the 5th harmonic (the strongest line) is traced back to 1 kHz
    x, coef = band_limited_pulse(1000.0, 0.05, 0.5, ac_coupling_hz=10000.0)
    assert coef.argmax() > 0
    tab = track_array(x + 1e-4 * np.random.default_rng(1).standard_normal(x.size), FS)
    assert np.all(np.abs(tab.freq_hz - 1000.0) < 0.01)
    assert not np.any(tab.flags & fl.ALIASED)


@pytest.mark.parametrize("f0, duty", [(5000.0, 0.5), (7512.25, 0.1), (2345.67, 0.25)])
def test_naive_pulse_is_aliased_and_on_its_fundamental(f0, duty):
    tab = track_array(naive_pulse(f0, duty, 0.5), FS)
    assert np.all(tab.flags & fl.ALIASED)
    ok = np.abs(tab.freq_hz - f0) <= 0.1
    assert np.all(ok | ((tab.flags & fl.UNUSABLE) != 0))
    assert np.all(np.abs(tab.freq_hz - f0) < 1.0)  # never a subharmonic or a folded line


def test_sensitivity_table_agrees_with_the_whole_tracker():
    # the bound's B(d) comes from the fine stage's own formula on two kernels; here the same
    # quantity is measured through the whole tracker: a noiseless tone plus a line 60 dB down,
    # 16 phases, the largest error per unit relative amplitude. Outside the Hann main lobe the
    # tracker cancels such a line (it would be an "other line"), so only d < 2 bins is compared.
    n = 4096
    plan = Plan(FS, n, TrackerSettings())
    table = line_sensitivity(plan, FINE_STEPS["aboutanios-mulgrew"])
    settings = TrackerSettings(frame_ms=1000 * n / FS + 0.01, hop_ms=1000 * n / FS)
    i = np.arange(n)
    for d in (0.2, 0.5, 0.66, 1.0, 1.3):
        worst = 0.0
        for ph in np.linspace(0, 2 * np.pi, 16, endpoint=False):
            f = 1024.25
            x = np.cos(2 * np.pi * f * i / n + 0.4) + 1e-3 * np.cos(2 * np.pi * (f + d) * i / n + ph)
            worst = max(worst, abs(track_array(x, FS, settings).freq_hz[0] * n / FS - f) / 1e-3)
        expect = np.interp(d, _D_GRID, table)
        assert worst == pytest.approx(expect, rel=0.15, abs=0.01), d


def test_streaming_equals_batch_with_aliased_frames_in_the_chunk():
    # a frame's result depends on its own samples only, also when the chunk it is analysed in
    # holds aliased frames (more harmonic columns) and clean ones
    t = np.arange(int(0.6 * FS)) / FS
    clean = 0.4 * np.cos(2 * np.pi * 1234.5 * t)
    noise = 1e-4 * np.random.default_rng(5).standard_normal(2 * t.size)
    x = np.concatenate([clean, naive_pulse(2345.67, 0.3, 0.6)]) + noise
    batch = track_array(x, FS)
    assert np.any(batch.flags & fl.ALIASED) and not np.all(batch.flags & fl.ALIASED)
    tracker = FrameTracker(FS)
    cuts = np.sort(np.random.default_rng(0).choice(np.arange(1, x.size), size=25, replace=False))
    streamed = type(batch).concat([tracker.push(part) for part in np.split(x, cuts)] + [tracker.finish()])
    for name in ("t_s", "freq_hz", "amp_dbfs", "snr_db", "flags"):
        np.testing.assert_array_equal(getattr(streamed, name), getattr(batch, name), err_msg=name)
    # and alone, the clean frames give the same as inside the mixed chunk
    alone = track_array(clean + noise[:t.size], FS)
    k = len(alone) - 4  # frames that lie wholly in the clean part
    np.testing.assert_array_equal(alone.freq_hz[:k], batch.freq_hz[:k])
