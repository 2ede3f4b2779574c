"""Per-step frequency shifts of a calibration run, with honest standard errors.

A calibration run alternates target-free baselines with stretches where a target sits at a
known distance. For each target stretch the shift is the stretch's mean frequency minus the
baseline *interpolated in time* from the nearest baseline stretch before and after it, so a
slow linear drift of the oscillator cancels. Frame-to-frame tracker noise is correlated
(overlapping frames, flicker), so the standard error of a mean comes from the integrated
autocorrelation time (Geyer's initial monotone sequence estimator, 1992) with small-sample
corrections, never from the naive ``std/sqrt(n)``.

Repeats of one target at one distance are combined by an inverse-variance weighted mean; when
their scatter exceeds what their errors allow (chi-squared test at the 1 % level) the combined
error is scaled by the Birge ratio ``sqrt(chi2/dof)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import special

from coilshift.logger.errors import InputError
from coilshift.logger.runfolder.markers import Marker

from coilshift.analysis.calibration.defaults import DEFAULT_SETTLE_S  # noqa: F401  (re-exported)

#: never trim more than this fraction of a stretch from each end, so short stretches keep data
MAX_TRIM_FRACTION = 0.25
#: a stretch needs at least this many usable frames to give a mean with an error
MIN_FRAMES = 8
#: significance level of the between-repeat consistency test
REPEAT_TEST_P = 0.01


@dataclass(frozen=True)
class CorrelatedMean:
    """Mean of a serially correlated series with an honest standard error.

    Attributes
    ----------
    mean : sample mean
    stderr : standard error of the mean, widened so that +-1 stderr covers about 68 %
    n : number of values averaged
    tau_int : integrated autocorrelation time in samples (1 = uncorrelated; the naive error
        ``std/sqrt(n)`` is too small by about ``sqrt(tau_int)``)
    n_eff : effective number of independent values, ``n / tau_int``
    converged : False when the autocorrelation had not died out within the series
    """

    mean: float
    stderr: float
    n: int
    tau_int: float
    n_eff: float
    converged: bool


def correlated_mean(x: np.ndarray) -> CorrelatedMean:
    """Mean and standard error of a serially correlated series (tracker frames).

    The variance of the mean is ``(gamma_0 + 2 sum_k gamma_k) / n`` with the autocovariance sum
    truncated by Geyer's initial monotone sequence estimator: pair sums
    ``G_m = gamma_2m + gamma_2m+1`` are added while positive, each clipped to the previous one.
    The autocovariance is taken about a fitted straight line, not the mean: a slow drift inside
    the stretch is not noise (the bracketing baselines remove it from the shift) and would
    otherwise inflate the error. Two small-sample corrections follow, because stretches of a
    calibration run hold only a few hundred frames: fitting the line removes part of the
    low-frequency noise, so the variance is divided by ``1 - 6 tau_int / n`` (a first-order
    correction; its factor was set so that the AR(1) coverage test in tests/analysis/test_steps.py
    holds from white noise to phi = 0.95), and the error is multiplied by the ratio of the
    Student-t to the normal 68.3 % quantile with ``n/(2 tau_int) - 1`` degrees of freedom
    (effective sample size after Bayley & Hammersley 1946), so that +-1 stderr covers 68 % even
    when the error itself is uncertain.

    Parameters
    ----------
    x : values (non-finite ones are dropped), e.g. tracked frequencies in Hz

    Returns
    -------
    CorrelatedMean

    References
    ----------
    C. J. Geyer, "Practical Markov chain Monte Carlo", Statistical Science 7, 473-483 (1992).
    G. V. Bayley and J. M. Hammersley, "The effective number of independent observations in an
    autocorrelated time series", J. R. Stat. Soc. Suppl. 8, 184-197 (1946).
    """
    x = np.asarray(x, dtype=float)
    x = x[np.isfinite(x)]
    n = int(x.size)
    if n < 3:
        return CorrelatedMean(float(x.mean()) if n else math.nan, math.nan, n, math.nan, float(n), False)
    i = np.arange(n, dtype=float)
    c = x - np.polyval(np.polyfit(i, x, 1), i)
    spec = np.fft.rfft(c, 2 * n)  # zero-padded: linear, not circular, autocovariance
    acov = np.fft.irfft(spec * np.conj(spec))[:n] / n
    if acov[0] <= 0:  # a constant series: the mean is exact to the data's resolution
        return CorrelatedMean(float(x.mean()), 0.0, n, 1.0, float(n), True)
    pairs = acov[0:2 * (n // 2):2] + acov[1:2 * (n // 2):2]
    nonpos = np.flatnonzero(pairs <= 0)
    m = int(nonpos[0]) if nonpos.size else pairs.size
    converged = bool(nonpos.size) and m < n // 4
    g = np.minimum.accumulate(pairs[:m]) if m else np.zeros(0)
    var_mean = max((2.0 * float(g.sum()) - acov[0]) / n, acov[0] / n)
    tau = var_mean * n / acov[0]
    if _LINE_LOSS * tau < 0.5 * n:
        var_mean /= 1.0 - _LINE_LOSS * tau / n
    else:  # correlation as long as the series: the mean is barely determined
        var_mean *= 2.0
        converged = False
    nu = max(n / (2.0 * tau) - 1.0, 1.0)
    widen = special.stdtrit(nu, _Q68) / special.ndtri(_Q68)
    return CorrelatedMean(float(x.mean()), float(math.sqrt(var_mean) * widen), n, float(tau),
                          float(n / tau), converged)


_Q68 = float(special.ndtr(1.0))  # one-sided quantile of +-1 sigma
_LINE_LOSS = 6.0  # variance lost to the fitted line, in units of tau_int/n (see correlated_mean)


@dataclass(frozen=True)
class Segment:
    """One marked stretch after trimming: its mean frequency and error."""

    marker: Marker
    t_mid_s: float  # mean time of the frames used
    used_start_s: float
    used_end_s: float
    stat: CorrelatedMean

    @property
    def is_baseline(self) -> bool:
        return self.marker.is_baseline


@dataclass(frozen=True)
class Step:
    """The shift of one target stretch against its bracketing baselines.

    Attributes
    ----------
    target, distance_mm : from the marker
    start_s, end_s : the stretch used (after settling time was removed)
    shift_hz : target mean minus the interpolated baseline
    stderr_hz : standard error (target and baseline errors combined)
    n : frames used in the target stretch
    baseline_hz : the interpolated baseline frequency
    bracketed : True when a baseline exists on both sides (drift removed to first order)
    unbracketed_shift_hz : target mean minus the run's first baseline (for comparison only)
    note : why a step is weak (one-sided baseline, no convergence), '' when clean
    target_stderr_hz : standard error of the target stretch's own mean
    baseline_terms : ``(index, weight, stderr_hz)`` of each baseline in the interpolation
        (index into the sorted baseline list of :func:`compute_steps`): the shift is the target
        mean minus ``sum weight x baseline mean``, so steps that share a baseline are correlated
    """

    target: str
    distance_mm: float
    start_s: float
    end_s: float
    shift_hz: float
    stderr_hz: float
    n: int
    baseline_hz: float
    bracketed: bool
    unbracketed_shift_hz: float
    note: str = ""
    target_stderr_hz: float = math.nan
    baseline_terms: tuple = ()


@dataclass(frozen=True)
class Point:
    """Repeats of one target at one distance, combined."""

    target: str
    distance_mm: float
    shift_hz: float
    stderr_hz: float
    n: int  # frames over all repeats
    repeats: int
    chi2: float = math.nan  # between-repeat chi-squared (NaN with one repeat)
    consistent: bool = True  # False when the repeats scatter more than their errors allow
    steps: tuple[Step, ...] = field(default=(), repr=False)


def segment_stats(t_s: np.ndarray, freq_hz: np.ndarray, usable: np.ndarray, marker: Marker,
                  settle_s: float = DEFAULT_SETTLE_S) -> Segment | None:
    """Mean frequency of one marked stretch with settling time removed at both ends.

    The trim is ``settle_s`` at each end but never more than a quarter of the stretch per end.
    Returns None when fewer than :data:`MIN_FRAMES` usable frames remain.
    """
    dur = marker.end_s - marker.start_s
    trim = min(max(settle_s, 0.0), MAX_TRIM_FRACTION * dur)
    lo, hi = marker.start_s + trim, marker.end_s - trim
    # t_s increases (read_log checks), so a stretch is one slice: no full-length masks per marker
    i0, i1 = int(np.searchsorted(t_s, lo, "left")), int(np.searchsorted(t_s, hi, "right"))
    ok = usable[i0:i1]
    if int(ok.sum()) < MIN_FRAMES:
        return None
    stat = correlated_mean(freq_hz[i0:i1][ok])
    return Segment(marker, float(t_s[i0:i1][ok].mean()), lo, hi, stat)


def _note(seg: Segment) -> str:
    return "" if seg.stat.converged else "noise correlated over most of the stretch: error uncertain"


def compute_steps(t_s: np.ndarray, freq_hz: np.ndarray, markers: list[Marker],
                  usable: np.ndarray | None = None, settle_s: float = DEFAULT_SETTLE_S,
                  source: str = "log") -> tuple[list[Step], list[Segment]]:
    """Shift of every target stretch against the baseline interpolated between its neighbours.

    The baseline at the target's mean time is the straight line through the nearest baseline
    stretch before and the nearest after (each at its own mean time). A linear drift therefore
    cancels exactly; with a baseline on one side only the step is kept but marked unbracketed.

    Parameters
    ----------
    t_s, freq_hz : the log (s, increasing; Hz)
    markers : stretches; ``baseline`` rows are target-free
    usable : mask of frames whose frequency can be used (all finite frames when None)
    settle_s : time dropped at each end of each stretch
    source : name for error messages

    Returns
    -------
    steps, baseline segments

    Raises
    ------
    InputError : no target stretches, no baseline stretches, or none with enough frames
    """
    t_s = np.asarray(t_s, float)
    freq_hz = np.asarray(freq_hz, float)
    ok = np.isfinite(freq_hz) if usable is None else (np.asarray(usable, bool) & np.isfinite(freq_hz))
    if not any(not m.is_baseline for m in markers):
        raise InputError(f"{source}: no target stretches in the markers (nothing to calibrate)")
    if not any(m.is_baseline for m in markers):
        raise InputError(f"{source}: no baseline stretches in the markers (shifts need a target-free reference)")
    segs = [s for s in (segment_stats(t_s, freq_hz, ok, m, settle_s) for m in markers) if s is not None]
    bases = sorted((s for s in segs if s.is_baseline), key=lambda s: s.t_mid_s)
    targets = [s for s in segs if not s.is_baseline]
    if not bases:
        raise InputError(f"{source}: no baseline stretch has {MIN_FRAMES} usable frames after settling")
    if not targets:
        raise InputError(f"{source}: no target stretch has {MIN_FRAMES} usable frames after settling")
    first = bases[0]
    index = {id(b): i for i, b in enumerate(bases)}
    steps = []
    for seg in sorted(targets, key=lambda s: s.t_mid_s):
        before = [b for b in bases if b.marker.end_s <= seg.marker.start_s + 1e-9]
        after = [b for b in bases if b.marker.start_s >= seg.marker.end_s - 1e-9]
        notes = [_note(seg)] if _note(seg) else []
        if before and after:
            b0, b1 = before[-1], after[0]
            w1 = (seg.t_mid_s - b0.t_mid_s) / (b1.t_mid_s - b0.t_mid_s)
            terms = ((index[id(b0)], 1 - w1, b0.stat.stderr), (index[id(b1)], w1, b1.stat.stderr))
            bracketed = True
            notes += [f"baseline {_note(b)}" for b in (b0, b1) if _note(b)]
        else:
            b = before[-1] if before else after[0]
            terms, bracketed = ((index[id(b)], 1.0, b.stat.stderr),), False
            notes.append("baseline on one side only: drift not removed")
        base = sum(w * bases[i].stat.mean for i, w, _ in terms)
        var_b = sum((w * e) ** 2 for _, w, e in terms)
        shift = seg.stat.mean - base
        err = math.sqrt(seg.stat.stderr ** 2 + var_b)
        steps.append(Step(seg.marker.target, seg.marker.distance_mm, seg.used_start_s, seg.used_end_s,
                          float(shift), float(err), seg.stat.n, float(base), bracketed,
                          float(seg.stat.mean - first.stat.mean), "; ".join(notes),
                          float(seg.stat.stderr), tuple((int(i), float(w), float(e)) for i, w, e in terms)))
    return steps, bases


def combine_repeats(steps: list[Step]) -> list[Point]:
    """Combine steps with the same target and distance by an inverse-variance weighted mean.

    The between-repeat chi-squared ``sum w_i (x_i - xbar)^2`` is tested against chi-squared with
    ``k - 1`` degrees of freedom; at p < 0.01 the repeats disagree and the combined error is
    multiplied by the Birge ratio ``sqrt(chi2/(k-1))`` so it covers the observed scatter
    (R. T. Birge, Phys. Rev. 40, 207 (1932)).

    Returns
    -------
    points sorted by target (first appearance) then distance
    """
    groups: dict[tuple[str, float], list[Step]] = {}
    for s in steps:
        groups.setdefault((s.target, float(s.distance_mm)), []).append(s)
    order = {}
    for s in steps:
        order.setdefault(s.target, len(order))
    out = []
    for (target, dist), group in sorted(groups.items(), key=lambda kv: (order[kv[0][0]], kv[0][1])):
        x = np.array([s.shift_hz for s in group])
        e = np.array([s.stderr_hz for s in group])
        n = sum(s.n for s in group)
        if len(group) == 1 or not np.all(np.isfinite(e) & (e > 0)):
            mean = float(x.mean())
            err = float(e[0]) if len(group) == 1 else float(x.std(ddof=1) / math.sqrt(len(x)))
            out.append(Point(target, dist, mean, err, n, len(group), steps=tuple(group)))
            continue
        w = 1.0 / e ** 2
        mean = float(np.sum(w * x) / np.sum(w))
        err = float(1.0 / math.sqrt(np.sum(w)))
        chi2 = float(np.sum(w * (x - mean) ** 2))
        dof = len(group) - 1
        consistent = bool(special.chdtrc(dof, chi2) >= REPEAT_TEST_P)
        if not consistent:
            err *= math.sqrt(chi2 / dof)
        out.append(Point(target, dist, mean, err, n, len(group), chi2, consistent, tuple(group)))
    return out
