"""Target responses: the oscillator's frequency shift against target distance.

Two kinds:

* parametric on-axis dipole, ``df(d) = A (R^2/(R^2 + d^2))^3``: a small target on the axis of a
  loop of radius R. The loop's field at the target falls as (a^2/(a^2+z^2))^(3/2) (Biot-Savart on
  the axis) and, by reciprocity, the coupling back into the coil carries the same factor again, so
  dL and df/f = -dL/(2L) fall as its square (Wait 1951 for the sphere's dipole moment);
* physical: a sphere of a material and size on the axis of the script's coil, built by the
  simulator alone (no import from the analysis side, so that the analysis' predictions are checked
  against it): the sphere's exact polarisability (:mod:`.sphere`, Wait 1951 with spherical
  Bessel functions), the winding's Biot-Savart field (:mod:`.fields`; with ``"finite_size": true``
  the field's square averaged over the sphere's volume), the winding's inductance by a quadrature
  of Maxwell's mutual inductance over its section (:mod:`.benchcoil`, :mod:`.inductance`; the
  same L that sets the tone's frequency), materials from :mod:`.materials` or the script's
  ``sigma`` / ``mu_r``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy.optimize import brentq

from coilshift.logger.errors import InputError
from coilshift.sim.benchcoil import bench_coil
from coilshift.sim.fields import Target, mean_field_sq
from coilshift.sim.inductance import MU0_H_PER_M
from coilshift.sim.materials import BENCH_MATERIALS, bench_material
from coilshift.sim.sphere import polarisability_m3

#: classes as the analysis names them: frequency falls / rises / no clear response
FERROUS, NON_FERROUS, INDETERMINATE = "ferrous", "non-ferrous", "indeterminate"
#: farthest distance searched for a detection range
MAX_RANGE_MM = 10_000.0


def dipole_shift_hz(distance_mm, peak_shift_hz: float, coil_radius_mm: float) -> np.ndarray:
    """On-axis dipole response ``A (R^2/(R^2+d^2))^3`` (Hz), signed like ``A``.

    Parameters
    ----------
    distance_mm : target distance from the coil plane along the axis
    peak_shift_hz : A, the shift with the target at the coil's centre (negative: frequency falls)
    coil_radius_mm : R, the loop's mean radius
    """
    d = np.asarray(distance_mm, dtype=float)
    r2 = coil_radius_mm ** 2
    return peak_shift_hz * (r2 / (r2 + d * d)) ** 3


def dipole_range_mm(threshold_hz: float, peak_shift_hz: float, coil_radius_mm: float) -> float:
    """Distance at which ``|A| (R^2/(R^2+d^2))^3`` falls to ``threshold_hz`` (closed form); NaN if never reached."""
    a = abs(peak_shift_hz)
    if a < threshold_hz:
        return math.nan
    return coil_radius_mm * math.sqrt((a / threshold_hz) ** (1.0 / 3.0) - 1.0)


@dataclass
class Response:
    """One target's shift-vs-distance function, with what it was built from."""

    name: str
    shift_hz: Callable[[np.ndarray], np.ndarray]  # distance_mm -> oscillator shift, Hz
    params: dict

    def range_mm(self, threshold_hz: float) -> float:
        """Largest distance with ``|shift| >= threshold_hz`` (NaN when not even touching)."""
        if self.params.get("model") == "dipole":
            return dipole_range_mm(threshold_hz, self.params["peak_shift_hz"], self.params["coil_radius_mm"])
        g = lambda d: abs(float(self.shift_hz(np.array([d]))[0])) - threshold_hz  # noqa: E731
        if g(0.0) < 0:
            return math.nan
        if g(MAX_RANGE_MM) >= 0:
            return MAX_RANGE_MM
        # the response falls monotonically with distance for a target on the axis
        return float(brentq(g, 0.0, MAX_RANGE_MM, xtol=1e-6))

    def expected_class(self, nearest_mm: float, floor_hz: float) -> str:
        """The call a sound analysis should make from the nearest scripted step."""
        s = float(self.shift_hz(np.array([nearest_mm]))[0])
        if abs(s) <= floor_hz:
            return INDETERMINATE
        return FERROUS if s < 0 else NON_FERROUS


def build_responses(script) -> dict[str, Response]:
    """A :class:`Response` for every target of a parsed script."""
    out = {}
    for name, t in script.targets.items():
        if t.spec is None:
            a, r = t.peak_shift_hz, t.coil_radius_mm
            out[name] = Response(name, lambda d, a=a, r=r: dipole_shift_hz(d, a, r),
                                 {"model": "dipole", "peak_shift_hz": a, "coil_radius_mm": r})
        else:
            out[name] = _physical(name, t.spec, script.oscillator, script.name)
    return out


def _physical(name: str, spec: dict, osc, where: str) -> Response:
    """The bench's true response of a sphere on the coil axis, from the simulator's own models.

    dL = mu0 alpha h^2 (reciprocity: the flux the dipole m = alpha h I sends through the coil is
    mu0 m h per ampere), with alpha the sphere's polarisability (:mod:`.sphere`), h the winding's
    field per ampere at the target (:mod:`.fields`; with ``finite_size`` the mean of |h|^2 over the
    sphere) and L the winding's own inductance (:mod:`.benchcoil`, by :mod:`.inductance`); df =
    -f Re(dL) / (2 L) at the script's oscillator frequency f.
    """
    w = f"{where}: targets.{name}"
    body = _sphere_spec(spec, w)
    coil = bench_coil(osc.coil, f"{where}: oscillator.coil")
    winding, l_h = coil.winding, coil.inductance_h  # the L of the tone's frequency too
    freq = float(osc.freq_hz)
    alpha = polarisability_m3(body["radius_m"], body["sigma_s_per_m"], body["mu_r"], freq)
    sphere = Target("sphere", body["radius_m"]) if body["finite_size"] else None
    scale = -freq * MU0_H_PER_M * alpha.real / (2.0 * l_h)   # Hz per (A/m per A)^2

    def shift(d):
        d = np.asarray(d, float)
        if sphere is None:  # a point target: h on the axis
            return scale * np.asarray(winding.field_per_amp(0.0, d * 1e-3)[1], float) ** 2
        return scale * np.asarray(mean_field_sq(winding, sphere, d * 1e-3), float).reshape(d.shape)

    probe = shift(np.array([0.0, 100.0]))
    if not np.all(np.isfinite(probe)):
        raise InputError(f"{w}: the target model gave no finite shift for this target")
    return Response(name, shift, {"model": "coilshift.sim (sphere polarisability, Biot-Savart field, "
                                           "own inductance)", "spec": spec,
                                  "target": {k: body[k] for k in ("name", "diameter_mm", "sigma_s_per_m", "mu_r")},
                                  "kappa": [alpha.real / (4.0 * math.pi * body["radius_m"] ** 3),
                                            alpha.imag / (4.0 * math.pi * body["radius_m"] ** 3)],
                                  "inductance_uh": l_h * 1e6, "freq_hz": freq})


#: the script keys of a physical target (``finite_size`` averages |h|^2 over the sphere)
_SPEC_KEYS = ("material", "diameter_mm", "sigma", "mu_r", "finite_size")


def _sphere_spec(spec: dict, where: str) -> dict:
    """Radius, sigma, mu_r and the finite-size switch from a script's physical target, checked."""
    extra = sorted(set(spec) - set(_SPEC_KEYS))
    if extra:
        raise InputError(f"{where}: unknown key '{extra[0]}' (allowed: {', '.join(_SPEC_KEYS)})")
    if "finite_size" in spec and not isinstance(spec["finite_size"], bool):
        raise InputError(f"{where}: finite_size must be true or false")
    if not isinstance(spec.get("material"), str):
        raise InputError(f"{where}: material must be a name, e.g. \"aluminium\"")
    head = spec["material"].strip()
    material = bench_material(head) if head else None
    if head and material is None:
        raise InputError(f"{where}: unknown material {head!r} (known: {', '.join(BENCH_MATERIALS)})")
    if "diameter_mm" not in spec:
        raise InputError(f"{where}: diameter_mm is required, e.g. \"diameter_mm\": 20")
    if material is None and not {"sigma", "mu_r"} <= set(spec):
        raise InputError(f"{where}: give a material name or both sigma and mu_r")
    d = _number(spec, "diameter_mm", where, None, 0.0, MAX_DIAMETER_MM, low_open=True)
    sigma = _number(spec, "sigma", where, material and material.sigma_s_per_m, 0.0, 1e9)
    mu_r = _number(spec, "mu_r", where, material and material.mu_r, 0.0, 1e6, low_open=True)
    return {"name": material.name if material else "custom", "diameter_mm": d, "radius_m": 0.5e-3 * d,
            "sigma_s_per_m": sigma, "mu_r": mu_r, "finite_size": bool(spec.get("finite_size", False))}


#: the largest sphere modelled, mm (100 m; no bench holds a larger one)
MAX_DIAMETER_MM = 1e5


def _number(spec: dict, key: str, where: str, default, lo: float, hi: float, low_open: bool = False) -> float:
    """spec[key] (or the default) as a finite number in [lo, hi] ((lo, hi] with ``low_open``)."""
    v = spec.get(key, default)
    try:
        if isinstance(v, bool):
            raise TypeError
        x = float(v)
    except (TypeError, ValueError):
        raise InputError(f"{where}: {key} must be a number, got {v!r}") from None
    if not (math.isfinite(x) and (x > lo if low_open else x >= lo) and x <= hi):
        rng = f"above {lo:g}" if low_open else f"at least {lo:g}"
        raise InputError(f"{where}: {key} must be {rng} and at most {hi:g}, got {v!r}")
    return x
