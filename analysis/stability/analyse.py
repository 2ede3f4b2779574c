"""Stability of a detector's oscillator: Allan family with confidence, drift, warm-up, tempco.

The data path is: frames (t_s, freq_hz, usable mask) -> a uniform grid with NaN for gaps
(:func:`to_uniform`) -> the Allan-family deviations (:mod:`.allan`), each with its number of
terms, equivalent degrees of freedom and chi-squared interval (:mod:`.allan_edf`) and the
dominant noise type per averaging time -> linear drift, warm-up and temperature coefficient.

Gaps and timing
    Frames are counted off in steps of the median spacing. A jump of 1.5 steps or more is a
    gap: its missing steps become NaN (at least one) and the stretch after it keeps its own time
    origin. tau0 is the least-squares slope of frame time on step number pooled within the
    gap-free stretches. Each frame sits on its step; frame times may jitter by up to a quarter of tau0 (their RMS offset
    is reported) but a log whose times stray further, or put two frames on one step, is
    refused rather than silently resampled. Grid steps without a frame, and frames flagged
    unusable (no tone, out of band, gap), are NaN. The estimators keep only terms whose
    samples are all present, so nothing is bridged across a gap.

Everything here is pure computation; reading the log and writing outputs is the CLI's job.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

import numpy as np

from coilshift.logger.errors import InputError

from coilshift.analysis.stability import allan
from coilshift.analysis.stability.allan_edf import (NOISE_NAMES, alpha_from_mdev_slope, confidence_interval, edf_with_gaps,
                        noise_id_acf, round_alpha)

DEFAULT_CONFIDENCE = 0.6827  # one-sigma, the usual level for stability plots (SP 1065 section 5.3)
MAX_JITTER = 0.25  # frame-time offset from the grid tolerated, as a fraction of tau0
DEFAULT_SETTLE_PPM_PER_MIN = 1.0  # warm-up threshold: 1 ppm of the nominal frequency per minute
MAX_GRID = 200_000_000  # refuse grids that would not fit in memory


# ---- uniform grid -------------------------------------------------------------------------------

@dataclass
class UniformSeries:
    """Frequency samples on a uniform time grid, NaN where no usable frame fell.

    Attributes
    ----------
    t0_s : time of the first grid step
    tau0_s : grid spacing (least-squares fit of frame time on step number)
    freq_hz : frequency per grid step (NaN = gap)
    n_frames : frames in the input
    n_unusable : frames dropped as unusable (flagged or empty frequency)
    n_missing : grid steps no frame fell on (time gaps)
    jitter_rms : RMS offset of frame times from their grid steps, in units of tau0
    """

    t0_s: float
    tau0_s: float
    freq_hz: np.ndarray
    n_frames: int
    n_unusable: int
    n_missing: int
    jitter_rms: float

    @property
    def t_s(self) -> np.ndarray:
        return self.t0_s + self.tau0_s * np.arange(self.freq_hz.size)

    @property
    def n_used(self) -> int:
        return int(np.isfinite(self.freq_hz).sum())

    def segment_lengths(self) -> np.ndarray:
        """Lengths of the contiguous gap-free stretches, in samples."""
        ok = np.isfinite(self.freq_hz).astype(np.int8)
        edges = np.diff(np.concatenate(([0], ok, [0])))
        return np.flatnonzero(edges == -1) - np.flatnonzero(edges == 1)


def to_uniform(t_s, freq_hz, usable=None, source: str = "log") -> UniformSeries:
    """Place frames on a uniform grid (spacing fitted to the frame times); gaps become NaN.

    Parameters
    ----------
    t_s : frame times, increasing, seconds
    freq_hz : frame frequencies (NaN allowed)
    usable : optional boolean mask of usable frames (others become gaps)
    source : name used in error messages

    Raises
    ------
    InputError : fewer than two frames, or frame times too uneven for a uniform grid
    """
    t = np.asarray(t_s, float)
    f = np.asarray(freq_hz, float)
    if t.shape != f.shape or t.ndim != 1:
        raise InputError(f"{source}: t_s and freq_hz differ in length")
    if t.size < 2:
        raise InputError(f"{source}: needs at least two frames for a stability analysis")
    dt = np.diff(t)
    if not np.all(np.isfinite(t)) or np.any(dt <= 0):
        raise InputError(f"{source}: frame times must be finite and increasing")
    # count grid steps frame to frame with the median spacing (robust to local jitter)
    step = np.rint(dt / float(np.median(dt))).astype(np.int64)
    if np.any(step < 1):
        i = int(np.argmax(step < 1))
        raise InputError(f"{source}: frame times too uneven for a uniform grid (frames at {t[i]:.6g} and "
                         f"{t[i + 1]:.6g} s are closer than half the median spacing); resample the log first")
    # a jump of 1.5 steps or more is a gap; dropped input rarely loses a whole number of frames,
    # so each gap-free stretch keeps its own time origin, and tau0 is the least-squares slope of
    # time on step number pooled within the stretches (a spacing a little off the median then
    # cannot accumulate into whole-step errors over a long record)
    seg = np.concatenate(([0], np.cumsum(step >= 2)))
    k_in = np.arange(t.size) - np.searchsorted(seg, seg, side="left")  # step number within its stretch
    cnt = np.bincount(seg).astype(float)
    kc = k_in - (np.bincount(seg, k_in) / cnt)[seg]
    del k_in  # long logs: free each frame-sized array once it is used (10 M frames = 80 MB each)
    tc = t - (np.bincount(seg, t) / cnt)[seg]
    den = float(np.sum(kc * kc))
    tau0 = float(np.sum(kc * tc) / den) if den > 0 else float(np.median(dt))
    off = tc / tau0
    del tc
    off -= kc
    del kc
    worst = float(np.max(np.abs(off)))
    if worst > MAX_JITTER:
        i = int(np.argmax(np.abs(off)))
        raise InputError(f"{source}: frame times too uneven for a uniform grid (frame at {t[i]:.6g} s is "
                         f"{off[i]:+.2f} steps of {tau0:.6g} s off); resample the log to even spacing first")
    jitter_rms = float(np.sqrt(np.mean(off ** 2)))
    del off
    # whole steps across each gap with the refined tau0, at least one empty step so no term bridges it
    gap = step >= 2
    step = np.ones(dt.size, np.int64)
    step[gap] = np.maximum(np.rint(dt[gap] / tau0).astype(np.int64), 2)
    del dt
    k = np.concatenate(([0], np.cumsum(step)))
    first = seg == 0
    t_origin = float(np.mean(t[first] - tau0 * k[first]))
    n = int(k[-1]) + 1
    if n > MAX_GRID:
        raise InputError(f"{source}: {n} grid steps of {tau0:.6g} s is too many to analyse")
    ok = np.isfinite(f)
    if usable is not None:
        ok &= np.asarray(usable, bool)
    grid = np.full(n, np.nan)
    grid[k[ok]] = f[ok]
    return UniformSeries(t0_s=t_origin, tau0_s=tau0, freq_hz=grid, n_frames=int(t.size),
                         n_unusable=int((~ok).sum()), n_missing=int(n - t.size),
                         jitter_rms=jitter_rms)


# ---- drift --------------------------------------------------------------------------------------

def _lag1(resid: np.ndarray) -> float:
    """Lag-1 autocorrelation of grid residuals, skipping pairs that touch a gap."""
    fin = np.isfinite(resid)
    if fin.sum() < 3:
        return 0.0
    r = resid - np.nanmean(resid)
    pair = fin[1:] & fin[:-1]
    den = np.sum(r[fin] ** 2)
    return float(np.sum((r[1:] * r[:-1])[pair]) / den) if den > 0 else 0.0


@dataclass
class LineFit:
    """Least-squares line y = intercept + slope (x - x_ref), with serial-correlation-aware error.

    Attributes
    ----------
    slope, u_slope : slope and its standard uncertainty allowing for lag-1 correlated residuals
    u_slope_white : the ordinary least-squares standard error (assumes independent residuals)
    intercept : fitted value at ``x_ref``
    x_ref : mean of x over the points used
    residual_rms : RMS of the residuals
    lag1 : lag-1 autocorrelation of the residuals (on the time grid)
    n, n_eff : points used, effective independent points n (1 - r1) / (1 + r1)
    """

    slope: float
    u_slope: float
    u_slope_white: float
    intercept: float
    x_ref: float
    residual_rms: float
    lag1: float
    n: int
    n_eff: float


def fit_line_ar1(x, y) -> LineFit:
    """Ordinary least squares with the slope's uncertainty inflated for AR(1) residuals.

    The residuals of a frequency record are rarely independent (flicker and random-walk FM,
    slow thermal wander), so the textbook standard error is too small. Following Santer et al.
    (J. Geophys. Res. 105(D6), 2000) the effective sample size n_eff = n (1 - r1)/(1 + r1)
    from the residuals' lag-1 autocorrelation r1 replaces n in the residual variance,
    s^2 = sum e^2 / (n_eff - 2). A negative r1 is taken as 0 so correlation never shrinks the
    error. This models the residual as first-order autoregressive; for strongly non-stationary
    noise (random-walk FM over the whole record) even this understates the uncertainty.

    Parameters
    ----------
    x, y : points in time order on a uniform grid, NaN at gaps (pairs across a gap are
        skipped when r1 is estimated; gaps are otherwise ignored)
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    fin = np.isfinite(x) & np.isfinite(y)
    n = int(fin.sum())
    if n < 3:
        raise InputError("fit: fewer than three usable points")
    xf, yf = x[fin], y[fin]
    x_ref = float(xf.mean())
    dx = xf - x_ref
    sxx = float(np.sum(dx * dx))
    if sxx <= 0:
        raise InputError("fit: the independent variable does not vary")
    slope = float(np.sum(dx * (yf - yf.mean())) / sxx)
    intercept = float(yf.mean())
    resid_all = y - (intercept + slope * (x - x_ref))
    resid = resid_all[fin]
    r1 = _lag1(resid_all)
    r1 = max(r1, 0.0)
    n_eff = n * (1 - r1) / (1 + r1) if r1 < 1 else 0.0
    ss = float(np.sum(resid ** 2))
    u_white = math.sqrt(ss / (n - 2) / sxx) if n > 2 else math.inf
    u = math.sqrt(ss / (n_eff - 2) / sxx) if n_eff > 2 else math.inf
    return LineFit(slope=slope, u_slope=u, u_slope_white=u_white, intercept=intercept, x_ref=x_ref,
                   residual_rms=math.sqrt(ss / n), lag1=r1, n=n, n_eff=n_eff)


@dataclass
class Drift:
    """Linear frequency drift over the whole record (SP 1065, drift analysis: linear fit to frequency)."""

    rate_hz_per_min: float
    u_rate_hz_per_min: float
    u_rate_white_hz_per_min: float
    freq_at_mid_hz: float
    t_mid_s: float
    residual_rms_hz: float
    residual_lag1: float
    n_eff: float


def fit_drift(series: UniformSeries) -> Drift:
    """Least-squares line through the usable samples, uncertainty as :func:`fit_line_ar1`."""
    t = series.t_s
    fit = fit_line_ar1(t, series.freq_hz)
    return Drift(rate_hz_per_min=fit.slope * 60.0, u_rate_hz_per_min=fit.u_slope * 60.0,
                 u_rate_white_hz_per_min=fit.u_slope_white * 60.0, freq_at_mid_hz=fit.intercept,
                 t_mid_s=fit.x_ref, residual_rms_hz=fit.residual_rms, residual_lag1=fit.lag1,
                 n_eff=fit.n_eff)


# ---- warm-up ------------------------------------------------------------------------------------

@dataclass
class Warmup:
    """When the drift rate settles.

    Attributes
    ----------
    threshold_hz_per_min : |drift rate| counted as settled
    window_s : length of the sliding windows the local rate is fitted over
    settled : True when the rate stays settled from some window to the end of the log
    warmup_s : time from the start of the log to the centre of the first window from which
        every later window is settled (0 when settled from the start; None when never)
    t_centre_s, rate_hz_per_min, u_rate_hz_per_min : local rate per window and its standard
        uncertainty (for the plot)
    """

    threshold_hz_per_min: float
    window_s: float
    settled: bool
    warmup_s: float | None
    t_centre_s: np.ndarray = field(repr=False)
    rate_hz_per_min: np.ndarray = field(repr=False)
    u_rate_hz_per_min: np.ndarray = field(repr=False)


#: a window counts as unsettled only when its rate exceeds the threshold by this many standard
#: uncertainties, so noise wander is not mistaken for warm-up drift
WARMUP_COVERAGE = 2.0


def find_warmup(series: UniformSeries, threshold_hz_per_min: float, window_s: float | None = None) -> Warmup:
    """Warm-up time: where the local drift rate falls below a threshold and stays there.

    The local rate is the least-squares slope over sliding windows (default: 60 s or a fifth
    of the record, whichever is shorter, but at least 10 samples), stepped by a quarter of a
    window; windows with fewer than half their samples usable are skipped. A window is
    unsettled when |rate| - 2 u(rate) > threshold, with u(rate) the AR(1)-aware uncertainty of
    :func:`fit_line_ar1`: a rate indistinguishable from the threshold within the window's own
    noise is not held against the oscillator. The slope of a window estimates the rate at its
    centre, hence the reported time is a window centre.
    """
    tau0 = series.tau0_s
    duration = series.freq_hz.size * tau0
    if window_s is None:
        window_s = min(60.0, duration / 5.0)
    if not window_s > 0:
        raise InputError(f"warm-up window must be positive, got {window_s}")
    w = max(int(round(window_s / tau0)), 10)
    t = series.t_s
    f = series.freq_hz
    step = max(w // 4, 1)
    starts = np.arange(0, max(f.size - w, 0) + 1, step)
    centres, rates, urates = [], [], []
    for s in starts:
        ff = f[s:s + w]
        if np.isfinite(ff).sum() < max(w // 2, 3):
            continue
        fit = fit_line_ar1(t[s:s + w], ff)
        rates.append(fit.slope * 60.0)
        urates.append(fit.u_slope * 60.0)
        centres.append(t[s] + (min(w, f.size - s) - 1) * tau0 / 2)
    centres_a = np.asarray(centres, float)
    rates_a = np.asarray(rates, float)
    u_a = np.asarray(urates, float)
    settled_mask = np.abs(rates_a) - WARMUP_COVERAGE * u_a <= threshold_hz_per_min
    if rates_a.size == 0 or not settled_mask[-1]:
        return Warmup(threshold_hz_per_min, w * tau0, False, None, centres_a, rates_a, u_a)
    unsettled = np.flatnonzero(~settled_mask)
    first = 0 if unsettled.size == 0 else int(unsettled[-1]) + 1
    warm = 0.0 if first == 0 else float(centres_a[first] - series.t0_s)
    return Warmup(threshold_hz_per_min, w * tau0, True, warm, centres_a, rates_a, u_a)


# ---- temperature --------------------------------------------------------------------------------

@dataclass
class TempCo:
    """Temperature coefficient from regressing frequency on temperature."""

    hz_per_degc: float
    u_hz_per_degc: float
    ppm_per_degc: float
    temp_min_c: float
    temp_max_c: float
    n_frames: int
    r_squared: float


def temperature_coefficient(series: UniformSeries, time_s, temp_c, nominal_hz: float,
                            source: str = "temperature") -> TempCo:
    """Frequency vs temperature slope, Hz/degC, by least squares.

    Temperature is interpolated linearly onto the grid times; frames outside the temperature
    record are left out (no extrapolation). The uncertainty allows for AR(1) residuals as in
    :func:`fit_line_ar1`. Time-linear drift that is not thermal is not separated: if the
    temperature also trends, the coefficient absorbs it (compare with the drift figure).
    """
    ts = np.asarray(time_s, float)
    tc = np.asarray(temp_c, float)
    t = series.t_s
    inside = (t >= ts[0]) & (t <= ts[-1])
    temp = np.where(inside, np.interp(t, ts, tc), np.nan)
    f = np.where(np.isfinite(temp), series.freq_hz, np.nan)
    ok = np.isfinite(f)
    if ok.sum() < 3:
        raise InputError(f"{source}: fewer than three frames fall inside the temperature record")
    if np.ptp(temp[ok]) <= 0:
        raise InputError(f"{source}: the temperature does not change over the log; no coefficient")
    fit = fit_line_ar1(temp, f)
    y = f - (fit.intercept + fit.slope * (temp - fit.x_ref))
    ss_tot = float(np.sum((f[ok] - f[ok].mean()) ** 2))
    r2 = 1.0 - float(np.nansum(y ** 2)) / ss_tot if ss_tot > 0 else float("nan")
    return TempCo(hz_per_degc=fit.slope, u_hz_per_degc=fit.u_slope,
                  ppm_per_degc=fit.slope / nominal_hz * 1e6, temp_min_c=float(np.min(temp[ok])),
                  temp_max_c=float(np.max(temp[ok])), n_frames=int(ok.sum()), r_squared=r2)


def read_temperature_csv(path) -> tuple[np.ndarray, np.ndarray]:
    """Read a ``time_s,temp_c`` CSV (header row; times on the log's clock, increasing)."""
    import pandas as pd

    try:
        df = pd.read_csv(path, skipinitialspace=True)
    except (OSError, ValueError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot read as CSV ({str(exc).splitlines()[0]})") from None
    cols = [c.strip() for c in df.columns]
    df.columns = cols
    if "time_s" not in cols or "temp_c" not in cols:
        raise InputError(f"{path}: needs time_s and temp_c columns")
    try:
        ts = df["time_s"].to_numpy(float)
        tc = df["temp_c"].to_numpy(float)
    except ValueError:
        raise InputError(f"{path}: non-numeric time_s or temp_c") from None
    ok = np.isfinite(ts) & np.isfinite(tc)
    ts, tc = ts[ok], tc[ok]
    if ts.size < 2:
        raise InputError(f"{path}: fewer than two temperature readings")
    if np.any(np.diff(ts) <= 0):
        raise InputError(f"{path}: time_s does not increase")
    return ts, tc


# ---- the whole analysis -------------------------------------------------------------------------

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


def _noise_per_tau(y: np.ndarray, ms: np.ndarray, mdev_frac: np.ndarray):
    """Dominant noise per tau: lag-1 ACF where >= 30 averaged points remain, else MDEV slope."""
    logt = np.log(ms.astype(float))
    with np.errstate(divide="ignore", invalid="ignore"):
        logd = np.log(mdev_frac)
    alphas, names, methods = [], [], []
    for i, m in enumerate(ms):
        got = noise_id_acf(y, int(m))
        if got is not None:
            a, method = got[0], "lag-1 autocorrelation"
        else:
            lo, hi = max(i - 1, 0), min(i + 1, ms.size - 1)
            if hi > lo and np.isfinite(logd[lo]) and np.isfinite(logd[hi]) and logd[lo] > -np.inf:
                a = alpha_from_mdev_slope((logd[hi] - logd[lo]) / (logt[hi] - logt[lo]))
                method = "MDEV slope"
            else:
                a, method = 0.0, "assumed white FM"
        ai = round_alpha(a)
        alphas.append(ai)
        # a slope steeper than random-walk FM is the signature of drift (ADEV ~ tau^+1)
        names.append("drift or random-walk FM" if a < -2.5 else NOISE_NAMES[ai])
        methods.append(method)
    return np.asarray(alphas, dtype=np.int64), names, methods


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
    alpha, names, methods = _noise_per_tau(y_hz, ms, md_hz / nominal)
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


# ---- the noise figure for detection thresholds --------------------------------------------------

def noise_at_tau_hz(t_s, freq_hz, tau_s: float) -> float:
    """Overlapping Allan deviation in Hz at averaging time ``tau_s``.

    Why this is the right noise figure for a step-mean difference: a calibration step compares
    the mean frequency over a dwell of length tau with the mean over an adjacent baseline
    dwell of the same length. By definition the Allan variance is half the expected squared
    difference of adjacent tau-averages, sigma_y^2(tau) = <(ybar_{k+1} - ybar_k)^2> / 2, so the
    standard deviation of such a difference is sqrt(2) sigma(tau) in Hz, with every noise type
    and the drift between the two dwells included. The plain standard deviation of the frames
    does not do this: it ignores averaging and diverges for flicker and random-walk FM. For
    dwells of unequal length or not adjacent, this figure is only a guide.

    Parameters
    ----------
    t_s, freq_hz : frame times (s) and frequencies (Hz); NaN frequencies are gaps
    tau_s : averaging time (dwell), seconds; at least the frame spacing

    Returns
    -------
    float : overlapping Allan deviation in Hz, computed at the nearest whole multiple m of the
        frame spacing when tau_s is one, else interpolated linearly in log tau / log sigma
        between the two neighbouring multiples.

    Raises
    ------
    InputError : tau_s shorter than the frame spacing or longer than half the usable record
    """
    series = to_uniform(t_s, freq_hz, None, "noise_at_tau_hz")
    y = series.freq_hz
    m_f = float(tau_s) / series.tau0_s
    if not np.isfinite(m_f) or m_f < 1 - 1e-9:
        raise InputError(f"noise_at_tau_hz: tau {tau_s} s is shorter than the frame spacing {series.tau0_s:.6g} s")
    m_lo = max(int(math.floor(m_f + 1e-9)), 1)
    exact = abs(m_f - round(m_f)) <= 1e-9 * max(m_f, 1.0)
    ms = np.array([int(round(m_f))]) if exact else np.array([m_lo, m_lo + 1])
    dev, n = allan.oadev(y, ms)
    if np.any(n == 0) or not np.all(np.isfinite(dev)):
        raise InputError(f"noise_at_tau_hz: no stretch of the log long enough for tau {tau_s} s "
                         f"(needs 2 tau of gap-free frames)")
    if exact:
        return float(dev[0])
    w = (math.log(m_f) - math.log(ms[0])) / (math.log(ms[1]) - math.log(ms[0]))
    return float(math.exp((1 - w) * math.log(dev[0]) + w * math.log(dev[1])))
