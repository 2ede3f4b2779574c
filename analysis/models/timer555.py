"""555-timer astable oscillators: frequency from parts, and parts for a wanted frequency.

Published formulas
------------------
- Two-resistor astable (NE555 datasheets): R1 from the supply to discharge, R2 from discharge
  to the timing capacitor C; the capacitor swings between Vcc/3 and 2 Vcc/3, so
  t_high = ln 2 (R1 + R2) C, t_low = ln 2 R2 C, f = 1 / (ln 2 (R1 + 2 R2) C); datasheets round
  ln 2 to 0.693 and 1/ln 2 to 1.44. Duty cycle (R1 + R2) / (R1 + 2 R2) is always above 50 %.
- One-resistor astable (CMOS 555 application notes): R from the output to C, trigger and
  threshold tied to C; t_high = t_low = ln 2 R C, f = 1 / (2 ln 2 R C) = 1 / (1.386 R C). Needs
  an output that swings rail to rail (CMOS parts), otherwise the duty cycle is off.
- Standard values: IEC 60063 E6/E12/E24 series.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from coilshift.logger.errors import InputError

LN2 = math.log(2.0)

E_SERIES = {
    "E6": (1.0, 1.5, 2.2, 3.3, 4.7, 6.8),
    "E12": (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2),
    "E24": (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
            3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1),
}

# Timing resistors outside this range make a 555 astable unreliable (leakage and threshold
# currents above, discharge-transistor current below): common practice.
R_MIN_OHM = 1e3
R_MAX_OHM = 1e6


@dataclass(frozen=True)
class AstableTiming:
    """Timing of a 555 astable: frequency, high and low times, duty cycle, and the parts."""

    config: str
    freq_hz: float
    t_high_s: float
    t_low_s: float
    duty: float
    r1_ohm: float
    r2_ohm: float | None
    cap_nf: float

    def to_dict(self) -> dict:
        return dict(self.__dict__)


def _check_positive(**values) -> None:
    for name, v in values.items():
        if v is None:
            continue
        if not (isinstance(v, (int, float)) and math.isfinite(v) and v > 0):
            raise InputError(f"555 astable: {name} must be positive, got {v!r}")


def astable_two_resistor(r1_ohm: float, r2_ohm: float, cap_nf: float) -> AstableTiming:
    """Two-resistor 555 astable (NE555 datasheet): t_high = ln2 (R1+R2) C, t_low = ln2 R2 C."""
    _check_positive(r1_ohm=r1_ohm, r2_ohm=r2_ohm, cap_nf=cap_nf)
    c = cap_nf * 1e-9
    t_high = LN2 * (r1_ohm + r2_ohm) * c
    t_low = LN2 * r2_ohm * c
    period = t_high + t_low
    return AstableTiming("two_resistor", 1.0 / period, t_high, t_low, t_high / period, r1_ohm, r2_ohm, cap_nf)


def astable_one_resistor(r_ohm: float, cap_nf: float) -> AstableTiming:
    """One-resistor CMOS 555 astable: f = 1 / (2 ln2 R C), 50 % duty with a rail-to-rail output."""
    _check_positive(r_ohm=r_ohm, cap_nf=cap_nf)
    t = LN2 * r_ohm * cap_nf * 1e-9
    return AstableTiming("one_resistor", 1.0 / (2.0 * t), t, t, 0.5, r_ohm, None, cap_nf)


def nearest_standard(value: float, series: str = "E24") -> float:
    """The nearest IEC 60063 standard value (in the log sense) of the given series."""
    try:
        mantissas = E_SERIES[series.upper()]
    except KeyError:
        raise InputError(f"series {series!r}: use one of {', '.join(E_SERIES)}") from None
    _check_positive(value=value)
    decade = math.floor(math.log10(value))
    candidates = [m * 10.0 ** (decade + s) for s in (-1, 0, 1) for m in mantissas]
    return min(candidates, key=lambda x: abs(math.log(x / value)))


def design_two_resistor(freq_hz: float, cap_nf: float, duty: float = 0.6,
                        series: str | None = "E24") -> AstableTiming:
    """R1, R2 for a two-resistor astable at ``freq_hz`` with ``duty`` (0.5 < duty < 1).

    From the datasheet formulas: R1 + 2 R2 = 1 / (ln2 f C), R2 = (1 - duty)(R1 + 2 R2),
    R1 = (2 duty - 1)(R1 + 2 R2). With ``series`` the resistors are rounded to standard values
    and the timing is recomputed from the rounded parts.
    """
    _check_positive(freq_hz=freq_hz, cap_nf=cap_nf)
    if not 0.5 < duty < 1.0:
        raise InputError(f"555 astable: duty {duty!r} must be above 0.5 and below 1 for the two-resistor "
                         f"circuit (use the one-resistor circuit for 50 %)")
    total = 1.0 / (LN2 * freq_hz * cap_nf * 1e-9)
    r1, r2 = (2.0 * duty - 1.0) * total, (1.0 - duty) * total
    if not series:
        return astable_two_resistor(r1, r2, cap_nf)
    # try the standard values around each ideal resistor; keep the pair closest in frequency,
    # the duty cycle breaking near-ties
    best = None
    for c1 in _neighbours(r1, series):
        for c2 in _neighbours(r2, series):
            t = astable_two_resistor(c1, c2, cap_nf)
            cost = abs(math.log(t.freq_hz / freq_hz)) + 0.1 * abs(t.duty - duty)
            if best is None or cost < best[0]:
                best = (cost, t)
    return best[1]


def _neighbours(value: float, series: str) -> list[float]:
    """The standard values just below and above ``value`` (and the nearest), at most three."""
    near = nearest_standard(value, series)
    mantissas = E_SERIES[series.upper()]
    decade = math.floor(math.log10(near))
    ladder = sorted(m * 10.0 ** (decade + s) for s in (-1, 0, 1) for m in mantissas)
    i = min(range(len(ladder)), key=lambda j: abs(ladder[j] - near))
    return ladder[max(i - 1, 0):i + 2]


def design_one_resistor(freq_hz: float, cap_nf: float, series: str | None = "E24") -> AstableTiming:
    """R for a one-resistor CMOS astable at ``freq_hz``: R = 1 / (2 ln2 f C), optionally rounded."""
    _check_positive(freq_hz=freq_hz, cap_nf=cap_nf)
    r = 1.0 / (2.0 * LN2 * freq_hz * cap_nf * 1e-9)
    if series:
        r = nearest_standard(r, series)
    return astable_one_resistor(r, cap_nf)


def suggest_cap_nf(freq_hz: float, target_r_ohm: float = 10e3, series: str = "E6") -> float:
    """A standard timing capacitor that puts R1 + 2 R2 near ``target_r_ohm`` at ``freq_hz``."""
    _check_positive(freq_hz=freq_hz, target_r_ohm=target_r_ohm)
    return nearest_standard(1e9 / (LN2 * freq_hz * target_r_ohm), series)


def resistor_warnings(timing: AstableTiming) -> list[str]:
    """Cautions for resistors outside the usual 1 kohm - 1 Mohm range (common practice)."""
    out = []
    for name, r in (("R1", timing.r1_ohm), ("R2", timing.r2_ohm)):
        if r is not None and not R_MIN_OHM <= r <= R_MAX_OHM:
            out.append(f"{name} = {r:.4g} ohm is outside the usual 1 kohm - 1 Mohm; choose another capacitor")
    return out
