"""The tone's harmonics: which ones stand out as lines, their amplitudes, and how they sharpen f0.

Harmonic h measures h f0 with the same absolute accuracy, so it estimates f0 h times more finely.
The lines found here are cancelled in the fine stage (each leaks as 1/distance into a
rectangular window) and combined with the fundamental's estimate by inverse-variance weights.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from coilshift.logger.tracking.coarse import Coarse
from coilshift.logger.tracking.estimators import grandke_hann
from coilshift.logger.tracking.folding import aliased_frames, crowding, fold, line_at, low_harmonic_lines
from coilshift.logger.tracking.kernels import clamp, hann_kernel
from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import CLOSE_BINS, FOLD_LOCATION_TOL, GRANDKE_VARIANCE_FACTOR


@dataclass
class Harmonics:
    """The fundamental (column 0) and its harmonics h = 2..H in each of F frames.

    Attributes
    ----------
    hbin : (F, H) int, Hann bin nearest where harmonic h shows (folded into 0..fs/2)
    hvalid : (F, H) bool, the harmonic is a line whose leakage is cancelled (column 0: inside the
        spectrum)
    amp_h : (F, H) complex amplitudes read through the Hann kernel (0 where not valid), each the
        coefficient of ``exp(+2j pi h f0 i / N)`` even where the line shows as its image
    around : (F, H - 1, 5) Hann power at hbin - 2 .. hbin + 2 of harmonics 2..H
    pos : (F, H) where each harmonic shows (bins, folded)
    combine : (F, H) bool, harmonics below fs/2 with no other line in their main lobe: the ones
        that sharpen the fundamental
    aliased : (F,) bool, harmonics above fs/2 show at their folded positions
    unresolved : (F,) bool, fs is so close to a multiple of f0 that folded harmonics, if any,
        would sit within a fraction of a bin of the harmonics below fs/2 (not aliased as far as
        can be told, but its harmonics reach the place)
    """

    hbin: np.ndarray
    hvalid: np.ndarray
    amp_h: np.ndarray
    around: np.ndarray
    pos: np.ndarray
    combine: np.ndarray
    aliased: np.ndarray
    unresolved: np.ndarray

    @property
    def count(self) -> int:
        """H, the number of columns (1 when no harmonic shows in any frame of the chunk)."""
        return self.hvalid.shape[1]


def harmonic_lines(plan: Plan, coarse: Coarse) -> Harmonics:
    """Complex amplitudes of the fundamental and of the harmonics that stand out of the noise.

    Weaker harmonics leak less than the noise does and are left out. Only as many columns as the
    lowest fundamental of the chunk has harmonics below fs/2 are formed, unless some frame is
    aliased (:func:`~coilshift.logger.tracking.folding.aliased_frames`): then harmonics up to
    LEAKAGE_HARMONICS are looked for at their folded positions in those frames. Columns beyond
    the last significant harmonic are dropped for the whole chunk: this changes no frame's result
    because the leakage sums run column by column.
    """
    power, detect, fc = coarse.power, coarse.detect, coarse.fc
    nf = power.shape[0]
    rows = np.arange(nf)
    n_range = int(min(len(plan.harm), max(1.0, (plan.nbins - 3) // max(float(fc.min()), 1.0))))
    aliased, unresolved = np.zeros(nf, dtype=bool), np.zeros(nf, dtype=bool)
    probe = np.flatnonzero(coarse.have & _may_fold(plan, power, detect, fc)) if n_range < len(plan.harm) else []
    if len(probe):
        aliased[probe], unresolved[probe] = aliased_frames(plan, coarse.spec[probe], power[probe], detect[probe],
                                                           fc[probe])
    any_aliased = bool(aliased.any())
    if any_aliased:
        n_range = len(plan.harm)
    hf = fc[:, None] * plan.harm[None, :n_range]  # (F, H), unfolded
    if any_aliased:
        pos, image = fold(hf, plan.n)
        folded = hf > plan.n / 2
    else:  # every column lies below fs/2 (n_range counts those of the lowest fundamental)
        pos, image, folded = hf, None, None
    hbin = np.rint(pos).astype(int)
    hvalid = (hbin <= plan.nbins - 3) & (hbin >= 2)
    if any_aliased:
        hvalid &= ~folded | aliased[:, None]
    hbin = clamp(hbin, 2, plan.nbins - 3)
    # a harmonic must be a line: a peak within +-1 bin above the threshold and above the bins
    # two either side (the skirt of the fundamental falls steadily and fails this); the bin
    # nearest the harmonic lies in the line's main lobe, so it alone decides whether to look closer
    hvalid[:, 1:] &= power[rows[:, None], hbin[:, 1:]] > detect[:, None]
    n_look = int(np.max(np.nonzero(hvalid[:, 1:].any(axis=0))[0], initial=-1)) + 1
    around = power[rows[:, None, None], hbin[:, 1:n_look + 1, None] + plan.step5[None, None, :]]  # (F, n_look, 5)
    top = around[:, :, 1:4].max(axis=2)
    hvalid[:, 1:n_look + 1] &= (top > detect[:, None]) & (top > around[:, :, 0]) & (top > around[:, :, 4])
    combine = hvalid
    if any_aliased:
        hvalid, combine = _folded_checks(plan, coarse, pos, hvalid, hvalid & ~folded, folded, n_look)
    n_h = int(np.max(np.nonzero(hvalid.any(axis=0))[0], initial=0)) + 1
    hf, hbin, hvalid = hf[:, :n_h], hbin[:, :n_h], hvalid[:, :n_h]
    xh = coarse.spec[rows[:, None], hbin].astype(complex)
    if any_aliased:
        xh = xh - _fundamental_hann_leak(plan, xh[:, 0], hf, hbin, folded[:, :n_h] & hvalid)
        # a harmonic folded past fs/2 shows as its image: conj(a) at -h f0
        image = image[:, :n_h]
        amp_h = xh / hann_kernel(np.where(image, -hf, hf) - hbin, plan.n)
        amp_h = np.where(image, np.conj(amp_h), amp_h)
    else:
        amp_h = xh / hann_kernel(hf - hbin, plan.n)
    amp_h = np.where(hvalid, amp_h, 0.0)
    return Harmonics(hbin, hvalid, amp_h, around[:, :n_h - 1], pos[:, :n_h], combine[:, :n_h], aliased, unresolved)


def _may_fold(plan: Plan, power, detect, fc):
    """(F,) bool: frames whose harmonics could fold: all but a tone below fs/6 with none of its
    harmonics 2..5 below fs/2 above the threshold (a waveform whose harmonics fold, a square with
    its 3rd, a sawtooth with its 2nd, a triangle with its 3rd at 1/9, shows one of them there)."""
    lines, inside = low_harmonic_lines(plan, power, detect, fc)
    return np.any(lines & inside, axis=1) | ~inside[:, 1]


def _folded_checks(plan: Plan, coarse: Coarse, pos, hvalid, combine, folded, n_look):
    """Folded harmonics of aliased frames: located where folding puts them, one reading per line.

    A folded line must lie within FOLD_LOCATION_TOL of its predicted place (another line, such as
    hum, is not taken for it), must not share the fundamental's main lobe (its Hann reading would
    be mostly the fundamental's), and of two harmonics that fold onto one line only the lower is
    cancelled. Harmonics crowded by another line do not sharpen the fundamental.
    """
    rows = np.arange(pos.shape[0])
    cols = slice(1, n_look + 1)
    check = hvalid[:, cols] & folded[:, cols]
    if check.any():
        _, loc, _ = line_at(plan, coarse.power, coarse.detect, rows, pos[:, cols])
        far = np.abs(pos[:, cols] - coarse.fc[:, None]) >= CLOSE_BINS
        hvalid[:, cols] &= ~check | ((np.abs(loc - pos[:, cols]) <= FOLD_LOCATION_TOL) & far)
    crowded, duplicate = crowding(pos, hvalid, plan.harm[None, :pos.shape[1]])
    hvalid = hvalid & ~duplicate
    combine = combine & hvalid & ~crowded
    combine[:, 0] = hvalid[:, 0]
    return hvalid, combine


def _fundamental_hann_leak(plan: Plan, x0, hf, hbin, where):
    """Hann leakage of the fundamental (and its image) into the bins ``hbin`` of the ``where`` columns.

    A weak folded harmonic a few bins from a strong fundamental is read after this is removed.
    """
    a1 = x0 / hann_kernel(hf[:, 0] - hbin[:, 0], plan.n)
    f1 = hf[:, :1]
    leak = a1[:, None] * hann_kernel(f1 - hbin, plan.n) + np.conj(a1)[:, None] * hann_kernel(-f1 - hbin, plan.n)
    return np.where(where, leak, 0.0)


def combine_harmonics(plan: Plan, f1, amp, harm: Harmonics, noise_var, have, harmonic_fine=None,
                      fundamental_factor: float = 1.0):
    """Combine the fundamental's estimate with its harmonics' (all in bins).

    The Fisher information of f0 is the sum over harmonics of h^2 times each line's single-tone
    information (the harmonics are asymptotically orthogonal). Each harmonic line is located by
    Grandke's Hann interpolation (measured at about GRANDKE_VARIANCE_FACTOR x the Cramer-Rao
    variance); all estimates are weighted by inverse variance, and any that disagrees with the
    most precise one by more than 4 standard deviations is left out.

    Parameters
    ----------
    f1, amp : (F,) the fundamental's fine estimate (bins) and peak amplitude
    harm : Harmonics
    noise_var : (F,) white-equivalent noise variance per sample
    have : (F,) bool, frames with a tone
    harmonic_fine : (column, f0 estimate, usable) or None
        The most informative harmonic's fine-stage estimate, taken as at its bound times
        ``fundamental_factor`` instead of Grandke's.
    fundamental_factor : float
        Variance of the fine estimator over the Cramer-Rao bound.
    """
    n = plan.n
    around, hbin, amp_h = harm.around, harm.hbin, harm.amp_h
    # Grandke on the three bins around each harmonic's peak (around = bins hbin-2 .. hbin+2)
    peak_i = 1 + np.argmax(around[:, :, 1:4], axis=2)
    pick = np.stack([np.take_along_axis(around, (peak_i + d)[..., None], axis=2)[..., 0] for d in (0, -1, 1)])
    mags = np.sqrt(pick.astype(float))
    f_h = hbin[:, 1:] + (peak_i - 2) + grandke_hann(mags[0], mags[1], mags[2])
    hnum = plan.harm[1:hbin.shape[1]]
    crb_unit = 12.0 * n / ((2 * np.pi) ** 2 * (n * n - 1.0))  # bins^2 times eta
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        eta_h = 2 * np.abs(amp_h[:, 1:]) ** 2 / noise_var[:, None]  # (2|a|)^2 / 2 / s^2
        var_h = GRANDKE_VARIANCE_FACTOR * crb_unit / (eta_h * hnum * hnum)
        var_1 = crb_unit / ((amp * amp / 2) / noise_var)
        if fundamental_factor != 1.0:
            var_1 = var_1 * fundamental_factor
        # every estimate of f0 (column 0: the fundamental's fine estimate) and its variance
        est = np.concatenate([f1[:, None], f_h / hnum], axis=1)
        var = np.concatenate([var_1[:, None], var_h], axis=1)
        if harmonic_fine is not None:
            # the most informative harmonic went through the fine stage: near its bound
            col, f_fine_h, usable = harmonic_fine
            rows_u = np.flatnonzero(usable)
            est[rows_u, col[rows_u]] = f_fine_h[rows_u]
            var[rows_u, col[rows_u]] /= GRANDKE_VARIANCE_FACTOR
            if fundamental_factor != 1.0:
                var[rows_u, col[rows_u]] *= fundamental_factor
        return f1 + _weighted_shift(est, var, f1, harm.combine, have)


def _weighted_shift(est, var, f1, hvalid, have):
    """Inverse-variance mean of the consistent estimates ``est`` (F, H), as a shift from ``f1``."""
    valid = np.concatenate([have[:, None], hvalid[:, 1:] & have[:, None]], axis=1)
    valid &= np.isfinite(est) & np.isfinite(var) & (var > 0)
    # reference: the most precise estimate; keep those within 4 sigma of it (a stray
    # fundamental estimate is outvoted by its harmonics, a stray harmonic is dropped)
    v_masked = np.where(valid, var, np.inf)
    ref = np.argmin(v_masked, axis=1)
    rows = np.arange(est.shape[0])
    ref_est, ref_var = est[rows, ref], var[rows, ref]
    keep = valid & (np.abs(est - ref_est[:, None]) < 4 * np.sqrt(var + ref_var[:, None]))
    w = np.where(keep, 1 / var, 0.0)
    # running sums: trailing all-zero columns do not change a frame's result
    shift = (np.cumsum(w * np.where(keep, est - f1[:, None], 0.0), axis=1)[:, -1]
             / np.cumsum(w, axis=1)[:, -1])
    return np.where(np.isfinite(shift), shift, 0.0)
