"""The harmonic-support rule of the fundamental search, on a signal no pulse wave could make."""

import numpy as np
import pytest

from coilshift.logger.tracking.settings import TrackerSettings
from coilshift.logger.tracking.tracker import track_array

FS = 48000.0


@pytest.mark.parametrize("f_hz, other_hz", [(5000.0, 1000.0), (7000.0, 1000.0)])
def test_unrelated_tone_20_db_down_at_a_fifth_is_not_the_fundamental(f_hz, other_hz):
    # A clean tone with an unrelated weaker tone (20 dB down) at f/5 or f/7. Read as harmonic 5
    # (or 7) of the weak tone, the strong one would need support from at least half of harmonics
    # 1..5 (1..7): it has only harmonic 1 and itself (2 of the 3 or 4 needed), so the tracker must
    # report the strong tone itself. The truth is the signal's own frequency (no model involved).
    t = np.arange(int(1.0 * FS)) / FS
    rng = np.random.default_rng(5)
    x = 0.5 * np.cos(2 * np.pi * f_hz * t) + 0.05 * np.cos(2 * np.pi * other_hz * t + 0.3)
    x = x + 1e-3 * rng.standard_normal(t.size)
    tab = track_array(x, FS, TrackerSettings())
    assert len(tab) > 20
    assert np.all(np.abs(tab.freq_hz - f_hz) < 0.01)


@pytest.mark.parametrize("f_hz, other_hz", [(4000.0, 1000.0), (5000.0, 1250.0), (5000.0, 2500.0),
                                            (6000.0, 2000.0), (3000.0, 1500.0), (9000.0, 3000.0)])
def test_unrelated_tone_at_a_half_third_or_quarter_is_not_the_fundamental(f_hz, other_hz):
    # Two lines alone, f and f/m (m = 2, 3, 4), fit "harmonic m of f/m" and "two tones" equally;
    # a waveform with a strong harmonic m also shows harmonics around it (the |sin(pi k d)| / k
    # envelope of a pulse train, common practice), here all of them (up to 2m) lie below fs/2 and
    # none is there, so the tone itself is the fundamental. Truth: the signal's own frequency.
    t = np.arange(int(0.5 * FS)) / FS
    rng = np.random.default_rng(6)
    x = 0.5 * np.sin(2 * np.pi * f_hz * t) + 0.05 * np.sin(2 * np.pi * other_hz * t + 1.0)
    x = x + 1e-3 * rng.standard_normal(t.size)
    tab = track_array(x, FS, TrackerSettings())
    assert np.all(np.abs(tab.freq_hz - f_hz) < 0.01)


@pytest.mark.parametrize("duty, m_strong", [(0.2, 2), (0.1, 5), (0.05, 8)])
def test_pulse_with_a_harmonic_stronger_than_its_fundamental_keeps_it(duty, m_strong):
    # The other side of the rule: an AC-coupled pulse train (Fourier series of a pulse of duty d,
    # |c_k| ~ |sin(pi k d)| / k, through a first-order high-pass at 10 kHz) whose strongest line is
    # harmonic m_strong; its neighbours are there, so the fundamental is the pulse's own.
    f0 = 1000.37
    t = np.arange(int(0.5 * FS)) / FS
    k = np.arange(1, int(FS / 2 / f0) + 1)
    c = np.sin(np.pi * k * duty) / k * (1j * k * f0 / (1j * k * f0 + 10000.0))
    assert np.argmax(np.abs(c)) + 1 == m_strong  # the case is what it says
    x = sum(abs(ci) * np.cos(2 * np.pi * kk * f0 * t + np.angle(ci)) for kk, ci in zip(k, c))
    x = 0.5 * x / np.abs(x).max() + 1e-4 * np.random.default_rng(7).standard_normal(t.size)
    tab = track_array(x, FS, TrackerSettings())
    assert np.all(np.abs(tab.freq_hz - f0) < 0.01)
