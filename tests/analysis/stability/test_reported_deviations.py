"""The deviations `analyse_stability` reports, and MDEV at its shortest record, against allantools
and a direct sum written from NIST SP 1065 (not from the code's cumulative-sum form)."""

from __future__ import annotations

import numpy as np
import pytest

from coilshift.analysis.stability import allan
from coilshift.analysis.stability.analyse import analyse_stability


def test_reported_tdev_matches_allantools():
    # analyse_stability computes TDEV itself from MDEV (tau/sqrt 3 x Mod sigma_y, SP 1065 eq. 4.5);
    # reference: allantools.tdev (general-purpose library) on the same fractional frequencies.
    # Both are exact sums of the same terms: agreement to rounding (1e-9).
    allantools = pytest.importorskip("allantools")
    rng = np.random.default_rng(4)
    n, tau0, f0 = 4096, 0.02, 30000.0
    t = np.arange(n) * tau0
    f = f0 + 0.05 * rng.standard_normal(n)
    res = analyse_stability(t, f, nominal_hz=f0)
    assert res.span.kind == "settled" and res.span_n_used == n  # the whole record is used
    _, ref, _, _ = allantools.tdev(f / f0, rate=1 / tau0, data_type="freq", taus=res.tau_s)
    assert res.tdev_s == pytest.approx(ref, rel=1e-9)
    _, ref_m, _, _ = allantools.mdev(f / f0, rate=1 / tau0, data_type="freq", taus=res.tau_s)
    assert res.mdev_hz / f0 == pytest.approx(ref_m, rel=1e-9)


def _mdev_direct(y, m):
    """Mod sigma_y(m tau0) from phase x (tau0 = 1), SP 1065 eq. 14, one term per start j; a term
    counts only when all its phase points come from gap-free data."""
    x = np.concatenate(([0.0], np.cumsum(y)))
    nx = x.size
    terms = []
    for j in range(nx - 3 * m + 1):
        i = np.arange(j, j + m)
        terms.append(np.sum(x[i + 2 * m] - 2 * x[i + m] + x[i]))
    terms = np.array(terms)
    good = np.isfinite(terms)
    if not good.any():
        return np.nan, 0
    return float(np.sqrt(np.sum(terms[good] ** 2) / (2.0 * m ** 4 * good.sum()))), int(good.sum())


@pytest.mark.parametrize("m", [1, 2, 4, 16])
def test_mdev_at_the_shortest_record_n_equals_3m_minus_1(m):
    # MDEV needs 3m phase points, i.e. N = 3m - 1 frequency samples (SP 1065 section 5.2.5: the
    # number of terms is N - 3m + 2): one term at N = 3m - 1, none at 3m - 2, two at 3m.
    rng = np.random.default_rng(m)
    for n, terms in ((3 * m - 1, 1), (3 * m, 2), (3 * m - 2, 0)):
        if n < 1:
            continue
        y = rng.standard_normal(n)
        dev, n_terms = allan.mdev(y, [m])
        ref, ref_terms = _mdev_direct(y, m)
        assert n_terms[0] == ref_terms == terms
        if terms:
            assert dev[0] == pytest.approx(ref, rel=1e-9)
        else:
            assert np.isnan(dev[0])
    # the octave factors offered for a record reach exactly this edge (m = 1, 2, 4, ...)
    assert m in allan.octave_factors(3 * m - 1) and m not in allan.octave_factors(3 * m - 2)
    # (allantools drops a deviation made of a single term, so the direct sum is the reference here)


def test_mdev_term_touching_a_gap_is_dropped():
    # a gap inside a term's 3m - 1 samples removes that term and no other (SP 1065 section 5.2.5:
    # each term uses samples j..j+3m-2)
    m = 4
    rng = np.random.default_rng(2)
    y = rng.standard_normal(3 * m + 1)  # three terms, starts 0, 1, 2
    y_gap = y.copy()
    y_gap[-1] = np.nan  # only the last term (start 2) reaches the last sample
    dev, n_terms = allan.mdev(y_gap, [m])
    ref, ref_terms = _mdev_direct(y_gap, m)
    assert n_terms[0] == ref_terms == 2
    assert dev[0] == pytest.approx(ref, rel=1e-9)
    y_gap = y.copy()
    y_gap[0] = np.nan  # only the first term (start 0) touches sample 0
    assert allan.mdev(y_gap, [m])[1][0] == 2
