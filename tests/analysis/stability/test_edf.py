"""Equivalent degrees of freedom and chi-squared intervals of the Allan-family deviations."""

from __future__ import annotations

import math

import numpy as np
import pytest

from coilshift.analysis.stability import allan
from coilshift.analysis.stability import allan_edf
from coilshift.analysis.stability.allan_edf import confidence_interval, edf_greenhall, edf_with_gaps

try:  # the reference library (test extra); only the tests that compare with it need it
    from allantools import ci as ci_ref
except ImportError:  # pragma: no cover
    ci_ref = None
needs_allantools = pytest.mark.skipif(ci_ref is None, reason="allantools (test extra) not installed")


# ---- equivalent degrees of freedom and intervals ------------------------------------------------

def _edf_cases():
    # where allantools evaluates Greenhall & Riley's basic sum exactly (J <= 100), not by tables
    for kind in ("adev", "oadev", "mdev"):
        for alpha in (2, 1, 0, -1, -2):
            ms = (1, 2, 8, 33, 64, 256) if kind == "adev" else (1, 2, 4, 8, 16, 32)
            for m in ms:
                for n_phase in (300, 1001):
                    if 3 * m < n_phase and _has_reference(kind, alpha, m, n_phase):
                        yield kind, alpha, m, n_phase


def _has_reference(kind, alpha, m, n_phase):
    # allantools raises NotImplementedError where it has no formula (non-overlapping ADEV,
    # alpha = 2, m = 256, N = 1001): such a case is not generated rather than skipped
    overlapping, modified = {"adev": (False, False), "oadev": (True, False), "mdev": (True, True)}[kind]
    if ci_ref is None:
        return True
    try:
        ci_ref.edf_greenhall(alpha, 2, m, n_phase, overlapping=overlapping, modified=modified)
    except NotImplementedError:
        return False
    return True


@needs_allantools
@pytest.mark.parametrize("kind,alpha,m,n_phase", list(_edf_cases()))
def test_edf_matches_allantools_greenhall(kind, alpha, m, n_phase):
    # Greenhall & Riley (PTTI 2003) as implemented in allantools.ci.edf_greenhall (reference
    # library). Tolerance: our Taylor form of the kernel's second difference is exact to
    # about (1/(F t))^6 relative, far below 1e-6.
    overlapping, modified = {"adev": (False, False), "oadev": (True, False), "mdev": (True, True)}[kind]
    ref = ci_ref.edf_greenhall(alpha, 2, m, n_phase, overlapping=overlapping, modified=modified)
    assert edf_greenhall(alpha, m, n_phase, kind) == pytest.approx(ref, rel=1e-6)


def test_edf_too_short_is_nan():
    assert math.isnan(edf_greenhall(0, 256, 300, "adev"))


def test_edf_with_gaps_pools_segments():
    # Satterthwaite (1946): two equal independent segments double the edf; one segment is unchanged
    e = edf_greenhall(0, 4, 401, "oadev")
    assert edf_with_gaps(0, 4, [400], "oadev") == pytest.approx(e, rel=1e-12)
    assert edf_with_gaps(0, 4, [400, 400], "oadev") == pytest.approx(2 * e, rel=1e-12)
    assert edf_with_gaps(0, 4, [400, 5], "oadev") == pytest.approx(e, rel=1e-12)  # too short: no terms


@needs_allantools
def test_confidence_interval_matches_allantools():
    # chi-squared interval, SP 1065 section 5.3.1; reference: allantools.ci.confidence_interval
    for edf in (1.7, 12.0, 250.0):
        lo, hi = confidence_interval(np.array([2.0]), np.array([edf]), 0.6827)
        rlo, rhi = ci_ref.confidence_interval(2.0, edf, ci=0.6827)
        assert lo[0] == pytest.approx(rlo, rel=1e-9) and hi[0] == pytest.approx(rhi, rel=1e-9)


def test_interval_coverage_white_fm():
    # frequency of the 68.27% interval covering the true sigma (white FM: sigma_y(m) = s/sqrt(m),
    # SP 1065 Table 11); binomial sd of the rate over 400 trials is 0.023, allow 4 sd
    rng = np.random.default_rng(11)
    m, n = 4, 256
    e = edf_greenhall(0, m, n + 1, "oadev")
    hits = 0
    for _ in range(400):
        d, _ = allan.oadev(rng.standard_normal(n), [m])
        lo, hi = confidence_interval(d, [e], 0.6827)
        hits += bool(lo[0] <= 1 / math.sqrt(m) <= hi[0])
    assert abs(hits / 400 - 0.6827) <= 4 * math.sqrt(0.6827 * 0.3173 / 400)


@pytest.mark.parametrize("kind", ["oadev", "mdev"])
@pytest.mark.parametrize("alpha", [2, 1, 0, -1, -2])
@pytest.mark.parametrize("m,n_phase", [(2048, 100_001), (8192, 40_001), (5000, 20_003), (1400, 1_000_001)])
def test_long_basic_sums_match_term_by_term(kind, alpha, m, n_phase):
    # independent computation written differently: above 4000 terms the basic sum is taken by
    # Euler-Maclaurin between the kernel's kinks; here every term is summed one by one. The
    # neglected Euler-Maclaurin terms are below 1e-9 relative (Abramowitz & Stegun 23.1.30: the
    # next term is B4/4! times the third derivative of the terms, which vary on the scale of
    # m >= 1000 terms)
    overlapping, modified = allan_edf.KINDS[kind]
    d = 2
    F = 1.0 if modified else float(m)
    S = float(m)
    M = 1 + math.floor(S * (n_phase - (m / F + m * d)) / m + 1e-9)
    J = int(min(M, (d + 1) * S))
    if not modified and alpha <= 0 and m * (d + 1) > 100:
        F = math.inf
    assert J > allan_edf._FAST_SUM_FROM
    exact = allan_edf._terms_sum_exact(J, M, S, F, alpha, d)
    assert allan_edf._terms_sum_fast(J, M, S, F, alpha, d) == pytest.approx(exact, rel=1e-8)
