"""Shape of a small target's response along the axis of a real (finite) winding, for curve fits.

By reciprocity a target's inductance change is ``dL = 4 pi mu0 R^3 k h^2`` with h the coil's field
per ampere at the target (:mod:`.target`), so with the coil's geometry known the shift against
distance has the shape ``S(d) = h(d)^2 / h(0)^2``, where h is the on-axis field summed over the
winding (length and depth, :func:`~.target.coil_axial_field_per_amp`). A fitted curve is then
``A S(d + d0)`` with only the amplitude A (and optionally the offset d0) free; the single-loop law
``(R^2/(R^2+d^2))^3`` is the special case of a thin loop.

A sphere of finite radius a sees the field over its volume. For a weakly responding body the
coupling is the volume mean of ``|h|^2`` (first order in the response, the Born approximation);
with ``div h = 0`` and ``curl h = 0`` in the free space around the axis, ``lap |h|^2 =
2 sum_ij (d_i h_j)^2 = 3 h'(z)^2`` on the axis (d_z h_z = h', d_x h_x = d_y h_y = -h'/2, the
other derivatives vanish there), and the mean of a smooth function over a ball is
``f(0) + (a^2/10) lap f(0) + O(a^4)``. Hence::

    <|h|^2>_sphere = h(d)^2 + (3/10) a^2 h'(d)^2 + O(a^4)

(derivation in docs/models.md). The correction is second order: a sphere whose radius is a fifth
of its distance from a loop changes the shape by about a per cent.
"""

from __future__ import annotations

import numpy as np

from coilshift.analysis.models.coil import as_report
from coilshift.analysis.models.target import coil_axial_field_per_amp, winding_nodes

#: second-order coefficient of the sphere's volume mean of |h|^2: <|h|^2> = h^2 + c a^2 h'^2
SPHERE_COEFF = 0.3


def coil_axial_field_slope_per_amp(coil, distance_mm):
    """dh/dz of the on-axis field per ampere (1/m^2) at ``distance_mm`` from the coil face.

    The derivative of the finite-sheet expression used by
    :func:`~.target.coil_axial_field_per_amp`: ``d/dz [z/sqrt(a^2+z^2)] = a^2/(a^2+z^2)^(3/2)``,
    integrated over the depth by the same 16-point Gauss-Legendre rule. Negative in front of the
    coil (the field falls with distance).
    """
    radii, weights, length, n = winding_nodes(coil)
    z1 = np.asarray(distance_mm, float)[..., None] * 1e-3
    z2 = z1 + length
    a2 = radii ** 2
    sheet = a2 / (a2 + z2 ** 2) ** 1.5 - a2 / (a2 + z1 ** 2) ** 1.5
    return (n / (2.0 * length)) * np.sum(sheet * weights, axis=-1)


def winding_shape(coil, distance_mm, target_diameter_mm: float = 0.0) -> np.ndarray:
    """Normalised response ``<|h|^2>(d) / h(0)^2`` of a target on the axis of ``coil``.

    Parameters
    ----------
    coil : a ``CoilDesign`` or ``CoilReport``
    distance_mm : distance from the coil face to the target's centre (mm), any shape
    target_diameter_mm : sphere diameter for the second-order finite-size term (0: a point target)

    Returns
    -------
    ndarray : 1 at the face for a point target, falling with distance (as d^-6 far away)
    """
    rep = as_report(coil)
    d = np.asarray(distance_mm, float)
    h0 = float(coil_axial_field_per_amp(rep, 0.0))
    h = coil_axial_field_per_amp(rep, d)
    out = h * h
    if target_diameter_mm > 0:
        a_m = 0.5e-3 * float(target_diameter_mm)
        slope = coil_axial_field_slope_per_amp(rep, d)
        out = out + SPHERE_COEFF * a_m * a_m * slope * slope
    return out / (h0 * h0)
