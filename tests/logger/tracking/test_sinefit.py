"""IEEE Std 1057 sine fits against independent least-squares solvers and the Cramer-Rao bound."""

import math

import numpy as np
import pytest
from scipy.optimize import curve_fit

from coilshift.logger.tracking import sinefit

FS = 48000.0


def tone(n, f, amp, phase, offset, noise=0.0, seed=0):
    t = np.arange(n) / FS
    x = amp * np.cos(2 * np.pi * f * t + phase) + offset
    if noise:
        x = x + noise * np.random.default_rng(seed).standard_normal(n)
    return x


def test_three_parameter_matches_numpy_lstsq():
    # independent reference: numpy.linalg.lstsq on the same design matrix (IEEE 1057 three-parameter model)
    n, f = 2000, 1234.5
    x = tone(n, f, 0.4, 0.3, 0.05, noise=0.01, seed=1)
    t = np.arange(n) / FS
    design = np.column_stack([np.cos(2 * np.pi * f * t), np.sin(2 * np.pi * f * t), np.ones(n)])
    a, b, c = np.linalg.lstsq(design, x, rcond=None)[0]
    fit = sinefit.fit_sine3(x, FS, f)
    assert fit.amplitude == pytest.approx(math.hypot(a, b), rel=1e-10)
    assert fit.offset == pytest.approx(c, abs=1e-12)
    assert fit.phase_rad == pytest.approx(math.atan2(-b, a), abs=1e-10)


def test_four_parameter_noiseless_exact():
    # IEEE Std 1057 four-parameter fit: a noiseless sine is recovered to round-off
    x = tone(4096, 997.123, 0.7, -1.1, 0.2)
    fit = sinefit.fit_sine4(x, FS, 997.123 + 3.0)  # start a quarter bin away (bin = 11.7 Hz)
    assert fit.converged
    assert fit.freq_hz == pytest.approx(997.123, abs=1e-7)
    assert fit.amplitude == pytest.approx(0.7, rel=1e-9)
    assert fit.phase_rad == pytest.approx(-1.1, abs=1e-7)
    assert fit.offset == pytest.approx(0.2, abs=1e-10)
    assert fit.rms_residual < 1e-9


@pytest.mark.parametrize("f", [523.3, 7000.9])
def test_four_parameter_matches_scipy_curve_fit(f):
    # independent reference library: scipy.optimize.curve_fit (Levenberg-Marquardt) minimises the same
    # sum of squares; both converge to the same minimum, far closer than the noise-limited
    # accuracy (Cramer-Rao std here is about 2 mHz)
    n = 3000
    x = tone(n, f, 0.5, 0.4, -0.1, noise=0.05, seed=5)
    t = np.arange(n) / FS
    fit = sinefit.fit_sine4(x, FS, f + 1.0)

    def model(tt, freq, a, b, c):
        return a * np.cos(2 * np.pi * freq * tt) + b * np.sin(2 * np.pi * freq * tt) + c

    popt, _ = curve_fit(model, t, x, p0=[f + 1.0, 0.4, 0.0, 0.0], xtol=1e-14, ftol=1e-14)
    assert fit.freq_hz == pytest.approx(popt[0], abs=1e-6)
    assert fit.amplitude == pytest.approx(math.hypot(popt[1], popt[2]), rel=1e-7)
    assert fit.offset == pytest.approx(popt[3], abs=1e-8)


def test_four_parameter_variance_near_crb():
    # Handel 2000 (IEEE TIM 49(6)) [pub]: the four-parameter fit is close to the Cramer-Rao bound;
    # CRB for a real tone (Kay 1993 ex. 3.14, REFERENCES section 2):
    # var(f) >= 12 fs^2 / ((2 pi)^2 eta N (N^2 - 1)), eta = A^2 / (2 s^2)
    n, trials, amp, snr_db = 1024, 600, 1.0, 20.0
    eta = 10 ** (snr_db / 10)
    s = amp / math.sqrt(2 * eta)
    rng = np.random.default_rng(7)
    freqs = rng.uniform(2000, 20000, trials)
    phases = rng.uniform(0, 2 * np.pi, trials)
    t = np.arange(n) / FS
    x = amp * np.cos(2 * np.pi * freqs[:, None] * t + phases[:, None]) + s * rng.standard_normal((trials, n))
    f, *_ = sinefit.fit_sine4_frames(x, FS, freqs + rng.uniform(-3, 3, trials))
    crb_std = math.sqrt(12 * FS ** 2 / ((2 * math.pi) ** 2 * eta * n * (n * n - 1)))
    ratio = math.sqrt(np.mean((f - freqs) ** 2)) / crb_std
    # 600 trials: the RMS scatters by about 1/sqrt(1200) = 3 %
    assert 0.88 < ratio < 1.15


def test_crb_check_value():
    # REFERENCES section 2 [derived]: fs = 48 kHz, N = 4800, A = 1, s = 0.01 -> std >= 1.125 mHz
    fs, n, eta = 48000.0, 4800, 1.0 / (2 * 0.01 ** 2)
    std = math.sqrt(12 * fs ** 2 / ((2 * math.pi) ** 2 * eta * n * (n * n - 1)))
    assert std == pytest.approx(1.125e-3, rel=1e-3)


def test_wild_start_is_refused_not_followed():
    # a start five bins off (outside the fit's capture range): steps larger than one bin are refused,
    # so the fit stays put and says it did not converge instead of settling somewhere arbitrary
    x = tone(1024, 3000.0, 0.5, 0.0, 0.0)
    start = 3000.0 + 5 * FS / 1024
    fit = sinefit.fit_sine4(x, FS, start, max_iter=3)
    assert not fit.converged
    assert abs(fit.freq_hz - start) < FS / 1024


@pytest.mark.parametrize("bins_off", [1.5, 4.0, 20.0])
def test_wild_step_is_refused_not_taken(bins_off):
    # The four-parameter fit linearises in the frequency, which holds within a fraction of a DFT
    # bin fs/N (IEEE Std 1057 starts it from an interpolated FFT, REFERENCES section 4). A start
    # further off asks for a step beyond one bin on the first iteration: the fit must refuse it
    # (keep the start, report no convergence) rather than jump to wherever the step points.
    n = 4096
    bin_hz = FS / n
    f0 = 1000.3
    x = tone(n, f0, 1.0, 0.2, 0.0) + tone(n, f0 + 8 * bin_hz, 0.6, 0.0, 0.0)
    start = f0 + bins_off * bin_hz
    f, a, b, c, it, conv = sinefit.fit_sine4_frames(x[None, :], FS, start)
    assert not conv[0]
    # every accepted step is at most one bin, so after `it` iterations the frequency is within
    # `it` bins of the start; a refused first step leaves it exactly at the start
    assert abs(f[0] - start) <= it * bin_hz
    if bins_off >= 4.0:
        assert f[0] == start and it == 1


def test_good_start_converges_to_the_tone():
    # the counterpart: a start 0.3 bin off converges (IEEE 1057), within 1e-6 Hz for a clean tone
    n = 4096
    x = tone(n, 1000.3, 1.0, 0.2, 0.0)
    f, *_, conv = sinefit.fit_sine4_frames(x[None, :], FS, 1000.3 + 0.3 * FS / n)
    assert conv[0] and f[0] == pytest.approx(1000.3, abs=1e-6)
