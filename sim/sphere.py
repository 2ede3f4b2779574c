"""The simulator's own magnetic polarisability of a conducting, permeable sphere.

Written apart from :mod:`coilshift.analysis.models.target` (which sums a series of tanh
coefficients): here the exact quasi-static solution is written with spherical Bessel functions.

A sphere of radius R, conductivity sigma and permeability mu_r mu0 in a uniform field H0 e^{iwt}
(free space around it) takes the dipole moment m = 4 pi R^3 kappa H0. Inside, the field solves
curl curl H = -k^2 H with k^2 = -i w mu sigma: H = curl curl (r A j_1(k r) cos theta). Outside it is
the uniform field plus the dipole. Continuity of B_r and H_theta at r = R gives, with x = k R,
P = j_1(x) and Q = d(r j_1(k r))/dr at R = x j_0(x) - j_1(x)::

    kappa = (2 mu_r P - Q) / (2 (mu_r P + Q))
          = [2 (mu_r - 1) j_1(x) + x j_2(x)] / (2 [(mu_r - 1) j_1(x) + x j_0(x)])

(the second line by the recurrence j_0 + j_2 = 3 j_1 / x, which removes the cancellation of the
first when mu_r = 1). Wait, "A conducting sphere in a time varying magnetic field", Geophysics 16
(1951) 666-672; Smythe, *Static and Dynamic Electricity*, 3rd ed. (1968), ch. 10. kappa is even in
x, so the branch of k does not matter. Limits: (mu_r - 1)/(mu_r + 2) when x -> 0, -1/2 when
|x| -> infinity (a perfect conductor); x^2 / 30 for a weak non-magnetic conductor.
"""

from __future__ import annotations

import numpy as np
from scipy.special import spherical_jn

from coilshift.sim.inductance import MU0_H_PER_M

#: above this |x| the Bessel functions are replaced by their ratios in cot x (no overflow)
RATIO_FORM_ABOVE = 1.0


def wave_argument(radius_m: float, sigma_s_per_m: float, mu_r: float, freq_hz: float) -> complex:
    """x = k R with k^2 = -i w mu_r mu0 sigma (time dependence e^{iwt})."""
    k2 = -1j * 2.0 * np.pi * freq_hz * mu_r * MU0_H_PER_M * sigma_s_per_m
    return complex(np.sqrt(k2) * radius_m)


def sphere_kappa(radius_m: float, sigma_s_per_m: float, mu_r: float, freq_hz: float) -> complex:
    """kappa of m = 4 pi R^3 kappa H0 for a sphere in a uniform field (the formula above).

    Im kappa < 0 for a lossy sphere with e^{iwt}. With sigma = 0 (or f = 0), the static value.
    """
    x = wave_argument(radius_m, sigma_s_per_m, mu_r, freq_hz)
    dm = mu_r - 1.0
    if x == 0:
        return complex(dm / (mu_r + 2.0))
    if abs(x) <= RATIO_FORM_ABOVE:
        j0, j1, j2 = (spherical_jn(n, x) for n in (0, 1, 2))
        return complex((2.0 * dm * j1 + x * j2) / (2.0 * (dm * j1 + x * j0)))
    # j_0/j_1 = x / (1 - x cot x) and j_2/j_1 = 3/x - j_0/j_1 (j_0 = sin x / x,
    # j_1 = (sin x - x cos x)/x^2); cot x tends to +-i for large Im x instead of overflowing
    r0 = x / (1.0 - x / np.tan(x))
    r2 = 3.0 / x - r0
    return complex((2.0 * dm + x * r2) / (2.0 * (dm + x * r0)))


def polarisability_m3(radius_m: float, sigma_s_per_m: float, mu_r: float, freq_hz: float) -> complex:
    """alpha = 4 pi R^3 kappa (m^3): the dipole moment per unit applied field, m = alpha H0."""
    return 4.0 * np.pi * radius_m ** 3 * sphere_kappa(radius_m, sigma_s_per_m, mu_r, freq_hz)
