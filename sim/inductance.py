"""The simulator's own inductance of a winding: the true L of its physical targets' coil.

Written apart from :mod:`coilshift.analysis.models` (no import from the analysis side, other
formulas, another discretisation), so that the analysis' inductance formulas are checked against
it rather than reused by it.

* :func:`mutual_circles_h`: two coaxial circles, in Maxwell's second form (Landen's transformation
  of the usual one; Maxwell, *A Treatise on Electricity and Magnetism*, 3rd ed. 1891, art. 701;
  Grover, *Inductance Calculations*, 1946, ch. 13)::

      M = mu0 (r1 + r2) [K(k) - E(k)],   k = (r2 - r1) / (r2 + r1),

  r1, r2 the least and greatest distances between the circles (r1^2 = (a - b)^2 + d^2,
  r2^2 = (a + b)^2 + d^2).
* :func:`winding_inductance_h`: N turns with uniform current density over a rectangular section
  (radius from r_in to r_out, axial length l): L = (N / S)^2 times the double integral of M over the
  section against itself. M has a logarithmic singularity where the two points meet, so around
  each outer point the section is cut into four triangles (one per side) and the inner integral is
  taken along rays from the point (the area element t dt cancels the singularity); Gauss-Legendre
  everywhere, with the nodes crowded where the integrand varies fastest. A current sheet
  (r_in = r_out) is the one-dimensional case
  L = (N / l)^2 2 int_0^l (l - s) M(a, a, s) ds, taken by adaptive quadrature (scipy.integrate.quad).
"""

from __future__ import annotations

import numpy as np
from scipy.integrate import quad
from scipy.special import ellipe, ellipkm1

#: vacuum permeability, H/m (CODATA 2018: 1.25663706212e-6)
MU0_H_PER_M = 1.25663706212e-6
#: Gauss-Legendre nodes: the outer point (each axis of the section), along a side, along a ray
OUTER_NODES, ANGLE_NODES, RADIAL_NODES = 20, 16, 16


def mutual_circles_h(a_m, b_m, d_m) -> np.ndarray:
    """Mutual inductance (H) of coaxial circles of radii a, b, planes d apart (Maxwell's second form).

    Arrays broadcast. ``1 - k^2 = 4 r1 r2 / (r1 + r2)^2`` is formed directly, so close circles keep
    their precision (scipy's ``ellipkm1`` takes it).
    """
    a = np.asarray(a_m, float)
    b = np.asarray(b_m, float)
    d = np.asarray(d_m, float)
    r1 = np.sqrt((a - b) ** 2 + d * d)
    r2 = np.sqrt((a + b) ** 2 + d * d)
    s = r1 + r2
    k = (r2 - r1) / s
    return MU0_H_PER_M * s * (ellipkm1(4.0 * r1 * r2 / (s * s)) - ellipe(k * k))


def _gl(lo, hi, n: int):
    """Gauss-Legendre nodes and weights mapped onto [lo, hi] (arrays broadcast)."""
    x, w = np.polynomial.legendre.leggauss(n)
    lo = np.asarray(lo, float)[..., None]
    hi = np.asarray(hi, float)[..., None]
    return 0.5 * (hi - lo) * x + 0.5 * (hi + lo), 0.5 * (hi - lo) * w


def _section_integral(r_in: float, r_out: float, length: float) -> float:
    """int_S int_S M(p, p') dp dp' over the rectangle S = [r_in, r_out] x [0, length] (m^4 H/m).

    Around each outer point p the section is cut into four triangles, one per side. A point of the
    triangle on a side at distance h is p + t (e - p), with e on the side at s from the foot of the
    perpendicular; the area element is then h t ds dt, smooth, and M's logarithm sits at t = 0.
    Each side is split at the foot, where the integrand in s peaks (on a scale h), and the nodes
    are crowded towards the foot (s = s_end v^2) and towards p (t = u^2).
    """
    r, wr = _gl(0.0, 1.0, OUTER_NODES)
    pr = (r_in + (r_out - r_in) * np.repeat(r, OUTER_NODES))[:, None, None]   # outer product rule
    pz = (length * np.tile(r, OUTER_NODES))[:, None, None]
    pw = np.outer(wr, wr).ravel() * (r_out - r_in) * length
    u, wu = _gl(0.0, 1.0, RADIAL_NODES)
    t, wt = u * u, 2.0 * u ** 3 * wu                        # int_0^1 f(t) t dt = int_0^1 f(u^2) 2 u^3 du
    v, wv = _gl(0.0, 1.0, ANGLE_NODES)
    # per side: distance h, the two ends of s, and the end point's offset (dr, dz) from h and s
    sides = ((r_out - pr, -pz, length - pz, lambda h, s: (h, s)),
             (length - pz, r_in - pr, r_out - pr, lambda h, s: (s, h)),
             (pr - r_in, -pz, length - pz, lambda h, s: (-h, s)),
             (pz, r_in - pr, r_out - pr, lambda h, s: (s, -h)))
    total = 0.0
    for h, s_lo, s_hi, offset in sides:
        for s_end in (s_lo[..., 0], s_hi[..., 0]):                      # (P, 1), signed
            s = s_end * v * v                                           # (P, S)
            ws = 2.0 * np.abs(s_end) * v * wv
            dr, dz = offset(h[..., 0], s)
            m = mutual_circles_h(pr, pr + dr[..., None] * t, dz[..., None] * t)   # (P, S, T)
            inner = np.sum(m * wt, axis=-1)
            total += float(np.sum(pw * h[:, 0, 0] * np.sum(inner * ws, axis=-1)))
    return total


def _sheet_integral(radius: float, length: float) -> float:
    """int_0^l int_0^l M(a, a, z - z') dz dz' = 2 int_0^l (l - s) M(a, a, s) ds (m^2 H/m)."""
    val, _ = quad(lambda s: (length - s) * float(mutual_circles_h(radius, radius, s)), 0.0, length,
                  limit=200, epsabs=0.0, epsrel=1e-11)
    return 2.0 * val


def winding_inductance_h(turns: float, inner_radius_m: float, outer_radius_m: float, length_m: float) -> float:
    """Self-inductance (H) of N turns with uniform current density over a rectangular section.

    Parameters
    ----------
    turns : N
    inner_radius_m, outer_radius_m : the section's radial extent (equal: a current sheet)
    length_m : its axial length (> 0)

    The rule's error is far below the 1e-4 the tests ask (its convergence is checked there by
    doubling the nodes); round-wire corrections (Rosa) are not part of a uniform current density.
    """
    if not (length_m > 0 and inner_radius_m > 0 and outer_radius_m >= inner_radius_m):
        raise ValueError("a winding needs a positive length and radius, and outer >= inner radius")
    if outer_radius_m == inner_radius_m:
        return (turns / length_m) ** 2 * _sheet_integral(inner_radius_m, length_m)
    area = (outer_radius_m - inner_radius_m) * length_m
    return (turns / area) ** 2 * _section_integral(inner_radius_m, outer_radius_m, length_m)
