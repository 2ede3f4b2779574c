"""The whole stability analysis of a frequency record.

The data path is: frames (t_s, freq_hz, usable mask; only the baseline stretches of a log
whose markers hold targets) -> a uniform grid with NaN for gaps (:mod:`.grid`) -> the settling
fit of warm-up and drift (:mod:`.settling`), the settled start (:mod:`.warmup`) and the
settled drift (:mod:`.drift`) -> the part the deviations use (:mod:`.span`) -> the
Allan-family deviations (:mod:`.allan`) with their noise labels (:mod:`.slope_id`), equivalent
degrees of freedom and chi-squared intervals (:mod:`.allan_edf`) -> the temperature
coefficient (:mod:`.tempco`).

Everything here is pure computation; reading the log and writing outputs happen elsewhere.
"""

from __future__ import annotations

import numpy as np

from coilshift.logger.errors import InputError, setting

from coilshift.analysis.stability import allan
from coilshift.analysis.stability.allan_edf import confidence_interval, edf_with_gaps
from coilshift.analysis.stability.drift import settled_drift
from coilshift.analysis.stability.grid import UniformSeries, to_uniform
from coilshift.analysis.stability.result import StabilityResult
from coilshift.analysis.stability.settling import fit_settling
from coilshift.analysis.stability.slope_id import label_noise
from coilshift.analysis.stability.span import BaselineNote, baseline_mask, choose_span
from coilshift.analysis.stability.tempco import temperature_coefficient
from coilshift.analysis.stability.warmup import DEFAULT_SETTLE_PPM_PER_MIN, settled_start

DEFAULT_CONFIDENCE = 0.6827  # one-sigma, the usual level for stability plots (SP 1065 section 5.3)


def _deviations(part: UniformSeries, y_hz: np.ndarray, nominal: float, confidence: float, frame_s, source: str):
    """The four deviations with terms, noise labels, edf and intervals on one stretch."""
    ms = allan.octave_factors(y_hz.size)
    fam = allan.family(y_hz, ms)
    (a_hz, n_a), (o_hz, n_o), (md_hz, n_m) = fam["adev"], fam["oadev"], fam["mdev"]
    keep = (n_a > 0) & (n_o > 0) & (n_m > 0)
    if not keep.any():
        raise InputError(f"{source}: gaps leave no stretch long enough for one averaging time")
    ms, a_hz, o_hz, md_hz = ms[keep], a_hz[keep], o_hz[keep], md_hz[keep]
    tau = ms * part.tau0_s
    td_s = tau / np.sqrt(3.0) * md_hz / nominal
    segs = part.segment_lengths()
    inside = np.zeros(tau.shape, bool) if frame_s is None else tau < frame_s * (1 - 1e-9)
    labels = label_noise(tau, o_hz, ms, segs, ~inside)
    devs = {"adev": a_hz, "oadev": o_hz, "mdev": md_hz, "tdev": td_s}
    edf, lo, hi = {}, {}, {}
    for kind, dev in devs.items():
        e = np.array([edf_with_gaps(int(al), int(m), segs, kind) for al, m in zip(labels.edf_alpha, ms)])
        edf[kind] = e
        lo[kind], hi[kind] = confidence_interval(dev, e, confidence)
    n_terms = {"adev": n_a[keep], "oadev": n_o[keep], "mdev": n_m[keep], "tdev": n_m[keep]}
    return dict(m=ms, tau_s=tau, adev_hz=a_hz, oadev_hz=o_hz, mdev_hz=md_hz, tdev_s=td_s, n_terms=n_terms,
                edf=edf, ci_lo=lo, ci_hi=hi, noise=labels, n_segments=int(segs.size))


def analyse_stability(t_s, freq_hz, usable=None, *, nominal_hz: float | None = None,
                      remove_drift: bool = False, confidence: float = DEFAULT_CONFIDENCE,
                      settle_hz_per_min: float | None = None, start_s: float | None = None,
                      whole_log: bool = False, baselines=None,
                      temperature: tuple[np.ndarray, np.ndarray] | None = None,
                      source: str = "log", temperature_source: str = "temperature",
                      frame_s: float | None = None) -> StabilityResult:
    """Warm-up, settled drift, and the Allan family with noise labels and intervals.

    Parameters
    ----------
    t_s, freq_hz : frame times and frequencies
    usable : boolean mask of usable frames (e.g. ``FrequencyLog.usable()``)
    nominal_hz : frequency the fractional values are relative to (default: mean frequency)
    remove_drift : compute the deviations after removing the settled drift (SP 1065 recommends
        removing drift before noise analysis when drift dominates long tau)
    confidence : two-sided confidence level of the intervals
    settle_hz_per_min : the warm-up rate counted as settled (default 1 ppm of nominal per minute)
    start_s : start the deviations here instead of at the settled start
    whole_log : compute the deviations on the whole log
    baselines : (start_s, end_s) stretches; when given, only frames inside them are used (a
        calibration log's target-free stretches)
    temperature : (time_s, temp_c) arrays for the temperature coefficient
    source, temperature_source : names of the log and the temperature record for error messages
    frame_s : the tracker's analysis frame length, when known (run.json), to mark the averaging
        times shorter than one frame and to size the settling fit's blocks

    Raises
    ------
    InputError : too few frames, uneven times, no averaging time with a term, a start outside
        the log, or a drift to remove that is not determined
    """
    t = np.asarray(t_s, float)
    ok = np.ones(t.shape, bool) if usable is None else np.asarray(usable, bool)
    note = None
    if baselines is not None:
        inside = baseline_mask(t, baselines)
        note = BaselineNote(len(baselines), int((~inside).sum()))
        if not np.any(ok & inside):
            raise InputError(f"{source}: no usable frame lies inside the markers' baseline stretches")
        ok = ok & inside
    series = to_uniform(t, freq_hz, ok, source)
    if series.n_used < 3 or allan.octave_factors(series.freq_hz.size).size == 0:
        raise InputError(f"{source}: too few usable frames ({series.n_used}) for one averaging time")
    y_all = series.freq_hz
    mean_hz = float(np.nanmean(y_all))
    nominal = float(nominal_hz) if nominal_hz is not None else mean_hz
    if not (np.isfinite(nominal) and nominal > 0):
        raise InputError(f"{source}: nominal frequency must be positive, got {nominal}")
    fit = fit_settling(series, frame_s, confidence)
    threshold = DEFAULT_SETTLE_PPM_PER_MIN * 1e-6 * nominal if settle_hz_per_min is None else settle_hz_per_min
    warm = settled_start(fit, threshold, series.t0_s)
    drift = settled_drift(series, fit, frame_s, confidence)
    span, part = choose_span(series, warm, start_s, whole_log, source)
    y_hz = part.freq_hz
    if remove_drift:
        if not drift.determined:
            raise InputError(f"{setting('remove_drift')}: the settled drift is not determined ({drift.reason}); "
                             "there is no drift to remove")
        y_hz = y_hz - drift.rate_hz_per_min / 60.0 * (part.t_s - part.t_s.mean())
    devs = _deviations(part, y_hz, nominal, confidence, frame_s, source)
    tempco = None
    if temperature is not None:
        tempco = temperature_coefficient(part, temperature[0], temperature[1], nominal, fit.noise, frame_s,
                                         temperature_source)
    return StabilityResult(
        source=source, tau0_s=series.tau0_s, duration_s=series.freq_hz.size * series.tau0_s,
        nominal_hz=nominal, mean_hz=mean_hz, n_frames=series.n_frames, n_used=series.n_used,
        n_unusable=series.n_unusable, n_missing=series.n_missing, span_n_used=part.n_used,
        jitter_rms=series.jitter_rms, detrended=remove_drift, confidence=confidence,
        settling=fit, drift=drift, warmup=warm, span=span, baselines=note, tempco=tempco, frame_s=frame_s,
        series=series, **devs)
