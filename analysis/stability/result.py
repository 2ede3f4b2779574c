"""What a stability analysis found (:class:`StabilityResult`) and its JSON form."""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

import numpy as np

from coilshift.analysis.stability.drift import Drift
from coilshift.analysis.stability.grid import UniformSeries
from coilshift.analysis.stability.settling import SettlingFit
from coilshift.analysis.stability.slope_id import NoiseLabels
from coilshift.analysis.stability.span import BaselineNote, Span
from coilshift.analysis.stability.tempco import TempCo
from coilshift.analysis.stability.warmup import Warmup


@dataclass
class StabilityResult:
    """Everything :func:`~.analyse.analyse_stability` found; arrays are per averaging time.

    Deviations ending in ``_hz`` are in hertz, ``_frac`` fractional (divided by the nominal
    frequency), ``tdev_s`` in seconds. ``*_lo``/``*_hi`` bound the ``confidence`` interval.
    The deviations, their noise labels and the temperature coefficient are computed on
    ``span`` (the settled part by default); the settling fit, warm-up and drift on the whole
    log (its baseline stretches only, when ``baselines`` is set). Counts of frames are of the
    whole log; ``n_segments`` and ``span_n_used`` of the span.
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
    span_n_used: int
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
    noise: NoiseLabels
    settling: SettlingFit
    drift: Drift
    warmup: Warmup
    span: Span
    baselines: BaselineNote | None = None
    tempco: TempCo | None = None
    frame_s: float | None = None
    series: UniformSeries | None = field(default=None, repr=False)  # the whole gridded log, for plots

    @property
    def noise_type(self) -> list:
        """The noise label per tau (None where the evidence is ambiguous)."""
        return self.noise.label

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
            "n_segments": self.n_segments, "span_n_used": self.span_n_used, "jitter_rms_tau0": self.jitter_rms,
            "drift_removed": self.detrended, "confidence": self.confidence,
            "span": asdict(self.span),
            "baselines_only": None if self.baselines is None else asdict(self.baselines),
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
        nl = self.noise
        d.update(noise_slope=nl.slope, noise_slope_lo=nl.slope_lo, noise_slope_hi=nl.slope_hi,
                 noise_alpha=nl.alpha, noise_type=nl.label, noise_edf_alpha=nl.edf_alpha, noise_method=nl.method)
        dr = self.drift
        d["drift_hz_per_min"] = dr.rate_hz_per_min if dr.determined else None
        d["drift_u_hz_per_min"] = dr.u_rate_hz_per_min if dr.determined else None
        d["drift"] = asdict(dr)
        d["warmup_s"] = self.warmup.warmup_s
        d["warmup"] = asdict(self.warmup)
        d["settling"] = self.settling.to_dict()
        d["tempco_hz_per_degc"] = None if self.tempco is None else self.tempco.hz_per_degc
        d["tempco"] = None if self.tempco is None else asdict(self.tempco)
        return d
