"""Noise type per averaging time, from the local slope of the overlapping Allan deviation.

One method, stated: the label at tau is the power-law type whose slope band holds the whole
95 % interval of the local log-log slope of the overlapping Allan deviation there; where the
interval crosses a band edge, or the slope lies outside every band, there is no label. The
label therefore always agrees with the slope of the plotted curve.

Slopes of sigma_y(tau) per noise type (NIST SP 1065, section 5.2, Table 11, and the drift
figure of section 5.3: a linear frequency drift D gives sigma_y = D tau / sqrt(2)):
white or flicker PM -1 (the overlapping Allan deviation cannot tell these two apart), white FM
-1/2, flicker FM 0, random-walk FM +1/2, drift +1. A band reaches halfway to its neighbours.

The local slope at tau_i is the secant between the neighbouring averaging times (one-sided at
the ends of the range and next to the averaging times inside one tracker frame, which are
never labelled). With var(ln sigma_hat) = 1 / (2 edf) (from the chi-squared distribution of
edf sigma_hat^2 / sigma^2, SP 1065 section 5.3) the slope's standard error is
sqrt(1/(2 edf_a) + 1/(2 edf_b)) / ln(tau_b / tau_a), treating the two deviations as
independent; estimates at nearby taus from the same data are positively correlated, so this
is conservative (wider), which only withholds labels. The edf (Greenhall & Riley 2003, with
gaps) depends on the noise type, so each band is judged with the edf of its own type (the
smaller of its types').
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from coilshift.analysis.stability.allan_edf import edf_with_gaps

#: (label, lowest slope, highest slope, power-law exponents alpha of S_y(f) judged with)
BANDS = (
    ("white or flicker PM", -1.25, -0.75, (2, 1)),
    ("white FM", -0.75, -0.25, (0,)),
    ("flicker FM", -0.25, 0.25, (-1,)),
    ("random-walk FM", 0.25, 0.75, (-2,)),
    ("drift", 0.75, 1.25, (-2,)),
)
LABEL_CONFIDENCE = 0.95
ALL_ALPHAS = (2, 1, 0, -1, -2)
METHOD = ("local slope of the overlapping Allan deviation; a type is named only where the slope's 95% "
          "interval lies inside that type's band (NIST SP 1065 Table 11)")


@dataclass
class NoiseLabels:
    """Per averaging time: the local slope with its interval, and the label (None where the
    evidence is ambiguous). ``edf_alpha`` is the noise exponent whose edf the deviations'
    intervals use: the label's type, or where there is no label the type giving the fewest
    degrees of freedom (the widest interval)."""

    slope: np.ndarray
    slope_lo: np.ndarray
    slope_hi: np.ndarray
    label: list
    alpha: list
    edf_alpha: np.ndarray
    method: str = METHOD


def label_noise(tau_s, oadev_hz, m, segment_lengths, eligible) -> NoiseLabels:
    """Label each averaging time by the local slope of the overlapping Allan deviation.

    Parameters
    ----------
    tau_s, oadev_hz, m : averaging times, the deviation, the averaging factors
    segment_lengths : gap-free stretches of the record (for the edf)
    eligible : taus that may carry a label and serve as neighbours (False inside a tracker frame)
    """
    from scipy.special import ndtri

    tau, dev = np.asarray(tau_s, float), np.asarray(oadev_hz, float)
    n = tau.size
    segs = np.asarray(segment_lengths)
    edf = {a: np.array([edf_with_gaps(a, int(mm), segs, "oadev") for mm in m]) for a in ALL_ALPHAS}
    worst_edf = np.nanmin(np.vstack([edf[a] for a in ALL_ALPHAS]), axis=0)
    worst_alpha = np.array([ALL_ALPHAS[int(np.nanargmin([edf[a][i] for a in ALL_ALPHAS]))]
                            if np.any(np.isfinite([edf[a][i] for a in ALL_ALPHAS])) else 0 for i in range(n)])
    ok = np.asarray(eligible, bool) & np.isfinite(dev) & (dev > 0)
    idx = np.flatnonzero(ok)
    z = float(ndtri(0.5 + LABEL_CONFIDENCE / 2))
    slope, lo, hi = (np.full(n, np.nan) for _ in range(3))
    labels: list = [None] * n
    alphas: list = [None] * n
    edf_alpha = worst_alpha.copy()
    for p, i in enumerate(idx):
        a = idx[p - 1] if p > 0 else i
        b = idx[p + 1] if p + 1 < idx.size else i
        if a == b:
            continue
        dlog = np.log(tau[b] / tau[a])
        slope[i] = np.log(dev[b] / dev[a]) / dlog

        def half_width(e_a, e_b):
            return z * np.sqrt(1 / (2 * e_a) + 1 / (2 * e_b)) / dlog

        w = half_width(worst_edf[a], worst_edf[b])
        lo[i], hi[i] = slope[i] - w, slope[i] + w
        for name, b_lo, b_hi, band_alphas in BANDS:
            e_a = min(edf[al][a] for al in band_alphas)
            e_b = min(edf[al][b] for al in band_alphas)
            w = half_width(e_a, e_b)
            if np.isfinite(w) and b_lo <= slope[i] - w and slope[i] + w <= b_hi:
                labels[i] = name
                # the PM band spans two exponents and drift is not a power-law noise: no single alpha
                alphas[i] = band_alphas[0] if len(band_alphas) == 1 and name != "drift" else None
                edf_alpha[i] = min(band_alphas, key=lambda al: edf[al][i] if np.isfinite(edf[al][i]) else np.inf)
                lo[i], hi[i] = slope[i] - w, slope[i] + w
                break
    return NoiseLabels(slope, lo, hi, labels, alphas, edf_alpha)
