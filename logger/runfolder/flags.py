"""Per-frame quality flags: a bit mask in memory, ``;``-separated words in log.csv.

:data:`UNUSABLE` is the set analysis and stability drop by default
(:meth:`~coilshift.logger.runfolder.reader.FrequencyLog.usable`): every flag that means "this
frame's frequency may be wrong". The others describe a frame whose frequency is still good.
docs/tracker.md lists them all with the reason for each choice.
"""

from __future__ import annotations

import numpy as np

CLIPPED = 1 << 0  # samples at or near full scale inside the frame
LOW_SNR = 1 << 1  # tone found but its SNR is below the tracker's threshold
NO_TONE = 1 << 2  # no tone distinguishable from noise; freq_hz is empty
OUT_OF_BAND = 1 << 3  # strongest tone lies outside the requested (or searchable) band
GAP = 1 << 4  # samples missing before this frame (dropped input, device fault)
OVERFLOW = 1 << 5  # the audio stream reported an input overflow in this frame
MARKER = 1 << 6  # a user marker was set at this frame (live capture)
EDGE = 1 << 7  # the tone starts, stops or jumps inside the frame
ALIASED = 1 << 8  # the signal carries folded (aliased) harmonics: the input was not band-limited
ALIAS_CLOSE = 1 << 9  # a folded harmonic lies too close to the measured line to be separated

NAMES = {
    CLIPPED: "clipped",
    LOW_SNR: "low_snr",
    NO_TONE: "no_tone",
    OUT_OF_BAND: "out_of_band",
    GAP: "gap",
    OVERFLOW: "overflow",
    MARKER: "marker",
    EDGE: "edge",
    ALIASED: "aliased",
    ALIAS_CLOSE: "alias_close",
}
_BY_NAME = {name: bit for bit, name in NAMES.items()}

#: flags that make a frame's frequency unusable for analysis: no tone or not the tone asked for
#: (no_tone, out_of_band), samples lost inside or before the frame (gap, overflow), a tone that
#: is not stationary over the frame (edge), a folded line too close to separate (alias_close)
UNUSABLE = NO_TONE | OUT_OF_BAND | GAP | OVERFLOW | EDGE | ALIAS_CLOSE


def to_text(mask: int) -> str:
    """Return the log.csv spelling of a flag mask, e.g. ``"clipped;low_snr"`` ('' for none)."""
    return ";".join(name for bit, name in NAMES.items() if mask & bit)


def from_text(text: str) -> int:
    """Parse a log.csv flags cell back to a mask; unknown words are ignored."""
    mask = 0
    if not isinstance(text, str):
        return 0
    for word in text.split(";"):
        mask |= _BY_NAME.get(word.strip(), 0)
    return mask


def column_from_text(cells) -> np.ndarray:
    """Vectorised :func:`from_text` over a column of cells (NaN or '' -> 0)."""
    cache: dict = {}
    out = np.zeros(len(cells), dtype=np.int64)
    for i, cell in enumerate(cells):
        if cell not in cache:
            cache[cell] = from_text(cell)
        out[i] = cache[cell]
    return out
