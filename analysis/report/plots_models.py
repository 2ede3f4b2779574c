"""Model plots: predicted |shift| of a target against distance, with the threshold and range."""

from __future__ import annotations

import os

import numpy as np

from coilshift.analysis.report.figures import save_png, subplots


def plot_predicted_shift(distance_mm, shift_hz, path: str | os.PathLike, *, title: str,
                         points_mm=None, points_hz=None, closed_form_hz=None,
                         threshold_hz: float | None = None, range_mm: float | None = None) -> None:
    """Log-log |shift| (Hz) against distance (mm) from the coil face.

    ``distance_mm``/``shift_hz`` is the model curve (signed; plotted as magnitude with the sign in
    the legend), ``points_*`` the tabulated distances, ``closed_form_hz`` the single-loop curve on
    the same distances, ``threshold_hz`` a horizontal line and ``range_mm`` a vertical one.
    """
    d = np.asarray(distance_mm, float)
    s = np.asarray(shift_hz, float)
    ok = (d > 0) & (np.abs(s) > 0)
    fig, ax = subplots(figsize=(8, 5.5))
    sign = "frequency rises" if np.nanmedian(s[ok]) > 0 else "frequency falls"
    ax.plot(d[ok], np.abs(s[ok]), color="tab:blue", lw=1.8, label=f"full winding ({sign})")
    if closed_form_hz is not None:
        c = np.abs(np.asarray(closed_form_hz, float))
        ax.plot(d[ok], c[ok], color="tab:grey", ls="--", lw=1.2, label="single loop at the mean radius")
    if points_mm is not None:
        pm, ph = np.asarray(points_mm, float), np.abs(np.asarray(points_hz, float))
        good = (pm > 0) & (ph > 0)
        ax.plot(pm[good], ph[good], "o", color="tab:blue", ms=5, label="tabulated distances")
    if threshold_hz is not None:
        ax.axhline(threshold_hz, color="tab:red", lw=1.2, label=f"threshold {threshold_hz:.3g} Hz")
    if range_mm is not None and range_mm > 0:
        ax.axvline(range_mm, color="tab:red", ls=":", lw=1.2, label=f"range {range_mm:.4g} mm")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("distance from the coil face to the target centre (mm)")
    ax.set_ylabel("|frequency shift| (Hz)")
    ax.set_title(title, fontsize=11)
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize=9, loc="lower left")
    fig.tight_layout()
    save_png(fig, path)
