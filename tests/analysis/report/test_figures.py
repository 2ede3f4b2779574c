"""The shared figure helper: PNG bytes, the same bytes on disk, the figure closed."""

from __future__ import annotations

import matplotlib
import matplotlib.pyplot as plt

from coilshift.analysis.report import figures

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948, section 5.2)


def test_backend_is_agg():
    assert matplotlib.get_backend().lower() == "agg"


def test_save_png_returns_and_writes_the_same_bytes(tmp_path):
    fig, ax = figures.subplots(figsize=(3, 2))
    ax.plot([0, 1], [1, 0])
    data = figures.save_png(fig, tmp_path / "a.png")
    assert data[:8] == PNG_MAGIC
    assert (tmp_path / "a.png").read_bytes() == data
    assert not plt.fignum_exists(fig.number)


def test_save_png_without_a_path_writes_nothing(tmp_path):
    fig, _ = figures.subplots(2, 1)
    assert figures.save_png(fig, None, dpi=50)[:8] == PNG_MAGIC
    assert list(tmp_path.iterdir()) == []
    assert not plt.fignum_exists(fig.number)
