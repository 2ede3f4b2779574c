"""Is a target seen at all? A family-wise test over its calibration points.

Each point gives ``z_i = shift_i / stderr_i`` and a two-sided normal p-value ``p_i``. A target
with n points is tested n times, so a single point at "3 sigma" is no evidence on its own (with
eight points the chance that one of them reaches |z| = 3 by noise alone is 2 %). The points'
p-values are Sidak-adjusted, ``p_adj = 1 - (1 - p_i)^n`` (Z. Sidak, "Rectangular confidence
regions for the means of multivariate normal distributions", J. Am. Stat. Assoc. 62, 626-633,
1967), which keeps the family-wise false-detection rate at the level even when the points are
positively correlated, as points sharing a baseline are (Sidak's inequality holds for any
correlation of jointly normal two-sided tests). A point is significant when ``p_adj <= alpha``;
the target is seen when any point is. Default family-wise level: :data:`FAMILY_ALPHA` = 1 %.

A target that is not seen gets no curve, no range and no advice: its "fit" would be a fit to
noise.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special

#: family-wise false-detection rate of the test over one target's points
FAMILY_ALPHA = 0.01


@dataclass(frozen=True)
class Significance:
    """The family-wise test of one target's points.

    Attributes
    ----------
    seen : True when at least one point is significant at the family-wise level
    alpha : the family-wise level
    alpha_point : the per-point level it implies, ``1 - (1 - alpha)^(1/n)``
    z : per-point ``shift / stderr`` (NaN where the error is unknown)
    p_adjusted : per-point Sidak-adjusted two-sided p-values
    significant : per-point flags (``p_adjusted <= alpha``)
    p_family : smallest adjusted p-value (the test's p-value for "the target is seen")
    """

    seen: bool
    alpha: float
    alpha_point: float
    z: np.ndarray
    p_adjusted: np.ndarray
    significant: np.ndarray
    p_family: float

    @property
    def n(self) -> int:
        return int(self.z.size)

    def rule(self) -> str:
        return (f"Sidak family-wise {100 * self.alpha:g} % over {self.n} point(s): |z| >= "
                f"{-special.ndtri(self.alpha_point / 2):.2f} at a point")

    def to_dict(self) -> dict:
        return {"seen": self.seen, "alpha_family": self.alpha, "alpha_point": self.alpha_point,
                "p_family": self.p_family, "z": self.z, "p_adjusted": self.p_adjusted}


def sidak_adjust(p: np.ndarray, n: int) -> np.ndarray:
    """Sidak-adjusted p-values ``1 - (1 - p)^n``, computed without cancellation for small p."""
    p = np.clip(np.asarray(p, float), 0.0, 1.0)
    with np.errstate(divide="ignore"):
        return -np.expm1(n * np.log1p(-p))


def family_test(shift_hz, stderr_hz, alpha: float = FAMILY_ALPHA) -> Significance:
    """Family-wise (Sidak) test that a target's shifts are not all zero.

    Parameters
    ----------
    shift_hz, stderr_hz : the target's points (a point without a usable error never counts)
    alpha : family-wise level, 0 < alpha < 1

    Returns
    -------
    Significance
    """
    if not 0 < alpha < 1:
        raise ValueError(f"alpha must lie between 0 and 1, got {alpha}")
    y = np.asarray(shift_hz, float)
    e = np.asarray(stderr_hz, float)
    n = int(y.size)
    ok = np.isfinite(y) & np.isfinite(e) & (e > 0)
    z = np.full(n, math.nan)
    z[ok] = y[ok] / e[ok]
    p = np.ones(n)
    p[ok] = 2.0 * special.ndtr(-np.abs(z[ok]))  # two-sided normal tail
    padj = sidak_adjust(p, max(n, 1))
    sig = ok & (padj <= alpha)
    alpha_point = float(-np.expm1(np.log1p(-alpha) / max(n, 1)))
    return Significance(bool(sig.any()), float(alpha), alpha_point, z, padj, sig,
                        float(padj.min()) if n else 1.0)
