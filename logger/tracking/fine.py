"""Fine stage on the rectangular window: the chosen sub-bin step with leakage cancellation.

The DTFT of each frame (its mean removed analytically) is sampled where the chosen estimator
(:mod:`coilshift.logger.tracking.subbin`) wants it, around the coarse estimate. The leakage of the
tone's own negative-frequency image, of its harmonics (amplitudes from the Hann spectrum), of other
strong lines and of the removed frame mean is subtracted with the exact kernel before each step;
this removes the bias a rectangular window otherwise shows for real signals and pulse waves.
FINE_PASSES steps are taken: the second uses the rectangular-window amplitude of the first for the
image correction.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from coilshift.logger.tracking.kernels import dirichlet
from coilshift.logger.tracking.leakage import lines_leakage
from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import FINE_PASSES
from coilshift.logger.tracking.subbin import SubBinStep


@dataclass
class Fine:
    """The fine stage's result for F frames.

    Attributes
    ----------
    freq_bins : (F,) the fundamental's frequency (bins)
    ah : (F, H) complex amplitudes of the fundamental (column 0, from the fine stage) and harmonics
    mean : (F,) frame means (None when no rectangular stage ran)
    misfit : (F,) what the one-tone model leaves of the fundamental's DTFT samples, relative to
        the tone's part of them (None without a rectangular stage; see
        :mod:`~coilshift.logger.tracking.edges`)
    """

    freq_bins: np.ndarray
    ah: np.ndarray
    mean: np.ndarray | None
    misfit: np.ndarray | None = None

    @property
    def amp(self):
        """(F,) peak amplitude of the fundamental."""
        return 2 * np.abs(self.ah[:, 0])


def cleaned_samples(plan: Plan, step: SubBinStep, xpad, g, lines, mean=None):
    """DTFT samples at ``g`` of the frames minus their mean and minus the other ``lines``.

    Returns (samples, wg_conj, mean); ``mean`` is computed from the frame sums when not given.
    """
    s, total = step.samples(plan, xpad, g)
    if mean is None:
        mean = total / plan.n
    # DTFT of the frame minus its mean: subtract the mean's kernel analytically
    wg_conj = np.conj(dirichlet(g, plan.n))
    s -= mean[:, None] * wg_conj
    s -= lines_leakage(plan, lines, g, wg_conj)
    return s, wg_conj, mean


def fine_stage(plan: Plan, step: SubBinStep | None, xpad, fc, amp_h, hvalid, lines) -> Fine:
    """The fundamental's fine estimate, starting from the coarse ``fc`` (bins).

    ``amp_h`` (F, H) are the Hann-spectrum amplitudes of the fundamental and its harmonics,
    ``lines`` the other strong lines (:func:`~coilshift.logger.tracking.leakage.other_lines`).
    With ``step`` None the coarse estimate and Hann amplitudes are the result.
    """
    ah = np.where(hvalid, amp_h, 0.0)
    if step is None:
        return Fine(fc, ah, None)
    g = step.points(plan, fc)
    s, wg_conj, mean = cleaned_samples(plan, step, xpad, g, lines)
    f_fine = fc.copy()
    target = np.zeros(fc.shape[0], dtype=np.int64)
    for _ in range(FINE_PASSES - 1):
        f_fine, ah[:, 0] = step.step(plan, s, g, wg_conj, f_fine, ah, target)
    f_fine, ah[:, 0], misfit = step.step(plan, s, g, wg_conj, f_fine, ah, target, misfit=True)
    return Fine(f_fine, ah, mean, misfit)


def fine_harmonic(plan: Plan, step: SubBinStep, xpad, fine: Fine, lines, f0, hvalid):
    """The fine stage again, on each frame's most informative harmonic (largest h^2 |a_h|^2).

    ``f0`` is the fundamental from the Hann estimates of the harmonics (good enough to place even
    a high harmonic within a small fraction of a bin). Returns (column, f0 estimate from it in
    bins, usable) per frame. Its variance is the single-tone bound of that harmonic divided by
    h^2, against about 3.5 times that for the Grandke estimate it replaces.
    """
    ah = fine.ah
    n_h = ah.shape[1]
    rows = np.arange(f0.shape[0])
    info = np.where(hvalid[:, 1:], plan.harm[None, 1:n_h] ** 2 * np.abs(ah[:, 1:]) ** 2, 0.0)
    best = 1 + np.argmax(info, axis=1)
    hstar = plan.harm[best]
    g = step.points(plan, hstar * f0)
    s, wg_conj, _ = cleaned_samples(plan, step, xpad, g, lines, mean=fine.mean)
    ah = ah.copy()
    f_est = f0.copy()
    for _ in range(FINE_PASSES):
        f_target, ah[rows, best] = step.step(plan, s, g, wg_conj, f_est, ah, best)
        f_est = f_target / hstar
    usable = hvalid[rows, best] & (info[rows, best - 1] > 0) & (np.max(g, axis=1) < plan.nbins - 2)
    return best, f_est, usable
