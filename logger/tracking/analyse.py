"""One chunk of frames through every stage: coarse search, harmonics, fine step, refinement, SNR, flags.

Each stage works on the whole (F, N) chunk at once; a frame's result depends only on its own
samples, never on the chunk it was analysed in.
"""

from __future__ import annotations

import numpy as np

from coilshift.logger.runfolder import flags as fl
from coilshift.logger.tracking.aliasbias import alias_bias
from coilshift.logger.tracking.coarse import coarse_stage
from coilshift.logger.tracking.dtft import padded
from coilshift.logger.tracking.edges import edge_frames
from coilshift.logger.tracking.fine import Fine, cleaned_samples, fine_harmonic, fine_stage
from coilshift.logger.tracking.folding import folding_missed
from coilshift.logger.tracking.harmonics import Harmonics, combine_harmonics, harmonic_lines
from coilshift.logger.tracking.leakage import other_lines
from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.quality import frame_flags, noise_variance
from coilshift.logger.tracking.sinefit import fit_sine4_frames
from coilshift.logger.tracking.subbin import FINE_STEPS, AboutaniosMulgrew, fundamental_variance_factor


def analyse_frames(plan: Plan, frames, clipped):
    """Analyse a (F, N) frame matrix.

    Parameters
    ----------
    plan : Plan
    frames : (F, N) float64 samples
    clipped : (F,) bool, frames holding a clipped sample

    Returns
    -------
    freq_hz, amp_dbfs, snr_db, flags : arrays of F (NaN where no tone)
    """
    s = plan.settings
    step = FINE_STEPS[s.fine_estimator]
    coarse = coarse_stage(plan, frames)
    harm = harmonic_lines(plan, coarse)
    xpad = lines = None
    if step is not None:
        xpad = padded(plan, frames)
        lines = other_lines(plan, coarse, harm.hvalid, harm.pos, harm.aliased)
    fine = fine_stage(plan, step, xpad, coarse.fc, harm.amp_h, harm.hvalid, lines)
    freq_bins, amp = fine.freq_bins, fine.amp
    if s.refine and coarse.have.any():
        freq_bins, amp = _refined(plan, frames, coarse.have, freq_bins, amp)
    noise_var = noise_variance(plan, coarse, freq_bins, harm.hvalid, harm.aliased)
    if harm.count > 1:
        freq_bins = _with_harmonics(plan, step, xpad, lines, fine, harm, freq_bins, amp, noise_var, coarse.have)
    with np.errstate(divide="ignore", invalid="ignore"):
        snr_db = 10 * np.log10((amp * amp / 2) / noise_var)
        amp_dbfs = 20 * np.log10(amp)
    _recheck_folding(plan, coarse, harm, fine.freq_bins)
    maybe = harm.aliased | harm.unresolved
    bias = alias_bias(plan, step, freq_bins, harm) if maybe.any() else None
    fl_arr = frame_flags(plan, coarse, freq_bins, snr_db, clipped, harm.aliased, bias, maybe)
    if coarse.have.any():
        fl_arr[coarse.have & _edges(plan, frames, fine, lines, freq_bins, snr_db)] |= fl.EDGE
    have = coarse.have
    freq_hz = np.where(have, freq_bins * plan.df, np.nan)
    amp_dbfs = np.where(have, amp_dbfs, np.nan)
    snr_db = np.where(have, snr_db, np.nan)
    return freq_hz, amp_dbfs, snr_db, fl_arr


def _recheck_folding(plan: Plan, coarse, harm: Harmonics, f_fine) -> None:
    """Frames with harmonics that the coarse look took for band-limited, looked at again with the
    fine estimate (:func:`~coilshift.logger.tracking.folding.folding_missed`); those that may be
    aliased after all are marked ``harm.unresolved`` (their folded lines were not modelled)."""
    if harm.count < 2:
        return
    rows = np.flatnonzero(coarse.have & ~harm.aliased & ~harm.unresolved & harm.hvalid[:, 1:].any(axis=1))
    if rows.size:
        missed = folding_missed(plan, coarse.spec[rows], coarse.power[rows], coarse.detect[rows],
                                coarse.fc[rows], f_fine[rows])
        harm.unresolved[rows[missed]] = True


def _edges(plan: Plan, frames, fine: Fine, lines, freq_bins, snr_db):
    """Frames that one stationary tone does not explain (:mod:`~coilshift.logger.tracking.edges`).

    Without a rectangular-window stage the misfit is taken at the Hann estimate, from DTFT
    samples +- 1/2 bin around it.
    """
    misfit = fine.misfit
    if misfit is None:
        step = AboutaniosMulgrew()
        g = step.points(plan, fine.freq_bins)
        s, wg_conj, _ = cleaned_samples(plan, step, padded(plan, frames), g, lines)
        target = np.zeros(g.shape[0], dtype=np.int64)
        misfit = step.step(plan, s, g, wg_conj, fine.freq_bins, fine.ah, target, misfit=True)[2]
    return edge_frames(plan, misfit, snr_db)


def _refined(plan: Plan, frames, have, freq_bins, amp):
    """IEEE Std 1057 four-parameter sine fit started from the fine estimate (frames with a tone).

    A fit that does not converge or moves by half a bin or more is refused.
    """
    fit_rows = np.flatnonzero(have)
    f_hz, ca, cb, _, _, conv = fit_sine4_frames(frames[fit_rows], plan.fs, freq_bins[fit_rows] * plan.df)
    ok = conv & (np.abs(f_hz / plan.df - freq_bins[fit_rows]) < 0.5)
    freq_bins = freq_bins.copy()
    freq_bins[fit_rows[ok]] = f_hz[ok] / plan.df
    amp = amp.copy()
    amp[fit_rows[ok]] = np.hypot(ca, cb)[ok]
    return freq_bins, amp


def _with_harmonics(plan: Plan, step, xpad, lines, fine: Fine, harm: Harmonics, freq_bins, amp, noise_var, have):
    """The fundamental sharpened by its harmonics.

    First with the harmonics' Hann estimates; with that f0 the most informative harmonic goes
    through the fine stage, and the combination is formed again with it. Without a
    rectangular-window stage the Hann combination is the result.
    """
    factor = fundamental_variance_factor(plan.settings.fine_estimator)
    f_comb = combine_harmonics(plan, freq_bins, amp, harm, noise_var, have, fundamental_factor=factor)
    if step is None:
        return f_comb
    fine_h = fine_harmonic(plan, step, xpad, fine, lines, f_comb, harm.combine)
    return combine_harmonics(plan, freq_bins, amp, harm, noise_var, have, harmonic_fine=fine_h,
                             fundamental_factor=factor)
