"""Inductance formulas for air-cored coils: Wheeler, the current sheet, thin rings, filament sums.

All functions take SI or the units in their names and return henries unless named otherwise.

References
----------
- H. A. Wheeler, "Simple inductance formulas for radio coils", Proc. IRE 16 (1928) 1398-1400.
- L. Lorenz (1879) and H. Nagaoka, "The inductance coefficients of solenoids", J. Coll. Sci.
  Tokyo 27 (1909): inductance of a uniform cylindrical current sheet.
- F. W. Grover, Inductance Calculations (1946; Dover reprint), Table 36 (Nagaoka's coefficient),
  and the geometric-mean-distance method (Maxwell) for rings of finite section.
- E. B. Rosa and F. W. Grover, "Formulas and tables for the calculation of mutual and
  self-inductance", Bull. Bureau of Standards 8 (1912): GMD of a rectangle from itself is about
  0.2235 (b + c); mutual inductance of coaxial circles (Maxwell) with elliptic integrals.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import ellipe, ellipkm1

MU0_H_PER_M = 1.25663706212e-6  # CODATA 2018


def wheeler_single_layer_uh(turns, mean_radius_in, length_in):
    """Wheeler (1928) single-layer solenoid: L = N^2 r^2 / (9 r + 10 l) microhenries, inches.

    About 1 % for l > 0.8 r (Wheeler's stated range).
    """
    return turns ** 2 * mean_radius_in ** 2 / (9.0 * mean_radius_in + 10.0 * length_in)


def wheeler_multilayer_uh(turns, mean_radius_in, length_in, depth_in):
    """Wheeler (1928) multilayer coil: L = 0.8 N^2 r^2 / (6 r + 9 l + 10 c) microhenries, inches.

    About 1 % when the three terms of the denominator are about equal.
    """
    return 0.8 * turns ** 2 * mean_radius_in ** 2 / (6.0 * mean_radius_in + 9.0 * length_in + 10.0 * depth_in)


def wheeler_flat_spiral_uh(turns, mean_radius_in, depth_in):
    """Wheeler (1928) flat spiral: L = N^2 r^2 / (8 r + 11 c) microhenries, inches; about 1 % for c > 0.2 r."""
    return turns ** 2 * mean_radius_in ** 2 / (8.0 * mean_radius_in + 11.0 * depth_in)


def nagaoka_coefficient(length_over_diameter):
    """Nagaoka's coefficient K of a cylindrical current sheet (Lorenz's formula).

    K = 4 / (3 pi k') [ (k'^2 / k^2) (K(k) - E(k)) + E(k) - k ],  k^2 = D^2 / (D^2 + l^2),
    k' = sqrt(1 - k^2); scipy's ``ellipk``/``ellipe`` take the parameter m = k^2.
    Tabulated in Grover, Inductance Calculations, Table 36. Tends to 1 for a long solenoid.
    """
    x = np.asarray(length_over_diameter, dtype=float)
    m = 1.0 / (1.0 + x * x)          # k^2 = D^2 / (D^2 + l^2)
    k = np.sqrt(m)
    kp2 = x * x / (1.0 + x * x)      # k'^2 computed directly, no 1 - m cancellation for short coils
    kp = np.sqrt(kp2)
    big_k = ellipkm1(kp2)            # K(m) from 1 - m: accurate as m -> 1
    big_e = ellipe(m)
    out = 4.0 / (3.0 * np.pi * kp) * ((kp2 / m) * (big_k - big_e) + big_e - k)
    return out if out.ndim else float(out)


def current_sheet_h(turns, mean_radius_m, length_m):
    """Exact inductance of a uniform cylindrical current sheet: mu0 pi a^2 N^2 K / l (Lorenz, Nagaoka).

    The round-wire corrections (Rosa 1907) are not part of the current sheet.
    """
    k = nagaoka_coefficient(length_m / (2.0 * mean_radius_m))
    return MU0_H_PER_M * math.pi * mean_radius_m ** 2 * turns ** 2 * k / length_m


def mutual_coaxial_circles_h(a_m, b_m, d_m):
    """Mutual inductance of two coaxial circles of radii a, b at axial distance d (Maxwell).

    M = mu0 sqrt(a b) [ (2/k - k) K(k) - (2/k) E(k) ],  k^2 = 4 a b / ((a + b)^2 + d^2).
    Arrays broadcast.
    """
    a = np.asarray(a_m, float)
    b = np.asarray(b_m, float)
    d = np.asarray(d_m, float)
    den = (a + b) ** 2 + d * d
    m = 4.0 * a * b / den
    p = ((a - b) ** 2 + d * d) / den   # 1 - m without cancellation for close filaments
    k = np.sqrt(m)
    return MU0_H_PER_M * np.sqrt(a * b) * ((2.0 / k - k) * ellipkm1(p) - (2.0 / k) * ellipe(m))


def ring_self_h(radius_m, gmd_m):
    """Self-inductance of a thin ring whose section has geometric mean distance g from itself.

    L = mu0 a [ln(8 a / g) - 2] (Maxwell's GMD method; Rosa & Grover 1912). For a round wire of
    radius rho carrying uniform current g = rho e^{-1/4}, giving mu0 a [ln(8 a / rho) - 7/4].
    Neglects terms of order (g/a)^2.
    """
    return MU0_H_PER_M * radius_m * (np.log(8.0 * radius_m / gmd_m) - 2.0)


def rectangle_gmd_m(b_m, c_m):
    """Geometric mean distance of a b x c rectangle from itself, about 0.2235 (b + c) (Maxwell).

    Within about 0.5 % for any aspect ratio; exact limits are 0.22313 b (line) and 0.44705 b (square).
    """
    return 0.2235 * (b_m + c_m)


def thin_ring_coil_h(turns, mean_radius_m, length_m, depth_m):
    """A coil whose winding section is small against its radius: N^2 times the GMD ring formula.

    L = mu0 N^2 a [ln(8 a / g) - 2] with g = 0.2235 (l + c). Suits bundle-wound search loops
    (section well below a fifth of the radius); error of order (section / radius)^2.
    """
    g = rectangle_gmd_m(length_m, depth_m)
    return turns ** 2 * ring_self_h(mean_radius_m, g)


def grid_loops_h(radii_m, dz_m, n_z, self_h):
    """Sum of self and mutual inductances of filaments on a regular (radius x axial) grid.

    Filaments sit at every radius in ``radii_m`` and at ``n_z`` axial positions ``dz_m`` apart,
    all carrying the same current. ``self_h`` gives each radius' self term. Uses the fact that M
    depends on the axial offset only, so the cost is len(radii)^2 * n_z evaluations.
    """
    r = np.asarray(radii_m, float)
    s = np.broadcast_to(np.asarray(self_h, float), r.shape)
    ks = np.arange(int(n_z))
    mult = np.where(ks == 0, n_z, 2 * (n_z - ks)).astype(float)
    total = 0.0
    for i in range(r.size):
        d = ks * dz_m
        m = mutual_coaxial_circles_h(r[i], r[:, None], d[None, :])   # (n_r, n_z)
        m[i, 0] = s[i]                                              # the filament with itself
        total += float(np.sum(m * mult[None, :]))
    return total


def uniform_section_h(turns, inner_radius_m, outer_radius_m, length_m, cells: int = 3000):
    """Inductance of a coil with uniform current density over a rectangular section (numeric).

    Splits the section into near-square cells (or strips for a current sheet, outer = inner),
    each a ring with Maxwell's GMD self term, and sums the Maxwell mutual inductances; scaled by
    (N / cells)^2. Converges to the exact uniform-density value as the grid is refined; this is
    the quantity Wheeler's multilayer and spiral formulas approximate.
    """
    depth = outer_radius_m - inner_radius_m
    if depth <= 0:
        n_r, n_z = 1, int(min(max(cells, 50), 6000))
    else:
        h = math.sqrt(length_m * depth / cells)
        n_r = int(min(max(math.ceil(depth / h), 1), 150))
        n_z = int(min(max(math.ceil(length_m / h), 1), 3000))
    dz = length_m / n_z
    dr = depth / n_r
    radii = inner_radius_m + (np.arange(n_r) + 0.5) * dr if depth > 0 else np.array([inner_radius_m])
    self_h = ring_self_h(radii, rectangle_gmd_m(dz, dr))
    total = grid_loops_h(radii, dz, n_z, self_h)
    return total * (turns / (n_r * n_z)) ** 2


def round_wire_rings_h(turns, inner_radius_m, length_m, depth_m, wire_outer_m, wire_bare_m):
    """Inductance of the winding as coaxial round-wire rings at the wire centres (DC current).

    Each turn's self term is mu0 a [ln(8 a / rho) - 7/4] (uniform current in a round wire),
    mutual terms are Maxwell's. Turns sit on a rectangular grid: one layer per wire outer
    diameter of depth (at least one), turns per layer spread evenly over the length. When the
    grid does not hold exactly N turns the sum is scaled by (N / grid)^2. Includes what the
    current sheet leaves out (Rosa's round-wire corrections); ignores the helix pitch.
    """
    n_r = max(1, int(round(depth_m / wire_outer_m))) if depth_m > 0 else 1
    n_z = max(1, int(round(turns / n_r)))
    dz = length_m / n_z
    if n_r == 1:
        radii = np.array([inner_radius_m + max(depth_m, wire_outer_m) / 2.0]) if depth_m > 0 \
            else np.array([inner_radius_m + wire_outer_m / 2.0])
    else:
        dr = depth_m / n_r
        radii = inner_radius_m + (np.arange(n_r) + 0.5) * dr
    rho = wire_bare_m / 2.0
    self_h = MU0_H_PER_M * radii * (np.log(8.0 * radii / rho) - 1.75)
    total = grid_loops_h(radii, dz, n_z, self_h)
    return total * (turns / (n_r * n_z)) ** 2
