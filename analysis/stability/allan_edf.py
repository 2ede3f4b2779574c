"""Confidence intervals for the Allan-family deviations.

* Equivalent degrees of freedom (edf) by the general algorithm of Greenhall and Riley, which
  covers the non-overlapping, overlapping and modified Allan variances for every power-law
  noise type (NIST SP 1065 section 5.3; C. A. Greenhall and W. J. Riley, "Uncertainty of
  stability variances based on finite differences", Proc. 35th PTTI Meeting, 2003). The
  paper's basic sum (its eqs. 7-10) is evaluated exactly, vectorised, for every case; the
  paper's table approximations for long sums are not needed. Its infinite-F limit is used
  for unmodified variances with alpha <= 0 and m (d + 1) > 100, as the paper prescribes.
* Chi-squared confidence intervals from the edf (SP 1065 section 5.3.1).

Noise exponents alpha follow S_y(f) ~ f^alpha: +2 white PM, +1 flicker PM, 0 white FM,
-1 flicker FM, -2 random-walk FM. The noise type per averaging time is named in
:mod:`.slope_id`.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

#: estimator kinds -> (overlapping, modified); all are second differences (d = 2)
KINDS = {"adev": (False, False), "oadev": (True, False), "mdev": (True, True), "tdev": (True, True)}

_J_MAX = 100  # the paper's limit above which unmodified variances switch to the F -> inf form
_FAST_SUM_FROM = 4000  # longer basic sums are summed by Euler-Maclaurin between the kinks
_KINK_WINDOW = 64  # terms summed one by one on each side of a kink


# ---- Greenhall & Riley (2003) edf -------------------------------------------------------------

def _xlogx(t: np.ndarray, power: int) -> np.ndarray:
    """|t|^power * ln|t| with the limit 0 at t = 0."""
    a = np.abs(t)
    return np.where(a == 0, 0.0, a ** power * np.log(np.where(a == 0, 1.0, a)))


def _sw(t: np.ndarray, alpha: int) -> np.ndarray:
    """Eq. 7 of Greenhall & Riley: the generalised autocovariance kernel for noise alpha."""
    a = np.abs(t)
    if alpha == 2:
        return -a
    if alpha == 1:
        return _xlogx(a, 2)
    if alpha == 0:
        return a ** 3
    if alpha == -1:
        return _xlogx(a, 4)
    if alpha == -2:
        return a ** 5
    raise ValueError(f"noise exponent alpha={alpha} outside -2..2")


def _sw_even_derivs(t: np.ndarray, alpha: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """2nd, 4th and 6th derivatives of sw at t > 0 (for the Taylor form of the second difference)."""
    ln = np.log(t)
    z = np.zeros_like(t)
    if alpha == 2:
        return z, z, z
    if alpha == 1:
        return 2 * ln + 3, -2 / t ** 2, -12 / t ** 4
    if alpha == 0:
        return 6 * t, z, z
    if alpha == -1:
        return 12 * t ** 2 * ln + 7 * t ** 2, 24 * ln + 50, -24 / t ** 2
    if alpha == -2:
        return 20 * t ** 3, 120 * t, z
    raise ValueError(f"noise exponent alpha={alpha} outside -2..2")


def _sx(t: np.ndarray, F: float, alpha: int) -> np.ndarray:
    """Eq. 8: sx(t) = F^2 [2 sw(t) - sw(t - 1/F) - sw(t + 1/F)], or sw(t, alpha + 2) for F = inf.

    For large F the bracket is a second difference with a tiny step that would cancel
    catastrophically in floating point; where |t| >= 10/F it is replaced by its Taylor series
    (exact for the polynomial kernels, error (1/(F t))^6 relative for the logarithmic ones).
    """
    if math.isinf(F):
        return _sw(t, alpha + 2)
    h = 1.0 / F
    a = np.abs(t)
    out = np.empty_like(a)
    near = a < 10 * h
    if near.any():
        tn = a[near]
        out[near] = F * F * (2 * _sw(tn, alpha) - _sw(tn - h, alpha) - _sw(tn + h, alpha))
    far = ~near
    if far.any():
        d2, d4, d6 = _sw_even_derivs(a[far], alpha)
        out[far] = -(d2 + h * h / 12.0 * d4 + h ** 4 / 360.0 * d6)
    return out


def _sz(t: np.ndarray, F: float, alpha: int, d: int) -> np.ndarray:
    """Eq. 9: the d-th order difference of sx at unit spacing."""
    out = np.zeros_like(t, dtype=float)
    for k in range(-d, d + 1):
        out += (-1) ** k * math.comb(2 * d, d + k) * _sx(t + k, F, alpha)
    return out


def _terms_sum_exact(J: int, M: int, S: float, F: float, alpha: int, d: int) -> float:
    """sum_{j=1}^{J-1} (1 - j/M) sz(j/S)^2, term by term."""
    j = np.arange(1, J, dtype=float)
    return float(np.sum((1 - j / M) * _sz(j / S, F, alpha, d) ** 2))


def _terms_sum_fast(J: int, M: int, S: float, F: float, alpha: int, d: int) -> float:
    """The same sum for long J: term by term within _KINK_WINDOW of each j = k S (where sz has
    kinks, and for finite F varies on the scale of single terms), and between those windows by
    the Euler-Maclaurin formula, sum_{a..b} w = int_a^b w + (w(a) + w(b))/2 + (w'(b) - w'(a))/12
    (M. Abramowitz and I. A. Stegun, *Handbook of Mathematical Functions*, 23.1.30), the
    integral by Gauss-Legendre on panels that double in length away from each kink. The terms
    vary on the scale of S there, so the neglected terms are below 1e-9 relative (checked
    against the term-by-term sum in the tests)."""

    def w(j):
        j = np.asarray(j, dtype=float)
        return (1 - j / M) * _sz(j / S, F, alpha, d) ** 2

    # the kinks, and the end of the sum (so every term lies in a window or between two)
    kinks = [int(round(k * S)) for k in range(d + 2) if k * S < J] + [J]
    total = 0.0
    covered = np.zeros(0, dtype=np.int64)
    for c in kinks:  # the windows, term by term
        covered = np.union1d(covered, np.arange(max(c - _KINK_WINDOW, 1), min(c + _KINK_WINDOW, J - 1) + 1))
    total += float(np.sum(w(covered)))
    nodes, weights = np.polynomial.legendre.leggauss(20)
    edges = np.flatnonzero(np.diff(covered) > 1)
    for e in edges:  # each smooth stretch a..b strictly between two windows
        a, b = int(covered[e]) + 1, int(covered[e + 1]) - 1
        half = 0.5 * (b - a)
        steps = [0.0]
        while steps[-1] < half:
            steps.append(min(2 * steps[-1] + _KINK_WINDOW, half))
        cuts = np.unique(np.concatenate([a + np.asarray(steps), b - np.asarray(steps)]))
        lo, hi = cuts[:-1], cuts[1:]
        x = (0.5 * (hi - lo))[:, None] * nodes[None, :] + (0.5 * (hi + lo))[:, None]
        integral = float(np.sum((0.5 * (hi - lo))[:, None] * weights[None, :] * w(x.ravel()).reshape(x.shape)))
        ends = w(np.array([a - 1, a, a + 1, b - 1, b, b + 1]))
        total += integral + 0.5 * (ends[1] + ends[4]) + ((ends[5] - ends[3]) - (ends[2] - ends[0])) / 24.0
    return total


def _basic_sum(J: int, M: int, S: float, F: float, alpha: int, d: int) -> float:
    """Eq. 10 of Greenhall & Riley."""
    inner = (_terms_sum_exact if J <= _FAST_SUM_FROM else _terms_sum_fast)(J, M, S, F, alpha, d)
    sz0 = _sz(np.zeros(1), F, alpha, d)[0]
    szJ = _sz(np.array([J / S]), F, alpha, d)[0]
    return float(sz0 ** 2 + (1 - J / M) * szJ ** 2 + 2 * inner)


@lru_cache(maxsize=4096)
def edf_greenhall(alpha: int, m: int, n_phase: int, kind: str = "oadev", d: int = 2) -> float:
    """Equivalent degrees of freedom of an Allan-family variance estimate.

    Parameters
    ----------
    alpha : power-law noise exponent of S_y(f), integer in -2..2
    m : averaging factor (tau = m tau0)
    n_phase : number of phase points (frequency samples + 1) in the contiguous record
    kind : ``"adev"`` (non-overlapping), ``"oadev"``, ``"mdev"`` or ``"tdev"``
    d : order of the difference (2 for the Allan family)

    Returns
    -------
    edf : float (NaN when the record is too short for one term)

    Notes
    -----
    Greenhall & Riley (2003), eqs. 7-13: F = m (unmodified) or 1 (modified), S = m
    (overlapping) or 1, L = m/F + m d, M = 1 + floor(S (N - L) / m), J = min(M, (d + 1) S),
    1/edf = BasicSum(J, M, S, F) / (M sz(0)^2). Requires alpha + 2d > 1.
    """
    overlapping, modified = KINDS[kind]
    alpha, m, n_phase = int(alpha), int(m), int(n_phase)
    if alpha + 2 * d <= 1:
        raise ValueError(f"edf undefined for alpha={alpha} with d={d}")
    F: float = 1.0 if modified else float(m)
    S = float(m) if overlapping else 1.0
    L = m / F + m * d
    M = 1 + math.floor(S * (n_phase - L) / m + 1e-9)
    if M < 1:
        return float("nan")
    J = int(min(M, (d + 1) * S))
    if not modified and alpha <= 0 and m * (d + 1) > _J_MAX:
        F = math.inf  # the paper's case 2.1b: the result no longer depends on m
    sz0 = _sz(np.zeros(1), F, alpha, d)[0]
    inv = _basic_sum(J, M, S, F, alpha, d) / (M * sz0 ** 2)
    return float(1.0 / inv)


def edf_with_gaps(alpha: int, m: int, segment_lengths, kind: str = "oadev") -> float:
    """edf of an estimate pooled over contiguous segments separated by gaps.

    Each segment of n frequency samples contributes n_k terms with its own edf_k (Greenhall &
    Riley on n + 1 phase points). The pooled variance is the term-weighted mean of the
    segment variances; treating the segments as independent, Satterthwaite's approximation
    gives edf = (sum n_k)^2 / sum(n_k^2 / edf_k) (F. E. Satterthwaite, Biometrics Bulletin 2,
    1946). With one segment this is exactly the Greenhall-Riley edf.
    """
    num = 0.0
    den = 0.0
    # segments of equal length have equal edf: one evaluation per distinct length
    lengths, counts = np.unique(np.asarray(segment_lengths, dtype=np.int64), return_counts=True)
    for n, c in zip(lengths.tolist(), counts.tolist()):
        terms = _terms(kind, m, n)
        if terms < 1:
            continue
        e = edf_greenhall(alpha, m, n + 1, kind)
        num += c * terms
        den += c * terms * terms / e
    return num * num / den if den > 0 else float("nan")


def _terms(kind: str, m: int, n: int) -> int:
    """Terms each estimator has on a contiguous run of n frequency samples."""
    if kind == "adev":
        return max(n // m - 1, 0)
    if kind == "oadev":
        return max(n - 2 * m + 1, 0)
    return max(n - 3 * m + 2, 0)


def confidence_interval(dev, edf, confidence: float = 0.6827) -> tuple[np.ndarray, np.ndarray]:
    """Chi-squared interval for a deviation: dev sqrt(edf / chi2_{(1+c)/2}) .. dev sqrt(edf / chi2_{(1-c)/2}).

    NIST SP 1065 section 5.3.1 (eq. 50): edf s^2 / sigma^2 is chi-squared with edf degrees of
    freedom. The default 0.6827 is the usual one-sigma level.
    """
    # chi2.ppf(q, k) = 2 gammaincinv(k / 2, q); scipy.special loads far faster than scipy.stats
    from scipy.special import gammaincinv

    dev = np.asarray(dev, float)
    edf = np.asarray(edf, float)
    if not 0 < confidence < 1:
        raise ValueError("confidence must lie between 0 and 1")
    with np.errstate(invalid="ignore", divide="ignore"):
        ok = np.isfinite(edf) & (edf > 0)
        e = np.where(ok, edf, 1.0)
        lo = dev * np.sqrt(e / (2.0 * gammaincinv(e / 2.0, 0.5 + confidence / 2)))
        hi = dev * np.sqrt(e / (2.0 * gammaincinv(e / 2.0, 0.5 - confidence / 2)))
    return np.where(ok, lo, np.nan), np.where(ok, hi, np.nan)
