"""Corrections: clock error, Nyquist-zone unfolding, prescaler, level warnings.

Expected values come from the sampling relations themselves, re-derived here:
* a tone f sampled at the true rate fs(1+e) and counted at the nominal rate fs reads f/(1+e);
* aliasing (sampling theorem): a real tone f sampled at fs shows at |f - fs round(f/fs)|;
* a divide-by-N counter outputs f/N.
"""

from __future__ import annotations

import numpy as np
import pytest

from coilshift.logger.runfolder import flags
from coilshift.logger.pipeline.corrections import Corrections, clock_ppm_from_tone, level_warnings
from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.frames import FrameTable

FS = 48000.0


def _alias(f_true, fs):
    """Apparent frequency of a real tone f sampled at fs (folding into 0..fs/2)."""
    f_true = np.asarray(f_true, float)
    return np.abs(f_true - fs * np.round(f_true / fs))


def _frames(t, f):
    n = len(t)
    return FrameTable(t, f, np.full(n, -10.0), np.full(n, 40.0))


def test_clock_correction_frequency_and_time():
    ppm = 73.0
    c = Corrections(clock_ppm=ppm)
    fs_true = FS * (1 + ppm * 1e-6)
    f0 = 10_000.0
    # counted against the nominal rate, f0 reads f0 * fs / fs_true
    assert c.freq_to_true(f0 * FS / fs_true, FS) == pytest.approx(f0, rel=1e-14)
    # sample n happened at n / fs_true, not n / fs
    n = np.array([0, 48000, 480000])
    np.testing.assert_allclose(c.time_to_true(n / FS), n / fs_true, rtol=1e-14)
    assert c.true_sample_rate_hz(FS) == pytest.approx(fs_true)


@pytest.mark.parametrize("zone", [1, 2, 3, 4, 5, 6])
def test_nyquist_unfolding_inverts_aliasing(zone):
    fs_true = FS * (1 + 20e-6)
    c = Corrections(clock_ppm=20.0, nyquist_zone=zone)
    lo, hi = (zone - 1) * fs_true / 2, zone * fs_true / 2
    f_true = np.linspace(lo, hi, 9)[1:-1]  # stay off the zone edges
    f_apparent = _alias(f_true, fs_true)
    raw = f_apparent / (1 + 20e-6)  # what a tracker counting at the nominal rate reports
    np.testing.assert_allclose(c.freq_to_true(raw, FS), f_true, rtol=1e-12)
    np.testing.assert_allclose(c.freq_to_raw(f_true, FS), raw, rtol=1e-9, atol=1e-9)


@pytest.mark.parametrize("zone", [1, 2, 3, 4])
def test_apparent_shift_sign_in_even_zones(zone):
    # a +1 Hz move of the true tone moves the apparent tone by +1 Hz in odd zones, -1 Hz in even
    f = (zone - 0.5) * FS / 2
    d_apparent = _alias(f + 1.0, FS) - _alias(f, FS)
    assert d_apparent == pytest.approx(-1.0 if zone % 2 == 0 else 1.0)
    c = Corrections(nyquist_zone=zone)
    assert c.inverts_shift == (zone % 2 == 0)
    loud = [w for w in c.warnings() if "INVERTED" in w]
    assert bool(loud) == (zone % 2 == 0)
    assert c.to_dict()["apparent_shift_sign_inverted"] == (zone % 2 == 0)


def test_nyquist_unfolding_on_sampled_tone():
    # reference: numpy FFT of an actual undersampled cosine shows the tone at the alias frequency
    fs, f_true = 8000.0, 5250.0  # zone 2 (4000..8000 Hz)
    n = np.arange(8000)
    spec = np.abs(np.fft.rfft(np.cos(2 * np.pi * f_true * n / fs)))
    f_seen = float(np.argmax(spec)) * fs / len(n)
    assert f_seen == 2750.0
    assert Corrections(nyquist_zone=2).freq_to_true(f_seen, fs) == pytest.approx(f_true)


def test_prescaler_applies_after_unfolding():
    # a 160 kHz oscillator through a divide-by-4 counter: 40 kHz, zone 2 at 48 kHz -> alias 8 kHz
    f_osc = 160_000.0
    apparent = _alias(f_osc / 4, FS)
    assert apparent == 8000.0
    c = Corrections(divide=4, nyquist_zone=2)
    assert c.freq_to_true(apparent, FS) == pytest.approx(f_osc)
    assert c.freq_to_raw(f_osc, FS) == pytest.approx(apparent)
    assert np.isnan(c.freq_to_raw(1000.0, FS))  # 250 Hz after the divider is not in zone 2


def test_apply_keeps_levels_flags_and_nan():
    raw = FrameTable([0.5, 1.0], [1000.0, np.nan], [-3.0, -80.0], [40.0, -1.0],
                     [0, flags.NO_TONE])
    c = Corrections(clock_ppm=100.0, divide=2)
    out = c.apply(raw, FS)
    assert out.freq_hz[0] == pytest.approx(2000.0 * (1 + 1e-4))
    assert np.isnan(out.freq_hz[1])
    np.testing.assert_array_equal(out.amp_dbfs, raw.amp_dbfs)
    np.testing.assert_array_equal(out.flags, raw.flags)
    assert out.t_s[1] == pytest.approx(1.0 / (1 + 1e-4))
    same = Corrections().apply(raw, FS)
    np.testing.assert_array_equal(same.t_s, raw.t_s)
    assert same.freq_hz is not raw.freq_hz


def test_clock_ppm_from_tone_inverts_the_clock_step():
    ref = 1000.0
    for ppm in (-250.0, 0.0, 37.5):
        measured = ref / (1 + ppm * 1e-6)
        assert clock_ppm_from_tone(measured, ref) == pytest.approx(ppm, abs=1e-9)
        assert Corrections(clock_ppm=ppm).freq_to_true(measured, FS) == pytest.approx(ref, rel=1e-15)


@pytest.mark.parametrize("kw", [dict(divide=0), dict(divide=2.5), dict(nyquist_zone=0),
                                dict(clock_ppm=float("nan")), dict(clock_ppm=2e5)])
def test_invalid_corrections_refused(kw):
    with pytest.raises(InputError):
        Corrections(**kw)


def test_zone_edge_warning():
    raw = _frames([0.1, 0.2], [23900.0, 23950.0])
    assert any("zone edge" in w for w in Corrections(nyquist_zone=3).warnings(raw, FS))
    assert not Corrections().warnings(raw, FS)


def test_level_warnings():
    n = 100
    fl = np.zeros(n, np.int64)
    fl[:5] = flags.CLIPPED
    ft = FrameTable(np.arange(n) * 0.02, np.full(n, 1000.0), np.full(n, -1.0), np.full(n, 50.0), fl)
    w = level_warnings(ft)
    assert len(w) == 1 and "5 of 100 frames (5.00%) are clipped" in w[0]
    quiet = FrameTable(np.arange(n) * 0.02, np.full(n, 1000.0), np.full(n, -70.0), np.full(n, 20.0))
    w = level_warnings(quiet)
    assert len(w) == 1 and "very low" in w[0]
    assert level_warnings(FrameTable(np.arange(n) * 0.02, np.full(n, 1000.0), np.full(n, -20.0),
                                     np.full(n, 50.0))) == []
