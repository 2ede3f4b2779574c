"""Where the harmonics of a tone land after sampling, and which of them show as lines.

A signal sampled without an anti-alias filter (an oscilloscope export of a logic-level
oscillator, a comparator output) carries every harmonic of its fundamental: harmonic ``k`` of
``f0`` is indistinguishable after sampling from a line at ``|k f0 - m fs|``, the multiple ``m``
of the sample rate that brings it into ``0..fs/2`` (common practice: the Nyquist sampling
theorem; Oppenheim & Schafer, *Discrete-Time Signal Processing*, section 4.2). In an N-point frame
that is ``fold(k f0)`` bins, seen either as the line itself or as its negative-frequency image.
The rectangular-window kernel is N-periodic, so the leakage of such a line is modelled at its
unfolded frequency ``k f0`` without further care; this module finds which folded lines are there.
"""

from __future__ import annotations

import numpy as np

from coilshift.logger.tracking.estimators import grandke_hann
from coilshift.logger.tracking.kernels import clamp, hann_kernel
from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import (CLOSE_BINS, FOLD_LOCATION_TOL, FOLD_PROBE_HARMONICS,
                                                FOLD_PROBE_MIN, FOLD_RESOLVE_BINS)


def fold(freq_bins, n: int):
    """Position in ``0..n/2`` (bins) of a component at ``freq_bins`` after sampling.

    Returns (position, image): ``image`` is True where the component shows as its
    negative-frequency image (its complex amplitude appears conjugated). Positions below n/2 come
    back unchanged, bit for bit.
    """
    r = np.mod(freq_bins, n)
    image = r > n / 2
    return np.where(image, n - r, r), image


def line_at(plan: Plan, power, detect, rows, centre):
    """Whether a spectral line stands near each (fractional) bin ``centre`` (F, K), and where.

    A line is a peak within +-1 bin of ``centre`` above ``detect`` and above the bins two either
    side of that peak (the skirt of a stronger line falls steadily and fails this). Returns
    (present, location in bins by Grandke's Hann interpolation, peak power).
    """
    b = clamp(np.rint(centre).astype(int), 3, plan.nbins - 4)
    around = power[rows[:, None, None], b[:, :, None] + plan.step5[None, None, :]]  # (F, K, 5)
    peak_i = 1 + np.argmax(around[:, :, 1:4], axis=2)
    top = np.take_along_axis(around, peak_i[..., None], axis=2)[..., 0]
    left = np.take_along_axis(around, (peak_i - 1)[..., None], axis=2)[..., 0]
    right = np.take_along_axis(around, (peak_i + 1)[..., None], axis=2)[..., 0]
    present = (top > detect[:, None]) & (top > around[:, :, 0]) & (top > around[:, :, 4])
    mags = np.sqrt(np.stack([top, left, right]).astype(float))
    loc = b + (peak_i - 2) + grandke_hann(mags[0], mags[1], mags[2])
    return present, loc, top.astype(float)


#: the harmonics above fs/2 looked for, counted from the last one below it
_PROBE = np.arange(1, FOLD_PROBE_HARMONICS + 1)[None, :]


def aliased_frames(plan: Plan, spec, power, detect, fc):
    """Frames whose first few harmonics above fs/2 show as lines at their folded positions.

    FOLD_PROBE_HARMONICS harmonics from the first one above fs/2 are looked for; at least
    FOLD_PROBE_MIN of them must stand as lines where folding puts them (a square wave lacks every
    other harmonic; one stray line, such as hum, is not enough). When fs is close to a multiple
    of f0, folded harmonics fall next to unfolded ones: a place more than CLOSE_BINS from the
    nearest harmonic below fs/2 is tested for a line within FOLD_LOCATION_TOL; one between
    FOLD_RESOLVE_BINS and CLOSE_BINS from it by a least-squares fit of both lines through the
    Hann kernel (:func:`_folded_amplitude`); one closer cannot be told from the harmonic beside it.

    Returns (aliased, unresolved), (F,) bool each: ``unresolved`` where no place could be told
    apart but lines stand at FOLD_PROBE_MIN of them: the frame may be aliased, and if it is,
    the folded lines sit too close to its harmonics to be seen.
    """
    nf = fc.shape[0]
    f_safe = np.maximum(fc, 1.0)[:, None]
    n_below = np.floor((plan.n / 2) / f_safe)
    pos, _ = fold((n_below + _PROBE) * f_safe, plan.n)
    # the bin nearest a line above the threshold lies in its main lobe: a cheap first look
    b = clamp(np.rint(pos).astype(int), 3, plan.nbins - 4)
    quick = power[np.arange(nf)[:, None], b] > detect[:, None]
    aliased = np.zeros(nf, dtype=bool)
    unresolved = np.zeros(nf, dtype=bool)
    look = np.flatnonzero(np.count_nonzero(quick, axis=1) >= FOLD_PROBE_MIN)
    if look.size == 0:
        return aliased, unresolved
    pos, f_safe, n_below, quick = pos[look], f_safe[look], n_below[look], quick[look]
    partner = clamp(np.rint(pos / f_safe), 1, n_below) * f_safe  # nearest harmonic below fs/2
    sep = np.abs(pos - partner)
    inside = (pos >= 3) & (pos <= plan.nbins - 4)
    clear = inside & (sep >= CLOSE_BINS)
    near = inside & (sep >= FOLD_RESOLVE_BINS) & (sep < CLOSE_BINS)
    rows = np.arange(look.size)
    present, loc, _ = line_at(plan, power[look], detect[look], rows, pos)
    hits = clear & present & (np.abs(loc - pos) <= FOLD_LOCATION_TOL)
    if near.any():
        hits |= near & _folded_amplitude(plan, spec[look], detect[look], pos, partner, near)
    aliased[look] = np.sum(hits, axis=1) >= FOLD_PROBE_MIN
    hidden = inside & (sep < FOLD_RESOLVE_BINS) & quick
    # the fundamental always stands at its own place: a folded harmonic hidden under it is
    # evidence only when the frame shows harmonic content of its own somewhere else
    on_fundamental = np.rint(partner / f_safe) <= 1
    content = _harmonic_content(plan, power[look], detect[look], f_safe[:, 0], pos, inside)
    counted = hidden & (~on_fundamental | content[:, None])
    unresolved[look] = (~aliased[look] & ~np.any(clear | near, axis=1)
                        & (np.sum(counted, axis=1) >= FOLD_PROBE_MIN))
    return aliased, unresolved


def _harmonic_content(plan: Plan, power, detect, f, pos, inside):
    """(F,) bool: a line of the waveform other than the fundamental stands in the frame.

    Looked for at harmonics 2..5 below fs/2, at folded places that lie under another harmonic,
    and next to fs/2, where a harmonic just below it (or folded just above it) piles up with its
    image. A pure tone shows none of them, so the places folding would hide under its own line
    say nothing about it; near 0 Hz nothing is looked for (a DC offset is not a harmonic).
    """
    lines, low_in = low_harmonic_lines(plan, power, detect, f)
    found = np.any(lines & low_in, axis=1)
    top = pos > plan.nbins - 4
    edge = power[:, plan.nbins - 3:].max(axis=1) > detect
    return found | ((np.any(top, axis=1) | ~low_in.all(axis=1)) & edge)


#: the harmonics that tell a pure tone from a waveform whose harmonics fold
LOW_HARMONICS = np.array([2.0, 3.0, 4.0, 5.0])[None, :]


def low_harmonic_lines(plan: Plan, power, detect, f):
    """Lines at harmonics 2..5 of ``f`` (F,) bins: (above the threshold, below fs/2), (F, 4) each.

    The bin nearest a harmonic lies in its main lobe, so it alone decides (a cheap first look).
    """
    low = np.rint(f[:, None] * LOW_HARMONICS).astype(int)
    inside = low <= plan.nbins - 3
    lines = power[np.arange(power.shape[0])[:, None], clamp(low, 0, plan.nbins - 1)]
    return lines > detect[:, None], inside


def folding_missed(plan: Plan, spec, power, detect, fc, f_fine):
    """(F,) bool: frames the coarse look took for band-limited that may be aliased after all.

    The first folded harmonic has order about N / (2 f0), so a coarse f0 off by e bins misplaces
    the looked-for lines by that order times e; in an aliased spectrum the coarse estimate is
    itself pulled by folded lines beside the fundamental. With the fine estimate the look is
    repeated: a frame is returned when it now finds folding (aliased or unresolved), or when the
    two estimates differ so much that the first look's places were off by more than
    FOLD_LOCATION_TOL while lines stand at the places now.
    """
    aliased, unresolved = aliased_frames(plan, spec, power, detect, f_fine)
    order = np.floor((plan.n / 2) / np.maximum(f_fine, 1.0)) + 1
    shaky = order * np.abs(f_fine - fc) > FOLD_LOCATION_TOL
    if shaky.any():
        f_safe = np.maximum(f_fine, 1.0)[:, None]
        pos, _ = fold((np.floor((plan.n / 2) / f_safe) + _PROBE) * f_safe, plan.n)
        b = clamp(np.rint(pos).astype(int), 3, plan.nbins - 4)
        lines = np.count_nonzero(power[np.arange(fc.shape[0])[:, None], b] > detect[:, None], axis=1)
        shaky &= lines >= FOLD_PROBE_MIN
    return aliased | unresolved | shaky


def _folded_amplitude(plan: Plan, spec, detect, pos, partner, which):
    """(F, P) bool: a folded line at ``pos`` beside a harmonic at ``partner`` stands out (``which`` only).

    Both complex amplitudes are fitted by least squares to the five Hann bins around the pair,
    through the Hann kernel at the two known places. The folded line counts when its peak power
    exceeds ``detect`` and four standard deviations of its fitted amplitude (the noise per bin,
    ``detect / detect_ratio``, through the fit's normal equations).
    """
    out = np.zeros(pos.shape, dtype=bool)
    r, c = np.nonzero(which)
    centre = np.rint(0.5 * (pos[r, c] + partner[r, c])).astype(int)
    bins = clamp(centre[:, None] + np.arange(-2, 3)[None, :], 0, plan.nbins - 1)
    x = spec[r[:, None], bins].astype(complex)  # (K, 5)
    h_f = hann_kernel(pos[r, c][:, None] - bins, plan.n)
    h_u = hann_kernel(partner[r, c][:, None] - bins, plan.n)
    # normal equations of x = a_u h_u + a_f h_f
    g_uu = np.sum(np.abs(h_u) ** 2, axis=1)
    g_ff = np.sum(np.abs(h_f) ** 2, axis=1)
    g_uf = np.sum(np.conj(h_u) * h_f, axis=1)
    y_u = np.sum(np.conj(h_u) * x, axis=1)
    y_f = np.sum(np.conj(h_f) * x, axis=1)
    det = g_uu * g_ff - np.abs(g_uf) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        a_f = (g_uu * y_f - np.conj(g_uf) * y_u) / det
        var_f = (detect[r] / plan.detect_ratio) * g_uu / det
    peak = np.abs(a_f) ** 2 * (plan.n / 2) ** 2  # Hann peak bin power of the folded line
    out[r, c] = np.isfinite(peak) & (peak > detect[r]) & (np.abs(a_f) ** 2 > 16 * var_f)
    return out


def crowding(pos, valid, hnum):
    """Which valid lines (F, H) share their Hann main lobe with another, and which duplicate one.

    Returns (crowded, duplicate): ``crowded`` where another valid line lies within CLOSE_BINS
    (its Hann reading and its location are disturbed); ``duplicate`` for the higher harmonic of
    two that fall within one bin of each other (one reading holds both: it is cancelled once).
    """
    # invalid lines sort to the end, spaced far apart so they never pair
    p = np.where(valid, pos, 1e9 * (1 + np.arange(pos.shape[1]))[None, :])
    order = np.argsort(p, axis=1, kind="stable")
    ps = np.take_along_axis(p, order, axis=1)
    gap = np.diff(ps, axis=1)
    near = gap < CLOSE_BINS
    crowded_sorted = np.zeros(p.shape, dtype=bool)
    crowded_sorted[:, 1:] |= near
    crowded_sorted[:, :-1] |= near
    rows = np.arange(p.shape[0])[:, None]
    crowded = np.zeros(p.shape, dtype=bool)
    crowded[rows, order] = crowded_sorted
    # of a pair within one bin, the higher harmonic is the duplicate
    same = gap < 1.0
    h_sorted = np.take_along_axis(np.broadcast_to(hnum, p.shape), order, axis=1)
    higher_second = h_sorted[:, 1:] > h_sorted[:, :-1]
    dup_sorted = np.zeros(p.shape, dtype=bool)
    dup_sorted[:, 1:] |= same & higher_second
    dup_sorted[:, :-1] |= same & ~higher_second
    duplicate = np.zeros(p.shape, dtype=bool)
    duplicate[rows, order] = dup_sorted
    return crowded & valid, duplicate & valid
