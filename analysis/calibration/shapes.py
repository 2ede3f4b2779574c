"""Normalised response shapes g(d) and their inverses, vectorised over Monte Carlo draws.

A fitted curve is an amplitude times a shape: ``A g(d)``. The range step uses the shape alone,
to interpolate between the two calibration points that bracket the threshold (linear in g, so
exact whenever the points follow the shape) and to extrapolate past the farthest point. Every
shape here falls monotonically with distance in front of the coil and can be inverted; the
parameters may be arrays of draws (shape ``(n_draws, 1)``) so that one call serves every draw.

* :class:`DipoleShape`: single loop, ``(R^2/(R^2+(d+d0)^2))^3``, inverse in closed form.
* :class:`TableShape`: any tabulated monotone shape (the finite-winding law), log-interpolated,
  shifted by the offset d0.
* :class:`PowerShape`: ``d^-p``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: points of the table of a tabulated shape (log-spaced); its interpolation error is ~1e-6
TABLE_POINTS = 4000


@dataclass(frozen=True)
class DipoleShape:
    """``(R^2/(R^2+(d+d0)^2))^3`` (arrays of R and d0 broadcast against d)."""

    radius_mm: object
    offset_mm: object = 0.0

    def g(self, d) -> np.ndarray:
        z = np.asarray(d, float) + self.offset_mm
        r2 = np.asarray(self.radius_mm, float) ** 2
        return (r2 / (r2 + z * z)) ** 3

    def ginv(self, g) -> np.ndarray:
        g = np.clip(np.asarray(g, float), 1e-300, 1.0)
        return np.asarray(self.radius_mm, float) * np.sqrt(np.maximum(g ** (-1.0 / 3.0) - 1.0, 0.0)) - self.offset_mm


@dataclass(frozen=True)
class PowerShape:
    """``d^-p`` (d > 0)."""

    p: object

    def g(self, d) -> np.ndarray:
        return np.maximum(np.asarray(d, float), 1e-9) ** (-np.asarray(self.p, float))

    def ginv(self, g) -> np.ndarray:
        g = np.maximum(np.asarray(g, float), 1e-300)
        return g ** (-1.0 / np.asarray(self.p, float))


class TableShape:
    """A monotone falling shape from a function of distance, tabulated once; offset d0 applied.

    Parameters
    ----------
    fn : distance_mm (array) -> g, positive and falling for d >= 0 (held level where it rises)
    d_max_mm : table extent (distances beyond it are extrapolated along the last log-log slope)
    offset_mm : d0 (array of draws allowed)
    """

    def __init__(self, fn, d_max_mm: float, offset_mm=0.0, _table=None):
        if _table is None:
            d = np.concatenate([[0.0], np.geomspace(1e-3 * d_max_mm, d_max_mm, TABLE_POINTS - 1)])
            lg = np.log(np.maximum(np.asarray(fn(d), float), 1e-300))
            # a shape must fall with distance to be inverted; where a model rises (a target as big
            # as the coil right at its face) it is held level, and a tiny slope keeps it strict
            lg = np.minimum.accumulate(lg) - 1e-12 * np.arange(d.size)
            _table = (d, lg)
        self._d, self._lg = _table
        self.offset_mm = offset_mm

    def with_offset(self, offset_mm) -> "TableShape":
        return TableShape(None, 0.0, offset_mm, (self._d, self._lg))

    def _log_g(self, x: np.ndarray) -> np.ndarray:
        d, lg = self._d, self._lg
        out = np.interp(x, d, lg)
        far = x > d[-1]
        if np.any(far):
            slope = (lg[-1] - lg[-2]) / (np.log(d[-1]) - np.log(d[-2]))
            out = np.where(far, lg[-1] + slope * (np.log(np.maximum(x, d[-1])) - np.log(d[-1])), out)
        return out

    def g(self, d) -> np.ndarray:
        x = np.maximum(np.asarray(d, float) + self.offset_mm, 0.0)
        return np.exp(self._log_g(x))

    def ginv(self, g) -> np.ndarray:
        lg_t = np.log(np.maximum(np.asarray(g, float), 1e-300))
        d, lg = self._d, self._lg
        x = np.interp(-lg_t, -lg, d)  # -lg increases with d
        beyond = lg_t < lg[-1]
        if np.any(beyond):
            slope = (lg[-1] - lg[-2]) / (np.log(d[-1]) - np.log(d[-2]))
            x = np.where(beyond, d[-1] * np.exp((lg_t - lg[-1]) / slope), x)
        return x - self.offset_mm
