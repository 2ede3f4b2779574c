"""The sub-bin estimators the fine stage can use, chosen by ``TrackerSettings.fine_estimator``.

Each estimator says where the DTFT of a frame is sampled around a frequency estimate, and how a
new estimate follows from those samples once the leakage of every other modelled component has
been removed (:func:`~coilshift.logger.tracking.leakage.without_model`). The coarse search, the
leakage model, the harmonic combination and the flags are shared, so any two estimators can be
compared inside the real tracker on the same frames.

* ``aboutanios-mulgrew`` (default): one Aboutanios-Mulgrew step (Aboutanios & Mulgrew 2005) on
  samples at ``estimate +- 1/2`` bin, solved in closed form with the exact finite-N kernel.
* ``candan2013``, ``quinn2``, ``macleod3``: the three-sample formulas of Candan 2013, Quinn 1997
  and Macleod 1998 (:mod:`coilshift.logger.tracking.estimators`) on the DFT bins ``k - 1, k,
  k + 1`` around the peak (``k`` the bin nearest the estimate).
* ``grandke-hann``: no rectangular-window stage; the coarse stage's two-bin Hann interpolation
  (Grandke 1983) is the result.
"""

from __future__ import annotations

import numpy as np

from coilshift.logger.tracking import estimators
from coilshift.logger.tracking.dtft import dtft_pair
from coilshift.logger.tracking.kernels import clamp, dirichlet
from coilshift.logger.tracking.leakage import without_model
from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import GRANDKE_VARIANCE_FACTOR


class SubBinStep:
    """One closed-form estimator step on DTFT samples (the interface every estimator follows).

    Attributes
    ----------
    variance_factor : float
        The estimator's variance over the Cramer-Rao bound, used to weigh its estimate against
        the harmonics' in :func:`~coilshift.logger.tracking.harmonics.combine_harmonics`.
    """

    variance_factor = 1.0

    def points(self, plan: Plan, centre):
        """(F, P) frequencies (bins) where the DTFT is sampled for an estimate near ``centre``."""
        raise NotImplementedError

    def samples(self, plan: Plan, xpad, g):
        """DTFT of the padded frames at ``g``: ((F, P) complex, (F,) frame sums)."""
        raise NotImplementedError

    def solve(self, plan: Plan, p, g):
        """New frequency (bins) from the cleaned samples ``p`` (F, P) at ``g``."""
        raise NotImplementedError

    def step(self, plan: Plan, s, g, wg_conj, f0_est, ah, target, misfit: bool = False):
        """Remove the leakage of everything but the target, then estimate it.

        Returns the target's frequency (bins) and its least-squares complex amplitude from all
        P samples (their kernels have nearly opposite phase). With ``misfit``, also
        ``|p - a W(f - g)| / |a W(f - g)|``, what the fitted tone leaves of the cleaned samples
        (:mod:`~coilshift.logger.tracking.edges`).
        """
        p = without_model(plan, s, g, wg_conj, f0_est, ah, target)
        f_new = self.solve(plan, p, g)
        w = dirichlet(f_new[:, None] - g, plan.n)
        num = np.conj(w[:, 0]) * p[:, 0]
        den = np.abs(w[:, 0]) ** 2
        for j in range(1, g.shape[1]):
            num = num + np.conj(w[:, j]) * p[:, j]
            den = den + np.abs(w[:, j]) ** 2
        with np.errstate(divide="ignore", invalid="ignore"):
            a_new = num / den
        a_new = np.where(np.isfinite(a_new), a_new, 0.0)
        if not misfit:
            return f_new, a_new
        # a is the least-squares amplitude, so the residual is what the fit leaves of |p|^2
        with np.errstate(divide="ignore", invalid="ignore"):
            rel2 = np.sum(p.real ** 2 + p.imag ** 2, axis=1) / ((a_new.real ** 2 + a_new.imag ** 2) * den) - 1.0
        return f_new, a_new, np.sqrt(np.maximum(rel2, 0.0))


class AboutaniosMulgrew(SubBinStep):
    """Aboutanios & Mulgrew 2005 interpolation on DTFT samples at ``centre +- 1/2`` bin.

    With the exact kernel, ``rho = -(P+ / P-) exp(j pi (N-1)/N)`` and ``r = (N/pi) atan(tan(pi/(2N))
    Re[(rho + 1)/(rho - 1)])`` give ``f = centre + r``, exact for a noiseless complex exponential
    at any N; the variance is about 1.0147 x the Cramer-Rao bound after two iterations.

    References
    ----------
    E. Aboutanios, B. Mulgrew, "Iterative frequency estimation by interpolation on Fourier
    coefficients", IEEE Trans. Signal Processing 53(4), 1237-1242, 2005.
    """

    def points(self, plan, centre):
        return centre[:, None] + plan.half_pm[None, :]  # (F, 2): centre + 1/2, centre - 1/2

    def samples(self, plan, xpad, g):
        return dtft_pair(plan, xpad, g[:, 0])

    def solve(self, plan, p, g):
        with np.errstate(divide="ignore", invalid="ignore"):
            rho = -(p[:, 0] / p[:, 1]) * plan.am_phase
            q = np.real((rho + 1) / (rho - 1))
            r = np.arctan(plan.am_tan * q) * (plan.n / np.pi)
        r = np.where(np.isfinite(r), clamp(r, -0.5, 0.5), 0.0)
        return (g[:, 0] - 0.5) + r


class ThreeBin(SubBinStep):
    """A three-sample estimator on the rectangular-window DFT bins ``k - 1, k, k + 1``.

    Parameters
    ----------
    formula : callable
        ``formula(x_left, x_peak, x_right, n) -> delta`` (bins from k).
    variance_factor : float
        Measured variance over the Cramer-Rao bound (``benchmarks/tracker_accuracy.py``).
    """

    def __init__(self, formula, variance_factor: float):
        self.formula = formula
        self.variance_factor = variance_factor

    def points(self, plan, centre):
        return np.rint(centre)[:, None] + plan.step3[None, :]

    def samples(self, plan, xpad, g):
        upper, total = dtft_pair(plan, xpad, g[:, 2])  # at k + 1 and k
        lower, _ = dtft_pair(plan, xpad, g[:, 1])  # at k and k - 1
        return np.stack([lower[:, 1], upper[:, 1], upper[:, 0]], axis=1), total

    def solve(self, plan, p, g):
        delta = self.formula(p[:, 0], p[:, 1], p[:, 2], plan.n)
        # the tone lies within the three bins; a frame of noise may give anything
        return g[:, 1] + np.where(np.isfinite(delta), clamp(delta, -1.0, 1.0), 0.0)


def _candan2013(xl, xp, xr, n):
    return estimators.candan2013(xl, xp, xr, n)


def _quinn2(xl, xp, xr, n):
    return estimators.quinn2(xl, xp, xr)


def _macleod3(xl, xp, xr, n):
    return estimators.macleod3(xl, xp, xr)


#: ``fine_estimator`` name -> its step; None: no rectangular-window stage (the coarse estimate).
#: The variance factors were measured inside the tracker for tones at random places between bins
#: (RMS 1.4-1.6 x the bound for Candan 2013, 1.1-1.2 x for Quinn 1997 and Macleod 1998).
FINE_STEPS: dict[str, SubBinStep | None] = {
    "aboutanios-mulgrew": AboutaniosMulgrew(),
    "candan2013": ThreeBin(_candan2013, variance_factor=2.3),
    "quinn2": ThreeBin(_quinn2, variance_factor=1.3),
    "macleod3": ThreeBin(_macleod3, variance_factor=1.35),
    "grandke-hann": None,
}


def fundamental_variance_factor(name: str) -> float:
    """Variance over the Cramer-Rao bound of the fundamental's estimate with estimator ``name``."""
    step = FINE_STEPS[name]
    return GRANDKE_VARIANCE_FACTOR if step is None else step.variance_factor
