"""Allan-family estimators against published tables, an independent library, and the gap rule."""

from __future__ import annotations

import math

import numpy as np
import pytest

from coilshift.analysis.stability import allan


def nist_1000_point() -> np.ndarray:
    """NIST SP 1065 section 12.4 validation set: n(i+1) = 16807 n(i) mod (2^31 - 1), y = n/(2^31 - 1)."""
    n = np.empty(1000, dtype=np.int64)
    n[0] = 1234567890
    for i in range(999):
        n[i + 1] = (16807 * n[i]) % 2147483647
    return n / 2147483647.0


def assert_printed(value: float, published: float, digits: int = 7) -> None:
    """Equal to the published value to its printed precision (7 significant figures, half a unit
    in the last printed place)."""
    exp = math.floor(math.log10(abs(published)))
    assert abs(value - published) <= 0.5 * 10 ** (exp - digits + 1) * (1 + 1e-9), (value, published)


# NIST SP 1065 (Riley 2008) section 12.4, Tables 31-32: the 1000-point set [pub]
NIST_TABLE = {
    "adev": ([2.922319e-01, 9.965736e-02, 3.897804e-02], [999, 99, 9]),
    "oadev": ([2.922319e-01, 9.159953e-02, 3.241343e-02], [999, 981, 801]),
    "mdev": ([2.922319e-01, 6.172376e-02, 2.170921e-02], [999, 972, 702]),
    "tdev": ([1.687202e-01, 3.563623e-01, 1.253382e+00], [999, 972, 702]),
}


def _dev(kind, y, ms, tau0=1.0):
    if kind == "tdev":
        return allan.tdev(y, ms, tau0)
    return getattr(allan, kind)(y, ms)


def test_nist_1000_point_generator():
    # SP 1065 section 12.4: n1 = 395529916, n2 = 1209410747, mean 4.897745e-01, std 2.884664e-01
    y = nist_1000_point()
    assert round(y[1] * 2147483647) == 395529916 and round(y[2] * 2147483647) == 1209410747
    assert_printed(y.mean(), 4.897745e-01)
    assert_printed(y.std(ddof=1), 2.884664e-01)


@pytest.mark.parametrize("kind", sorted(NIST_TABLE))
def test_nist_1000_point_values_and_counts(kind):
    # NIST SP 1065 Tables 31-32 [pub]: tau = 1, 10, 100 with tau0 = 1
    dev, n = _dev(kind, nist_1000_point(), [1, 10, 100])
    published, counts = NIST_TABLE[kind]
    for d, p in zip(dev, published):
        assert_printed(d, p)
    assert list(n) == counts


# NBS Monograph 140 Annex 8.E; NIST SP 1065 Tables 29-30 [pub]: frequency data, tau0 = 1
NBS_DATA = np.array([892, 809, 823, 798, 671, 644, 883, 903, 677], dtype=float)
NBS_TABLE = {
    "adev": [91.22945, 115.8082],
    "oadev": [91.22945, 85.95287],
    "mdev": [91.22945, 74.78849],
    "tdev": [52.67135, 86.35831],
}


@pytest.mark.parametrize("kind", sorted(NBS_TABLE))
def test_nbs_10_point_set(kind):
    dev, _ = _dev(kind, NBS_DATA, [1, 2])
    for d, p in zip(dev, NBS_TABLE[kind]):
        assert_printed(d, p)


@pytest.mark.parametrize("kind", ["adev", "oadev", "mdev", "tdev"])
@pytest.mark.parametrize("noise", ["white", "random_walk", "offset_white"])
def test_agrees_with_allantools(kind, noise):
    # allantools (general-purpose reference library, frequency input converted to phase there)
    allantools = pytest.importorskip("allantools")
    rng = np.random.default_rng({"white": 1, "random_walk": 2, "offset_white": 3}[noise])
    n = 3000
    y = rng.standard_normal(n) * 1e-9
    if noise == "random_walk":
        y = np.cumsum(y)
    elif noise == "offset_white":
        y = y + 3e-6  # a constant offset must change nothing
    tau0 = 0.02
    ms = allan.octave_factors(n)
    mine, _ = _dev(kind, y, ms, tau0)
    taus_ref, ref, _, _ = getattr(allantools, kind)(y, rate=1 / tau0, data_type="freq", taus=ms * tau0)
    assert np.allclose(taus_ref, ms * tau0, rtol=1e-12)
    np.testing.assert_allclose(mine, ref, rtol=1e-9)


def test_deviation_of_hz_equals_nominal_times_fractional():
    # the estimators are homogeneous of degree one (definition, SP 1065 section 4)
    rng = np.random.default_rng(4)
    f_hz = 20000 + 0.05 * rng.standard_normal(500)
    ms = [1, 2, 4, 8]
    for fn in (allan.adev, allan.oadev, allan.mdev):
        np.testing.assert_allclose(fn(f_hz, ms)[0], 20000 * fn(f_hz / 20000, ms)[0], rtol=1e-10)


def _pooled(halves, fn, ms):
    """Term-weighted pooling of the two halves' variances: what the gap rule promises."""
    num = np.zeros(len(ms))
    den = np.zeros(len(ms))
    for h in halves:
        d, n = fn(h, ms)
        num += np.where(n > 0, d, 0) ** 2 * n
        den += n
    return np.sqrt(num / den), den


@pytest.mark.parametrize("fn", [allan.adev, allan.oadev, allan.mdev])
def test_gap_equals_two_halves_pooled(fn):
    # derived from the definitions: each term uses gap-free samples only, so a record with a
    # gap is the two stretches' terms together. The halves are whole multiples of every m so
    # the non-overlapping blocks line up the same way.
    rng = np.random.default_rng(5)
    a, b = rng.standard_normal(256), rng.standard_normal(512)
    y = np.concatenate([a, np.full(128, np.nan), b])
    ms = [1, 2, 4, 8, 16, 32]
    dev, n = fn(y, ms)
    ref, n_ref = _pooled([a, b], fn, ms)
    np.testing.assert_allclose(dev, ref, rtol=1e-12)
    assert np.array_equal(n, n_ref)


@pytest.mark.parametrize("fn", [allan.adev, allan.oadev, allan.mdev])
def test_gap_is_not_bridged(fn):
    # a frequency step hidden in a gap must not appear in any statistic
    rng = np.random.default_rng(6)
    y = rng.standard_normal(1024)
    y[500:540] = np.nan
    stepped = y.copy()
    stepped[540:] += 1e6
    ms = [1, 2, 4, 8, 16, 64]
    np.testing.assert_allclose(fn(stepped, ms)[0], fn(y, ms)[0], rtol=1e-9)


def test_too_short_gives_no_terms():
    dev, n = allan.oadev(np.array([1.0, 2.0, 3.0]), [2])
    assert n[0] == 0 and np.isnan(dev[0])
    assert list(allan.octave_factors(9)) == [1, 2]  # MDEV needs 3m - 1 samples
    assert allan.octave_factors(1).size == 0
