"""Keep the C heap from handing the tracker's freed chunk arrays back to the kernel after every chunk.

Each chunk of frames allocates a few arrays of several MB (the float32 frames, their spectrum,
the power spectrum) and frees them at its end. With glibc's default settings, arrays this large
are mapped fresh from the kernel, or the freed top of the heap is trimmed and grown again, so
every chunk pays a page fault and a page of zeroing per 4 kB touched: the largest single cost
of ``coilshift track`` before this (docs/tracker.md, "Speed of track"), with the results bit for
bit the same either way. Raising glibc's mmap and
trim thresholds (``mallopt``, glibc manual, "Malloc Tunable Parameters") lets those pages be
reused. The peak memory is unchanged; memory freed after the peak stays with the process (up to
:data:`TRIM_BYTES`) instead of going back to the system. Elsewhere than glibc this does nothing.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import sys

#: glibc's mallopt parameter numbers (malloc.h)
_M_TRIM_THRESHOLD = -1
_M_MMAP_THRESHOLD = -3
#: allocations up to this size come from the heap (glibc's own ceiling for its adaptive threshold)
MMAP_BYTES = 32 * 1024 * 1024
#: free memory at the top of the heap is returned to the kernel only beyond this
TRIM_BYTES = 128 * 1024 * 1024

_done = False


def reuse_freed_memory() -> bool:
    """Set the two glibc thresholds once per process; True when they were set (now or before)."""
    global _done
    if _done:
        return True
    if not sys.platform.startswith("linux"):
        return False
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
        mallopt = libc.mallopt
    except (OSError, AttributeError):  # not glibc (musl has no mallopt)
        return False
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    mallopt.restype = ctypes.c_int
    _done = bool(mallopt(_M_MMAP_THRESHOLD, MMAP_BYTES)) and bool(mallopt(_M_TRIM_THRESHOLD, TRIM_BYTES))
    return _done
