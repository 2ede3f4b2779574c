"""Sub-bin frequency estimators from a few DFT samples around a spectral peak.

Every function is vectorised: the DFT samples may be arrays of any (equal) shape, one estimate per
element. ``delta`` is the offset of the tone from bin ``k`` in bins (normally ``|delta| <= 0.5``),
so the tone sits at ``(k + delta) * fs / N``. The DFT convention is numpy's,
``X[m] = sum_n x[n] exp(-2j pi m n / N)``.

Which one to use (see ``docs/tracker.md`` for measured numbers):

* :func:`grandke_hann` - two magnitudes of a Hann-windowed DFT; exact for a noiseless complex tone
  as N grows, robust, used by the tracker for its coarse stage.
* :func:`jacobsen`, :func:`candan2011`, :func:`candan2013` - three complex rectangular-window
  samples; Candan 2013 is exact for a noiseless complex exponential at any N.
* :func:`jacobsen_windowed` - the windowed form with an empirical correction factor Q.
* :func:`quinn2`, :func:`macleod3` - three complex rectangular samples, lower variance than
  Jacobsen away from bin centre.
* :func:`aboutanios_mulgrew` - iterative interpolation on DFT samples computed at half-bin offsets
  from the time series itself; variance about 1.0147 x the Cramer-Rao bound.
"""

from __future__ import annotations

import math

import numpy as np

#: Jacobsen & Kootsookos 2007, Table 1: empirical Q factors for the windowed three-sample estimator.
JACOBSEN_Q = {"hann": 0.55, "hamming": 0.60, "blackman": 0.55}


def grandke_hann(mag_peak, mag_left, mag_right):
    """Two-bin Hann-window interpolation (Grandke 1983).

    Parameters
    ----------
    mag_peak, mag_left, mag_right : array_like
        Magnitudes ``|X[k]|``, ``|X[k-1]|``, ``|X[k+1]|`` of a Hann-windowed DFT.

    Returns
    -------
    ndarray
        ``delta`` in bins. With ``a = |X[k+s]| / |X[k]|`` for the larger neighbour ``s = +-1``,
        ``delta = s (2a - 1) / (a + 1)``.

    References
    ----------
    T. Grandke, "Interpolation algorithms for discrete Fourier transforms of weighted signals",
    IEEE Trans. Instrum. Meas. 32(2), 350-355, 1983.
    """
    mag_peak = np.asarray(mag_peak, dtype=float)
    left = np.asarray(mag_left, dtype=float)
    right = np.asarray(mag_right, dtype=float)
    sign = np.where(right >= left, 1.0, -1.0)
    big = np.maximum(left, right)
    with np.errstate(divide="ignore", invalid="ignore"):
        a = big / mag_peak
        delta = sign * (2.0 * a - 1.0) / (a + 1.0)
    return np.where(mag_peak > 0, delta, 0.0)


def jacobsen(x_left, x_peak, x_right):
    """Three-sample rectangular-window estimator (Jacobsen & Kootsookos 2007).

    ``delta = Re[(X[k-1] - X[k+1]) / (2 X[k] - X[k-1] - X[k+1])]``.

    References
    ----------
    E. Jacobsen, P. Kootsookos, "Fast, accurate frequency estimators", IEEE Signal Processing
    Magazine 24(3), 123-125, 2007.
    """
    xl, xp, xr = (np.asarray(v, dtype=complex) for v in (x_left, x_peak, x_right))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.real((xl - xr) / (2.0 * xp - xl - xr))


def jacobsen_windowed(x_left, x_peak, x_right, window: str = "hann"):
    """Windowed three-sample estimator ``delta = Re[Q (X[k-1] - X[k+1]) / (2X[k] + X[k-1] + X[k+1])]``.

    Q is the empirical factor of Jacobsen & Kootsookos 2007 (0.55 Hann, 0.60 Hamming, 0.55
    Blackman); the estimate carries a small residual bias because Q is a fit.
    """
    try:
        q = JACOBSEN_Q[window]
    except KeyError:
        raise ValueError(f"no Jacobsen Q factor for window {window!r}") from None
    xl, xp, xr = (np.asarray(v, dtype=complex) for v in (x_left, x_peak, x_right))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.real(q * (xl - xr) / (2.0 * xp + xl + xr))


def candan_factor(n: int) -> float:
    """Candan's bias-correction factor ``tan(pi/N) / (pi/N)`` for an N-point DFT."""
    return math.tan(math.pi / n) / (math.pi / n)


def candan2011(x_left, x_peak, x_right, n: int):
    """Jacobsen's estimate times ``tan(pi/N)/(pi/N)`` (Candan 2011).

    References
    ----------
    C. Candan, "A method for fine resolution frequency estimation from three DFT samples",
    IEEE Signal Processing Letters 18(6), 351-354, 2011.
    """
    return candan_factor(n) * jacobsen(x_left, x_peak, x_right)


def candan2013(x_left, x_peak, x_right, n: int):
    """``delta = (N/pi) atan(tan(pi/N) * jacobsen)`` - exact for a noiseless complex exponential.

    References
    ----------
    C. Candan, "Analysis and further improvement of fine resolution frequency estimation method
    from three DFT samples", IEEE Signal Processing Letters 20(9), 913-916, 2013.
    """
    k = math.pi / n
    return np.arctan(math.tan(k) * jacobsen(x_left, x_peak, x_right)) / k


def quinn2(x_left, x_peak, x_right):
    """Quinn's second estimator from three rectangular-window DFT samples (Quinn 1997).

    References
    ----------
    B. G. Quinn, "Estimation of frequency, amplitude, and phase from the DFT of a time series",
    IEEE Trans. Signal Processing 45(3), 814-817, 1997.
    """
    xl, xp, xr = (np.asarray(v, dtype=complex) for v in (x_left, x_peak, x_right))
    with np.errstate(divide="ignore", invalid="ignore"):
        ap = np.real(xr / xp)
        am = np.real(xl / xp)
        dp = -ap / (1.0 - ap)
        dm = am / (1.0 - am)

        def tau(v):
            r = math.sqrt(2.0 / 3.0)
            return 0.25 * np.log(3 * v * v + 6 * v + 1) - math.sqrt(6) / 24 * np.log((v + 1 - r) / (v + 1 + r))

        return (dp + dm) / 2.0 + tau(dp * dp) - tau(dm * dm)


def macleod3(x_left, x_peak, x_right):
    """Macleod's three-sample estimator on rectangular-window DFT samples (Macleod 1998).

    ``gamma = (R[-1] - R[+1]) / (2 R[0] + R[-1] + R[+1])`` with ``R[m] = Re(X[k+m] X[k]*)`` and
    ``delta = (sqrt(1 + 8 gamma^2) - 1) / (4 gamma)``.

    References
    ----------
    M. D. Macleod, "Fast nearly ML estimation of the parameters of real or complex single tones
    or resolved multiple tones", IEEE Trans. Signal Processing 46(1), 141-148, 1998.
    """
    xl, xp, xr = (np.asarray(v, dtype=complex) for v in (x_left, x_peak, x_right))
    rm = np.real(xl * np.conj(xp))
    r0 = np.abs(xp) ** 2
    rp = np.real(xr * np.conj(xp))
    with np.errstate(divide="ignore", invalid="ignore"):
        gamma = (rm - rp) / (2 * r0 + rm + rp)
        delta = (np.sqrt(1 + 8 * gamma * gamma) - 1) / (4 * gamma)
    return np.where(gamma == 0, 0.0, delta)


def dtft(x, freq_bins):
    """DTFT of the rows of ``x`` at fractional bin positions, ``sum_n x[n] exp(-2j pi f n / N)``.

    ``x`` has shape (..., N); ``freq_bins`` broadcasts against ``x.shape[:-1]``. Direct sums, for
    estimators and tests; the tracker uses a faster blocked evaluation.
    """
    x = np.asarray(x)
    n = x.shape[-1]
    f = np.asarray(freq_bins, dtype=float)[..., None]
    return np.sum(x * np.exp(-2j * np.pi * f * np.arange(n) / n), axis=-1)


def aboutanios_mulgrew(x, k, iterations: int = 2):
    """Iterative interpolation of Aboutanios & Mulgrew 2005 on the rectangular-window DFT.

    Parameters
    ----------
    x : array_like, shape (..., N)
        Time series (real or complex), one per row.
    k : array_like of int
        Peak bin of each row's DFT.
    iterations : int
        Number of iterations (the paper shows two reach about 1.0147 x the Cramer-Rao bound).

    Returns
    -------
    ndarray
        ``delta`` in bins, ``delta <- delta + 1/2 Re[(X+ + X-)/(X+ - X-)]`` with
        ``X+- = DTFT(k + delta +- 1/2)``.

    References
    ----------
    E. Aboutanios, B. Mulgrew, "Iterative frequency estimation by interpolation on Fourier
    coefficients", IEEE Trans. Signal Processing 53(4), 1237-1242, 2005.
    """
    x = np.asarray(x)
    k = np.asarray(k, dtype=float)
    delta = np.zeros(np.broadcast_shapes(k.shape, x.shape[:-1]))
    for _ in range(iterations):
        xp = dtft(x, k + delta + 0.5)
        xm = dtft(x, k + delta - 0.5)
        with np.errstate(divide="ignore", invalid="ignore"):
            delta = delta + 0.5 * np.real((xp + xm) / (xp - xm))
    return delta
