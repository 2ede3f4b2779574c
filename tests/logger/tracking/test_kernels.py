"""Spectral kernels and the CFAR threshold factor, against published formulas and direct sums."""

import numpy as np
import pytest

from coilshift.logger.tracking.kernels import dirichlet, hann_kernel, os_cfar_factor


def test_os_cfar_factor():
    # Rohling 1983 [pub]: Pfa = prod_{i<rank} (n - i)/(n - i + T); for rank 1 this is n / (n + T),
    # so T = n (1/Pfa - 1) [derived]
    assert os_cfar_factor(24, 1, 0.01) == pytest.approx(24 * 99, rel=1e-9)
    # Monte Carlo with exponential noise cells (numpy's generator as the independent reference):
    # 200000 trials give Pfa = 0.01 to +-0.00022 (binomial), so +-0.0012 is over 5 sigma
    t = os_cfar_factor(24, 12, 0.01)
    rng = np.random.default_rng(1)
    cells = np.sort(rng.exponential(size=(200000, 24)), axis=1)[:, 11]
    cut = rng.exponential(size=200000)
    assert np.mean(cut > t * cells) == pytest.approx(0.01, abs=0.0012)


@pytest.mark.parametrize("n", [64, 4096, 4095])
def test_dirichlet_equals_direct_sum(n):
    # the definition sum_i exp(2j pi nu i / n), summed directly, is the reference; includes
    # integers (nu = 0, multiples of n, where the closed form has 0/0) and fractional offsets
    nu = np.array([0.0, 0.5, -0.37, 1.0, 3.25, n, -n, 2 * n + 0.1, n / 2 + 0.3])
    i = np.arange(n)
    direct = np.exp(2j * np.pi * nu[:, None] * i[None, :] / n).sum(axis=1)
    np.testing.assert_allclose(dirichlet(nu, n), direct, rtol=0, atol=1e-9 * n)


def test_hann_kernel_equals_windowed_dft():
    # a complex tone through the periodic Hann window, its DFT from numpy.fft as the reference:
    # bin m holds hann_kernel(f - m)
    n, f = 256, 40.3
    i = np.arange(n)
    window = 0.5 - 0.5 * np.cos(2 * np.pi * i / n)
    spec = np.fft.fft(window * np.exp(2j * np.pi * f * i / n))
    m = np.arange(35, 46)
    np.testing.assert_allclose(hann_kernel(f - m, n), spec[m], rtol=0, atol=1e-10)
