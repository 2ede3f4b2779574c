"""Ferrous, non-ferrous or mixed: the signs of a target's significant shifts, with their evidence.

A point is significant by the family-wise (Sidak) test of :mod:`.significance`; the call carries
the strongest point's z and its adjusted p-value. Significant shifts of both signs make the call
``mixed``; none make it ``indeterminate``.

A permeable (ferrous) target concentrates the coil's field: inductance up, frequency down.
A non-ferrous conductor carries eddy currents that oppose the field: inductance down, frequency
up (common practice; Wait 1951 gives both limits for a sphere). That mapping from frequency to
inductance holds for an LC oscillator read directly ("normal" polarity). A tone (or a
prescaler's output) aliased from an even Nyquist zone and logged without the zone correction, a
beat against a reference oscillator above the search frequency, or an oscillator topology whose
frequency rises with inductance all invert it ("inverted" polarity). A reference target of known kind checks the polarity.

Steels at higher frequencies can give a mixed or even eddy-dominated response (eddy currents
oppose the permeable response and can win), so a steel target may read as non-ferrous or change
sign with distance: the call is about the response, not the metallurgy.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from coilshift.analysis.calibration.significance import FAMILY_ALPHA, Significance, family_test
from coilshift.analysis.calibration.steps import Point

FERROUS = "ferrous"
NON_FERROUS = "non-ferrous"
MIXED = "mixed"
INDETERMINATE = "indeterminate"
CLASSES = (FERROUS, NON_FERROUS)
POLARITIES = ("normal", "inverted")

MIXED_STEEL_CAUTION = ("Some steels, especially at higher frequencies, respond as a mix of "
                       "permeable and eddy-current targets and can read as non-ferrous or change "
                       "sign with distance; the call describes the response, not the metal.")
POLARITY_CAUTION = ("The call assumes the logged frequency falls when inductance rises (LC "
                    "oscillator read directly). A tone aliased from an even Nyquist zone (unless "
                    "the log was made with the matching --nyquist-zone correction), a beat against "
                    "a higher reference, or another oscillator topology inverts this: check with a "
                    "reference target of known kind (--reference-target NAME=ferrous) and use "
                    "--polarity inverted if needed.")


@dataclass(frozen=True)
class Classification:
    """Call for one target, with its evidence.

    Attributes
    ----------
    target : name
    cls : ``ferrous``, ``non-ferrous``, ``mixed`` (significant shifts of both signs) or
        ``indeterminate`` (no significant shift)
    reason : why, in words
    n_significant, n_negative, n_positive : significant points and their signs
    z : the sign's evidence: the signed ``shift/stderr`` of the strongest significant point of the
        called sign (for ``mixed``: of the strongest point overall); NaN when nothing is significant
    p_value : the Sidak-adjusted two-sided p-value of that point (family-wise over the target's
        points): the probability that noise alone gives a point this far from zero
    z_other, p_other : for ``mixed``, the strongest significant point of the other sign
    significance : the family-wise test behind the call
    """

    target: str
    cls: str
    reason: str
    n_significant: int
    n_negative: int
    n_positive: int
    z: float = math.nan
    p_value: float = math.nan
    z_other: float = math.nan
    p_other: float = math.nan
    significance: Significance | None = None

    def to_dict(self) -> dict:
        return {"class": self.cls, "reason": self.reason, "n_significant": self.n_significant,
                "n_falling": self.n_negative, "n_rising": self.n_positive, "z": self.z,
                "p_value": self.p_value, "z_other_sign": self.z_other, "p_other_sign": self.p_other}


def _strongest(sig: Significance, mask: np.ndarray) -> tuple[float, float]:
    if not mask.any():
        return math.nan, math.nan
    i = int(np.flatnonzero(mask)[np.argmax(np.abs(sig.z[mask]))])
    return float(sig.z[i]), float(sig.p_adjusted[i])


def format_p(p: float, name: str = "p") -> str:
    """A p-value for people: ``p = 0.0312``, or ``p < 1e-300`` where it underflows."""
    if not math.isfinite(p):
        return f"{name} undefined"
    return f"{name} < 1e-300" if p < 1e-300 else f"{name} = {p:.3g}"


def classify_points(target: str, points: list[Point], polarity: str = "normal",
                    alpha: float = FAMILY_ALPHA) -> Classification:
    """Ferrous / non-ferrous / mixed / indeterminate from the signs of the significant shifts.

    A point is significant when its Sidak-adjusted p-value over the target's points is at most
    ``alpha`` (:func:`~.significance.family_test`).

    Parameters
    ----------
    target : target name
    points : its combined calibration points
    polarity : ``normal`` (frequency down = inductance up) or ``inverted``
    alpha : family-wise level

    Returns
    -------
    Classification
    """
    if polarity not in POLARITIES:
        raise ValueError(f"polarity must be one of {POLARITIES}, got {polarity!r}")
    sig = family_test([p.shift_hz for p in points], [p.stderr_hz for p in points], alpha)
    y = np.array([p.shift_hz for p in points], float)
    neg_mask = sig.significant & (y < 0)
    pos_mask = sig.significant & (y > 0)
    neg, pos = int(neg_mask.sum()), int(pos_mask.sum())
    if not sig.seen:
        return Classification(target, INDETERMINATE, f"no significant shift at any of {len(points)} distance(s) "
                              f"({sig.rule()}; smallest {format_p(sig.p_family, 'adjusted p')})", 0, 0, 0,
                              significance=sig)
    if neg and pos:
        zn, pn = _strongest(sig, neg_mask)
        zp, pp = _strongest(sig, pos_mask)
        first, other = ((zn, pn), (zp, pp)) if abs(zn) >= abs(zp) else ((zp, pp), (zn, pn))
        return Classification(target, MIXED, f"significant shifts of both signs ({neg} falling, strongest z = "
                              f"{zn:+.1f}, {format_p(pn)}; {pos} rising, strongest z = {zp:+.1f}, "
                              f"{format_p(pp)}): mixed permeable/eddy response, or an unstable run",
                              neg + pos, neg, pos, first[0], first[1], other[0], other[1], sig)
    falling = neg > 0
    z, p = _strongest(sig, neg_mask if falling else pos_mask)
    ferrous = falling if polarity == "normal" else not falling
    direction = "falls" if falling else "rises"
    cls = FERROUS if ferrous else NON_FERROUS
    why = "inductance up: permeable" if ferrous else "inductance down: eddy currents"
    return Classification(target, cls, f"frequency {direction} at {neg + pos} significant distance(s), strongest "
                          f"z = {z:+.1f} ({format_p(p, 'adjusted p')}; {polarity} polarity: {why})",
                          neg + pos, neg, pos, z, p, significance=sig)


@dataclass(frozen=True)
class ReferenceCheck:
    """A reference target of declared kind against its call (for the report's polarity table)."""

    target: str
    declared: str
    called: str | None  # None: the target is not in the run
    agrees: bool | None  # None: no clear call, so the polarity was not checked

    def to_dict(self) -> dict:
        return {"target": self.target, "declared": self.declared, "called": self.called, "agrees": self.agrees}


def reference_checks(classes: dict[str, Classification], reference: dict[str, str]) -> list[ReferenceCheck]:
    """Each reference target's declared kind beside its call."""
    out = []
    for name, declared in reference.items():
        c = classes.get(name)
        if c is None:
            out.append(ReferenceCheck(name, declared, None, None))
        elif c.cls in CLASSES:
            out.append(ReferenceCheck(name, declared, c.cls, c.cls == declared))
        else:
            out.append(ReferenceCheck(name, declared, c.cls, None))
    return out


def check_reference(classes: dict[str, Classification], reference: dict[str, str],
                    polarity: str) -> list[str]:
    """Warnings where a reference target's declared kind disagrees with its call.

    Parameters
    ----------
    classes : calls by target name
    reference : declared kind by target name (``ferrous`` / ``non-ferrous``)
    polarity : the polarity used

    Returns
    -------
    list of one-line warnings (empty when every reference agrees)
    """
    out = []
    other = "inverted" if polarity == "normal" else "normal"
    for name, declared in reference.items():
        c = classes.get(name)
        if c is None:
            out.append(f"reference target {name!r} is not in the run")
        elif c.cls not in CLASSES:
            out.append(f"reference target {name!r} ({declared}) gave no clear call ({c.cls}): polarity not checked")
        elif c.cls != declared:
            out.append(f"reference target {name!r} is declared {declared} but reads {c.cls} with "
                       f"{polarity} polarity: the polarity is probably {other} (prescaler, aliasing "
                       f"or oscillator topology); rerun with --polarity {other}")
    return out
