"""How far folded harmonics too close to the tone to be separated could move its frequency.

In an aliased signal every harmonic ``k`` of the fundamental folds somewhere into 0..fs/2, and
some always land within a bin of the fundamental itself (Dirichlet's approximation theorem: for
any ratio f0/fs some k <= N/2 puts ``k f0`` within fs/N of a multiple of fs, so harmonics k +- 1
fall within about a bin of f0). Lines that close share the fundamental's main lobe: they can be
neither read nor cancelled, and the frame's frequency moves with them. The harmonics that stand
out are cancelled (:mod:`~coilshift.logger.tracking.harmonics`); this module bounds what the
rest can do:

``E = sqrt(sum_k (r_k B(d_k))^2)`` (bins), over harmonics k = 2..ALIAS_BIAS_HARMONICS that are not
cancelled and fold within the reach of the sensitivity table, where ``d_k`` is the distance of
harmonic k's folded line from the fundamental, ``r_k`` its amplitude relative to the
fundamental from the envelope ``A k^-alpha`` fitted to the harmonics measured in the frame
(alpha between 1, a waveform with jumps, and 2, one with kinks; common practice: the decay of
Fourier coefficients of piecewise-smooth functions), and ``B(d)`` the largest frequency error of
the fine-stage estimator per unit relative amplitude of a line at distance d, over its phase,
computed from the estimator's own formula. The phases of different harmonics are unrelated, so
their effects add in quadrature.

Where a close line sits is itself uncertain: it moves k times as fast as the fundamental, and the
fundamental is off by as much as the line pulls it (up to ``r_k max B``). So ``B`` is taken as
its largest value within ``k (r_k max B + ALIAS_BIAS_LIMIT_BINS)`` of the predicted distance;
otherwise a biased estimate could place the very line that biases it right on top of itself,
where it seems harmless.
"""

from __future__ import annotations

import numpy as np

from coilshift.logger.tracking.folding import fold
from coilshift.logger.tracking.harmonics import Harmonics
from coilshift.logger.tracking.kernels import dirichlet
from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import ALIAS_BIAS_HARMONICS, ALIAS_BIAS_LIMIT_BINS, ALIAS_BIAS_REACH_BINS
from coilshift.logger.tracking.subbin import FINE_STEPS, AboutaniosMulgrew, SubBinStep

#: distances (bins) at which the sensitivity is tabulated
_D_GRID = np.linspace(0.0, ALIAS_BIAS_REACH_BINS, int(ALIAS_BIAS_REACH_BINS * 100) + 1)


def line_sensitivity(plan: Plan, step: SubBinStep | None) -> np.ndarray:
    """``B(d)`` on :data:`_D_GRID`: the largest error (bins) of ``step`` per unit relative amplitude.

    A noiseless tone plus a line at distance d with relative amplitude 1e-3 (small enough for the
    response to be linear), over 16 phases of the line and three places of the tone between bins.
    Without a rectangular-window stage the Aboutanios-Mulgrew step stands in.
    """
    step = step if step is not None else AboutaniosMulgrew()
    rel = 1e-3
    phase = np.linspace(0, 2 * np.pi, 16, endpoint=False)
    offset = np.array([0.0, 0.25, 0.5])
    d, ph, off = np.meshgrid(_D_GRID, phase, offset, indexing="ij")
    f = plan.n / 4 + off.ravel()
    g = step.points(plan, f)
    line = rel * np.exp(1j * ph.ravel())[:, None]
    p = dirichlet(f[:, None] - g, plan.n) + line * dirichlet(f[:, None] + d.ravel()[:, None] - g, plan.n)
    err = np.abs(step.solve(plan, p, g) - f) / rel
    return err.reshape(d.shape).max(axis=(1, 2))


def alias_bias(plan: Plan, step: SubBinStep | None, freq_bins, harm: Harmonics):
    """(F,) bound E (bins) on the error from folded harmonics that were not cancelled.

    Computed for aliased frames and for those where folding could not be told apart
    (``harm.unresolved``: there every folded harmonic counts, none being cancelled); 0 elsewhere.
    """
    out = np.zeros(freq_bins.shape[0])
    rows = np.flatnonzero((harm.aliased | harm.unresolved) & np.isfinite(freq_bins))
    if rows.size == 0:
        return out
    table = _table(plan, step)
    f = freq_bins[rows]
    k = np.arange(2, ALIAS_BIAS_HARMONICS + 1, dtype=float)
    pos, _ = fold(f[:, None] * k[None, :], plan.n)
    dist = np.abs(pos - f[:, None])
    n_h = harm.hvalid.shape[1]
    cancelled = np.zeros(dist.shape, dtype=bool)
    cancelled[:, :n_h - 1] = harm.hvalid[rows, 1:]
    a_env, alpha = _envelope(harm, rows)
    rel = a_env[:, None] * k[None, :] ** -alpha[:, None]
    reach = k[None, :] * (rel * table[-1].max() + ALIAS_BIAS_LIMIT_BINS)
    near = (dist - reach < ALIAS_BIAS_REACH_BINS) & ~cancelled
    terms = np.where(near, rel * _windowed(table, dist, reach), 0.0)
    out[rows] = np.sqrt(np.sum(terms * terms, axis=1))
    return out


def _windowed(table, dist, reach):
    """``max B`` over ``[dist - reach, dist + reach]`` from the table of running maxima."""
    step = _D_GRID[1] - _D_GRID[0]
    wi = np.clip(np.rint(reach / step).astype(int), 0, table.shape[0] - 1)
    di = np.clip(np.rint(dist / step).astype(int), 0, table.shape[1] - 1)
    return table[wi, di]


def _table(plan: Plan, step):
    """Running maxima of the sensitivity, ``[w, d] -> max B over |x - d| <= w`` (grid units), computed once.

    Beyond the tabulated reach B is taken as its value at the last point.
    """
    cache = plan.__dict__.setdefault("_alias_sensitivity", {})
    name = plan.settings.fine_estimator
    if name not in cache:
        b = line_sensitivity(plan, step)
        n = b.size
        rows = [b]
        padded = np.concatenate([b[1:][::-1], b, np.full(n, b[-1])])  # |x| symmetric below 0
        for w in range(1, n):
            lo = padded[n - 1 - w:2 * n - 1 - w]
            hi = padded[n - 1 + w:2 * n - 1 + w]
            rows.append(np.maximum(rows[-1], np.maximum(lo, hi)))
        cache[name] = np.array(rows)
    return cache[name]


def _envelope(harm: Harmonics, rows):
    """Per frame, ``A`` (relative to the fundamental) and ``alpha`` of ``|a_k| ~ A k^-alpha``.

    ``alpha`` is the least-squares slope of log |a_k| against log k over the harmonics found,
    kept within [1, 2]; ``A`` puts the envelope at the 90th percentile of the harmonics, so a
    pulse's sinc-shaped spectrum is bounded by its peaks.
    """
    amp = np.abs(harm.amp_h[rows])
    ok = harm.hvalid[rows] & (amp > 0)
    ok[:, 0] = False
    a1 = np.maximum(np.abs(harm.amp_h[rows, 0]), 1e-300)
    k = np.arange(1, amp.shape[1] + 1, dtype=float)[None, :]
    with np.errstate(divide="ignore"):
        x = np.where(ok, np.log(k), 0.0)
        y = np.where(ok, np.log(np.where(ok, amp, 1.0) / a1[:, None]), 0.0)
    n = np.maximum(ok.sum(axis=1), 1)
    mx, my = x.sum(axis=1) / n, y.sum(axis=1) / n
    sxx = np.sum(np.where(ok, (x - mx[:, None]) ** 2, 0.0), axis=1)
    sxy = np.sum(np.where(ok, (x - mx[:, None]) * (y - my[:, None]), 0.0), axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        alpha = np.clip(np.where(sxx > 0, -sxy / sxx, 1.0), 1.0, 2.0)
    lifted = np.where(ok, y + alpha[:, None] * x, -np.inf)
    top = np.sort(lifted, axis=1)
    count = ok.sum(axis=1)
    pick = np.clip(top.shape[1] - 1 - (count // 10), 0, top.shape[1] - 1)
    log_a = np.where(count > 0, top[np.arange(top.shape[0]), pick], 0.0)
    return np.exp(log_a), alpha
