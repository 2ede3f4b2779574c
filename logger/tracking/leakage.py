"""Leakage into the rectangular-window DTFT, computed with the exact finite-N Dirichlet kernel.

Every modelled component ``a exp(2j pi f i / N)`` adds ``a W(f - g)`` to the DTFT at ``g`` (and
its negative-frequency image ``conj(a) W(-f - g)``), where ``W`` is
:func:`~coilshift.logger.tracking.kernels.dirichlet`. Subtracting these terms for the tone's own
image, its harmonics, other strong lines and the removed frame mean leaves DTFT samples of the
tone alone, as a complex exponential: what the published sub-bin estimators are derived for.
Evaluation points ``g`` are (F, P) arrays, any P.
"""

from __future__ import annotations

import numpy as np

from coilshift.logger.tracking.coarse import Coarse
from coilshift.logger.tracking.estimators import grandke_hann
from coilshift.logger.tracking.kernels import clamp, dirichlet, hann_kernel
from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import OTHER_LINES, OTHER_LINES_RANGE_DB


def other_lines(plan: Plan, coarse: Coarse, hvalid, pos=None, aliased=None):
    """Strong lines that are not the tone's cancelled harmonics: (frequencies, amplitudes).

    Mains hum or a second oscillator leaks into a rectangular-window DTFT as 1/distance; the
    strongest OTHER_LINES such lines (local maxima of the Hann spectrum within
    OTHER_LINES_RANGE_DB of the tone) are located by Grandke's interpolation and their complex
    amplitudes read through the Hann kernel. In ``aliased`` frames, lines at the folded
    positions ``pos`` (F, H) of the cancelled harmonics are left out too. Returns (F, L) arrays
    (amplitude 0 = no line), or None when no frame has such a line.
    """
    power, spec, detect, k, fc = coarse.power, coarse.spec, coarse.detect, coarse.k, coarse.fc
    nf = power.shape[0]
    rows = np.arange(nf)
    thr = np.maximum(detect, power[rows, k].astype(float) * 10 ** (-OTHER_LINES_RANGE_DB / 10))
    # threshold first (one pass, few survivors), then test only those for a local maximum
    above = power[:, 2:-2] > thr[:, None].astype(np.float32)
    # flat indices are far cheaper to collect than 2-D ones
    r, c = np.divmod(np.flatnonzero(above), above.shape[1])
    c = c + 2
    top = power[r, c]
    local = (top > power[r, c - 1]) & (top >= power[r, c + 1])
    r, c = r[local], c[local]
    # leave out the tone and the harmonics already cancelled
    h = np.rint(c / fc[r]).astype(int)
    n_h = hvalid.shape[1]
    cancelled = (h >= 1) & (h <= n_h) & (np.abs(c - h * fc[r]) <= 2.0)
    cancelled &= hvalid[r, clamp(h - 1, 0, n_h - 1)] | (h == 1)
    if aliased is not None and aliased.any():
        cancelled |= _near_folded(plan, hvalid, pos, aliased)[r, c]
    r, c = r[~cancelled], c[~cancelled]
    if r.size == 0:
        return None
    # strongest first within each frame, then keep OTHER_LINES per frame
    order = np.lexsort((-power[r, c], r))
    r, c = r[order], c[order]
    rank = np.arange(r.size) - np.searchsorted(r, r)
    keep = rank < OTHER_LINES
    r, c, rank = r[keep], c[keep], rank[keep]
    n_l = int(rank.max()) + 1
    line_bin = np.full((nf, n_l), 2 * plan.kmin)
    line_on = np.zeros((nf, n_l), dtype=bool)
    line_bin[r, rank] = c
    line_on[r, rank] = True
    mags = np.sqrt(power[rows[:, None, None], line_bin[:, :, None] + plan.step3[None, None, :]].astype(float))
    f_line = line_bin + grandke_hann(mags[:, :, 1], mags[:, :, 0], mags[:, :, 2])
    amp = np.where(line_on, spec[rows[:, None], line_bin].astype(complex) / hann_kernel(f_line - line_bin, plan.n), 0.0)
    return f_line, amp


def _near_folded(plan: Plan, hvalid, pos, aliased):
    """(F, nbins) bool: bins within two of a cancelled harmonic's folded line, in aliased frames."""
    mark = np.zeros((hvalid.shape[0], plan.nbins), dtype=bool)
    r, h = np.nonzero(hvalid & aliased[:, None])
    centre = np.rint(pos[r, h]).astype(int)
    for d in range(-2, 3):
        mark[r, clamp(centre + d, 0, plan.nbins - 1)] = True
    return mark


def lines_leakage(plan: Plan, lines, g, wg_conj):
    """Exact rectangular-window contribution of ``lines`` at the DTFT points ``g`` (F, P):
    each line, its negative-frequency image, and its share of the subtracted frame mean."""
    out = np.zeros(g.shape, dtype=complex)
    if lines is None:
        return out
    f_line, amp = lines
    n_l = f_line.shape[1]
    n_p = g.shape[1]
    cols = [g[:, j:j + 1] for j in range(n_p)]
    ker = dirichlet(np.concatenate([f_line] + [f_line - c for c in cols] + [f_line + c for c in cols], axis=1), plan.n)
    k_f = ker[:, :n_l]
    mu = np.cumsum(2 * np.real(amp * k_f) / plan.n, axis=1)[:, -1]
    # running sums: a frame's result does not depend on the chunk's column count
    for j in range(n_p):
        k_minus = ker[:, (1 + j) * n_l:(2 + j) * n_l]
        k_plus = ker[:, (1 + n_p + j) * n_l:(2 + n_p + j) * n_l]
        terms = amp * k_minus + np.conj(amp) * np.conj(k_plus)
        out[:, j] = np.cumsum(terms, axis=1)[:, -1] - mu * wg_conj[:, j]
    return out


def without_model(plan: Plan, s, g, wg_conj, f0_est, ah, target):
    """DTFT samples ``s`` (F, P) at ``g`` with every modelled component but the target removed.

    ``wg_conj`` = conj(dirichlet(g)) is the kernel of a constant at ``g``, ``f0_est`` the current
    fundamental (bins), ``ah`` (F, H) the complex amplitudes of the harmonics (0 where none),
    ``target`` (F,) the column being estimated. Removed: the negative-frequency images of all
    components (the target's too), the positive-frequency components other than the target, and
    the share of the subtracted frame mean that belongs to the modelled periodic part (put back).
    """
    n = plan.n
    # only the harmonic columns some frame of the chunk holds: an all-zero column adds exact
    # zeros to every sum below, so leaving it out changes no frame's result, bit for bit
    held = np.flatnonzero(np.logical_or.reduce(ah != 0, axis=0))
    if held.size == 0:
        held = np.zeros(1, dtype=np.intp)  # keep one (zero) column: the sums need one
    if held.size < ah.shape[1]:
        ah = ah[:, held]
    n_h = held.size
    n_p = g.shape[1]
    hf = f0_est[:, None] * plan.harm[None, held]  # (F, H)
    ah_c = np.conj(ah)
    others = held[None, :] != target[:, None]
    cols = [g[:, j:j + 1] for j in range(n_p)]
    # every kernel value this step needs, in one call: at hf, hf + g, hf - g
    ker = dirichlet(np.concatenate([hf] + [hf + c for c in cols] + [hf - c for c in cols], axis=1), n)
    k_hf = ker[:, :n_h]
    # mean of the modelled periodic part (the frame mean was subtracted before the DTFT);
    # the kernel at -nu is the conjugate of the kernel at nu
    mean_terms = 2 * np.real(ah * k_hf)
    # running (sequential) sums keep each frame's result independent of the chunk's column
    # count: trailing all-zero columns add exact zeros
    mu = np.cumsum(mean_terms, axis=1)[:, -1] / n
    p = np.empty(s.shape, dtype=complex)
    for j in range(n_p):
        k_plus = ker[:, (1 + j) * n_h:(2 + j) * n_h]
        k_minus = ker[:, (1 + n_p + j) * n_h:(2 + n_p + j) * n_h]
        leak = np.cumsum(ah_c * np.conj(k_plus) + np.where(others, ah * k_minus, 0.0), axis=1)[:, -1]
        p[:, j] = s[:, j] - leak + mu * wg_conj[:, j]
    return p
