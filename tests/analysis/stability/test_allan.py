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


# --- the shortest records and precision with gaps (mutation survivors, issue 18) ----------------

def _direct(kind, y, m):
    """NIST SP 1065 section 4, phase form with tau0 = 1, written term by term (x = running sum of y,
    N + 1 phase points): ADEV from non-overlapping second differences of x at stride m, OADEV from
    every second difference x[i+2m] - 2x[i+m] + x[i], MDEV from sums of m of them (eq. 14)."""
    x = np.concatenate(([0.0], np.cumsum(y)))
    d2 = np.array([x[i + 2 * m] - 2 * x[i + m] + x[i] for i in range(len(x) - 2 * m)])
    if kind == "adev":
        d = d2[::m]
        return math.sqrt(np.sum(d ** 2) / (2 * m * m * d.size)), d.size
    if kind == "oadev":
        return math.sqrt(np.sum(d2 ** 2) / (2 * m * m * d2.size)), d2.size
    sums = np.array([d2[j:j + m].sum() for j in range(len(x) - 3 * m + 1)])
    return math.sqrt(np.sum(sums ** 2) / (2 * m ** 4 * sums.size)), sums.size


@pytest.mark.parametrize("kind, shortest", [("adev", lambda m: 2 * m), ("oadev", lambda m: 2 * m),
                                            ("mdev", lambda m: 3 * m - 1)])
@pytest.mark.parametrize("m", [1, 3, 8])
def test_shortest_record_has_one_term_and_one_sample_less_has_none(kind, shortest, m):
    # ADEV and OADEV need 2m frequency samples, MDEV 3m - 1 (SP 1065: 2m + 1 and 3m phase points)
    rng = np.random.default_rng(40 + m)
    y = rng.standard_normal(shortest(m))
    dev, n = getattr(allan, kind)(y, [m])
    ref, n_ref = _direct(kind, y, m)
    assert n[0] == n_ref == 1 and dev[0] == pytest.approx(ref, rel=1e-9)
    # family() shares one set of running sums and must agree, edge included
    fam_dev, fam_n = allan.family(y, [m])[kind]
    assert fam_n[0] == 1 and fam_dev[0] == pytest.approx(ref, rel=1e-9)
    dev, n = getattr(allan, kind)(y[:-1], [m])
    assert n[0] == 0 and np.isnan(dev[0])
    fam_dev, fam_n = allan.family(y[:-1], [m])[kind]
    assert fam_n[0] == 0 and np.isnan(fam_dev[0])


def test_octave_factors_reach_the_longest_that_mdev_allows():
    # MDEV at m needs 3m - 1 samples: 11 samples allow m = 4, 10 do not
    assert list(allan.octave_factors(11)) == [1, 2, 4]
    assert list(allan.octave_factors(10)) == [1, 2]


def test_mdev_with_a_gap_keeps_its_precision_on_fractional_frequency():
    # fractional-frequency data of a good oscillator (1e-11 scale, SP 1065's usual unit) with a gap:
    # the pooled terms of the two gap-free halves, summed directly, to 1e-9 relative
    rng = np.random.default_rng(44)
    y = 1e-11 * rng.standard_normal(600)
    y[290:310] = np.nan
    m = 8
    dev, n = allan.mdev(y, [m])
    parts = [_direct("mdev", y[:290] - np.nanmean(y), m), _direct("mdev", y[310:] - np.nanmean(y), m)]
    total = sum(r ** 2 * k for r, k in parts)
    count = sum(k for _, k in parts)
    # abs=0: pytest.approx's default absolute tolerance (1e-12) would swallow values of 1e-12
    assert n[0] == count and dev[0] == pytest.approx(math.sqrt(total / count), rel=1e-9, abs=0)


@pytest.mark.parametrize("n", [16, 19, 20, 21, 22])
def test_records_between_2m_and_3m_minus_2_give_adev_but_no_mdev(n):
    # m = 8: OADEV needs 16 samples, MDEV 23 (3m - 1); in between MDEV has no term (SP 1065)
    y = np.random.default_rng(45 + n).standard_normal(n)
    fam = allan.family(y, [8])
    assert fam["oadev"][1][0] == n - 16 + 1 and fam["mdev"][1][0] == 0 and np.isnan(fam["mdev"][0][0])
    dev, count = allan.mdev(y, [8])
    assert count[0] == 0 and np.isnan(dev[0])
