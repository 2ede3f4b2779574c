"""The whole stability analysis of a frequency record, and its result.

The data path is: frames (t_s, freq_hz, usable mask) -> a uniform grid with NaN for gaps
(:mod:`.grid`) -> the Allan-family deviations (:mod:`.allan`), each with its number of
terms, equivalent degrees of freedom and chi-squared interval (:mod:`.allan_edf`) and the
dominant noise type per averaging time (:mod:`.noise`) -> linear drift (:mod:`.drift`),
warm-up (:mod:`.warmup`) and temperature coefficient (:mod:`.tempco`).

Everything here is pure computation; reading the log and writing outputs happen elsewhere.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

import numpy as np

from coilshift.logger.errors import InputError

from coilshift.analysis.stability import allan
from coilshift.analysis.stability.allan_edf import confidence_interval, edf_with_gaps
from coilshift.analysis.stability.drift import Drift, fit_drift
from coilshift.analysis.stability.grid import UniformSeries, to_uniform
from coilshift.analysis.stability.noise import dominant_noise_per_tau
from coilshift.analysis.stability.tempco import TempCo, temperature_coefficient
from coilshift.analysis.stability.warmup import DEFAULT_SETTLE_PPM_PER_MIN, Warmup, find_warmup

DEFAULT_CONFIDENCE = 0.6827  # one-sigma, the usual level for stability plots (SP 1065 section 5.3)


@dataclass
class StabilityResult:
    """Everything :func:`analyse_stability` found; arrays are per averaging time.

    Deviations ending in ``_hz`` are in hertz, ``_frac`` fractional (divided by the nominal
    frequency), ``tdev_s`` in seconds. ``*_lo``/``*_hi`` bound the ``confidence`` interval.
    """

    source: str
    tau0_s: float
    duration_s: float
    nominal_hz: float
    mean_hz: float
    n_frames: int
    n_used: int
    n_unusable: int
    n_missing: int
    n_segments: int
    jitter_rms: float
    detrended: bool
    confidence: float
    m: np.ndarray
    tau_s: np.ndarray
    adev_hz: np.ndarray
    oadev_hz: np.ndarray
    mdev_hz: np.ndarray
    tdev_s: np.ndarray
    n_terms: dict
    edf: dict
    ci_lo: dict
    ci_hi: dict
    alpha: np.ndarray
    noise_type: list
    noise_method: list
    drift: Drift
    warmup: Warmup
    tempco: TempCo | None = None
    frame_s: float | None = None
    series: UniformSeries | None = field(default=None, repr=False)  # the gridded input, for plots

    def within_frame(self) -> np.ndarray:
        """True where tau is shorter than the tracker's frame: overlapping frames share samples,
        so there the curve shows the tracker's own smoothing rather than the oscillator."""
        if self.frame_s is None:
            return np.zeros(self.tau_s.shape, bool)
        return self.tau_s < self.frame_s * (1 - 1e-9)

    def frac(self, name: str) -> np.ndarray:
        """A deviation in Hz as fractional frequency."""
        return getattr(self, f"{name}_hz") / self.nominal_hz

    def to_dict(self) -> dict:
        """Plain JSON-ready dictionary (lists of equal length per tau)."""
        d = {
            "source": self.source, "tau0_s": self.tau0_s, "duration_s": self.duration_s,
            "nominal_hz": self.nominal_hz, "mean_hz": self.mean_hz, "n_frames": self.n_frames,
            "n_used": self.n_used, "n_unusable": self.n_unusable, "n_missing": self.n_missing,
            "n_segments": self.n_segments, "jitter_rms_tau0": self.jitter_rms,
            "drift_removed": self.detrended, "confidence": self.confidence,
            "tau_s": self.tau_s, "m": self.m,
            "adev_hz": self.adev_hz, "oadev_hz": self.oadev_hz, "mdev_hz": self.mdev_hz,
            "tdev_s": self.tdev_s,
            "adev_frac": self.frac("adev"), "oadev_frac": self.frac("oadev"),
            "mdev_frac": self.frac("mdev"),
        }
        for k in ("adev", "oadev", "mdev", "tdev"):
            unit = "s" if k == "tdev" else "hz"
            d[f"{k}_n_terms"] = self.n_terms[k]
            d[f"{k}_edf"] = self.edf[k]
            d[f"{k}_lo_{unit}"] = self.ci_lo[k]
            d[f"{k}_hi_{unit}"] = self.ci_hi[k]
        d["tracker_frame_s"] = self.frame_s
        d["within_frame"] = self.within_frame()
        d["noise_alpha"] = self.alpha
        d["noise_type"] = self.noise_type
        d["noise_method"] = self.noise_method
        d["drift_hz_per_min"] = self.drift.rate_hz_per_min
        d["drift_u_hz_per_min"] = self.drift.u_rate_hz_per_min
        d["drift"] = asdict(self.drift)
        w = self.warmup
        d["warmup_s"] = w.warmup_s
        d["warmup"] = {"threshold_hz_per_min": w.threshold_hz_per_min, "window_s": w.window_s,
                       "settled": w.settled, "warmup_s": w.warmup_s}
        d["tempco_hz_per_degc"] = None if self.tempco is None else self.tempco.hz_per_degc
        d["tempco"] = None if self.tempco is None else asdict(self.tempco)
        return d


def analyse_stability(t_s, freq_hz, usable=None, *, nominal_hz: float | None = None,
                      remove_drift: bool = False, confidence: float = DEFAULT_CONFIDENCE,
                      settle_hz_per_min: float | None = None, window_s: float | None = None,
                      temperature: tuple[np.ndarray, np.ndarray] | None = None,
                      source: str = "log", temperature_source: str = "temperature",
                      frame_s: float | None = None) -> StabilityResult:
    """Allan, overlapping Allan, modified Allan and time deviation with intervals, drift, warm-up.

    Parameters
    ----------
    t_s, freq_hz : frame times and frequencies
    usable : boolean mask of usable frames (e.g. ``FrequencyLog.usable()``)
    nominal_hz : frequency the fractional values are relative to (default: mean frequency)
    remove_drift : compute the deviations on the residual after removing the linear drift
        (SP 1065 recommends removing drift before noise analysis when drift dominates long tau)
    confidence : two-sided confidence level of the intervals
    settle_hz_per_min : warm-up threshold (default 1 ppm of nominal per minute)
    window_s : warm-up window (default min(60 s, record/5))
    temperature : (time_s, temp_c) arrays for the temperature coefficient
    source, temperature_source : names of the log and the temperature record for error messages
    frame_s : the tracker's analysis frame length, when known (run.json), to mark the averaging
        times shorter than one frame

    Raises
    ------
    InputError : too few frames, uneven times, or no averaging time with a term
    """
    series = to_uniform(t_s, freq_hz, usable, source)
    y_hz = series.freq_hz
    fin = np.isfinite(y_hz)
    ms = allan.octave_factors(y_hz.size)
    if series.n_used < 3 or ms.size == 0:
        raise InputError(f"{source}: too few usable frames ({series.n_used}) for one averaging time")
    mean_hz = float(y_hz[fin].mean())
    nominal = float(nominal_hz) if nominal_hz is not None else mean_hz
    if not (np.isfinite(nominal) and nominal > 0):
        raise InputError(f"{source}: nominal frequency must be positive, got {nominal}")
    drift = fit_drift(series)
    if remove_drift:
        y_hz = y_hz - drift.rate_hz_per_min / 60.0 * (series.t_s - drift.t_mid_s)
    a_hz, n_a = allan.adev(y_hz, ms)
    o_hz, n_o = allan.oadev(y_hz, ms)
    md_hz, n_m = allan.mdev(y_hz, ms)
    keep = (n_a > 0) & (n_o > 0) & (n_m > 0)
    if not keep.any():
        raise InputError(f"{source}: gaps leave no stretch long enough for one averaging time")
    ms, a_hz, o_hz, md_hz = ms[keep], a_hz[keep], o_hz[keep], md_hz[keep]
    n_a, n_o, n_m = n_a[keep], n_o[keep], n_m[keep]
    tau = ms * series.tau0_s
    td_s = tau / np.sqrt(3.0) * md_hz / nominal
    alpha, names, methods = dominant_noise_per_tau(y_hz, ms, md_hz / nominal)
    segs = series.segment_lengths()
    devs = {"adev": a_hz, "oadev": o_hz, "mdev": md_hz, "tdev": td_s}
    edf, lo, hi = {}, {}, {}
    for kind, dev in devs.items():
        e = np.array([edf_with_gaps(int(al), int(m), segs, kind) for al, m in zip(alpha, ms)])
        edf[kind] = e
        lo[kind], hi[kind] = confidence_interval(dev, e, confidence)
    if settle_hz_per_min is None:
        settle_hz_per_min = DEFAULT_SETTLE_PPM_PER_MIN * 1e-6 * nominal
    warm = find_warmup(series, settle_hz_per_min, window_s)
    tempco = None
    if temperature is not None:
        tempco = temperature_coefficient(series, temperature[0], temperature[1], nominal, temperature_source)
    return StabilityResult(
        source=source, tau0_s=series.tau0_s, duration_s=series.freq_hz.size * series.tau0_s,
        nominal_hz=nominal, mean_hz=mean_hz, n_frames=series.n_frames, n_used=series.n_used,
        n_unusable=series.n_unusable, n_missing=series.n_missing, n_segments=int(segs.size),
        jitter_rms=series.jitter_rms, detrended=remove_drift, confidence=confidence, m=ms, tau_s=tau,
        adev_hz=a_hz, oadev_hz=o_hz, mdev_hz=md_hz, tdev_s=td_s,
        n_terms={"adev": n_a, "oadev": n_o, "mdev": n_m, "tdev": n_m}, edf=edf, ci_lo=lo, ci_hi=hi,
        alpha=alpha, noise_type=names, noise_method=methods, drift=drift, warmup=warm, tempco=tempco,
        frame_s=frame_s, series=series)
