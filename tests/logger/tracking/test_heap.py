"""The tracker's heap setting: glibc's mallopt accepts it, once per process, and tracking does not depend on it."""

from __future__ import annotations

import subprocess
import sys

import pytest

from coilshift.logger.tracking.heap import reuse_freed_memory

CHILD = """
import sys
import numpy as np
from coilshift.logger.tracking import heap
if sys.argv[1] == "off":
    heap.reuse_freed_memory = lambda: False  # the tracker then runs with glibc's defaults
from coilshift.logger.tracking.tracker import track_array
rng = np.random.default_rng(3)
t = np.arange(48000 * 8) / 48000  # 400 frames: two chunks, the second in reused pages
x = 0.5 * np.sin(2 * np.pi * 1234.567 * t) + 0.01 * rng.standard_normal(t.size)
ft = track_array(x, 48000.0)
sys.stdout.write(np.concatenate([ft.freq_hz, ft.amp_dbfs, ft.snr_db, ft.flags]).tobytes().hex())
"""


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="glibc's mallopt")
def test_mallopt_accepts_the_thresholds():
    # mallopt returns 1 on success (glibc manual, "Malloc Tunable Parameters"); a second call is a no-op
    assert reuse_freed_memory() is True
    assert reuse_freed_memory() is True


def test_results_do_not_depend_on_the_heap_setting():
    # the same frames, bit for bit, with glibc's default thresholds and with the raised ones
    out = [subprocess.run([sys.executable, "-c", CHILD, mode], capture_output=True, text=True, check=True).stdout
           for mode in ("on", "off")]
    assert out[0] and out[0] == out[1]
