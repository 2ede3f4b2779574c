"""The oscillator's noise as white FM plus random-walk FM: its two levels, fitted by REML.

The settling fit (:mod:`.settling`) weights its block means by this model's covariance
(:mod:`.gls`, :mod:`.blocks`), so the drift and warm-up uncertainties allow for the slow wander
of the oscillator and not only for sample-to-sample scatter.

Parametrisation (the one NIST SP 1065 Table 11 uses for these two power laws): white FM by its
Allan deviation at 1 s, ``white_fm_hz`` (sigma(tau) = white_fm_hz / sqrt(tau / 1 s)), and
random-walk FM by its diffusion ``random_walk_hz`` in Hz/sqrt(s) (sigma^2(tau) = q^2 tau / 3).
On a grid of spacing tau0 these are white samples of variance s_w^2 = white_fm_hz^2 (1 s)/tau0
and random-walk steps of variance s_r^2 = q^2 tau0, whose exact Allan variance at m samples is

    sigma^2(m tau0) = s_w^2 / m + s_r^2 (2 m^2 + 1) / (6 m)

(derived from the definition: the difference of adjacent m-sample means of a random walk is a
triangular sum of 2m - 1 steps).

The two levels are estimated by restricted maximum likelihood (REML: H. D. Patterson and R.
Thompson, "Recovery of inter-block information when block sizes are unequal", Biometrika
58(3), 1971) on the block means with the settling model's columns as fixed effects. REML,
unlike the Allan deviation of a fitted residual, allows for what the fit itself absorbs: a
fitted line and exponential take up part of a random walk's slow wander, and the residual's
Allan deviation then understates it at long tau.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from coilshift.analysis.stability.allan_edf import edf_with_gaps
from coilshift.analysis.stability.gls import Whitener, golden_min, solve_normal

#: per-tau agreement of the model with the measured deviation is judged at this level
AGREEMENT_LEVEL = 0.95
REML_GRID = 9  # first look at the noise mix phi in [0, pi/2]
REML_TOL = 1e-3  # then golden-section search to this (radians)


@dataclass
class NoiseModel:
    """White FM plus random-walk FM.

    Attributes
    ----------
    white_fm_hz : Allan deviation of the white FM at tau = 1 s (Hz)
    random_walk_hz : random-walk FM diffusion q (Hz/sqrt(s)); sigma^2(tau) = q^2 tau / 3
    tau_fit_s : the averaging times the model was compared with the measured deviation at
    n_outside : of those, how many measured deviations exclude the model at 95 %
    """

    white_fm_hz: float
    random_walk_hz: float
    tau_fit_s: np.ndarray
    n_outside: int

    def sample_variances(self, tau0_s: float) -> tuple[float, float]:
        """(s_w^2, s_r^2): white variance per sample and random-walk step variance, Hz^2."""
        return self.white_fm_hz ** 2 / tau0_s, self.random_walk_hz ** 2 * tau0_s

    def adev_hz(self, tau_s) -> np.ndarray:
        """The model's Allan deviation (continuous-time form), Hz."""
        tau = np.asarray(tau_s, float)
        return np.sqrt(self.white_fm_hz ** 2 / tau + self.random_walk_hz ** 2 * tau / 3.0)

    @property
    def describes_the_data(self) -> bool:
        """False when more measured deviations exclude the model than chance allows: the number
        outside their 95 % intervals exceeds the binomial(n, 0.05) 99.5 % quantile."""
        n = int(self.tau_fit_s.size)
        p, cdf, k = 1.0 - AGREEMENT_LEVEL, 0.0, 0
        while k <= n:
            cdf += math.comb(n, k) * p ** k * (1 - p) ** (n - k)
            if cdf >= 0.995:
                break
            k += 1
        return self.n_outside <= k

    def to_dict(self) -> dict:
        return {"white_fm_hz_at_1s": self.white_fm_hz, "random_walk_hz_per_rt_s": self.random_walk_hz,
                "method": "REML on block means", "tau_compared_s": self.tau_fit_s,
                "n_outside_95": self.n_outside, "n_compared": int(self.tau_fit_s.size),
                "describes_the_data": self.describes_the_data}


def discrete_avar(m, white_var: float, walk_var: float) -> np.ndarray:
    """Exact Allan variance at m samples of white (variance ``white_var``) plus a random walk
    (step variance ``walk_var``)."""
    m = np.asarray(m, float)
    return white_var / m + walk_var * (2.0 * m * m + 1.0) / (6.0 * m)


def fit_noise_reml(parts, y, x) -> tuple[float, float]:
    """REML estimates of (s_w^2, s_r^2) for block means ``y`` with fixed-effect columns ``x``.

    The covariance is s^2 (cos^2 phi W + sin^2 phi R) with W, R the white and walk parts of
    the tridiagonal (:meth:`.blocks.Blocks.covariance_parts`); s^2 is profiled out analytically
    and the restricted log-likelihood
    -1/2 [(n - p) ln(RSS/(n - p)) + ln det C + ln det(X' C^-1 X)] is maximised over phi in
    [0, pi/2] (both pure white and pure random walk included) on a grid, then by golden-section
    search.

    Parameters
    ----------
    parts : covariance parts of the block means
    y : block means (Hz)
    x : (n, p) fixed-effect columns (the model's regressors and, for a nonlinear model, its
        derivatives at the estimate)

    Returns
    -------
    (s_w^2, s_r^2) in Hz^2; (NaN, NaN) when n <= p + 1 leaves no degrees of freedom
    """
    y = np.asarray(y, float)
    # the likelihood depends only on the space the columns span: an orthonormal basis of it, with
    # (nearly) dependent directions dropped, keeps ln det(X' C^-1 X) well conditioned
    u, sv, _ = np.linalg.svd(np.asarray(x, float), full_matrices=False)
    x = u[:, sv > 1e-9 * sv[0]]
    n, p = x.shape
    if n <= p + 1:
        return math.nan, math.nan
    yc = y - y.mean()

    def objective(phi: float) -> tuple[float, float]:
        w = Whitener(parts, math.cos(phi) ** 2, math.sin(phi) ** 2)
        zx, zy = w.whiten(x), w.whiten(yc)
        g = zx.T @ zx
        _, _, rss = solve_normal(g, zx.T @ zy, float(zy @ zy))
        sign, ld = np.linalg.slogdet(g)
        if sign <= 0 or rss <= 0:
            return math.inf, 0.0
        s2 = rss / (n - p)
        return (n - p) * math.log(s2) + w.logdet + ld, s2

    grid = np.linspace(0.0, math.pi / 2, REML_GRID)
    vals = [objective(ph)[0] for ph in grid]
    i = int(np.argmin(vals))
    phi = golden_min(lambda ph: objective(ph)[0], float(grid[max(i - 1, 0)]), float(grid[min(i + 1, REML_GRID - 1)]),
                     REML_TOL)
    s2 = objective(phi)[1]
    return s2 * math.cos(phi) ** 2, s2 * math.sin(phi) ** 2


def agreement(noise: "NoiseModel", m_blocks, block_steps: int, oadev_hz, tau0_s: float,
              block_segment_lengths) -> NoiseModel:
    """The model with ``tau_fit_s``/``n_outside`` filled in: how many overlapping Allan deviations
    of the block means with the fitted model removed exclude the model from their 95 %
    chi-squared interval. Averages of m consecutive full block means are averages of m times
    ``block_steps`` samples, so their Allan variance is the model's at that many samples. The
    edf (Greenhall & Riley, on the block series) is that of whichever of the two noises the
    model says dominates at each tau."""
    mb = np.asarray(m_blocks, np.int64)
    v = np.asarray(oadev_hz, float) ** 2
    ok = np.isfinite(v) & (v > 0)
    mb, v = mb[ok], v[ok]
    m = mb * int(block_steps)
    sw2, sr2 = noise.sample_variances(tau0_s)
    white, walk = sw2 / m, sr2 * (2.0 * m * m + 1.0) / (6.0 * m)
    segs = np.asarray(block_segment_lengths)
    e = np.array([edf_with_gaps(0 if a >= b else -2, int(k), segs, "oadev") for a, b, k in zip(white, walk, mb)])
    return NoiseModel(noise.white_fm_hz, noise.random_walk_hz, m * tau0_s, _count_outside(v, white + walk, e))


def _count_outside(v: np.ndarray, model: np.ndarray, edf: np.ndarray) -> int:
    """How many measured variances exclude the model from their chi-squared interval."""
    from scipy.special import gammaincinv

    ok = np.isfinite(edf) & (edf > 0)
    e = np.where(ok, edf, 1.0)
    p = (1.0 - AGREEMENT_LEVEL) / 2.0
    # chi-squared quantiles: chi2.ppf(q, k) = 2 gammaincinv(k/2, q)
    lo = v * e / (2.0 * gammaincinv(e / 2.0, 1.0 - p))
    hi = v * e / (2.0 * gammaincinv(e / 2.0, p))
    return int(np.sum(ok & ((model < lo) | (model > hi))))
