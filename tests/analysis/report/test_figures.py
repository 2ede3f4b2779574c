"""The shared figure helper: PNG bytes at the figure's resolution, the same bytes on disk, and
figures that nothing holds once saved (pyplot is never involved)."""

from __future__ import annotations

import gc
import struct
import sys
import weakref

import matplotlib

from coilshift.analysis.report import figures

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948, section 5.2)


def _png_size(data: bytes) -> tuple[int, int]:
    # the IHDR chunk comes first: length, b"IHDR", then width and height as big-endian uint32
    # (ISO/IEC 15948, sections 5.3 and 11.2.2)
    assert data[:8] == PNG_MAGIC and data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


def test_backend_is_agg():
    assert matplotlib.get_backend().lower() == "agg"


def test_save_png_returns_and_writes_the_same_bytes(tmp_path):
    fig, ax = figures.subplots(figsize=(3, 2))
    ax.plot([0, 1], [1, 0])
    data = figures.save_png(fig, tmp_path / "a.png")
    assert data[:8] == PNG_MAGIC
    assert (tmp_path / "a.png").read_bytes() == data


def test_save_png_without_a_path_writes_nothing(tmp_path):
    fig, _ = figures.subplots(2, 1)
    assert figures.save_png(fig, None, dpi=50)[:8] == PNG_MAGIC
    assert list(tmp_path.iterdir()) == []


def test_the_png_has_the_figures_own_resolution_unless_told():
    # pixels = inches x dots per inch: 3 x 2 in at 110 dpi is 330 x 220 px; at 50 dpi 150 x 100
    fig, _ = figures.subplots(figsize=(3, 2), dpi=110)
    assert _png_size(figures.save_png(fig, None)) == (330, 220)
    assert _png_size(figures.save_png(fig, None, dpi=50)) == (150, 100)
    fig, _ = figures.subplots(figsize=(3, 2))
    assert _png_size(figures.save_png(fig, None)) == (3 * figures.DPI, 2 * figures.DPI)


def test_subplots_takes_the_grid_arguments_of_pyplot():
    fig, axes = figures.subplots(2, 1, figsize=(4, 3), sharex=True, gridspec_kw={"height_ratios": [2, 1]},
                                 squeeze=False)
    assert axes.shape == (2, 1) and fig.get_size_inches().tolist() == [4.0, 3.0]
    a, b = axes[:, 0]
    assert a.get_position().height > b.get_position().height  # the 2:1 height ratio was applied
    assert a.get_shared_x_axes().joined(a, b)


def test_a_saved_figure_is_freed_and_pyplot_never_holds_it():
    fig, ax = figures.subplots(figsize=(3, 2))
    ax.plot([0, 1], [1, 0])
    figures.save_png(fig, None)
    gone = weakref.ref(fig)
    del fig, ax
    gc.collect()
    assert gone() is None  # no registry keeps a reference: the figure's memory is returned
    plt = sys.modules.get("matplotlib.pyplot")
    assert plt is None or plt.get_fignums() == []
