"""Closed-form spectral kernels and thresholds the tracker stages share (no state, no settings)."""

from __future__ import annotations

import math

import numpy as np


def clamp(a, lo, hi):
    """``np.clip`` without its Python-level overhead (called many times per chunk)."""
    return np.minimum(np.maximum(a, lo), hi)


def os_cfar_factor(cells: int, rank: int, p_false: float) -> float:
    """Threshold factor T on the ``rank``-th smallest of ``cells`` exponential noise powers.

    An ordered-statistic CFAR test declares a signal when ``P > T * X(rank)``; for independent
    exponential cells the false-alarm probability is ``prod_{i=0}^{rank-1} (cells - i) /
    (cells - i + T)`` (Rohling 1983, IEEE Trans. Aerosp. Electron. Syst. 19(4)). Solved for T.
    """
    def pfa(t):
        return math.prod((cells - i) / (cells - i + t) for i in range(rank))

    lo, hi = 0.0, 1.0
    while pfa(hi) > p_false:
        hi *= 2.0
    for _ in range(100):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if pfa(mid) > p_false else (lo, mid)
    return hi


def dirichlet(nu, n: int):
    """Rectangular-window kernel ``sum_{i=0}^{n-1} exp(2j pi nu i / n)`` for fractional ``nu`` (bins).

    A component ``a exp(2j pi f i / n)`` contributes ``a * dirichlet(f - g, n)`` to the DTFT
    ``sum_i x[i] exp(-2j pi g i / n)``.
    """
    z = np.pi * np.asarray(nu, dtype=float)
    num = np.sin(z)
    den = np.sin(z / n)
    small = np.abs(den) < 1e-12
    if np.logical_or.reduce(small, axis=None):  # ndarray.any() goes through Python-level wrappers
        # at nu = multiple of n the sum is n (times the sign of the alternating phase)
        ratio = np.where(small, n * np.cos(z) / np.cos(z / n), num / np.where(small, 1.0, den))
    else:
        ratio = num / den
    return ratio * np.exp(1j * (z * ((n - 1) / n)))


def hann_kernel(nu, n: int):
    """Kernel of the periodic Hann window ``0.5 - 0.5 cos(2 pi i / n)``, same convention as :func:`dirichlet`."""
    nu = np.asarray(nu, dtype=float)
    return 0.5 * dirichlet(nu, n) - 0.25 * dirichlet(nu + 1, n) - 0.25 * dirichlet(nu - 1, n)
