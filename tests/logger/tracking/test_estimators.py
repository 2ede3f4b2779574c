"""Sub-bin interpolation estimators against published factor values and exactness properties."""

import math

import numpy as np
import pytest

from coilshift.logger.tracking import estimators as est


def complex_tone(n, k, delta, phase=0.7):
    i = np.arange(n)
    return np.exp(2j * np.pi * (k + delta) * i / n + 1j * phase)


def three_bins(x, k, window=None):
    n = x.shape[-1]
    if window == "hann":
        x = x * (0.5 - 0.5 * np.cos(2 * np.pi * np.arange(n) / n))
    spec = np.fft.fft(x)
    return spec[k - 1], spec[k], spec[k + 1]


def test_candan_factor_published_values():
    # REFERENCES.md section 3 [pub]: Candan 2011, tan(pi/N)/(pi/N) for N = 8 and N = 1024
    assert est.candan_factor(8) == pytest.approx(1.0547861751580989, rel=1e-15)
    assert est.candan_factor(1024) == pytest.approx(1.0000031374745559, rel=1e-15)


@pytest.mark.parametrize("n", [8, 16, 1024])
@pytest.mark.parametrize("delta", [-0.5, -0.31, 0.0, 0.12, 0.37, 0.5])
def test_candan2013_exact_for_noiseless_complex_exponential(n, delta):
    # Candan 2013 (IEEE SPL 20(9)) [pub]: exact for a noiseless complex exponential at any N;
    # tolerance = double-precision round-off of an N-point FFT
    k = n // 4
    xl, xp, xr = three_bins(complex_tone(n, k, delta), k)
    assert est.candan2013(xl, xp, xr, n) == pytest.approx(delta, abs=1e-12)


def test_candan2011_is_jacobsen_times_factor():
    # Candan 2011 (IEEE SPL 18(6)) [pub]: the 2011 estimate is Jacobsen's times tan(pi/N)/(pi/N)
    n, k = 16, 4
    xl, xp, xr = three_bins(complex_tone(n, k, 0.3), k)
    assert est.candan2011(xl, xp, xr, n) == pytest.approx(est.candan_factor(n) * est.jacobsen(xl, xp, xr), rel=1e-14)
    # with jacobsen = tan(pi delta/N)/tan(pi/N) (exactness of Candan 2013) the 2011 estimate is
    # (N/pi) tan(pi delta/N) [derived]: its bias is delta^2/(1 - delta^2) times Jacobsen's
    assert est.candan2011(xl, xp, xr, n) == pytest.approx(n / math.pi * math.tan(math.pi * 0.3 / n), abs=1e-12)


@pytest.mark.parametrize("delta", [-0.5, -0.2, 0.0, 0.3, 0.5])
def test_jacobsen_rectangular_relation(delta):
    # Jacobsen & Kootsookos 2007 [pub] rectangular form; Candan 2013's exactness of
    # (N/pi) atan(tan(pi/N) * jacobsen) implies jacobsen = tan(pi delta/N) / tan(pi/N) [derived],
    # so Jacobsen alone is exact at delta = 0 and +-1/2 only as N grows (bias O(1/N^2))
    n, k = 4096, 300
    xl, xp, xr = three_bins(complex_tone(n, k, delta), k)
    assert est.jacobsen(xl, xp, xr) == pytest.approx(math.tan(math.pi * delta / n) / math.tan(math.pi / n), abs=1e-11)


@pytest.mark.parametrize("delta", [-0.45, -0.2, 0.0, 0.2, 0.45])
def test_grandke_hann_asymptotically_exact(delta):
    # Grandke 1983 [pub]: with a = |X(k+1)|/|X(k)|, delta = (2a - 1)/(a + 1); the Hann kernel makes
    # it exact for a complex tone as N grows (finite-N error O(1/N^2): < 1e-9 at N = 4096)
    n, k = 4096, 500
    xl, xp, xr = three_bins(complex_tone(n, k, delta), k, window="hann")
    assert est.grandke_hann(abs(xp), abs(xl), abs(xr)) == pytest.approx(delta, abs=1e-9)


@pytest.mark.parametrize("delta", [-0.5, -0.25, 0.1, 0.33, 0.5])
def test_jacobsen_windowed_hann_matches_closed_form(delta):
    # Jacobsen & Kootsookos 2007 [pub], Q = 0.55 for Hann (an empirical fit, REFERENCES says test
    # loosely). For large N the Hann samples are proportional to 1/(u (u^2 - 1)), u = delta - m,
    # which gives the closed form Q * 1.5 delta / (1 - delta^2) [derived]; its error is <= 0.05 bin.
    n, k = 8192, 700
    xl, xp, xr = three_bins(complex_tone(n, k, delta), k, window="hann")
    got = est.jacobsen_windowed(xl, xp, xr, "hann")
    assert got == pytest.approx(0.55 * 1.5 * delta / (1 - delta ** 2), abs=1e-6)
    assert abs(got - delta) <= 0.0501


def test_jacobsen_windowed_rejects_unknown_window():
    with pytest.raises(ValueError):
        est.jacobsen_windowed(1, 1, 1, "kaiser")


@pytest.mark.parametrize("func", [est.quinn2, est.macleod3])
@pytest.mark.parametrize("delta", [-0.4, -0.1, 0.0, 0.2, 0.45])
def test_quinn_macleod_asymptotically_exact(func, delta):
    # Quinn 1997 and Macleod 1998 [pub] invert the large-N ratio X[k+m] ~ 1/(delta - m) exactly;
    # finite-N error is the same O(1/N^2) term as Jacobsen's: pi^2 delta (1 - delta^2)/(3 N^2)
    n, k = 65536, 4000
    xl, xp, xr = three_bins(complex_tone(n, k, delta), k)
    assert func(xl, xp, xr) == pytest.approx(delta, abs=5 * math.pi ** 2 / (3 * n ** 2) + 1e-11)


def test_aboutanios_mulgrew_noiseless_and_variance_near_crb():
    # Aboutanios & Mulgrew 2005 [pub]: two iterations; noiseless error tiny; variance about
    # 1.0147 x the Cramer-Rao bound for a complex tone (Rife & Boorstyn 1974: var(delta) >=
    # 6 / ((2 pi)^2 eta N) in bins^2 with eta = |a|^2 / s^2 for a complex tone, half the real-tone bound).
    n, k = 256, 40
    rng = np.random.default_rng(11)
    deltas = rng.uniform(-0.5, 0.5, 1500)
    clean = complex_tone(n, k, deltas[:, None])
    got = est.aboutanios_mulgrew(clean, np.full(deltas.shape, k))
    assert np.max(np.abs(got - deltas)) < 1e-6
    eta = 10 ** (20 / 10)
    s = math.sqrt(1 / eta)
    noise = s / math.sqrt(2) * (rng.standard_normal(clean.shape) + 1j * rng.standard_normal(clean.shape))
    err = est.aboutanios_mulgrew(clean + noise, np.full(deltas.shape, k)) - deltas
    crb_std = math.sqrt(6 / ((2 * math.pi) ** 2 * eta * n * (n * n - 1)) * n * n)
    ratio = math.sqrt(np.mean(err ** 2)) / crb_std
    # 1500 trials: the RMS itself scatters by about 1/sqrt(2*1500) = 1.8 %
    assert 0.9 < ratio < 1.3


def test_dtft_matches_fft_on_bins():
    # numpy.fft as the independent reference at integer bins
    rng = np.random.default_rng(3)
    x = rng.standard_normal(64)
    assert np.allclose(est.dtft(x, np.arange(64)), np.fft.fft(x), atol=1e-12)


def test_jacobsen_q_factors_are_the_published_ones():
    # Jacobsen & Kootsookos 2007 (IEEE SP Magazine 24(3)), Table 1 [pub, REFERENCES section 3]
    assert est.JACOBSEN_Q == {"hann": 0.55, "hamming": 0.60, "blackman": 0.55}


@pytest.mark.parametrize("delta", [-0.4, -0.25, -0.1, 0.1, 0.25, 0.4])
def test_jacobsen_windowed_hamming_uses_its_own_q(delta):
    # The windowed formula written out here, Re[Q (X[k-1] - X[k+1]) / (2X[k] + X[k-1] + X[k+1])]
    # with the published Hamming Q = 0.60 (Jacobsen & Kootsookos 2007), on a spectrum windowed by
    # numpy.hamming (an independent window). Q is an empirical fit, so the estimate itself is
    # checked loosely: within 0.03 bin of the truth for |delta| <= 0.4 (a few hundredths of a bin
    # is the residual bias the authors show; from memory). Hann's Q (0.55) misses by 0.045 there.
    n, k = 1024, 100
    spec = np.fft.fft(complex_tone(n, k, delta) * np.hamming(n))
    xl, xp, xr = spec[k - 1], spec[k], spec[k + 1]
    got = est.jacobsen_windowed(xl, xp, xr, "hamming")
    assert got == pytest.approx(np.real(0.60 * (xl - xr) / (2 * xp + xl + xr)), rel=1e-12)
    assert abs(got - delta) <= 0.03


def _quinn1997_written_out(xl, xp, xr):
    # Quinn 1997 (IEEE Trans. SP 45(3)) [pub], second estimator, written term by term:
    # alpha+- = Re(X[k+-1] X[k]*) / |X[k]|^2, delta+ = -alpha+ / (1 - alpha+), delta- = alpha- / (1 - alpha-),
    # delta = (delta+ + delta-) / 2 + tau(delta+^2) - tau(delta-^2),
    # tau(x) = log(3x^2 + 6x + 1) / 4 - sqrt(6) / 24 log((x + 1 - sqrt(2/3)) / (x + 1 + sqrt(2/3)))
    p2 = (xp * np.conj(xp)).real
    a_plus = (xr * np.conj(xp)).real / p2
    a_minus = (xl * np.conj(xp)).real / p2
    d_plus = a_plus / (a_plus - 1.0)
    d_minus = a_minus / (1.0 - a_minus)
    c = np.sqrt(2.0) / np.sqrt(3.0)

    def tau(x):
        return np.log(3.0 * x ** 2 + 6.0 * x + 1.0) / 4.0 - np.sqrt(6.0) / 24.0 * (np.log(x + 1.0 - c)
                                                                                - np.log(x + 1.0 + c))

    return 0.5 * (d_plus + d_minus) + tau(d_plus ** 2) - tau(d_minus ** 2)


def test_quinn2_matches_the_published_formula_on_noisy_samples():
    # With noise delta+ != delta-, so the tau terms (zero on a clean tone) decide the result:
    # 400 noisy tones (7.4 dB per sample: noise variance 2 x 0.3^2), each equal to the formula above
    n, k = 64, 10
    rng = np.random.default_rng(5)
    deltas = rng.uniform(-0.45, 0.45, 400)
    x = complex_tone(n, k, deltas[:, None])
    x = x + 0.3 * (rng.standard_normal(x.shape) + 1j * rng.standard_normal(x.shape))
    spec = np.fft.fft(x, axis=-1)
    xl, xp, xr = spec[:, k - 1], spec[:, k], spec[:, k + 1]
    ref = _quinn1997_written_out(xl, xp, xr)
    ok = np.isfinite(ref)
    assert ok.mean() > 0.95
    got = est.quinn2(xl, xp, xr)
    assert np.allclose(got[ok], ref[ok], rtol=1e-9, atol=1e-12)
    # the tau terms matter here: the estimate differs from Quinn's plain average (delta+ + delta-) / 2
    a_plus, a_minus = (xr / xp).real, (xl / xp).real
    plain = 0.5 * (a_plus / (a_plus - 1.0) + a_minus / (1.0 - a_minus))
    assert np.max(np.abs(ref[ok] - plain[ok])) > 1e-3


def test_aboutanios_mulgrew_default_is_two_iterations():
    # Aboutanios & Mulgrew 2005 [pub]: two iterations. Written here with numpy.fft instead of direct
    # sums: X(k + d +- 1/2) is bin k of the FFT of x[n] exp(-2j pi (d +- 1/2) n / N). On noisy tones a
    # third iteration moves the estimate by more than the 1e-9 tolerance.
    n, k = 128, 20
    rng = np.random.default_rng(8)
    deltas = rng.uniform(-0.5, 0.5, 50)
    x = complex_tone(n, k, deltas[:, None])
    x = x + 0.5 * (rng.standard_normal(x.shape) + 1j * rng.standard_normal(x.shape))
    i = np.arange(n)

    def at(d):
        return np.fft.fft(x * np.exp(-2j * np.pi * d[:, None] * i / n), axis=-1)[:, k]

    d = np.zeros(len(deltas))
    steps = []
    for _ in range(3):
        xp, xm = at(d + 0.5), at(d - 0.5)
        d = d + 0.5 * ((xp + xm) / (xp - xm)).real
        steps.append(d.copy())
    assert np.max(np.abs(steps[2] - steps[1])) > 1e-6
    assert np.allclose(est.aboutanios_mulgrew(x, np.full(len(deltas), k)), steps[1], rtol=0, atol=1e-9)


def test_grandke_hann_of_an_empty_spectrum_is_zero_not_nan():
    # a silent frame (all three magnitudes zero) gives the documented 0, never the 0/0 NaN
    got = est.grandke_hann([0.0, 1.0], [0.0, 0.25], [0.0, 0.5])
    assert got[0] == 0.0
    # and a live one follows delta = s (2a - 1) / (a + 1) with a = 0.5, s = +1 (Grandke 1983): 0
    assert got[1] == pytest.approx(0.0, abs=1e-15)
