"""Oscillator pieces: pulse-wave harmonics, RC edges, phase noise, aliasing arithmetic."""

from __future__ import annotations

import allantools
import numpy as np
import pytest

from coilshift.sim.oscillator import PhaseNoise, PulseSynth, apparent_freq_hz, pulse_harmonics


@pytest.mark.parametrize("duty", [0.5, 0.25, 0.1])
def test_pulse_harmonics_match_fourier_series_of_rectangular_pulse(duty):
    # Source: Fourier series of a rectangular pulse train of duty D (any signals-and-systems
    # text): a_n = (2/(n pi)) sin(n pi D). Checked here against a numerical DFT of the ideal
    # pulse (numpy.fft), an outside computation of the same coefficients.
    n_pts = 1 << 16
    phase = np.arange(n_pts) / n_pts
    pulse = ((phase < duty / 2) | (phase > 1 - duty / 2)).astype(float)
    spec = np.fft.rfft(pulse) / n_pts
    dft_a = 2 * spec.real[1:11]
    assert np.allclose(pulse_harmonics(duty, 10), dft_a, atol=2 * np.pi * 10 / n_pts)


def _harmonic_amplitudes(x, fs, f0, orders):
    # coherent sampling: f0 * n falls exactly on a DFT bin, so |X| / (N/2) is the amplitude
    spec = np.fft.rfft(x) / (len(x) / 2)
    return np.abs(spec[(np.asarray(orders) * f0 * len(x) / fs).round().astype(int)])


@pytest.mark.parametrize("duty,tau_us", [(0.25, 0.0), (0.3, 0.0), (0.5, 20.0)])
def test_synth_harmonic_amplitudes(duty, tau_us):
    fs, f0 = 48000.0, 750.0  # 64 samples a period, 1 s = whole periods
    synth = PulseSynth(f0, duty, tau_us, 0.25, fs, anti_alias=True, max_harmonic=25)
    x = synth.next(np.full(48000, f0), fs)
    orders = np.arange(1, 26)
    got = _harmonic_amplitudes(x, fs, f0, orders)
    # Source: rectangular-pulse Fourier series a_n = (2/(n pi)) sin(n pi D), times the first-order
    # RC low-pass magnitude 1/sqrt(1 + (2 pi n f tau)^2); fundamental scaled to 0.25
    a = np.abs(2 / (orders * np.pi) * np.sin(orders * np.pi * duty))
    h = 1 / np.sqrt(1 + (2 * np.pi * orders * f0 * tau_us * 1e-6) ** 2)
    want = 0.25 * a * h / (a[0] * h[0])
    assert np.allclose(got, want, atol=1e-9)
    # anti-alias: 0.45 * 48000 / 750 = 28.8, so all 25 orders are present, none beyond
    assert abs(_harmonic_amplitudes(x, fs, f0, [26])[0]) < 1e-9


def test_synth_anti_alias_drops_harmonics_above_cutoff():
    fs, f0 = 48000.0, 6000.0
    synth = PulseSynth(f0, 0.5, 0.0, 0.5, fs, anti_alias=True, max_harmonic=25)
    # square wave: odd harmonics only; 0.45 fs = 21.6 kHz keeps 6 and 18 kHz (orders 1 and 3)
    assert list(synth.orders) == [1, 3]


def test_phase_noise_allan_deviation():
    # Source: NIST SP 1065 (Riley 2008), power-law noise: white FM has AVAR = h0/(2 tau) and
    # random-walk FM AVAR = (2 pi^2/3) h_-2 tau; a white sequence of std s at rate fs has
    # h0 = 2 s^2/fs, a random walk of diffusion q has h_-2 = q^2/(2 pi^2) [derived], so
    # sigma_white(tau) = w / sqrt(tau) and sigma_rw(tau) = q sqrt(tau/3).
    # Allan deviations computed by allantools (independent library).
    fs = 100.0
    white = PhaseNoise(fs, 0.02, 0.0, seed=5).next(200_000)
    (taus, dev, err, _) = allantools.oadev(white, rate=fs, data_type="freq", taus=[1.0, 10.0])[:4]
    # 2000 s of data: at tau = 1 s the overlapping estimate has hundreds of degrees of freedom
    # (SP 1065 sec. 5), so a 1-sigma error of a few percent; allow 10 %
    assert dev[0] == pytest.approx(0.02, rel=0.10)
    assert dev[1] == pytest.approx(0.02 / np.sqrt(10), rel=0.15)
    walk = PhaseNoise(fs, 0.0, 0.01, seed=6).next(200_000)
    (taus, dev, err, _) = allantools.oadev(walk, rate=fs, data_type="freq", taus=[1.0])[:4]
    assert dev[0] == pytest.approx(0.01 * np.sqrt(1 / 3), rel=0.10)


def test_phase_noise_streams_independently_of_block_size():
    a = PhaseNoise(1000.0, 0.01, 0.01, seed=9)
    b = PhaseNoise(1000.0, 0.01, 0.01, seed=9)
    whole = a.next(3000)
    parts = np.concatenate([b.next(1000), b.next(1500), b.next(500)])
    assert np.allclose(whole, parts, rtol=0, atol=1e-12)


@pytest.mark.parametrize("f_hz,pre,ppm,fs,want_hz,zone", [
    (9000.0, 1, 0.0, 48000.0, 9000.0, 1),
    (40000.0, 1, 0.0, 48000.0, 8000.0, 2),  # folds about fs/2: 48000 - 40000
    (56000.0, 1, 0.0, 48000.0, 8000.0, 3),  # 56000 - 48000
    (160000.0, 16, 0.0, 48000.0, 10000.0, 1),
    (10000.0, 1, 100.0, 48000.0, 10000.0 / 1.0001, 1),
])
def test_apparent_frequency(f_hz, pre, ppm, fs, want_hz, zone):
    # Source: sampling theorem (aliases at |f - k fs|); a clock fast by ppm reads f/(1 + ppm 1e-6)
    got, z = apparent_freq_hz(f_hz, pre, ppm, fs)
    assert float(got) == pytest.approx(want_hz, abs=1e-9)
    assert int(z) == zone
