"""Noise floor with the tone left out, SNR, and the per-frame flags.

``snr_db`` is the per-sample SNR of the fundamental, ``eta = A^2 / (2 s^2)`` in dB, the quantity in
the Cramer-Rao bound (Rife & Boorstyn 1974; Kay 1993, ex. 3.14); ``s^2`` is the white-equivalent
noise variance from the median of the frame's Hann power spectrum with the tone's harmonics left
out.
"""

from __future__ import annotations

import math

import numpy as np

from coilshift.logger.runfolder import flags as fl
from coilshift.logger.tracking.coarse import Coarse
from coilshift.logger.tracking.folding import fold
from coilshift.logger.tracking.kernels import clamp
from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import ALIAS_BIAS_LIMIT_BINS, NOISE_GUARD_BINS


def noise_variance(plan: Plan, coarse: Coarse, freq_bins, hvalid, aliased=None):
    """White-equivalent noise variance per sample, (F,), with the tone's lines left out.

    The median of the remaining bins sits at rank ``(nd - above + below) / 2`` of the full sorted
    set, where above/below count the left-out bins above/below the overall median (exact when none
    of them straddles the new median). Only the fundamental and the harmonics found (``hvalid``)
    are left out, NOISE_GUARD_BINS either side.
    """
    noise_bins, noise_sorted, have = coarse.noise_bins, coarse.noise_sorted, coarse.have
    nf, nd = noise_sorted.shape
    centre = freq_bins[:, None] * plan.harm[None, :hvalid.shape[1]]
    if aliased is not None and aliased.any():
        centre = fold(centre, plan.n)[0]  # where the harmonics above fs/2 show
    step_b = plan.noise_step
    j_first = np.ceil((centre - NOISE_GUARD_BINS - plan.kmin) / step_b).astype(int)
    left_out = []
    for step in range(2 * NOISE_GUARD_BINS // step_b + 1):
        j = j_first + step
        inside = (j >= 0) & (j < nd) & (plan.kmin + step_b * j <= centre + NOISE_GUARD_BINS)
        left_out.append((inside & hvalid & have[:, None], clamp(j, 0, nd - 1)))
    median_raw = noise_sorted[:, nd // 2:nd // 2 + 1]
    n_above = np.zeros(nf, dtype=int)
    n_below = np.zeros(nf, dtype=int)
    for inside, j in left_out:
        high = np.take_along_axis(noise_bins, j, axis=1) > median_raw
        n_above += np.sum(inside & high, axis=1)
        n_below += np.sum(inside & ~high, axis=1)
    rank = clamp((nd - n_above + n_below) // 2, 0, nd - 1)
    noise_bin = np.take_along_axis(noise_sorted, rank[:, None], axis=1)[:, 0].astype(float) / math.log(2.0)
    return noise_bin / plan.win_power


def frame_flags(plan: Plan, coarse: Coarse, freq_bins, snr_db, clipped, aliased=None, alias_bias=None,
                maybe_aliased=None):
    """Flags per frame: CLIPPED, OUT_OF_BAND (with a band), NO_TONE, LOW_SNR, ALIASED, ALIAS_CLOSE.

    ALIAS_CLOSE: the bound ``alias_bias`` (bins) on what folded harmonics too close to separate
    can do exceeds ALIAS_BIAS_LIMIT_BINS, in ``maybe_aliased`` frames (aliased, or where folded
    lines could not be told from the harmonics beside them).
    """
    s = plan.settings
    power, detect, have = coarse.power, coarse.detect, coarse.have
    fl_arr = np.zeros(have.shape[0], dtype=np.int64)
    fl_arr[clipped] |= fl.CLIPPED
    if alias_bias is not None:
        fl_arr[have & aliased] |= fl.ALIASED
        fl_arr[have & maybe_aliased & (alias_bias > ALIAS_BIAS_LIMIT_BINS)] |= fl.ALIAS_CLOSE
    if s.band_hz is not None:
        freq_hz = freq_bins * plan.df
        # the dominant line over the whole spectrum: outside the band and not one of our harmonics?
        f_safe = np.where(freq_bins > 1, freq_bins, 1.0)
        full = power[:, plan.kmin:plan.kmax + 1]
        kg = plan.kmin + np.argmax(full, axis=1)
        pg = power[np.arange(have.shape[0]), kg].astype(float)
        outside = (kg < plan.s0) | (kg > plan.s1)
        hnum = np.rint(kg / f_safe)
        harmonic = have & (hnum >= 1) & (np.abs(kg - hnum * f_safe) <= 1.5)
        oob = outside & (pg > detect) & ~harmonic
        oob |= have & ((freq_hz < s.band_hz[0]) | (freq_hz > s.band_hz[1]))
        fl_arr[oob] |= fl.OUT_OF_BAND
    else:
        # the strongest line sits within a few bins of fs/2, where nothing is searched
        fl_arr[coarse.outside] |= fl.OUT_OF_BAND
    fl_arr[~have] |= fl.NO_TONE
    low = have & ~(snr_db >= s.min_snr_db)
    fl_arr[low] |= fl.LOW_SNR
    return fl_arr

