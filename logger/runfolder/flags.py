"""Per-frame quality flags: a bit mask in memory, ``;``-separated words in log.csv."""

from __future__ import annotations

import numpy as np

CLIPPED = 1 << 0  # samples at or near full scale inside the frame
LOW_SNR = 1 << 1  # tone found but its SNR is below the tracker's threshold
NO_TONE = 1 << 2  # no tone distinguishable from noise; freq_hz is empty
OUT_OF_BAND = 1 << 3  # strongest tone lies outside the requested band
GAP = 1 << 4  # samples missing before this frame (dropped input, device fault)
OVERFLOW = 1 << 5  # the audio stream reported an input overflow in this frame
MARKER = 1 << 6  # a user marker was set at this frame (live capture)

NAMES = {
    CLIPPED: "clipped",
    LOW_SNR: "low_snr",
    NO_TONE: "no_tone",
    OUT_OF_BAND: "out_of_band",
    GAP: "gap",
    OVERFLOW: "overflow",
    MARKER: "marker",
}
_BY_NAME = {name: bit for bit, name in NAMES.items()}

#: flags that make a frame's frequency unusable for analysis
UNUSABLE = NO_TONE | OUT_OF_BAND | GAP


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
