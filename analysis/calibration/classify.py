"""Ferrous or non-ferrous: the sign of a target's significant shifts.

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

from coilshift.analysis.calibration.steps import Point

FERROUS = "ferrous"
NON_FERROUS = "non-ferrous"
INDETERMINATE = "indeterminate"
CLASSES = (FERROUS, NON_FERROUS)
POLARITIES = ("normal", "inverted")
#: a shift counts as significant when it is this many standard errors from zero ...
SIGNIFICANCE_Z = 3.0
# ... and at or above the detection threshold when one is known

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
    """Call for one target.

    Attributes
    ----------
    target : name
    cls : ``ferrous``, ``non-ferrous`` or ``indeterminate``
    reason : why (counts of significant points and their signs)
    n_significant, n_negative, n_positive : significant points and their signs
    """

    target: str
    cls: str
    reason: str
    n_significant: int
    n_negative: int
    n_positive: int


def is_significant(shift_hz: float, stderr_hz: float, threshold_hz: float = math.nan,
                   z: float = SIGNIFICANCE_Z) -> bool:
    """``|shift| >= z * stderr`` and, when a threshold is known, ``|shift| >= threshold``."""
    if not math.isfinite(shift_hz):
        return False
    err_ok = math.isfinite(stderr_hz) and abs(shift_hz) >= z * stderr_hz
    thr_ok = (not math.isfinite(threshold_hz)) or abs(shift_hz) >= threshold_hz
    return bool(err_ok and thr_ok)


def classify_points(target: str, points: list[Point], threshold_hz: float = math.nan,
                    polarity: str = "normal") -> Classification:
    """Ferrous / non-ferrous / indeterminate from the signs of a target's significant shifts.

    Parameters
    ----------
    target : target name
    points : its combined calibration points
    threshold_hz : detection threshold (NaN: significance from the errors alone)
    polarity : ``normal`` (frequency down = inductance up) or ``inverted``

    Returns
    -------
    Classification : indeterminate when no shift is significant or the signs disagree
    """
    if polarity not in POLARITIES:
        raise ValueError(f"polarity must be one of {POLARITIES}, got {polarity!r}")
    sig = [p for p in points if is_significant(p.shift_hz, p.stderr_hz, threshold_hz)]
    neg = sum(1 for p in sig if p.shift_hz < 0)
    pos = len(sig) - neg
    rule = (f"|shift| >= {SIGNIFICANCE_Z:g} stderr" +
            (f" and >= threshold {threshold_hz:.4g} Hz" if math.isfinite(threshold_hz) else ""))
    if not sig:
        return Classification(target, INDETERMINATE,
                              f"no significant shift ({rule}) at any of {len(points)} distance(s)", 0, 0, 0)
    if neg and pos:
        return Classification(target, INDETERMINATE,
                              f"significant shifts disagree in sign ({neg} falling, {pos} rising): "
                              "mixed permeable/eddy response or an unstable run", len(sig), neg, pos)
    falling = neg > 0
    ferrous = falling if polarity == "normal" else not falling
    direction = "falls" if falling else "rises"
    cls = FERROUS if ferrous else NON_FERROUS
    why = "inductance up: permeable" if ferrous else "inductance down: eddy currents"
    return Classification(target, cls, f"frequency {direction} at {len(sig)} significant distance(s) "
                          f"({polarity} polarity: {why})", len(sig), neg, pos)


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
        elif c.cls == INDETERMINATE:
            out.append(f"reference target {name!r} ({declared}) gave no clear call: polarity not checked")
        elif c.cls != declared:
            out.append(f"reference target {name!r} is declared {declared} but reads {c.cls} with "
                       f"{polarity} polarity: the polarity is probably {other} (prescaler, aliasing "
                       f"or oscillator topology); rerun with --polarity {other}")
    return out
