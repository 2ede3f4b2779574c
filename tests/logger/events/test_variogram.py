"""Variances of zero-sum combinations from the frames' variogram (Matheron 1963)."""

import math

import numpy as np
import pytest

from coilshift.logger.events.variogram import Variogram, lag_set


def test_fft_quadratic_form_equals_the_plain_double_sum():
    # independent computation: -1/2 a^T D a with the matrix D(|i - j|) written out
    rng = np.random.default_rng(0)
    v = Variogram(lag_set(0.02))
    y = np.cumsum(rng.standard_normal(20000)) * 0.01 + rng.standard_normal(20000)
    v.add(y, np.ones(y.size, bool))
    idx = np.array([3, 4, 5, 100, 101, 700, 1500, 1500])
    a = np.array([1.0, 1.0, 1.0, -1.0, -1.0, -0.5, -0.25, -0.25])
    dmat = v.at(idx[:, None] - idx[None, :])
    assert v.variance(idx, a) == pytest.approx(-0.5 * a @ dmat @ a, rel=1e-10)


def test_white_noise_difference_of_two_means():
    # closed form: Var(mean of na - mean of nb) = sigma^2 (1/na + 1/nb) for independent frames.
    # Each D(k) = 2 sigma^2 is estimated from ~1e6 pairs (relative error sqrt(2/1e6) = 0.14 %); the
    # double sum amplifies it by at most (sum |a|)^2 / sum a^2 = 10 here: 5 % is > 3 of those errors
    rng = np.random.default_rng(1)
    sigma = 0.02
    y = sigma * rng.standard_normal(1_000_000)
    v = Variogram(lag_set(0.02))
    v.add(y, np.ones(y.size, bool))
    idx = np.concatenate([np.arange(0, 5), np.arange(40, 45)])
    a = np.concatenate([np.full(5, 1 / 5), np.full(5, -1 / 5)])
    assert v.variance(idx, a) == pytest.approx(sigma ** 2 * (1 / 5 + 1 / 5), rel=0.05)


def test_random_walk_variogram_is_linear_in_the_lag():
    # closed form for a random walk with step variance q^2: D(k) = q^2 k
    rng = np.random.default_rng(2)
    q = 0.001
    y = np.cumsum(q * rng.standard_normal(400_000))
    v = Variogram(np.array([1, 10, 100]))
    v.add(y, np.ones(y.size, bool))
    # the estimate at lag k averages ~n/k nearly independent blocks: relative error ~ sqrt(2k/n)
    for k in (1, 10, 100):
        assert v.at([k])[0] == pytest.approx(q * q * k, rel=5 * math.sqrt(2 * k / y.size))


def test_masked_frames_are_left_out():
    y = np.zeros(1000)
    y[500] = 1e6  # a wild frame, masked
    ok = np.ones(1000, bool)
    ok[500] = False
    v = Variogram(np.array([1, 2]))
    v.add(y, ok)
    assert v.at([1, 2]).max() == 0.0
