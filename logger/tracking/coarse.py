"""Coarse stage on the Hann spectrum: noise floor, hum exclusion, detection, fundamental picking.

One single-precision real FFT per frame of the Hann-windowed samples. The strongest line in the
search band (or the significant peak nearest ``near_hz``) is found; its subharmonics are tested
for a real peak with harmonic support, because a pulse-shaped oscillator output can carry
harmonics stronger than its fundamental. A tone must clear both a global threshold (median noise
floor) and a local ordered-statistic CFAR test (Rohling 1983). The sub-bin offset comes from
Grandke's two-bin Hann formula (Grandke 1983). Every function works on a (F, ...) chunk of frames.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.fft as sfft

from coilshift.logger.tracking.estimators import grandke_hann
from coilshift.logger.tracking.fundamental import fundamental_guess
from coilshift.logger.tracking.kernels import clamp
from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import (HUM_PEAK_RATIO, HUM_STRONGER, LOCAL_CELLS, ROUNDING_FLOOR,
                                                SUBHARMONIC_RANGE_DB)


@dataclass
class Coarse:
    """What the coarse stage found in each of F frames.

    Attributes
    ----------
    spec : (F, nbins) complex64, the Hann-windowed real FFT
    power : (F, nbins) float32, ``|spec|^2``
    noise_bins : (F, nd) float32, the decimated bins the noise median is taken over
    noise_sorted : (F, nd) float32, the same sorted per frame
    detect : (F,) global detection threshold (Hann power)
    k : (F,) int, bin of the fundamental's peak
    fc : (F,) coarse frequency of the fundamental (bins)
    have : (F,) bool, a tone passed both detection tests
    outside : (F,) bool, the strongest line lies above the searched range (within a few bins of
        fs/2), above the threshold
    """

    spec: np.ndarray
    power: np.ndarray
    noise_bins: np.ndarray
    noise_sorted: np.ndarray
    detect: np.ndarray
    k: np.ndarray
    fc: np.ndarray
    have: np.ndarray
    outside: np.ndarray


def coarse_stage(plan: Plan, frames) -> Coarse:
    """Run the coarse stage on a (F, N) frame matrix."""
    nf = frames.shape[0]
    # a DC offset leaks only into bins 0 and 1 of a periodic-Hann DFT, which are never
    # searched, so the coarse stage needs no mean removal; single precision is ample here
    # one pass: each sample is rounded to float32, then windowed in float32
    xw = np.multiply(frames, plan.window32, dtype=np.float32)
    spec = sfft.rfft(xw, axis=1, overwrite_x=True)
    power = np.square(spec.real)
    power += np.square(spec.imag)  # |X|^2, (F, nbins) float32

    # noise floor per Hann bin: median of a decimated spectrum / ln 2 (exponential power)
    noise_bins = power[:, plan.kmin:plan.noise_idx[-1] + 1:plan.noise_step]  # = the noise_idx bins
    noise_sorted = np.sort(noise_bins, axis=1)
    nd = noise_sorted.shape[1]
    noise_raw = noise_sorted[:, nd // 2].astype(float) / math.log(2.0)
    detect = noise_raw * plan.detect_ratio

    searchable = _without_hum(plan, power, detect)
    if plan.settings.band_hz is not None:
        searchable = _band_peaks(plan, power, searchable)
    rows = np.arange(nf)
    if plan.near_bin is None:
        kp = plan.s0 + np.argmax(searchable[:, plan.s0:plan.s1 + 1], axis=1)
    else:
        kp = _nearest_peak(plan, searchable, detect)
    p_peak = searchable[rows, kp].astype(float)
    detect = np.maximum(detect, _rounding_floor(plan, power, p_peak))
    have = p_peak > detect
    fp = kp + grandke_offset(plan, power, kp)
    f_guess = fundamental_guess(plan, spec, searchable, power, fp, p_peak, detect)

    # settle on the local maximum nearest the guess, then Grandke's Hann interpolation
    b0 = clamp(np.rint(f_guess).astype(int), plan.kmin + 1, plan.kmax - 1)
    nb = searchable[rows[:, None], b0[:, None] + plan.step3[None, :]]
    k = clamp(b0 - 1 + np.argmax(nb, axis=1), plan.kmin, plan.kmax)
    fc = k + grandke_offset(plan, power, k)
    p_k = searchable[rows, k]
    local = clamp(k[:, None] + plan.local_offsets[None, :], 2, plan.nbins - 1)
    local_sorted = np.sort(power[rows[:, None], local], axis=1)
    have &= (p_k > detect) & (p_k > plan.local_ratio * local_sorted[:, LOCAL_CELLS // 2 - 1])
    # a peak on the edge of the searched range whose spectrum still rises beyond it is the skirt
    # of a line outside (near DC or fs/2), not a tone
    have &= ~(((k <= plan.s0) & (power[rows, k - 1] > power[rows, k]))
              | ((k >= plan.s1) & (power[rows, k + 1] > power[rows, k])))
    top_edge = power[:, plan.kmax + 1:].max(axis=1).astype(float)
    outside = (top_edge > detect) & (top_edge > np.where(have, p_k, 0.0))
    return Coarse(spec, power, noise_bins, noise_sorted, detect, k, fc, have, outside)


def _rounding_floor(plan: Plan, power, p_peak):
    """Least power (F,) a Hann bin must hold to be more than single-precision rounding.

    The coarse FFT runs in float32: rounding leaves a structured floor whose peaks reach about
    800 eps^2 sum(xw^2) (eps = 2^-23; measured for constants, a tone at fs/2 and tones with offsets,
    N = 3000..16384), eps^2 sum(xw^2) being the rounding power of the windowed samples. A frame
    holding only DC, or only a tone at fs/2, shows nothing but this floor in the searched bins;
    ROUNDING_FLOOR times it keeps such frames NO_TONE. ``sum(xw^2)`` is taken (Parseval) from
    the bins outside the searched range, where DC and fs/2 lie, plus four times the strongest
    searched line (a Hann main lobe holds 1.5 times its peak bin's power): within a factor of
    two, which the margin of ROUNDING_FLOOR over 800 covers.
    """
    edges = (power[:, :plan.kmin].sum(axis=1, dtype=np.float64)
             + power[:, plan.kmax + 1:].sum(axis=1, dtype=np.float64))
    total = 2.0 * (edges + 4.0 * p_peak) / plan.n
    return ROUNDING_FLOOR * float(np.finfo(np.float32).eps) ** 2 * total


def _without_hum(plan: Plan, power, detect):
    """``power`` with mains hum lines zeroed in the frames where the mains line itself shows.

    Returns ``power`` itself (not a copy) when no frame has hum.
    """
    searchable = power
    for probe, flank, mask, cells in plan.hum:
        top = power[:, probe].max(axis=1)
        hum_on = (top > detect) & (top > HUM_PEAK_RATIO * power[:, flank].max(axis=1))
        if hum_on.any():
            # the same local test as for a tone, so a noise spike on a tone's skirt is not hum
            near = np.sort(power[:, cells], axis=1)[:, LOCAL_CELLS // 2 - 1]
            hum_on &= top > plan.local_ratio * near
        if hum_on.any():
            if searchable is power:
                searchable = power.copy()
            # lines far stronger than the mains line itself are not its harmonics
            region = searchable[hum_on][:, mask]
            weak = region < HUM_STRONGER * top[hum_on, None]
            region[weak] = 0.0
            sub = searchable[hum_on]
            sub[:, mask] = region
            searchable[hum_on] = sub
    return searchable


def _band_peaks(plan: Plan, power, searchable):
    """Only the local maxima inside the band stay searchable.

    The skirt of a strong tone just outside the band must not hide a weaker tone inside it.
    """
    if searchable is power:
        searchable = power.copy()
    searchable[:, ~plan.search_mask] = 0.0
    inner = searchable[:, 1:-1]
    skirt = (inner < power[:, :-2]) | (inner < power[:, 2:])
    inner[skirt] = 0.0
    return searchable


def grandke_offset(plan: Plan, power, k):
    """Grandke's offset at bin k from the Hann power spectrum (magnitudes of three bins)."""
    rows = np.arange(power.shape[0])
    idx = clamp(k[:, None] + plan.step3[None, :], 0, plan.nbins - 1)
    mags = np.sqrt(power[rows[:, None], idx].astype(float))
    return grandke_hann(mags[:, 1], mags[:, 0], mags[:, 2])


def _nearest_peak(plan: Plan, searchable, detect):
    """Bin of the significant local maximum nearest ``near_hz`` in each frame."""
    p = searchable
    local = np.zeros(p.shape, dtype=bool)
    local[:, 1:-1] = (p[:, 1:-1] > p[:, :-2]) & (p[:, 1:-1] >= p[:, 2:])
    strongest = p.max(axis=1).astype(float)
    thr = np.maximum(detect, strongest * 10 ** (-SUBHARMONIC_RANGE_DB / 10))
    cand = local & (p > thr[:, None])
    dist = np.where(cand, np.abs(np.arange(p.shape[1])[None, :] - plan.near_bin), np.inf)
    best = np.argmin(dist, axis=1)
    fallback = np.argmax(p, axis=1)
    return np.where(np.isfinite(dist[np.arange(p.shape[0]), best]), best, fallback)
