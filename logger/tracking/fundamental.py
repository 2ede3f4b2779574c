"""Which fundamental the strongest line belongs to, knowing that harmonics fold at fs/2.

A pulse-shaped oscillator output (555, comparator), especially after AC coupling, can carry
harmonics stronger than its fundamental, so the strongest line ``fp`` may be harmonic ``m`` of
the tone: ``f = fp / m``, or, when harmonic m lies above fs/2 and folds back,
``f = (c N + s fp) / m`` (``c`` = 1..m/2, ``s`` = +-1; common practice: the sampling theorem puts
harmonic k of f0 at ``|k f0 - j fs|``). A hypothesis needs a line at ``f`` within
SUBHARMONIC_RANGE_DB of ``fp`` (FOLDED_RANGE_DB for the folded family, considered only in frames
that show folding), and at least half of its harmonics h = 1..m must show as lines in that range,
each located (Grandke) within SELECT_LOCATION_BINS plus four of its standard deviations of where
the hypothesis puts it. Two lines alone, ``fp`` and one at ``fp / m``, are as well explained by
two unrelated tones (an interferer, a second oscillator) as by one waveform: a waveform with a
strong harmonic m has others around it (a pulse train's |sin(pi k d)| / k envelope is smooth), so
one more line among h = 2..m-1 and m+1..2m is needed, wherever one of them could be seen (below
fs/2, or anywhere in a frame that shows folding).

Without an anti-alias filter the spectrum is dense with folded harmonics of ``fp`` itself, and
some of them sit by chance where a subharmonic's harmonics would be. A supporting line counts
only when it is not better explained as harmonic ``k`` of ``fp`` folded to ``|k fp - j N|``: it is
explained when it lies clearly closer to such a place than to where the hypothesis puts it, or
about as close (within SELECT_TIE_BINS, widened by k times FP_UNCERTAINTY_BINS) and no stronger
than a folded harmonic of that order can be (``(FOLD_AMPLITUDE_GAIN / k)^2`` times ``fp``'s power).
So a line 29 dB down does not make a fundamental by level alone. Accepted hypotheses are tested
again with the best lower-order one of their family in place of ``fp`` (:func:`_nested`); the one
with the highest harmonic number wins, a direct one (c = 0) before a folded one.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from coilshift.logger.tracking.estimators import grandke_hann
from coilshift.logger.tracking.folding import aliased_frames, fold
from coilshift.logger.tracking.kernels import clamp
from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import (FOLD_AMPLITUDE_GAIN, FOLDED_RANGE_DB, FP_UNCERTAINTY_BINS,
                                                GRANDKE_LOCATION_SIGMA,
                                                SELECT_LOCATION_BINS,
                                                SELECT_TIE_BINS, SUBHARMONIC_RANGE_DB)


#: bins around the strongest line that belong to its own main lobe and skirt
_LOBE = np.arange(-6, 7)[None, :]


def fundamental_guess(plan: Plan, spec, searchable, power, fp, p_peak, detect):
    """The fundamental (bins) the strongest line ``fp`` (F,) belongs to.

    Every hypothesis's h = 1 line is looked for first (vectorised over frames); only frames where
    some hypothesis other than ``fp`` itself has that line get the full test, first with the
    folded harmonics of ``fp`` as the other explanation, then (:func:`_nested`) with those of the
    best lower-order hypothesis accepted so far. The accepted hypothesis with the highest
    harmonic number wins (the lowest fundamental that explains ``fp``), or, with ``near_hz``,
    the accepted one nearest it.
    """
    nf = fp.shape[0]
    thr = np.maximum(detect, p_peak * 10 ** (-SUBHARMONIC_RANGE_DB / 10))
    f_all = (plan.hyp_c[None, :] * plan.n + plan.hyp_s[None, :] * fp[:, None]) / plan.hyp_m[None, :]
    choice = np.zeros(nf, dtype=int)
    # only frames with some other line in range of the strongest can hold another hypothesis
    look = _other_lines_in_range(plan, searchable, fp, thr)
    if look.size:
        choice[look] = _choose(plan, spec[look], searchable[look], power[look], fp[look], p_peak[look],
                               detect[look], thr[look], f_all[look])
    return f_all[np.arange(nf), choice]


def _other_lines_in_range(plan: Plan, searchable, fp, thr):
    """Frames with a bin above ``thr`` beyond the strongest line's main lobe (+-6 bins)."""
    above = searchable > thr[:, None].astype(searchable.dtype)
    lobe = clamp(np.rint(fp).astype(int)[:, None] + _LOBE, 0, searchable.shape[1] - 1)
    in_lobe = np.count_nonzero(above[np.arange(fp.shape[0])[:, None], lobe], axis=1)
    return np.flatnonzero(np.count_nonzero(above, axis=1) > in_lobe)


def _choose(plan: Plan, spec, searchable, power, fp, p_peak, detect, thr, f_all):
    """The accepted hypothesis (column of ``f_all``) of each frame; see :func:`fundamental_guess`."""
    nf = fp.shape[0]
    rows = np.arange(nf)
    lo, hi = max(plan.lo_bin - 0.5, plan.kmin), min(plan.hi_bin + 0.5, plan.kmax)
    in_range = (f_all >= lo) & (f_all <= hi)
    near = _peak_near(plan, searchable, rows, f_all)
    # a fundamental whose folded harmonic is the strongest line: a pulse train's harmonics never
    # exceed its fundamental (|sin(m x)| <= m |sin x|), so it must come within FOLDED_RANGE_DB
    # (room for coupling and for folded lines adding to the strongest one)
    thr_folded = np.maximum(thr, p_peak * 10 ** (-FOLDED_RANGE_DB / 10))
    gate = in_range & (near > np.where(plan.hyp_c[None, :] == 0, thr[:, None], thr_folded[:, None]))
    gate[:, 0] = False
    # a chance peak within a bin is common in a dense spectrum: the h = 1 line must also sit
    # where the hypothesis puts it before the full test
    r, c = np.nonzero(gate)
    if r.size:
        noise_bin = detect[r] / plan.detect_ratio
        gate[r, c] = _located(plan, searchable, power, r, f_all[r, c][:, None], thr[r], noise_bin)[0][:, 0]
    accepted = np.zeros(f_all.shape, dtype=bool)
    accepted[:, 0] = True
    todo = np.flatnonzero(gate.any(axis=1))
    aliased = np.zeros(nf, dtype=bool)
    if todo.size:
        aliased[todo] = aliased_frames(plan, spec[todo], power[todo], detect[todo], fp[todo])[0]
        # a harmonic of f that folds onto fp exists only where harmonics fold at all
        gate &= aliased[:, None] | (plan.hyp_c == 0)[None, :]
        todo = np.flatnonzero(gate.any(axis=1))
    if todo.size:
        spec = _Lines(searchable, power, todo, p_peak[todo], thr[todo], detect[todo] / plan.detect_ratio,
                      aliased[todo])
        acc = gate[todo]
        acc[:, 0] = True
        hyps = np.flatnonzero(acc[:, 1:].any(axis=0)) + 1
        acc[:, hyps] &= _supported(plan, spec, f_all[todo], fp[todo], hyps)
        accepted[todo] = _nested(plan, spec, f_all[todo], acc)
    if plan.near_bin is not None:
        return np.argmin(np.where(accepted, np.abs(f_all - plan.near_bin), np.inf), axis=1)
    # a fundamental below fp that explains it without folding is preferred to one that needs a
    # fold: where f0 is an exact fraction of fs both can fit the same lines
    direct = accepted & (plan.hyp_c == 0)[None, :]
    best_direct = np.argmax(np.where(direct, plan.hyp_rank[None, :], -np.inf), axis=1)
    best_any = np.argmax(np.where(accepted, plan.hyp_rank[None, :], -np.inf), axis=1)
    return np.where(direct[:, 1:].any(axis=1), best_direct, best_any)


@dataclass
class _Lines:
    """What the support tests read for some frames: the spectra (all frames; ``idx`` says which
    rows these frames are), the strongest line and thresholds (these frames only)."""

    searchable: np.ndarray
    power: np.ndarray
    idx: np.ndarray
    p_peak: np.ndarray
    thr: np.ndarray
    noise_bin: np.ndarray
    aliased: np.ndarray

    def rows(self, sel) -> "_Lines":
        return _Lines(self.searchable, self.power, self.idx[sel], self.p_peak[sel], self.thr[sel],
                      self.noise_bin[sel], self.aliased[sel])


def _nested(plan: Plan, spec: _Lines, f_all, acc):
    """Accepted hypotheses tested again against the best lower-order one of their family so far.

    A near-rational ratio of f0 to the sample rate puts the folded harmonics of the true
    fundamental on a regular grid, which a subharmonic of it can pass for; that subharmonic's
    support is then explained by folded harmonics of the true one, not of ``fp``. The two
    families (fp itself a harmonic, c = 0; a folded harmonic, c >= 1) are kept apart.
    """
    for direct in (True, False):
        _nested_family(plan, spec, f_all, acc, (plan.hyp_c == 0) == direct)
    return acc


def _nested_family(plan: Plan, spec: _Lines, f_all, acc, family):
    """:func:`_nested` within the hypotheses ``family`` (bool over columns); updates ``acc``."""
    best = np.zeros(f_all.shape[0], dtype=int)
    for m in range(2, int(plan.hyp_m.max()) + 1):
        cols = np.flatnonzero((plan.hyp_m == m) & family)
        if cols.size == 0:
            continue
        redo = np.flatnonzero(acc[:, cols].any(axis=1) & (best > 0))
        if redo.size:
            base = f_all[redo, best[redo]]
            ok = _supported(plan, spec.rows(redo), f_all[redo], base, cols)
            acc[np.ix_(redo, cols)] &= ok
        cand = acc[:, cols]
        pick = cols[np.argmax(np.where(cand, plan.hyp_rank[cols][None, :], -np.inf), axis=1)]
        best = np.where(cand.any(axis=1), pick, best)


def _peak_near(plan: Plan, p, rows, centre):
    """Largest of the three bins around each (fractional) bin ``centre`` (F, K) of ``p``."""
    pos = clamp(np.rint(centre).astype(int), 1, plan.nbins - 2)
    r = rows[:, None]
    return np.maximum(np.maximum(p[r, pos - 1], p[r, pos]), p[r, pos + 1])


def _located(plan: Plan, searchable, power, rows, centre, thr, noise_bin):
    """Lines near each (fractional) bin ``centre`` (F, L) of spectra ``rows`` (F,): (present and
    in place, location, peak power).

    Present: the largest of the three bins around ``centre`` exceeds ``thr``. In place: its
    Grandke location (on the full spectrum) lies within SELECT_LOCATION_BINS plus four of its
    standard deviations (from its SNR) of ``centre``.
    """
    r = rows[:, None]
    b = clamp(np.rint(centre).astype(int), 2, plan.nbins - 3)
    trio = np.stack([searchable[r, b - 1], searchable[r, b], searchable[r, b + 1]])
    peak_i = np.argmax(trio, axis=0) - 1
    top = np.max(trio, axis=0).astype(float)
    present = (top > thr[:, None]) & (centre >= plan.kmin - 1) & (centre <= plan.kmax + 1)
    k = clamp(b + peak_i, 1, plan.nbins - 2)
    mags = np.sqrt(np.stack([power[r, k], power[r, k - 1], power[r, k + 1]]).astype(float))
    loc = k + grandke_hann(mags[0], mags[1], mags[2])
    with np.errstate(divide="ignore"):
        sigma = GRANDKE_LOCATION_SIGMA / np.sqrt(top / noise_bin[:, None])
    present &= np.abs(loc - centre) <= SELECT_LOCATION_BINS + 4 * sigma
    return present, loc, top


def _supported(plan: Plan, spec: _Lines, f_all, base, hyps):
    """(F, len(hyps)) bool: whether the h = 1 line and at least half of h = 1..m support each hypothesis.

    ``hyps`` are hypothesis indices in ascending order; ``base`` (F,) the fundamental whose folded
    harmonics are the other explanation. A supporting line is in place (:func:`_located`) and not
    explained as a folded harmonic of ``base`` (see the module docstring).
    """
    sel = np.flatnonzero(np.isin(plan.sup_hyp, hyps))
    starts = np.flatnonzero(plan.sup_h[sel] == 1)
    pos, _ = fold(f_all[:, plan.sup_hyp[sel]] * plan.sup_h[None, sel], plan.n)  # (F, L)
    present, loc, top = _located(plan, spec.searchable, spec.power, spec.idx, pos, spec.thr, spec.noise_bin)
    d_hyp = np.abs(loc - pos)
    support = present & ~_folded_explains(plan, base, spec.aliased, spec.p_peak, loc, d_hyp, top, present)
    above = plan.sup_above[sel][None, :]
    counts = np.add.reduceat(support & ~above, starts, axis=1, dtype=np.int64) + 1  # + fp itself
    # one more line of the waveform, among h = 2..m-1 and m+1..2m, where one could be seen
    other = plan.sup_h[sel][None, :] > 1
    seen = (f_all[:, plan.sup_hyp[sel]] * plan.sup_h[None, sel] <= plan.nbins - 4) | spec.aliased[:, None]
    extra = np.add.reduceat(support & other, starts, axis=1, dtype=np.int64)
    could = np.add.reduceat(seen & other, starts, axis=1, dtype=np.int64)
    return support[:, starts] & (counts >= plan.hyp_need[None, hyps]) & ((extra > 0) | (could == 0))


def _folded_explains(plan: Plan, base, aliased, p_peak, loc, d_hyp, top, present):
    """Lines (F, L) at ``loc`` better explained as folded harmonics of ``base`` than as the hypothesis's.

    ``d_hyp`` is each line's distance from where the hypothesis puts it. Explained: harmonic k of
    ``base`` (k = 1..SELECT_FOLD_HARMONICS) folds clearly closer, or about as close (within
    SELECT_TIE_BINS) with an order k that allows the line's strength (the lowest such k counts).
    """
    out = np.zeros(loc.shape, dtype=bool)
    r, c = np.nonzero(present)
    if r.size == 0:
        return out
    q, dh, pw, pk = loc[r, c], d_hyp[r, c], top[r, c], p_peak[r]
    d_min = np.full(r.size, np.inf)
    k_low = np.full(r.size, np.inf)
    b = base[r]
    # above fs/2 only where the frame shows folded lines: a band-limited signal has none there
    top_k = np.where(aliased[r], np.inf, (plan.n / 2) / np.maximum(b, 1.0))
    for k in plan.fold_k[::-1]:  # descending, so the lowest order within the tie window stays
        d = np.where(k <= top_k, np.abs(q - fold(b * k, plan.n)[0]), np.inf)
        d_min = np.minimum(d_min, d)
        # both places are predicted from fp, whose error grows k-fold in harmonic k
        k_low = np.where(d <= dh + SELECT_TIE_BINS + k * FP_UNCERTAINTY_BINS, k, k_low)
    weak = pw <= (FOLD_AMPLITUDE_GAIN / k_low) ** 2 * pk
    out[r, c] = (d_min + SELECT_TIE_BINS < dh) | weak
    return out
