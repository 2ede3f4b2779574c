"""Response of a small metal sphere near a search coil, and the frequency shift it causes.

Chain of the model (details and derivations in docs/models.md):

1. The sphere (radius R, conductivity sigma, permeability mu = mu_r mu0) in a uniform
   alternating field H0 e^{iwt} takes a dipole moment m = 4 pi R^3 k H0 with (Wait 1951)
   k = [2 mu (tanh a - a) + mu0 (a^2 tanh a - a + tanh a)] /
       (2 [mu (tanh a - a) - mu0 (a^2 tanh a - a + tanh a)]),   a = sqrt(i w mu sigma) R.
   Limits: k -> (mu_r - 1)/(mu_r + 2) at low frequency (a permeable sphere), k -> -1/2 at high
   induction number (a perfect conductor), k ~ -a^2/30 for a weak non-magnetic conductor.
   With e^{iwt}, losses make Im k < 0.
2. The coil's on-axis field per ampere h(z) at the target (a finite winding integrated over its
   length and depth; for the closed form a single loop N a^2 / (2 (a^2 + z^2)^{3/2})).
3. Reciprocity: the coil's impedance changes by i w dL with dL = mu0 m h / I = 4 pi mu0 R^3 k h^2.
   An LC oscillator's frequency moves by df = -f Re(dL) / (2 L); -w Im(dL) is an added series loss
   resistance. So ferrous targets (Re k > 0) lower the frequency and conductors raise it.

The sphere is assumed small against its distance and the coil radius (uniform field over it).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import brentq
from scipy.special import bernoulli

from coilshift.logger.errors import InputError, setting

from coilshift.analysis.models.coil import CoilReport, as_report
from coilshift.analysis.models.inductance import MU0_H_PER_M
from coilshift.analysis.models.materials import MATERIALS, Material, find_material

__all__ = ["TargetSpec", "MATERIALS", "make_target", "parse_target_spec", "sphere_response", "induction_number",
           "coil_axial_field_per_amp", "predicted_response", "predicted_shift_hz",
           "predicted_range_mm", "closed_form_range_mm", "closed_form_amplitude_hz", "ShiftPrediction"]


@dataclass(frozen=True)
class TargetSpec:
    """A spherical target: diameter (mm), conductivity (S/m), relative permeability."""

    name: str
    diameter_mm: float
    conductivity_s_per_m: float
    mu_r: float = 1.0

    @property
    def radius_m(self) -> float:
        return self.diameter_mm * 5e-4

    def to_dict(self) -> dict:
        return {"name": self.name, "diameter_mm": self.diameter_mm,
                "conductivity_s_per_m": self.conductivity_s_per_m, "mu_r": self.mu_r}


_KEYS = {"diameter_mm": "diameter_mm", "d_mm": "diameter_mm", "sigma": "conductivity_s_per_m",
         "conductivity_s_per_m": "conductivity_s_per_m", "mu_r": "mu_r", "name": "name"}


#: the largest sphere modelled, mm (the --diameter-mm option's range)
MAX_DIAMETER_MM = 1e5


def make_target(name: str, diameter_mm, conductivity_s_per_m, mu_r, where: str = "target") -> TargetSpec:
    """A checked TargetSpec (diameter > 0, sigma >= 0, mu_r > 0), InputError otherwise."""
    def num(v, what):
        try:
            x = float(v)
        except (TypeError, ValueError):
            raise InputError(f"{where}: {what} must be a number, got {v!r}") from None
        if not math.isfinite(x):
            raise InputError(f"{where}: {what} must be finite, got {v!r}")
        return x

    d = num(diameter_mm, "diameter_mm")
    s = num(conductivity_s_per_m, "sigma")
    m = num(mu_r, "mu_r")
    if d <= 0 or d > MAX_DIAMETER_MM:  # beyond 100 m the response arithmetic overflows; no bench holds one
        raise InputError(f"{where}: diameter_mm must be above 0 and at most {MAX_DIAMETER_MM:g}, got {diameter_mm!r}")
    if s < 0 or s > 1e9:
        raise InputError(f"{where}: sigma must be between 0 and 1e9 S/m, got {conductivity_s_per_m!r}")
    if m <= 0 or m > 1e6:
        raise InputError(f"{where}: mu_r must be above 0 and at most 1e6, got {mu_r!r}")
    return TargetSpec(name, d, s, m)


def parse_target_spec(text: str) -> TargetSpec:
    """Parse a target description.

    Syntax: ``[MATERIAL][:]key=value[,key=value...]`` where MATERIAL is a name from
    :data:`MATERIALS` (or an alias such as ``steel``, ``aluminum``, ``stainless``) and keys are
    ``diameter_mm`` (required), ``sigma`` (S/m), ``mu_r`` and ``name``. Keys override the
    material's values; without a material both ``sigma`` and ``mu_r`` are needed.

    Examples: ``"steel:diameter_mm=12"``, ``"copper:diameter_mm=20,name=coin"``,
    ``"sigma=3.5e7,mu_r=1,diameter_mm=20"``.
    """
    where = f"target {text!r}"
    text = text.strip()
    if not text:
        raise InputError("target: empty description")
    head, sep, rest = text.partition(":")
    if not sep and "=" in head:
        head, rest = "", text
    material: Material | None = None
    if head:
        material = find_material(head)
        if material is None:
            raise InputError(f"{where}: unknown material {head!r} (known: {', '.join(MATERIALS)})")
    values: dict[str, str] = {}
    for part in filter(None, (p.strip() for p in rest.split(","))):
        key, eq, val = part.partition("=")
        key = key.strip().lower()
        if not eq or key not in _KEYS:
            raise InputError(f"{where}: cannot read {part!r} (keys: diameter_mm, sigma, mu_r, name)")
        values[_KEYS[key]] = val.strip()
    if "diameter_mm" not in values:
        raise InputError(f"{where}: diameter_mm is required, e.g. {head or 'copper'}:diameter_mm=20")
    if material is None and not {"conductivity_s_per_m", "mu_r"} <= set(values):
        raise InputError(f"{where}: give a material name or both sigma and mu_r")
    name = values.get("name") or (material.name if material else "custom")
    sigma = values.get("conductivity_s_per_m", material.conductivity_s_per_m if material else None)
    mu_r = values.get("mu_r", material.mu_r if material else None)
    return make_target(name, values["diameter_mm"], sigma, mu_r, where)


def _tanh_coefficients(n_terms: int = 26) -> np.ndarray:
    """t_j with tanh x = sum_{j>=1} t_j x^(2j-1): 2^(2j) (2^(2j) - 1) B_(2j) / (2j)!."""
    b = bernoulli(2 * n_terms)
    return np.array([2.0 ** (2 * j) * (2.0 ** (2 * j) - 1.0) * b[2 * j] / math.factorial(2 * j)
                     for j in range(1, n_terms + 1)])


_T = _tanh_coefficients()
_F1 = _T[1:]                                   # (tanh a - a) / a^3 in powers of u = a^2
_TT = _T[:-1]                                  # a^2 tanh a / a^3
_G = np.concatenate([[0.0], 3.0 * _F1[1:] + _TT[1:]])   # 3 F1 + T, its u^0 term is exactly zero
_SERIES_MAX_U = 0.5                            # series radius is (pi/2)^2; at 0.5 it converges fast


def induction_number(target: TargetSpec, freq_hz):
    """|a| = R sqrt(w mu sigma): the sphere's radius over the skin depth, times sqrt 2."""
    w = 2.0 * np.pi * np.asarray(freq_hz, float)
    return target.radius_m * np.sqrt(w * target.mu_r * MU0_H_PER_M * target.conductivity_s_per_m)


def sphere_response(target: TargetSpec, freq_hz):
    """Dimensionless response k of a conducting, permeable sphere: m = 4 pi R^3 k H0.

    Wait (1951), "A conducting sphere in a time varying magnetic field", Geophysics 16, 666-672;
    also Smythe, Static and Dynamic Electricity, and Wait & Spies (1969). Time dependence e^{iwt},
    a = sqrt(i w mu sigma) R on the principal branch; Im k <= 0 (loss).

    Parameters
    ----------
    target : TargetSpec
    freq_hz : float or array

    Returns
    -------
    complex or complex ndarray
        (mu_r - 1)/(mu_r + 2) at low frequency or sigma = 0; -1/2 for a perfect conductor.
    """
    f = np.asarray(freq_hz, float)
    if np.any(f < 0) or not np.all(np.isfinite(f)):
        raise InputError(f"frequency must be finite and not negative, got {freq_hz!r}")
    mr = target.mu_r
    u = 1j * 2.0 * np.pi * f * mr * MU0_H_PER_M * target.conductivity_s_per_m * target.radius_m ** 2
    u = np.atleast_1d(u).astype(complex)
    out = np.empty(u.shape, complex)
    small = np.abs(u) < _SERIES_MAX_U
    if np.any(small):
        us = u[small]
        # Horner on the series of f1 = tanh a - a and f2 = a^2 tanh a + f1, divided by a^3,
        # so the static limit has no cancellation: N = 2 (mu_r - 1) F1 + G, D = (mu_r - 1) F1 - T
        f1 = np.polynomial.polynomial.polyval(us, _F1)
        tt = np.polynomial.polynomial.polyval(us, _TT)
        g = np.polynomial.polynomial.polyval(us, _G)
        out[small] = (2.0 * (mr - 1.0) * f1 + g) / (2.0 * ((mr - 1.0) * f1 - tt))
    big = ~small
    if np.any(big):
        a = np.sqrt(u[big])
        th = np.tanh(a)
        f1 = th - a
        f2 = a * a * th - a + th
        out[big] = (2.0 * mr * f1 + f2) / (2.0 * (mr * f1 - f2))
    return out.reshape(np.shape(f)) if np.ndim(f) else complex(out[0])


def _winding_bounds(rep: CoilReport) -> tuple[float, float, float]:
    """(inner radius, outer radius, length) of the current-carrying section in metres."""
    d = rep.design
    if d.depth_mm > 0:
        return rep.inner_radius_mm * 1e-3, (rep.inner_radius_mm + d.depth_mm) * 1e-3, d.length_mm * 1e-3
    r = rep.mean_radius_mm * 1e-3
    return r, r, d.length_mm * 1e-3


_GL_X, _GL_W = np.polynomial.legendre.leggauss(16)


def coil_axial_field_per_amp(coil, distance_mm):
    """On-axis field per ampere h (A/m per A = 1/m) at ``distance_mm`` from the coil's near face.

    The winding (N turns spread uniformly over its length and depth) is integrated exactly along
    the axis (finite-solenoid sheet: n/2 [z2/sqrt(a^2+z2^2) - z1/sqrt(a^2+z1^2)]) and by 16-point
    Gauss-Legendre over the depth. For a single loop this is N a^2 / (2 (a^2 + z^2)^{3/2}).
    """
    radii, weights, length, n = winding_nodes(coil)
    z1 = np.asarray(distance_mm, float)[..., None] * 1e-3
    z2 = z1 + length
    sheet = z2 / np.sqrt(radii ** 2 + z2 ** 2) - z1 / np.sqrt(radii ** 2 + z1 ** 2)
    return (n / (2.0 * length)) * np.sum(sheet * weights, axis=-1)


def winding_nodes(coil) -> tuple[np.ndarray, np.ndarray, float, float]:
    """(radii m, weights, length m, turns): the 16-point Gauss-Legendre rule over the winding's
    depth (one node for a single layer) that the axial field and its slope integrate with."""
    rep = as_report(coil)
    r0, r1, length = _winding_bounds(rep)
    if r1 > r0:
        return 0.5 * (r1 - r0) * _GL_X + 0.5 * (r1 + r0), 0.5 * _GL_W, length, float(rep.design.turns)
    return np.array([r0]), np.array([1.0]), length, float(rep.design.turns)


@dataclass
class ShiftPrediction:
    """Predicted effect of a target at each distance (arrays over ``distance_mm``)."""

    distance_mm: np.ndarray
    shift_hz: np.ndarray          # signed: negative = frequency falls
    delta_l_uh: np.ndarray        # real part of the inductance change
    delta_r_ohm: np.ndarray       # added series loss resistance (>= 0)
    delta_inv_q: np.ndarray       # change of 1/Q of the coil: delta_r / (w L)
    response: complex
    freq_hz: float
    inductance_uh: float
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict:
        return {"distance_mm": self.distance_mm, "shift_hz": self.shift_hz, "delta_l_uh": self.delta_l_uh,
                "delta_r_ohm": self.delta_r_ohm, "delta_inv_q": self.delta_inv_q,
                "response_real": self.response.real, "response_imag": self.response.imag,
                "freq_hz": self.freq_hz, "inductance_uh": self.inductance_uh, "notes": self.notes}


def _operating_freq(rep: CoilReport, freq_hz) -> float:
    if freq_hz is None:
        if rep.lc_freq_hz is None:
            raise InputError(f"coil: no operating frequency; give {setting('freq_hz')} or a tuning capacitor (cap_nf)")
        return float(rep.lc_freq_hz)
    f = float(freq_hz)
    if not (math.isfinite(f) and f > 0):
        raise InputError(f"frequency {freq_hz!r}: must be positive")
    return f


def _distances(distance_mm) -> np.ndarray:
    d = np.asarray(distance_mm, float)
    if not np.all(np.isfinite(d)) or np.any(d < 0):
        raise InputError("distances must be finite and not negative (mm from the coil face)")
    return d


def predicted_response(coil, target: TargetSpec, distance_mm, freq_hz=None) -> ShiftPrediction:
    """Frequency shift, inductance change and added loss for a target on the coil's axis.

    Reciprocity (REFERENCES section 8): dL = mu0 m h / I = 4 pi mu0 R^3 k h^2, with h the coil's
    field per ampere at the target; df = -f Re(dL) / (2 L) for an LC oscillator (first order);
    dR = -w Im(dL). ``coil`` is a CoilDesign or CoilReport; ``freq_hz`` defaults to its LC frequency.
    """
    rep = as_report(coil)
    f = _operating_freq(rep, freq_hz)
    d = _distances(distance_mm)
    k = sphere_response(target, f)
    h = coil_axial_field_per_amp(rep, d)
    dl = 4.0 * np.pi * MU0_H_PER_M * target.radius_m ** 3 * k * h ** 2      # complex, henries
    l_h = rep.inductance_h
    shift = -f * dl.real / (2.0 * l_h)
    w = 2.0 * np.pi * f
    dr = -w * dl.imag
    notes = []
    if np.any(d * 1e-3 < 2.0 * target.radius_m):
        notes.append("some distances are under two target radii: the uniform-field dipole model "
                     "is rough there")
    return ShiftPrediction(d, shift, dl.real * 1e6, dr, dr / (w * l_h), complex(k), f, rep.inductance_uh, notes)


def predicted_shift_hz(coil, target: TargetSpec, distance_mm, freq_hz=None) -> np.ndarray:
    """Signed frequency shift (Hz) at each distance (mm from the coil face to the target centre).

    Negative = the frequency falls (ferrous targets); positive = it rises (conductors).
    See :func:`predicted_response` for the model.
    """
    return predicted_response(coil, target, distance_mm, freq_hz).shift_hz


def closed_form_amplitude_hz(coil, target: TargetSpec, freq_hz=None) -> float:
    """Shift amplitude A of the single-loop model: df(z) = A (a^2 / (a^2 + z^2))^3.

    A = -f mu0 pi R^3 Re(k) N^2 / (2 L a^2), a = the coil's mean radius. Far away
    df ~ A (a/z)^6: the d^-6 law.
    """
    rep = as_report(coil)
    f = _operating_freq(rep, freq_hz)
    k = sphere_response(target, f)
    a = rep.mean_radius_mm * 1e-3
    n = float(rep.design.turns)
    return -f * MU0_H_PER_M * math.pi * target.radius_m ** 3 * k.real * n * n / (2.0 * rep.inductance_h * a * a)


def closed_form_range_mm(coil, target: TargetSpec, freq_hz=None, threshold_hz: float = 1.0) -> float:
    """Detection range of the single-loop model: z = a sqrt((|A| / T)^(1/3) - 1); 0 if |A| <= T."""
    if not (threshold_hz > 0):
        raise InputError(f"threshold {threshold_hz!r} Hz: must be positive")
    rep = as_report(coil)
    amp = abs(closed_form_amplitude_hz(rep, target, freq_hz))
    if amp <= threshold_hz:
        return 0.0
    return rep.mean_radius_mm * math.sqrt((amp / threshold_hz) ** (1.0 / 3.0) - 1.0)


def predicted_range_mm(coil, target: TargetSpec, freq_hz=None, threshold_hz: float = 1.0) -> float:
    """Largest distance (mm from the coil face) at which |shift| reaches ``threshold_hz``.

    Solved numerically on the full-winding model of :func:`predicted_shift_hz` (the on-axis
    shift falls monotonically with distance); 0.0 when even a target at the face stays below it.
    """
    if not (threshold_hz > 0):
        raise InputError(f"threshold {threshold_hz!r} Hz: must be positive")
    rep = as_report(coil)
    f = _operating_freq(rep, freq_hz)

    def excess(z_mm: float) -> float:
        return abs(float(predicted_shift_hz(rep, target, z_mm, f))) - threshold_hz

    if excess(0.0) <= 0:
        return 0.0
    hi = max(rep.mean_radius_mm, 1.0)
    while excess(hi) > 0:
        hi *= 2.0
        if hi > 1e9:
            raise InputError("target: range does not converge (threshold too small?)")
    return float(brentq(excess, 0.0, hi, xtol=1e-9 * hi, rtol=1e-12))

