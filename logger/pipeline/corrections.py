"""Turn the tracker's raw frequencies into the oscillator's frequency, and check the level.

The tracker measures the tone *as the soundcard sees it*: times counted in samples at the
nominal sample rate, frequencies relative to that rate, folded into 0..fs/2. Three corrections
map that back to the oscillator, applied in this order:

1. **Sample clock** (``clock_ppm``). The converter really runs at
   ``fs_true = fs_nominal (1 + ppm 1e-6)``. A tone counted against the nominal rate reads
   ``f_raw = f fs_nominal / fs_true``, so ``f = f_raw (1 + ppm 1e-6)``; a frame at sample
   time ``t_raw = n / fs_nominal`` really happened at ``t = n / fs_true = t_raw / (1 + ppm 1e-6)``.
2. **Nyquist zone** (``nyquist_zone = K``). Sampling folds any tone into zone 1 (0..fs/2).
   A tone known to lie in zone K, ``(K-1) fs/2 .. K fs/2``, is unfolded from the apparent
   frequency ``f_a`` (clock-corrected, with ``fs = fs_true``):
   odd K: ``f = (K-1)/2 fs + f_a``; even K: ``f = K/2 fs - f_a``.
   In even zones the apparent frequency moves OPPOSITE to the true one: a ferrous target that
   lowers the oscillator raises the recorded tone.
3. **Prescaler** (``divide = N``). A divide-by-N counter between oscillator and soundcard
   records ``f_osc / N``; the oscillator's frequency is ``N f``. Step 2 comes first because it
   is the divided tone that was sampled (and folded).

Amplitudes, SNR and flags pass through unchanged.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from coilshift.logger.runfolder import flags as _flags
from coilshift.logger.errors import InputError, setting
from coilshift.logger.runfolder.frames import FrameTable

#: a frame level below this (median over frames with a tone) earns a low-level warning; at
#: -60 dBFS a 16-bit consumer line-in keeps only some 30-40 dB above its noise floor
#: (typical figure, from memory)
LOW_LEVEL_DBFS = -60.0


@dataclass(frozen=True)
class Corrections:
    """Clock error, Nyquist zone and prescaler applied to raw tracker frames (see module notes).

    Parameters
    ----------
    clock_ppm : soundcard sample-clock error, parts per million (positive = the card samples
        faster than its nominal rate).
    divide : prescaler ratio N >= 1 between oscillator and input.
    nyquist_zone : zone K >= 1 of the (divided) tone; 1 = 0..fs/2.
    """

    clock_ppm: float = 0.0
    divide: int = 1
    nyquist_zone: int = 1

    def __post_init__(self) -> None:
        if not np.isfinite(self.clock_ppm) or abs(self.clock_ppm) >= 1e5:
            raise InputError(f"clock correction ({setting('clock_ppm')}): {self.clock_ppm} ppm is not a plausible clock error")
        if int(self.divide) != self.divide or self.divide < 1:
            raise InputError(f"prescaler ({setting('divide')}): ratio must be a whole number >= 1, got {self.divide}")
        if int(self.nyquist_zone) != self.nyquist_zone or self.nyquist_zone < 1:
            raise InputError(f"Nyquist zone ({setting('nyquist_zone')}) must be a whole number >= 1, got {self.nyquist_zone}")
        object.__setattr__(self, "divide", int(self.divide))
        object.__setattr__(self, "nyquist_zone", int(self.nyquist_zone))

    @property
    def clock_factor(self) -> float:
        """``fs_true / fs_nominal = 1 + ppm 1e-6``."""
        return 1.0 + self.clock_ppm * 1e-6

    @property
    def inverts_shift(self) -> bool:
        """True in even Nyquist zones, where the recorded tone moves against the oscillator."""
        return self.nyquist_zone % 2 == 0

    @property
    def is_identity(self) -> bool:
        return self.clock_ppm == 0 and self.divide == 1 and self.nyquist_zone == 1

    def true_sample_rate_hz(self, sample_rate_hz: float) -> float:
        return sample_rate_hz * self.clock_factor

    def freq_to_true(self, freq_raw_hz, sample_rate_hz: float) -> np.ndarray:
        """Raw tracker frequency (Hz at the nominal rate, zone 1) -> oscillator frequency (Hz)."""
        fs = self.true_sample_rate_hz(sample_rate_hz)
        f_a = np.asarray(freq_raw_hz, dtype=float) * self.clock_factor
        k = self.nyquist_zone
        if k % 2:
            f = (k - 1) / 2.0 * fs + f_a
        else:
            f = k / 2.0 * fs - f_a
        return f * self.divide

    def freq_to_raw(self, freq_true_hz, sample_rate_hz: float) -> np.ndarray:
        """Inverse of :meth:`freq_to_true`: where an oscillator frequency shows up in the recording.

        Returns NaN for frequencies that do not fall in the configured Nyquist zone.
        """
        fs = self.true_sample_rate_hz(sample_rate_hz)
        f = np.asarray(freq_true_hz, dtype=float) / self.divide
        k = self.nyquist_zone
        f_a = f - (k - 1) / 2.0 * fs if k % 2 else k / 2.0 * fs - f
        f_a = np.where((f_a >= 0) & (f_a <= fs / 2.0), f_a, np.nan)
        return f_a / self.clock_factor

    def time_to_true(self, t_raw_s) -> np.ndarray:
        """Sample-count time at the nominal rate -> real elapsed time (s)."""
        return np.asarray(t_raw_s, dtype=float) / self.clock_factor

    def apply(self, frames: FrameTable, sample_rate_hz: float) -> FrameTable:
        """Return a new table with true times and oscillator frequencies (NaN stays NaN)."""
        if self.is_identity:
            return frames.replace()
        return frames.replace(t_s=self.time_to_true(frames.t_s),
                              freq_hz=self.freq_to_true(frames.freq_hz, sample_rate_hz))

    def warnings(self, raw_frames: FrameTable | None = None, sample_rate_hz: float | None = None) -> list[str]:
        """Warnings the user must see: inverted shift sign, tones at a zone edge (ambiguous)."""
        out = []
        if self.inverts_shift:
            out.append(f"WARNING: NYQUIST ZONE {self.nyquist_zone} IS AN EVEN ZONE: THE RECORDED TONE MOVES "
                       f"OPPOSITE TO THE OSCILLATOR (APPARENT SHIFT SIGN INVERTED); the log holds the "
                       f"unfolded frequency with the true sign")
        if self.nyquist_zone > 1 and raw_frames is not None and sample_rate_hz:
            f = raw_frames.freq_hz[np.isfinite(raw_frames.freq_hz)]
            edge = 0.01 * sample_rate_hz / 2.0
            if len(f) and (np.any(f < edge) or np.any(f > sample_rate_hz / 2.0 - edge)):
                out.append("warning: the recorded tone comes within 1% of a Nyquist-zone edge; "
                           "unfolding there is ambiguous")
        return out

    def to_dict(self) -> dict:
        return {
            "clock_ppm": self.clock_ppm,
            "divide": self.divide,
            "nyquist_zone": self.nyquist_zone,
            "apparent_shift_sign_inverted": self.inverts_shift,
            "order": ["clock: f *= (1 + ppm 1e-6), t /= (1 + ppm 1e-6)",
                      "nyquist zone K: odd f = (K-1)/2 fs + f_a, even f = K/2 fs - f_a (fs = true rate)",
                      "prescaler: f *= divide"],
        }


def clock_ppm_from_tone(measured_hz: float, reference_hz: float) -> float:
    """Soundcard clock error from a reference tone of known frequency.

    A tone of exactly ``reference_hz`` recorded by a card whose clock runs at
    ``fs_nominal (1 + ppm 1e-6)`` and analysed against the nominal rate reads
    ``measured = reference / (1 + ppm 1e-6)``, hence ``ppm = (reference / measured - 1) 1e6``
    (the exact inverse of the clock step in :class:`Corrections`).
    """
    if not (measured_hz > 0 and reference_hz > 0):
        raise InputError(f"clock measurement: frequencies must be positive ({measured_hz}, {reference_hz})")
    return (reference_hz / measured_hz - 1.0) * 1e6


def level_warnings(frames: FrameTable, low_level_dbfs: float = LOW_LEVEL_DBFS) -> list[str]:
    """Clipping and low-level warnings from raw-level frames (amplitudes in dBFS).

    Reports the fraction of frames the tracker flagged CLIPPED (any clipping distorts the wave and
    can pull the frequency estimate), and a median tone level below ``low_level_dbfs``.
    """
    out: list[str] = []
    n = len(frames)
    if n == 0:
        return out
    clipped = int(np.count_nonzero(frames.flags & _flags.CLIPPED))
    if clipped:
        out.append(f"warning: {clipped} of {n} frames ({100.0 * clipped / n:.2f}%) are clipped: "
                   f"lower the input level")
    tone = np.isfinite(frames.amp_dbfs) & np.isfinite(frames.freq_hz) & ((frames.flags & _flags.NO_TONE) == 0)
    if tone.any():
        level = float(np.median(frames.amp_dbfs[tone]))
        if level < low_level_dbfs:
            out.append(f"warning: the input level is very low (median {level:.1f} dBFS): raise the gain "
                       f"for a better SNR")
    return out
