"""Target responses: the oscillator's frequency shift against target distance.

Two kinds:

* parametric on-axis dipole, ``df(d) = A (R^2/(R^2 + d^2))^3``: a small target on the axis of a
  loop of radius R. The loop's field at the target falls as (a^2/(a^2+z^2))^(3/2) (Biot-Savart on
  the axis) and, by reciprocity, the coupling back into the coil carries the same factor again, so
  dL and df/f = -dL/(2L) fall as its square (Wait 1951 for the sphere's dipole moment);
* physical: the models' :func:`coilshift.analysis.models.target.predicted_shift_hz` for a material, shape
  and size in front of a designed coil (a point-like sphere on the axis of the finite winding);
  with ``"finite_size": true`` the sphere's finite size is added by the truth model of
  :mod:`coilshift.sim.fields` (the field's square averaged over the sphere's volume, Biot-Savart
  off the axis), which the analysis does not share.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy.optimize import brentq

from coilshift.logger.errors import InputError

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
    w = f"{where}: targets.{name}"
    try:
        from coilshift.analysis.models import coil as coilmod
        from coilshift.analysis.models import target as targetmod
    except ImportError:
        raise InputError(f"{w}: target models are not available in this installation; "
                         "use peak_shift_hz and coil_radius_mm") from None
    report = coilmod.analyse_coil(coilmod.design_from_dict(osc.coil, f"{where}: oscillator.coil"))
    try:
        tspec = _target_spec(targetmod, spec, w)
    except InputError as exc:
        # the models name the spec text; say which script entry it came from
        msg = str(exc)
        raise InputError(msg if msg.startswith(w) else f"{w}: {msg}") from None
    freq = float(osc.freq_hz)
    finite = _finite_size_factor(osc.coil, tspec.diameter_mm) if spec.get("finite_size") else None

    def shift(d, report=report, tspec=tspec, freq=freq):
        d = np.asarray(d, float)
        point = np.asarray(targetmod.predicted_shift_hz(report, tspec, d, freq), float)
        return point if finite is None else point * finite(d)

    try:
        probe = shift(np.array([0.0, 100.0]))
    except (TypeError, ValueError) as exc:
        raise InputError(f"{w}: {exc}") from None
    if probe.shape != (2,) or not np.all(np.isfinite(probe)):
        raise InputError(f"{w}: the target model gave no finite shift for this target")
    return Response(name, shift, {"model": "coilshift.analysis.models.target", "spec": spec,
                                  "target": tspec.to_dict(),
                                  "inductance_uh": float(report.inductance_uh), "freq_hz": freq})


def _finite_size_factor(coil: dict, diameter_mm: float) -> Callable[[np.ndarray], np.ndarray]:
    """d -> <|h|^2>_sphere(d) / h_z(0, d)^2 from the truth model (sim.fields) for the script's coil."""
    from coilshift.sim.fields import Target, Winding, mean_field_sq

    w = Winding.from_design_mm(float(coil["turns"]), float(coil["inner_diameter_mm"]), float(coil["length_mm"]),
                               float(coil.get("depth_mm", 0.0) or 0.0))
    sphere = Target("sphere", 0.5e-3 * float(diameter_mm))

    def factor(d_mm: np.ndarray) -> np.ndarray:
        z = np.atleast_1d(np.asarray(d_mm, float)) * 1e-3
        point = np.array([float(w.field_per_amp(0.0, zi)[1]) ** 2 for zi in z])
        out = np.asarray(mean_field_sq(w, sphere, z), float) / point
        return out.reshape(np.shape(d_mm))

    return factor


def _target_spec(targetmod, spec: dict, where: str):
    """The models' TargetSpec from the script's keys: material, diameter_mm, optional sigma and mu_r
    (``finite_size`` is the simulator's own switch)."""
    extra = sorted(set(spec) - {"material", "diameter_mm", "sigma", "mu_r", "finite_size"})
    if extra:
        raise InputError(f"{where}: unknown key '{extra[0]}' (allowed: material, diameter_mm, sigma, mu_r, "
                         "finite_size)")
    if "finite_size" in spec and not isinstance(spec["finite_size"], bool):
        raise InputError(f"{where}: finite_size must be true or false")
    if not isinstance(spec.get("material"), str):
        raise InputError(f"{where}: material must be a name, e.g. \"aluminium\"")
    parts = [f"{k}={spec[k]}" for k in ("diameter_mm", "sigma", "mu_r") if k in spec]
    return targetmod.parse_target_spec(f"{spec['material']}:{','.join(parts)}")
