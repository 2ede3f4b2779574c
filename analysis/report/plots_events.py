"""The events plot: the tracked frequency against time with every found event shaded (colour by
class), its peak marked with its 95 % interval, and the baselines before and after drawn."""

from __future__ import annotations

import os

import numpy as np

from coilshift.analysis.events.find import EventsResult
from coilshift.analysis.report.figures import decimate_trace, save_png, subplots
from coilshift.logger.events.measure import FERROUS, NON_FERROUS

KIND_COLORS = {FERROUS: "#c0392b", NON_FERROUS: "#2471a3"}
OTHER_COLOR = "0.5"


def plot_events(res: EventsResult, path: str | os.PathLike | None = None) -> bytes:
    """Frequency minus its median against time; events shaded; peaks with 95 % intervals."""
    fig, ax = subplots(figsize=(11, 5))
    log = res.log
    ok = log.usable()
    ref = float(np.median(log.freq_hz[ok])) if np.any(ok) else 0.0
    t, y = decimate_trace(log.t_s, np.where(ok, log.freq_hz - ref, np.nan))
    ax.plot(t, y, "-", color="0.25", lw=0.6, label="tracked frequency")
    for i, ev in enumerate(res.events):
        c = KIND_COLORS.get(ev.kind, OTHER_COLOR)
        ax.axvspan(ev.start_s, ev.end_s, color=c, alpha=0.25, lw=0)
        left = ev.baseline_before_hz if np.isfinite(ev.baseline_before_hz) else ev.baseline_after_hz
        right = ev.baseline_after_hz if np.isfinite(ev.baseline_after_hz) else ev.baseline_before_hz
        ax.plot([ev.start_s, ev.end_s], [left - ref, right - ref], "--", color="black", lw=0.8)
        lam = (ev.peak_t_s - ev.start_s) / ev.duration_s if ev.duration_s > 0 else 0.0
        base = left + lam * (right - left)
        top = base + ev.peak_shift_hz - ref
        ax.errorbar([ev.peak_t_s], [top], yerr=[[1.96 * ev.peak_u_hz], [1.96 * ev.peak_u_hz]], fmt="o", ms=3,
                    color=c, capsize=2, lw=1)
        ax.annotate(str(i + 1), (ev.peak_t_s, 1.0), xycoords=("data", "axes fraction"), textcoords="offset points",
                    xytext=(0, 2), ha="center", va="bottom", fontsize=7, color=c)
    from matplotlib.patches import Patch

    handles, _ = ax.get_legend_handles_labels()
    for kind, c in (*KIND_COLORS.items(), ("indeterminate", OTHER_COLOR)):
        if any(ev.kind == kind for ev in res.events):
            handles.append(Patch(color=c, alpha=0.25, label=f"event: {kind}"))
    handles += ax.plot([], [], "--", color="black", lw=0.8, label="baseline under the event")
    handles += ax.plot([], [], "o", ms=3, color="0.3", label="peak, with its 95 % interval")
    ax.set_xlabel("time from start of run (s)")
    ax.set_ylabel(f"frequency - {ref:.3f} Hz (Hz)")
    ax.set_title(f"Events found in {res.name} (numbered above the plot)", pad=14)
    ax.grid(True, alpha=0.3)
    ax.legend(handles=handles, fontsize=8, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0)
    fig.tight_layout()
    return save_png(fig, path)
