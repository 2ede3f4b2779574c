"""Figure set-up shared by every plot: new figures on the Agg canvas, and saving as PNG.

Plot modules make their figures here, never through pyplot: a figure is a plain
:class:`matplotlib.figure.Figure` on an Agg canvas (files only, never a window), so pyplot, its
figure registry and its backends are never loaded, and nothing holds a figure once it is saved.
Each figure is made at the resolution it is saved at, so the layout pass (``tight_layout``) and
the final drawing measure the text once, with one renderer. Saving gives PNG bytes in memory,
then (given a path) one atomic write, so a finished plot appears whole or not at all.
"""

from __future__ import annotations

import io
import os

import matplotlib
import numpy as np

matplotlib.use("Agg")  # should anything load pyplot later: files only, never a window
from matplotlib.backends.backend_agg import FigureCanvasAgg  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

from coilshift.logger.runfolder.atomic import write_bytes_atomic  # noqa: E402

#: resolution of the stand-alone plot files
DPI = 120
#: most points a time-series trace is drawn with
MAX_TRACE_POINTS = 20000
#: matplotlib's default colour cycle, for plots that colour by target or run
COLORS: tuple[str, ...] = tuple(matplotlib.rcParams["axes.prop_cycle"].by_key()["color"])

#: the arguments of :meth:`matplotlib.figure.Figure.subplots` (the rest go to the figure)
_SUBPLOT_ARGS = frozenset({"sharex", "sharey", "squeeze", "width_ratios", "height_ratios", "subplot_kw",
                           "gridspec_kw"})


def subplots(nrows: int = 1, ncols: int = 1, dpi: float = DPI, **kwargs):
    """A new figure at ``dpi`` (the resolution it will be saved at) and its axes; the arguments
    are those of :func:`matplotlib.pyplot.subplots`."""
    grid = {k: kwargs.pop(k) for k in list(kwargs) if k in _SUBPLOT_ARGS}
    fig = Figure(dpi=dpi, **kwargs)
    FigureCanvasAgg(fig)  # the canvas attaches itself to the figure
    return fig, fig.subplots(nrows, ncols, **grid)


def png_bytes(fig, dpi: float | None = None) -> bytes:
    """The figure as PNG bytes, at ``dpi`` (default: the figure's own)."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=fig.dpi if dpi is None else dpi)
    return buf.getvalue()


def save_png(fig, path: str | os.PathLike | None, dpi: float | None = None) -> bytes:
    """The figure as PNG bytes (see :func:`png_bytes`), written atomically to ``path`` when given."""
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
