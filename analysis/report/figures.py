"""Figure set-up shared by every plot: the Agg backend, new figures, and saving as PNG.

Plot modules make their figures here, never through pyplot themselves, so the backend is chosen
once, before pyplot is loaded, and every figure is saved and closed the same way: PNG bytes in
memory, then (given a path) one atomic write, so a finished plot appears whole or not at all.
"""

from __future__ import annotations

import io
import os

import matplotlib
import numpy as np

matplotlib.use("Agg")  # files only, never a window
import matplotlib.pyplot as plt  # noqa: E402

from coilshift.logger.runfolder.atomic import write_bytes_atomic  # noqa: E402

#: resolution of the stand-alone plot files
DPI = 120
#: most points a time-series trace is drawn with
MAX_TRACE_POINTS = 20000
#: matplotlib's default colour cycle, for plots that colour by target or run
COLORS: tuple[str, ...] = tuple(plt.rcParams["axes.prop_cycle"].by_key()["color"])


def subplots(nrows: int = 1, ncols: int = 1, **kwargs):
    """A new figure and its axes (arguments as :func:`matplotlib.pyplot.subplots`)."""
    return plt.subplots(nrows, ncols, **kwargs)


def png_bytes(fig, dpi: float = DPI) -> bytes:
    """The figure as PNG bytes; the figure is closed (its memory freed) afterwards."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    plt.close(fig)
    return buf.getvalue()


def save_png(fig, path: str | os.PathLike | None, dpi: float = DPI) -> bytes:
    """Close the figure and return it as PNG bytes, written atomically to ``path`` when given."""
    data = png_bytes(fig, dpi)
    if path is not None:
        write_bytes_atomic(path, data)
    return data


def decimate_trace(t: np.ndarray, y: np.ndarray, max_points: int = MAX_TRACE_POINTS):
    """At most ``max_points`` points of a trace: each slice's lowest and highest, in time order,
    so peaks and dips survive on a plot of a long log (slices with no finite value are left out)."""
    if t.size <= max_points:
        return t, y
    edges = np.linspace(0, t.size, max_points // 2 + 1).astype(int)
    keep = []
    for a, b in zip(edges[:-1], edges[1:]):
        seg = y[a:b]
        if np.isfinite(seg).any():
            keep += sorted((a + int(np.nanargmin(seg)), a + int(np.nanargmax(seg))))
    keep = np.asarray(keep, int)
    return t[keep], y[keep]
