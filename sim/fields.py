"""The truth model of the simulated benches: a search coil's magnetic field anywhere in space, and
what a target of finite size sees of it.

Written apart from :mod:`coilshift.analysis.models` on purpose (a different code path, and no
import from the analysis side): the benchmarks and the demo use it as the "real" response that the
calibration analysis, with its simpler fitted laws, must measure.

* :func:`loop_field_per_amp`: a one-turn circular loop carrying 1 A, at any point (rho, z), from
  the complete elliptic integrals (Smythe, *Static and Dynamic Electricity*, 3rd ed. 1968,
  section 7.10; Jackson, *Classical Electrodynamics*, 3rd ed. 1999, section 5.5; written in the
  form of Simpson et al., NASA/TM-2013-217919). Units: A/m per ampere, lengths in metres.
* :class:`Winding`: a coil of N turns with uniform current density over a rectangular section
  (inner and outer radius, axial length) whose face nearest the target is the plane z = 0; the
  field is the loop field summed over the section by Gauss-Legendre quadrature.
* :func:`mean_field_sq`: the mean of |h|^2 over a target's volume (a sphere, a disc, a washer,
  centred on the axis), by Gauss-Legendre quadrature in z and rho^2. To first order in the
  target's response (a weak, uniformly responding body) the coil's inductance change is
  proportional to this mean (reciprocity: dL = mu0 chi int |h|^2 dV), so a finite target's shift
  is ``A <|h|^2>(d) / h(0)^2`` with A the shift of a point target at the face.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import ellipe, ellipk

#: quadrature points over the winding's section (radius, length) and over a target (z, rho^2)
WINDING_NODES = 12
TARGET_NODES = 16

_GL = {n: np.polynomial.legendre.leggauss(n) for n in (WINDING_NODES, TARGET_NODES)}


def _nodes(lo: float, hi: float, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights on [lo, hi] (one node of weight 1 when lo == hi)."""
    if hi <= lo:
        return np.array([lo], float), np.array([1.0])
    x, w = _GL[n]
    return 0.5 * (hi - lo) * x + 0.5 * (hi + lo), 0.5 * w * (hi - lo) / (hi - lo)


def loop_field_per_amp(radius_m: float, rho_m, z_m) -> tuple[np.ndarray, np.ndarray]:
    """Field (h_rho, h_z) of a circular loop of radius a carrying 1 A, in A/m.

    With alpha^2 = a^2 + rho^2 + z^2 - 2 a rho, beta^2 = a^2 + rho^2 + z^2 + 2 a rho and
    m = k^2 = 1 - alpha^2/beta^2::

        h_z   = [(a^2 - rho^2 - z^2) E(m) + alpha^2 K(m)] / (2 pi alpha^2 beta)
        h_rho = z [(a^2 + rho^2 + z^2) E(m) - alpha^2 K(m)] / (2 pi alpha^2 beta rho)

    (K, E: complete elliptic integrals of the first and second kind, parameter m as in
    scipy.special). On the axis h_rho = 0 and h_z = a^2 / (2 (a^2 + z^2)^(3/2)). Undefined on
    the wire itself.
    """
    a = np.asarray(radius_m, float)
    rho = np.abs(np.asarray(rho_m, float))
    z = np.asarray(z_m, float)
    a, rho, z = np.broadcast_arrays(a, rho, z)
    s = a * a + rho * rho + z * z
    alpha2 = s - 2.0 * a * rho
    beta = np.sqrt(s + 2.0 * a * rho)
    m = np.clip(1.0 - alpha2 / (beta * beta), 0.0, 1.0)
    kk, ee = ellipk(m), ellipe(m)
    hz = ((a * a - rho * rho - z * z) * ee + alpha2 * kk) / (2.0 * math.pi * alpha2 * beta)
    with np.errstate(invalid="ignore", divide="ignore"):
        hr = z * (s * ee - alpha2 * kk) / (2.0 * math.pi * alpha2 * beta * rho)
    # close to the axis the bracket cancels; the first-order expansion h_rho = -rho/2 dh_z/dz
    # of the axial field is exact to O(rho^3) there
    near = rho < 1e-6 * np.maximum(a, 1e-12)
    if np.any(near):
        zz, aa = z[near], a[near]
        hr = np.where(near, 0.0, hr)
        hr[near] = 0.75 * rho[near] * aa * aa * zz / (aa * aa + zz * zz) ** 2.5
    return hr, hz


@dataclass(frozen=True)
class Winding:
    """A coil: N turns spread uniformly over a rectangular section (lengths in metres).

    The face nearest the target is the plane z = 0; the winding occupies -length_m <= z <= 0 and
    inner_radius_m <= r <= outer_radius_m (equal radii: a single layer; zero length: a flat
    spiral or a thin loop).
    """

    turns: float
    inner_radius_m: float
    outer_radius_m: float
    length_m: float

    @classmethod
    def from_design_mm(cls, turns: float, inner_diameter_mm: float, length_mm: float, depth_mm: float = 0.0):
        """From the coil description's fields (former diameter, length, radial depth in mm)."""
        r0 = inner_diameter_mm * 5e-4
        return cls(float(turns), r0, r0 + depth_mm * 1e-3, length_mm * 1e-3)

    def field_per_amp(self, rho_m, z_m) -> tuple[np.ndarray, np.ndarray]:
        """(h_rho, h_z) in A/m per ampere of coil current at points (rho, z), z > 0 in front."""
        rho = np.asarray(rho_m, float)
        z = np.asarray(z_m, float)
        shape = np.broadcast(rho, z).shape
        rs, wr = _nodes(self.inner_radius_m, self.outer_radius_m, WINDING_NODES)
        zs, wz = _nodes(0.0, self.length_m, WINDING_NODES)
        # every loop of the section at once: axes (radius node, length node, field point)
        r3 = rs[:, None, None]
        w3 = (wr[:, None] * wz[None, :])[:, :, None]
        pr = np.broadcast_to(rho, shape).reshape(1, 1, -1)
        pz = np.broadcast_to(z, shape).reshape(1, 1, -1) + zs[None, :, None]
        fr, fz = loop_field_per_amp(r3, pr, pz)
        hr = np.sum(w3 * fr, axis=(0, 1)).reshape(shape)
        hz = np.sum(w3 * fz, axis=(0, 1)).reshape(shape)
        return self.turns * hr, self.turns * hz


@dataclass(frozen=True)
class Target:
    """A target centred on the coil axis: a sphere, a disc or a washer (lengths in metres).

    ``kind`` is ``"sphere"`` (radius_m), ``"disc"`` (radius_m, thickness_m, axis along the coil
    axis) or ``"washer"`` (radius_m, thickness_m, hole_radius_m).
    """

    kind: str
    radius_m: float
    thickness_m: float = 0.0
    hole_radius_m: float = 0.0

    def __post_init__(self):
        if self.kind not in ("sphere", "disc", "washer"):
            raise ValueError(f"target kind must be sphere, disc or washer, got {self.kind!r}")

    def half_height_m(self) -> float:
        return self.radius_m if self.kind == "sphere" else 0.5 * self.thickness_m

    def nodes(self, centre_m: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Quadrature points (rho, z) and volume weights over the target centred at ``centre_m``."""
        zeta, wz = _nodes(-self.half_height_m(), self.half_height_m(), TARGET_NODES)
        if self.kind == "sphere":
            top = self.radius_m ** 2 - zeta ** 2  # rho^2 limit of each slice
            bottom = np.zeros_like(top)
        else:
            top = np.full(zeta.shape, self.radius_m ** 2)
            bottom = np.full(zeta.shape, self.hole_radius_m ** 2 if self.kind == "washer" else 0.0)
        x, w = _GL[TARGET_NODES]
        # dV = pi d(rho^2) dz: in u = rho^2 the integrand is smooth and the weights are plain
        u = 0.5 * (top - bottom)[:, None] * x[None, :] + 0.5 * (top + bottom)[:, None]
        wu = 0.5 * (top - bottom)[:, None] * w[None, :] * math.pi
        weights = wz[:, None] * wu * (2.0 * self.half_height_m() if self.half_height_m() > 0 else 1.0)
        z = np.broadcast_to(centre_m + zeta[:, None], u.shape)
        return np.sqrt(np.maximum(u, 0.0)), z, weights


def mean_field_sq(winding: Winding, target: Target, distance_m) -> np.ndarray:
    """Mean of |h|^2 over the target's volume, centred on the axis at each ``distance_m`` (A^2/m^2).

    A point target (radius 0) gives h_z(0, d)^2.
    """
    d = np.atleast_1d(np.asarray(distance_m, float))
    out = np.empty(d.shape)
    for i, di in enumerate(d.flat):
        if target.radius_m <= 0:
            _, hz = winding.field_per_amp(0.0, di)
            out.flat[i] = float(hz) ** 2
            continue
        rho, z, w = target.nodes(di)
        hr, hz = winding.field_per_amp(rho, z)
        out.flat[i] = float(np.sum(w * (hr * hr + hz * hz)) / np.sum(w))
    return out.reshape(np.shape(distance_m)) if np.ndim(distance_m) else out[0]


def mean_field(winding: Winding, target: Target, distance_m: float) -> tuple[float, float]:
    """Volume means of h_rho and h_z over the target (used to check the quadrature: h_z is
    harmonic, so its mean over a ball equals its value at the centre)."""
    rho, z, w = target.nodes(float(distance_m))
    hr, hz = winding.field_per_amp(rho, z)
    return float(np.sum(w * hr) / np.sum(w)), float(np.sum(w * hz) / np.sum(w))


def finite_target_shift_hz(winding: Winding, target: Target, distance_mm, face_shift_hz: float) -> np.ndarray:
    """Shift of a finite target: ``A <|h|^2>(d) / h_z(0, 0)^2`` (Hz), distances in mm from the face.

    ``face_shift_hz`` A is the shift a point target of the same response would give at the face.
    """
    _, h0 = winding.field_per_amp(0.0, 0.0)
    return face_shift_hz * np.asarray(mean_field_sq(winding, target, np.asarray(distance_mm, float) * 1e-3)) / float(h0) ** 2
