"""Test tones from an independent generator: SoX's ``synth`` effect, written to WAV files.

SoX is outside the project (https://sox.sourceforge.net; installed by .ci/run). Its synth effect
(SoX 14.4, src/synth.c, ``flow``) computes every sample's phase afresh as ``freq * n / rate``
(no accumulated phase, the "linear sweep" with equal start and end frequency), so the
fundamental of a file is exactly the frequency given on the command line. The waveforms, from
the same function, with ``phase`` in 0..1:

* ``sine``: ``sin(2 pi phase)``; ``triangle``: rising to the peak at ``p1`` (default 1/2), falling
  after; ``sawtooth``: ``-1 + 2 phase``;
* ``square``: ``+1`` while ``phase < p1``, else ``-1``; ``p1`` defaults to 1/2, and ``square f 0 0
  10`` (offset 0, phase 0, ``p1`` = 10 %) is a 10 % pulse wave.

Written at the file's own rate, every harmonic above fs/2 folds back (aliasing, as in an
oscilloscope export of a logic-level oscillator). The band-limited version is synthesised at
OVERSAMPLE times the rate and brought down by SoX's ``rate -v`` (its very-high-quality
resampler), so harmonics above the new fs/2 are filtered out; only those above the high rate's
half still fold, from harmonic 256 fs / f0 on (about 940 for a 12 kHz square at 44.1 kHz,
-60 dB). At 64 times the rate those residual lines still moved a 1.2 kHz sawtooth at 48 kHz by
1 mHz (median), at 256 times by 0.13 mHz at most over the test grid, at 1024 times by 0.014 mHz
(measured while writing this). ``-R`` makes SoX's dither repeatable, so every run writes the
same files.
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

#: synth arguments after the frequency: offset, phase, p1 (percent)
WAVES = {
    "sine": ("sine", ()),
    "triangle": ("triangle", ()),
    "square": ("square", ()),
    "sawtooth": ("sawtooth", ()),
    "pulse10": ("square", ("0", "0", "10")),
    "pulse25": ("square", ("0", "0", "25")),
}
#: band-limited files are synthesised at this multiple of their rate
OVERSAMPLE = 256
#: peak amplitude (SoX's vol effect) of every file
VOLUME = 0.5


def sox_available() -> bool:
    return shutil.which("sox") is not None


def synth(out_dir: Path, wave: str, freq_hz: float, rate_hz: int, bits: int, seconds: float,
          band_limited: bool) -> Path:
    """Write (once per folder) a SoX tone and return its path."""
    kind, params = WAVES[wave]
    name = f"{wave}_{freq_hz!r}_{rate_hz}_{bits}_{'bl' if band_limited else 'al'}_{seconds!r}.wav"
    path = Path(out_dir) / name
    if path.exists():
        return path
    gen_rate = rate_hz * OVERSAMPLE if band_limited else rate_hz
    cmd = ["sox", "-R", "-r", str(gen_rate), "-n", "-b", str(bits), str(path),
           "synth", repr(seconds), kind, repr(freq_hz), *params, "vol", str(VOLUME)]
    if band_limited:
        cmd += ["rate", "-v", str(rate_hz)]
    subprocess.run(cmd, check=True, capture_output=True)
    return path
