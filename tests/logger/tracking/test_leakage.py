"""The leakage model against a direct sum written from its definition (not from the module's code)."""

import numpy as np

from coilshift.logger.tracking.leakage import without_model
from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import TrackerSettings


def _kernel(nu, n):
    # sum_{i<n} exp(2j pi nu i / n), summed term by term
    i = np.arange(n)
    return np.exp(2j * np.pi * np.multiply.outer(np.asarray(nu, float), i) / n).sum(axis=-1)


def _direct(n, s, g, wg_conj, f0, ah, target):
    # p = s - sum_h [conj(a_h) W(-h f0 - g) + (h != target) a_h W(h f0 - g)] + mu conj(W(g)),
    # mu = (1/n) sum_h 2 Re(a_h W(h f0)): a real component a e^{+} + conj(a) e^{-} adds a W(f - g)
    # and conj(a) W(-f - g) to the DTFT at g, and its share of the subtracted frame mean is put back
    out = np.empty(s.shape, complex)
    for r in range(s.shape[0]):
        hf = f0[r] * np.arange(1, ah.shape[1] + 1)
        mu = np.sum(2 * np.real(ah[r] * _kernel(hf, n))) / n
        for j in range(g.shape[1]):
            keep = np.arange(ah.shape[1]) != target[r]
            leak = np.sum(np.conj(ah[r]) * _kernel(-hf - g[r, j], n)) + np.sum((ah[r] * _kernel(hf - g[r, j], n))[keep])
            out[r, j] = s[r, j] - leak + mu * wg_conj[r, j]
    return out


def test_without_model_equals_the_direct_sum_with_empty_harmonic_columns():
    n = 512
    plan = Plan(48000.0, n, TrackerSettings(frame_ms=n / 48.0, hop_ms=5.0))
    rng = np.random.default_rng(4)
    f0 = np.array([20.3, 31.7, 12.9])
    g = f0[:, None] + np.array([[-0.5, 0.5]])
    s = rng.standard_normal((3, 2)) + 1j * rng.standard_normal((3, 2))
    wg_conj = np.conj(_kernel(g, n))
    ah = np.zeros((3, 12), complex)
    ah[:, 0] = [0.4, 0.3 - 0.1j, 0.2j]
    ah[0, 2] = 0.05 + 0.02j      # columns held by one frame only
    ah[1, 6] = -0.01j
    ah[2, 2] = 0.03              # columns 1, 3-5, 7-11 are zero in every frame
    target = np.array([0, 0, 2])
    got = without_model(plan, s, g, wg_conj, f0, ah, target)
    np.testing.assert_allclose(got, _direct(n, s, g, wg_conj, f0, ah, target), rtol=1e-9, atol=1e-9)
    # and a chunk with no harmonic amplitude at all leaves only the samples
    zero = np.zeros_like(ah)
    np.testing.assert_allclose(without_model(plan, s, g, wg_conj, f0, zero, target), s, rtol=0, atol=0)
