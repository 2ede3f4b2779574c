"""Calibration plots: shift-versus-distance curves, the time series with stretches, residuals,
and the overlay of several runs.

Every function returns the PNG as bytes (the report embeds them) and, given a path, also writes
it atomically. On the log-log curve plot the marker shape tells the sign: a downward triangle
is a falling frequency (inductance up), an upward triangle a rising one.
"""

from __future__ import annotations

import math
import os

import numpy as np
from matplotlib.ticker import FuncFormatter

from coilshift.analysis.calibration.classify import format_p
from coilshift.analysis.calibration.run import CalibrationResult, TargetResult
from coilshift.analysis.report.calibration_text import MODEL_NAMES
from coilshift.analysis.report.figures import COLORS, decimate_trace, save_png, subplots

#: resolution of the calibration plots (the HTML report embeds them; the other plots use figures.DPI)
DPI = 110


def _plain_mm_ticks(ax) -> None:
    # distances read better as 20, 30, 50 mm than as 2x10^1 on a log axis
    fmt = FuncFormatter(lambda v, _: f"{v:g}")
    ax.xaxis.set_major_formatter(fmt)
    ax.xaxis.set_minor_formatter(FuncFormatter(lambda v, _: f"{v:g}" if f"{v:g}"[0] in "235" else ""))
    ax.tick_params(axis="x", which="both", labelsize=8)  # one size for 20, 50, 100, 200


def _color(i: int) -> str:
    return COLORS[i % len(COLORS)]


def _span(res: CalibrationResult) -> tuple[float, float]:
    d = [p.distance_mm for t in res.targets for p in t.points if p.distance_mm > 0]
    if not d:
        return 1.0, 100.0
    return min(d) / 1.6, max(d) * 1.6


def _draw_target(ax, t: TargetResult, color: str, d_grid: np.ndarray, label_prefix: str = "",
                 coil=None, threshold_hz: float = math.nan, show_power: bool = True) -> None:
    d = np.array([p.distance_mm for p in t.points])
    y = np.array([p.shift_hz for p in t.points])
    e = np.array([p.stderr_hz for p in t.points])
    pos = d > 0
    mag = np.abs(y)
    lo_err = np.minimum(np.nan_to_num(e), mag * 0.999)  # keep error bars above zero on log axes
    name = f"{label_prefix}{t.target}"
    for sign, marker, fill in ((-1, "v", color), (1, "^", "white")):
        sel = pos & (np.sign(y) == sign) & (mag > 0)
        if sel.any():
            ax.errorbar(d[sel], mag[sel], yerr=[lo_err[sel], np.nan_to_num(e[sel])], fmt=marker, ms=7,
                        mfc=fill, mec=color, ecolor=color, capsize=3, lw=1, ls="none")
    # a curve through points that are all noise says nothing, and a rejected fit does not describe
    # the points: draw the points only, and say why in the legend
    seen = t.seen
    r = t.range
    has_range = r.range_mm is not None and math.isfinite(threshold_hz)
    reach = f"; range {r.range_mm:.0f} mm ({r.basis})" if has_range else ""
    if not seen:
        ax.plot([], [], "v", color=color, label=f"{name} (not detected: no curve)")
    elif t.fit is None:
        ax.plot([], [], "v", color=color, label=f"{name} (no fit){reach}")
    elif t.fit.accepted:
        law = MODEL_NAMES.get(t.fit.model, t.fit.model)
        # the range goes in the legend, not beside its marker, where close ranges would overlap
        ax.plot(d_grid, np.abs(t.fit.predict(d_grid)), "-", color=color, lw=1.6,
                label=f"{name}: {law}, chi2/dof {t.fit.chi2_red:.2g}{reach}")
    else:
        ax.plot([], [], "-", color=color, alpha=0.3,
                label=f"{name}: {MODEL_NAMES.get(t.fit.model, t.fit.model)} fit REJECTED "
                      f"(chi2/dof {t.fit.chi2_red:.3g}, {format_p(t.fit.p_value)}): not drawn{reach}")
    if t.power_fit is not None and seen and show_power and t.power_fit.accepted:
        ax.plot(d_grid, np.abs(t.power_fit.predict(d_grid)), "--", color=color, lw=0.9, alpha=0.7,
                label=f"{name}: power law, exponent {t.power_fit.params['p']:.2f}")
    if t.prediction is not None and coil is not None:
        pred = np.abs(t.prediction.curve(coil, d_grid))
        ax.plot(d_grid, pred, ":", color=color, lw=1.6, label=f"{name}: predicted ({t.prediction.spec.name})")
    if has_range:
        xerr = None
        if r.ci_mm is not None:
            xerr = [[max(r.range_mm - r.ci_mm[0], 0)], [max(r.ci_mm[1] - r.range_mm, 0)]]
        ax.errorbar([r.range_mm], [threshold_hz], xerr=xerr, fmt="D", ms=8, color=color, mec="black",
                    capsize=4, lw=1.5, zorder=5)


def _sign_legend(ax) -> None:
    ax.plot([], [], "v", color="grey", label="frequency falls (filled)")
    ax.plot([], [], "^", mfc="white", mec="grey", color="grey", label="frequency rises (open)")
    ax.plot([], [], "D", color="grey", mec="black", label="detection range (95 % interval; measured or extrapolated)")


def plot_curves(res: CalibrationResult, path: str | os.PathLike | None = None) -> bytes:
    """|shift| against distance on log-log axes: points with errors, fits, threshold, range."""
    fig, ax = subplots(figsize=(12, 6.2), dpi=DPI)
    lo, hi = _span(res)
    d_grid = np.geomspace(lo, hi, 300)
    for i, t in enumerate(res.targets):
        _draw_target(ax, t, _color(i), d_grid, coil=res.coil, threshold_hz=res.threshold_hz)
    if math.isfinite(res.threshold_hz):
        ax.axhline(res.threshold_hz, color="black", ls="-.", lw=1,
                   label=f"threshold {res.threshold_hz:.3g} Hz ({res.threshold_source})")
    _sign_legend(ax)
    ax.set_xscale("log")
    ax.set_yscale("log")
    _plain_mm_ticks(ax)
    _floor_axis(ax, res)
    ax.set_xlabel("distance from coil (mm)")
    ax.set_ylabel("|frequency shift| (Hz)")
    ax.set_title(f"Shift vs distance: {res.name} (polarity {res.polarity})")
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize=8, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0)
    fig.tight_layout()
    return save_png(fig, path)


def _floor_axis(ax, res: CalibrationResult) -> None:
    mags = [abs(p.shift_hz) for t in res.targets for p in t.points if p.shift_hz != 0]
    mags += [res.threshold_hz] if math.isfinite(res.threshold_hz) else []
    if mags:
        ax.set_ylim(min(mags) / 5, max(mags) * 3)


def plot_timeseries(res: CalibrationResult, path: str | os.PathLike | None = None) -> bytes:
    """Shift against time with target stretches shaded and the interpolated baseline drawn."""
    fig, ax = subplots(figsize=(11, 5), dpi=DPI)
    log = res.log
    t, y = decimate_trace(log.t_s, log.freq_hz - res.baseline_hz)
    ax.plot(t, y, "-", color="0.25", lw=0.6, label="tracked frequency - baseline")
    names = [tr.target for tr in res.targets]
    for b in res.baselines:
        ax.axvspan(b.used_start_s, b.used_end_s, color="0.85", alpha=0.5, lw=0)
    bt = [b.t_mid_s for b in res.baselines]
    bm = [b.stat.mean - res.baseline_hz for b in res.baselines]
    ax.plot(bt, bm, "o--", color="black", ms=3, lw=0.8, label="baseline means (interpolated between)")
    for s in res.steps:
        c = _color(names.index(s.target)) if s.target in names else "grey"
        ax.axvspan(s.start_s, s.end_s, color=c, alpha=0.25, lw=0)
        ax.hlines(s.shift_hz + s.baseline_hz - res.baseline_hz, s.start_s, s.end_s, color=c, lw=2)
        # the label sits above the plotting area, where no trace can run through it
        ax.annotate(f"{s.distance_mm:g}", ((s.start_s + s.end_s) / 2, 1.0), xycoords=("data", "axes fraction"),
                    textcoords="offset points", xytext=(0, 2), ha="center", va="bottom", fontsize=6, color=c,
                    rotation=90)
    for i, n in enumerate(names):
        ax.axvspan(0, 0, color=_color(i), alpha=0.25, label=f"{n} (label: distance in mm)")
    ax.axvspan(0, 0, color="0.85", alpha=0.5, label="baseline stretch (used part)")
    ax.set_xlabel("time from start of run (s)")
    ax.set_ylabel(f"shift from {res.baseline_hz:.3f} Hz (Hz)")
    ax.set_title(f"Calibration run {res.name}: target stretches shaded (settling removed)", pad=22)
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0)
    fig.tight_layout()
    return save_png(fig, path)


def plot_baseline_noise(res: CalibrationResult, path: str | os.PathLike | None = None) -> bytes:
    """Overlapping Allan deviation of the baseline stretches (the rest of the log is a gap) at
    octave averaging times, with the noise at the dwell and the threshold marked."""
    from coilshift.analysis.calibration.run import _baseline_only
    from coilshift.analysis.stability import allan
    from coilshift.analysis.stability.grid import to_uniform

    fig, ax = subplots(figsize=(8, 4.5), dpi=DPI)
    log = res.log
    drawn = False
    try:
        series = to_uniform(log.t_s, _baseline_only(log, res.baselines, log.usable()), None, "baselines")
        m = allan.octave_factors(series.freq_hz.size)
        dev, n = allan.oadev(series.freq_hz, m)
        ok = (n > 0) & np.isfinite(dev) & (dev > 0)
        if ok.any():
            ax.loglog(m[ok] * series.tau0_s, dev[ok], "o-", color="0.2", ms=4,
                      label="overlapping Allan deviation of the baselines")
            drawn = True
    except Exception:  # too short a record: the figure says so instead of failing the report
        drawn = False
    if math.isfinite(res.noise_hz) and res.noise_hz > 0:
        ax.loglog([res.noise_tau_s], [res.noise_hz], "D", color=COLORS[1], ms=8,
                  label=f"noise at the dwell: {res.noise_hz:.3g} Hz at {res.noise_tau_s:.3g} s")
        drawn = True
    if math.isfinite(res.threshold_hz) and res.threshold_hz > 0:
        ax.axhline(res.threshold_hz, color=COLORS[3], ls="-.", lw=1,
                   label=f"threshold {res.threshold_hz:.3g} Hz ({res.threshold_source})")
    if not drawn:
        ax.text(0.5, 0.5, "baselines too short for an Allan deviation", transform=ax.transAxes, ha="center")
    ax.set_xlabel("averaging time tau (s)")
    ax.set_ylabel("Allan deviation (Hz)")
    ax.set_title(f"Baseline noise of run {res.name}")
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize=8)
    fig.tight_layout()
    return save_png(fig, path)


def plot_residuals(res: CalibrationResult, path: str | os.PathLike | None = None) -> bytes:
    """Normalised residuals (measured - fit)/effective error of the curve fits against distance."""
    fig, ax = subplots(figsize=(9, 4.5), dpi=DPI)
    any_fit = False
    for i, t in enumerate(res.targets):
        if t.fit is None:
            continue
        any_fit = True
        verdict = "accepted" if t.fit.accepted else "REJECTED"
        ax.plot(t.fit.distance_mm, t.fit.normalized_residuals, "o-", color=_color(i), ms=6, lw=0.8,
                label=f"{t.target}: {MODEL_NAMES.get(t.fit.model, t.fit.model)}, chi2/dof = {t.fit.chi2_red:.3g} "
                      f"({t.fit.dof} dof, {format_p(t.fit.p_value)}): {verdict}")
    for level, ls in ((1, ":"), (3, "--")):
        ax.axhline(level, color="grey", ls=ls, lw=0.8)
        ax.axhline(-level, color="grey", ls=ls, lw=0.8)
    ax.axhline(0, color="black", lw=0.8)
    ax.set_xscale("log")
    _plain_mm_ticks(ax)
    ax.set_xlabel("distance from coil (mm)")
    ax.set_ylabel("(measured - fit) / effective error")
    ax.set_title("Fit residuals (dotted: +-1, dashed: +-3 errors; errors include the placement tolerance)")
    ax.grid(True, which="both", alpha=0.3)
    if any_fit:
        ax.legend(fontsize=8)
    else:
        ax.text(0.5, 0.5, "no fitted curve", transform=ax.transAxes, ha="center")
    fig.tight_layout()
    return save_png(fig, path)


def plot_compare(results: list[CalibrationResult], names: list[str],
                 path: str | os.PathLike | None = None) -> bytes:
    """One panel per target: the curves of every run that has it, colours by run."""
    targets: list[str] = []
    for r in results:
        for t in r.targets:
            if t.target not in targets:
                targets.append(t.target)
    ncol = 1  # one target a row, legend to its right
    nrow = math.ceil(len(targets) / ncol)
    fig, axes = subplots(nrow, ncol, figsize=(12, 4.2 * nrow + 0.6), squeeze=False, dpi=DPI)
    for k, tname in enumerate(targets):
        ax = axes[k // ncol][k % ncol]
        lo, hi = 1e9, 0.0
        for r in results:
            a, b = _span(r)
            lo, hi = min(lo, a), max(hi, b)
        d_grid = np.geomspace(lo, hi, 300)
        mags = []
        for i, (name, r) in enumerate(zip(names, results)):
            t = r.target(tname)
            if t is None:
                continue
            _draw_target(ax, t, _color(i), d_grid, label_prefix=f"{name}: ", coil=r.coil,
                         threshold_hz=r.threshold_hz, show_power=False)
            if math.isfinite(r.threshold_hz):
                ax.axhline(r.threshold_hz, color=_color(i), ls="-.", lw=0.8,
                           label=f"{name}: threshold {r.threshold_hz:.3g} Hz")
                mags.append(r.threshold_hz)
            mags += [abs(p.shift_hz) for p in t.points if p.shift_hz != 0]
        ax.set_xscale("log")
        ax.set_yscale("log")
        _plain_mm_ticks(ax)
        if mags:
            ax.set_ylim(min(mags) / 5, max(mags) * 3)
        ax.set_title(tname)
        ax.set_xlabel("distance from coil (mm)")
        ax.set_ylabel("|frequency shift| (Hz)")
        ax.grid(True, which="both", alpha=0.3)
        # beside the panel: inside, any corner hides a curve or a threshold line
        ax.legend(fontsize=8, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0)
    for k in range(len(targets), nrow * ncol):
        axes[k // ncol][k % ncol].set_visible(False)
    fig.suptitle("Runs compared (filled triangle down: frequency falls; open up: rises; diamond: range)")
    fig.tight_layout(rect=(0, 0, 1, 1 - 0.5 / fig.get_figheight()))
    return save_png(fig, path)
