"""Allan-family estimators on evenly spaced frequency data that may contain gaps (NaN).

All four estimators work on frequency samples ``y`` (fractional frequency, or hertz: the
deviations scale linearly, so a deviation computed on hertz is in hertz) taken every
``tau0`` seconds, each sample being the mean frequency over its interval. They are
vectorised with cumulative sums, so every averaging factor costs O(N).

Gaps: a NaN marks a missing or unusable sample. A term of an estimator is kept only when
every sample it is built from is finite; terms that would reach across a gap are dropped,
never bridged. With no NaN the results equal the textbook formulas exactly; the number of
terms each estimator used is returned alongside it so that confidence intervals and
readers can see how much data stood behind every point.

References
----------
W. J. Riley, *Handbook of Frequency Stability Analysis*, NIST Special Publication 1065
(2008), section 4 (definitions of the Allan, overlapping Allan, modified Allan and time
deviations, in phase and frequency form).
D. W. Allan and J. A. Barnes, "A modified Allan variance with increased oscillator
characterization ability", Proc. 35th Annual Frequency Control Symposium (1981).
"""

from __future__ import annotations

import numpy as np


def _prepare(y) -> np.ndarray:
    y = np.asarray(y, dtype=float)
    if y.ndim != 1:
        raise ValueError(f"expected a 1-D frequency series, got shape {y.shape}")
    finite = np.isfinite(y)
    if finite.any():
        # a constant offset does not change any of these statistics; removing it keeps the
        # cumulative sums small so differences of them lose no precision
        y = y - y[finite].mean()
    return y


class _WindowSums:
    """Sums of ``y`` over every window of ``m`` samples, and whether the window is gap-free."""

    def __init__(self, y: np.ndarray):
        bad = ~np.isfinite(y)
        self.n = y.shape[0]
        self._cy = np.concatenate(([0.0], np.cumsum(np.where(bad, 0.0, y))))
        self._cb = np.concatenate(([0], np.cumsum(bad, dtype=np.int64)))
        self.any_gap = bool(bad.any())

    def gap_free(self, span: int) -> np.ndarray:
        """For each start i = 0..n-span: True when samples i..i+span-1 have no gap."""
        return (self._cb[span:] - self._cb[:-span]) == 0

    def sums(self, m: int) -> tuple[np.ndarray, np.ndarray]:
        """Window sums s[i] = y[i] + ... + y[i+m-1] for i = 0..N-m, and their gap-free mask."""
        s = self._cy[m:] - self._cy[:-m]
        ok = (self._cb[m:] - self._cb[:-m]) == 0
        return s, ok


def _check_m(m_list) -> np.ndarray:
    m = np.atleast_1d(np.asarray(m_list))
    if m.size and (not np.issubdtype(m.dtype, np.integer) and not np.all(m == np.round(m))):
        raise ValueError("averaging factors must be whole numbers")
    m = m.astype(np.int64)
    if np.any(m < 1):
        raise ValueError("averaging factors must be >= 1")
    return m


def _deviation(y, m_list, span, terms, ws: "_WindowSums | None" = None) -> tuple[np.ndarray, np.ndarray]:
    """Shared driver: ``terms(window_sums, m)`` gives (term values, gap-free mask, normaliser);
    the deviation is sqrt(sum of squared gap-free terms / (normaliser * count)). Factors whose
    ``span(m)`` exceeds the record get no term. ``ws`` reuses the window sums of ``y``."""
    ws = _WindowSums(_prepare(y)) if ws is None else ws
    ms = _check_m(m_list)
    dev = np.full(ms.shape, np.nan)
    n_terms = np.zeros(ms.shape, dtype=np.int64)
    for k, m in enumerate(ms):
        if span(int(m)) > ws.n:
            continue
        d, good, norm = terms(ws, int(m))
        n = int(good.sum())
        n_terms[k] = n
        if n:
            dev[k] = np.sqrt(np.sum(d[good] ** 2) / (norm * n))
    return dev, n_terms


def _adev_terms(ws: _WindowSums, m: int):
    s, ok = ws.sums(m)
    s, ok = s[::m], ok[::m]  # the non-overlapping blocks start at 0, m, 2m, ...
    return s[1:] - s[:-1], ok[1:] & ok[:-1], 2.0 * m * m


def _oadev_terms(ws: _WindowSums, m: int):
    s, ok = ws.sums(m)
    return s[m:] - s[:-m], ok[m:] & ok[:-m], 2.0 * m * m


def _mdev_terms(ws: _WindowSums, m: int):
    # term j = sum_{i=j}^{j+m-1} (S_{i+m} - S_i): a running sum of the overlapping terms (small
    # numbers, so their cumulative sum keeps its precision); the term is gap-free when its whole
    # span of 3m - 1 samples is
    d, ok, _ = _oadev_terms(ws, m)
    cd = np.concatenate(([0.0], np.cumsum(np.where(ok, d, 0.0))))
    k = ws.n - 3 * m + 2
    return cd[m:m + k] - cd[:k], ws.gap_free(3 * m - 1)[:k], 2.0 * float(m) ** 4


def adev(y, m_list) -> tuple[np.ndarray, np.ndarray]:
    """Non-overlapping Allan deviation of frequency data.

    sigma_y^2(m tau0) = 1 / (2 (M - 1)) * sum_k (ybar_{k+1} - ybar_k)^2 over the M adjacent,
    non-overlapping means of m samples (NIST SP 1065 section 4.1, eq. 6).

    Parameters
    ----------
    y : frequency samples (fractional or Hz), NaN for gaps
    m_list : averaging factors (tau = m * tau0)

    Returns
    -------
    dev : deviation per factor, same unit as ``y`` (NaN where no term survives)
    n_terms : number of differences used per factor
    """
    return _deviation(y, m_list, lambda m: 2 * m, _adev_terms)


def oadev(y, m_list) -> tuple[np.ndarray, np.ndarray]:
    """Overlapping Allan deviation of frequency data.

    sigma_y^2(m tau0) = 1 / (2 m^2 (N - 2m + 1)) * sum_i (S_{i+m} - S_i)^2 where S_i is the
    sum of y over samples i..i+m-1, every start i used (NIST SP 1065 section 4.2, eq. 11).

    Parameters and returns as :func:`adev`.
    """
    return _deviation(y, m_list, lambda m: 2 * m, _oadev_terms)


def mdev(y, m_list) -> tuple[np.ndarray, np.ndarray]:
    """Modified Allan deviation of frequency data.

    Mod sigma_y^2(m tau0) = 1 / (2 m^4 (N - 3m + 2)) * sum_j (sum_{i=j}^{j+m-1} (S_{i+m} - S_i))^2
    with S_i as in :func:`oadev`; this is SP 1065 eq. 14 (phase form, N+1 phase points)
    rewritten for frequency samples. Each term spans 3m - 1 samples.

    Parameters and returns as :func:`adev`.
    """
    return _deviation(y, m_list, lambda m: 3 * m - 1, _mdev_terms)


def family(y, m_list) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """:func:`adev`, :func:`oadev` and :func:`mdev` together (one set of running sums for all
    three): ``{"adev": (dev, n_terms), "oadev": ..., "mdev": ...}``."""
    ws = _WindowSums(_prepare(y))
    return {"adev": _deviation(y, m_list, lambda m: 2 * m, _adev_terms, ws),
            "oadev": _deviation(y, m_list, lambda m: 2 * m, _oadev_terms, ws),
            "mdev": _deviation(y, m_list, lambda m: 3 * m - 1, _mdev_terms, ws)}


def tdev(y, m_list, tau0_s: float) -> tuple[np.ndarray, np.ndarray]:
    """Time deviation: sigma_x(tau) = tau / sqrt(3) * Mod sigma_y(tau) (NIST SP 1065 section 4.5).

    ``y`` must be fractional frequency for the result to be in seconds.

    Parameters
    ----------
    y : fractional frequency samples, NaN for gaps
    m_list : averaging factors
    tau0_s : sample spacing in seconds

    Returns
    -------
    dev : time deviation in seconds per factor
    n_terms : number of terms used (those of the modified Allan deviation)
    """
    ms = _check_m(m_list)
    mod, n_terms = mdev(y, ms)
    return ms * float(tau0_s) / np.sqrt(3.0) * mod, n_terms


def octave_factors(n_samples: int) -> np.ndarray:
    """Averaging factors 1, 2, 4, ... for which every estimator here has at least one term.

    The modified deviation needs the longest stretch (3m - 1 samples), so it sets the limit.
    """
    out = []
    m = 1
    while 3 * m - 1 <= n_samples and 2 * m <= n_samples:
        out.append(m)
        m *= 2
    return np.asarray(out, dtype=np.int64)
