"""ToneSource: the synthetic recording matches closed forms and independent generators."""

from __future__ import annotations

import datetime as dt
import json

import numpy as np
import pytest
from scipy import signal

from coilshift.logger.sources.synthetic import ToneSource

FS = 48000.0


def test_constant_sine_matches_closed_form():
    # reference: x[n] = A sin(2 pi f n / fs), written out directly
    src = ToneSource(1234.5, 0.5, FS, amplitude=0.3)
    n = np.arange(src.n_frames)
    np.testing.assert_allclose(src.read_all(), 0.3 * np.sin(2 * np.pi * 1234.5 * n / FS), atol=1e-9)


def test_frequency_steps_keep_phase_continuous():
    # reference: after a step at sample n1 the phase is 2 pi (f0 n1 + f1 (n - n1)) / fs
    f0, f1, t1 = 1000.0, 1000.3, 0.25
    src = ToneSource([(0.0, f0), (t1, f1)], 0.5, FS, amplitude=0.5)
    n = np.arange(src.n_frames)
    n1 = int(t1 * FS)
    cycles = np.where(n <= n1, f0 * n, f0 * n1 + f1 * (n - n1)) / FS
    np.testing.assert_allclose(src.read_all(), 0.5 * np.sin(2 * np.pi * cycles), atol=1e-8)
    assert src.frequency_at([0.1, 0.3]).tolist() == [f0, f1]


def test_same_seed_same_samples_any_block_size():
    kw = dict(wave="pulse", duty=0.3, snr_db=20.0, seed=11, hum_hz=50.0, hum_amplitude=0.01)
    a = ToneSource([(0, 900.0), (0.3, 900.4)], 0.6, FS, **kw)
    b = ToneSource([(0, 900.0), (0.3, 900.4)], 0.6, FS, **kw)
    x = a.read_all()
    y = np.concatenate(list(b.blocks(1001)))
    # the noise stream is identical; the phase sum differs only by float rounding
    np.testing.assert_allclose(x, y, atol=1e-6)
    c = ToneSource([(0, 900.0), (0.3, 900.4)], 0.6, FS, **{**kw, "seed": 12}).read_all()
    assert np.max(np.abs(c - x)) > 0.01


def test_pulse_harmonics_match_an_oversampled_ideal_pulse():
    # reference: scipy.signal.square (ideal pulse, duty d) at 64x oversampling, whose FFT gives the
    # harmonic amplitudes of the continuous wave to about 1/64 of a period's discretisation error
    f, d, amp = 1000.0, 0.3, 0.4
    src = ToneSource(f, 0.1, FS, wave="pulse", duty=d, amplitude=amp)
    x = src.read_all()
    over = 64
    t = np.arange(int(0.1 * FS * over)) / (FS * over)
    ideal = amp * (signal.square(2 * np.pi * f * t, duty=d) + 1.0) - 2 * amp * d  # AC-coupled levels
    X = np.abs(np.fft.rfft(x)) / len(x) * 2
    R = np.abs(np.fft.rfft(ideal)) / len(ideal) * 2
    bins = (np.arange(1, 24) * f * 0.1).astype(int)  # harmonics 1..23 lie below fs/2 = 24 kHz
    np.testing.assert_allclose(X[bins], R[bins], atol=0.02 * R[bins[0]])
    # nothing above the last harmonic below Nyquist: no aliased components anywhere else
    others = np.ones(len(X), bool)
    others[bins] = False
    assert X[others].max() < 1e-9
    assert abs(x.mean()) < 1e-9


def test_noise_level_follows_snr():
    # white noise: sample std of N values has relative standard error 1/sqrt(2N) (chi-square)
    clean = ToneSource(1000.0, 1.0, FS, amplitude=0.5).read_all()
    noisy = ToneSource(1000.0, 1.0, FS, amplitude=0.5, snr_db=30.0, seed=3).read_all()
    sigma = np.std(noisy - clean)
    expected = np.sqrt(0.5 ** 2 / 2 / 10 ** 3.0)
    assert sigma == pytest.approx(expected, rel=4 / np.sqrt(2 * len(clean)))


def test_pulse_signal_power_definition():
    # AC power of a two-level wave at 2A(1-d) for a fraction d and -2Ad otherwise: 4 A^2 d (1-d)
    src = ToneSource(1000.0, 0.1, FS, wave="pulse", duty=0.25, amplitude=0.5)
    assert src.signal_power == pytest.approx(4 * 0.25 * 0.25 * 0.75)


def test_clip_dc_hum_and_quantisation():
    x = ToneSource(1000.0, 0.2, FS, amplitude=1.5).read_all()
    assert x.max() == 1.0 and x.min() == -1.0
    y = ToneSource(1000.0, 1.0, FS, amplitude=0.1, dc_offset=0.05, hum_hz=50.0, hum_amplitude=0.02).read_all()
    assert y.mean() == pytest.approx(0.05, abs=1e-9)
    spec = np.abs(np.fft.rfft(y - y.mean())) / len(y) * 2
    assert spec[50] == pytest.approx(0.02, rel=1e-6)  # 1 s record: bin k is k Hz
    q = ToneSource(1000.0, 0.05, FS, amplitude=0.3, bits=16).read_all()
    np.testing.assert_array_equal(q * 32768, np.round(q * 32768))


def test_describe_is_json_and_start_time():
    t0 = dt.datetime(2026, 1, 2, 3, 4, 5, tzinfo=dt.timezone.utc)
    src = ToneSource([(0, 1000.0), (1, 1001.0)], 2.0, FS, seed=5, start_utc=t0)
    json.dumps(src.describe(), allow_nan=False)
    assert src.start_time()[0] == t0
    assert src.duration_s == 2.0 and src.n_frames == 96000


@pytest.mark.parametrize("kw", [dict(wave="triangle"), dict(duty=0.0), dict(duty=1.0)])
def test_bad_parameters(kw):
    with pytest.raises(ValueError):
        ToneSource(1000.0, 1.0, FS, **kw)
