"""docs/tracker.md lists every flag with whether analysis drops it, as flags.UNUSABLE says."""

from __future__ import annotations

import re
from pathlib import Path

from coilshift.logger.runfolder import flags as fl

DOC = Path(__file__).resolve().parents[3] / "docs" / "tracker.md"


def test_every_flag_documented_with_its_drop():
    rows = re.findall(r"^\| `([a-z_]+)` \| .+ \| (yes|no) \|$", DOC.read_text(encoding="utf-8"), flags=re.M)
    documented = dict(rows)
    assert set(documented) == set(fl.NAMES.values())
    for bit, word in fl.NAMES.items():
        assert (documented[word] == "yes") == bool(fl.UNUSABLE & bit), word


def test_unusable_holds_every_flag_that_means_the_frequency_may_be_wrong():
    # the frequency may be wrong: no tone or not the one asked for, samples lost in or before the
    # frame, a tone that is not stationary over the frame, folded lines too close to separate
    for bit in (fl.NO_TONE, fl.OUT_OF_BAND, fl.GAP, fl.OVERFLOW, fl.EDGE, fl.ALIAS_CLOSE):
        assert fl.UNUSABLE & bit
    # still good: noisier, clipped (odd harmonics, cancelled), a marker, folded lines cancelled
    for bit in (fl.LOW_SNR, fl.CLIPPED, fl.MARKER, fl.ALIASED):
        assert not fl.UNUSABLE & bit
    # log.csv spelling round-trips
    every = 0
    for bit in fl.NAMES:
        every |= bit
    assert fl.from_text(fl.to_text(every)) == every
