"""Stability plots: sigma(tau) on log-log axes with the noise labels and the fitted noise model, and
frequency vs time with the settling fit, the settled start and the part the deviations use."""

from __future__ import annotations

import os

import numpy as np

from coilshift.analysis.report.figures import save_png, subplots
from coilshift.analysis.stability.result import StabilityResult

# slope of sigma_y(tau) on log-log axes per noise type (SP 1065 Table 11; modified ADEV for PM)
_REFERENCE_SLOPES = (("white FM", -0.5), ("flicker FM", 0.0), ("random-walk FM", 0.5),
                     ("white PM (MDEV)", -1.5), ("drift", 1.0))
_SHORT = {"white or flicker PM": "PM", "white FM": "WFM", "flicker FM": "FFM", "random-walk FM": "RWFM",
          "drift": "drift"}


def _reference_slopes(ax, result: StabilityResult) -> None:
    """Dashed reference segments through the overlapping-ADEV floor, up to a decade long and kept
    inside the measured tau range: falling slopes on the left of it, rising on the right."""
    tau, o = result.tau_s, result.oadev_hz
    ok = np.flatnonzero(np.isfinite(o) & (o > 0) & ~result.within_frame())
    if not ok.size:
        return
    i_min = ok[np.argmin(o[ok])]
    t_ref, s_ref = tau[i_min], o[i_min]
    t_lo, t_hi = max(t_ref / 10, tau[ok[0]]), min(t_ref * 10, tau[ok[-1]])
    for (name, slope), ls in zip(_REFERENCE_SLOPES, (":", "--", "-.", (0, (1, 3)), (0, (5, 2, 1, 2)))):
        left = slope < 0 if t_lo < t_ref and t_hi > t_ref else t_lo < t_ref
        tt = np.array([t_lo, t_ref]) if left else np.array([t_ref, t_hi])
        if tt[0] == tt[1]:
            continue
        ax.plot(tt, s_ref * (tt / t_ref) ** slope, color="dimgrey", ls=ls, lw=1.0, label=f"slope {slope:+.1f}: {name}")


def plot_sigma_tau(result: StabilityResult, path: str | os.PathLike) -> None:
    """Log-log Allan, overlapping Allan and modified Allan deviation (Hz, fractional on the right)
    with their confidence intervals, the fitted white + random-walk FM noise model, dashed
    reference slopes, and the noise label at each averaging time where the slope identifies one."""
    fig, ax = subplots(figsize=(8.5, 7.4), layout="constrained")
    tau = result.tau_s
    styles = (("adev", "ADEV (non-overlapping)", "o", "tab:blue"),
              ("oadev", "overlapping ADEV", "s", "tab:orange"),
              ("mdev", "modified ADEV", "^", "tab:green"))
    for key, label, marker, color in styles:
        dev = getattr(result, f"{key}_hz")
        lo, hi = result.ci_lo[key], result.ci_hi[key]
        ok = np.isfinite(dev) & (dev > 0)
        yerr = np.vstack([np.where(np.isfinite(lo), dev - lo, 0), np.where(np.isfinite(hi), hi - dev, 0)])
        ax.errorbar(tau[ok], dev[ok], yerr=yerr[:, ok], fmt=marker + "-", color=color, ms=5,
                    capsize=3, lw=1.2, label=label)
    nm = result.settling.noise
    if np.isfinite(nm.white_fm_hz) and tau.size:
        tt = np.geomspace(tau[0], tau[-1], 100)
        ax.plot(tt, nm.adev_hz(tt), color="black", lw=1.0, alpha=0.6,
                label=f"noise model: WFM {1000 * nm.white_fm_hz:.3g} mHz at 1 s + RWFM "
                      f"{1000 * nm.random_walk_hz:.3g} mHz/sqrt(s)")
    _reference_slopes(ax, result)
    for i, name in enumerate(result.noise.label):
        if name:
            ax.annotate(_SHORT.get(name, name), (tau[i], result.oadev_hz[i]), textcoords="offset points",
                        xytext=(0, 9), ha="center", fontsize=7, color="tab:orange")
    ax.plot([], [], " ", label="labels: OADEV slope, 95% interval in one type's band")
    if result.frame_s is not None and tau.size and tau[0] < result.frame_s:
        ax.axvspan(tau[0] / 1.2, result.frame_s, color="0.85", alpha=0.5, lw=0,
                   label=f"tau < tracker frame ({1000 * result.frame_s:.4g} ms)")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel("averaging time tau (s)")
    ax.set_ylabel("deviation sigma(tau) (Hz)")
    nominal = result.nominal_hz
    sec = ax.secondary_yaxis("right", functions=(lambda h: h / nominal, lambda y: y * nominal))
    sec.set_ylabel(f"fractional deviation (of {nominal:.6g} Hz)")
    level = f"{100 * result.confidence:.1f}%"
    extra = ", settled drift removed" if result.detrended else ""
    sp = result.span
    ax.set_title(f"Frequency stability, {level} intervals{extra}, {sp.start_s:.4g}-{sp.end_s:.4g} s "
                 f"({sp.kind})\n{os.path.basename(result.source.rstrip('/'))}", fontsize=11)
    ax.grid(True, which="both", alpha=0.3)
    lo_y = np.nanmin([np.nanmin(result.ci_lo[k]) for k in ("adev", "oadev", "mdev")])
    hi_y = np.nanmax([np.nanmax(result.ci_hi[k]) for k in ("adev", "oadev", "mdev")])
    if np.isfinite(lo_y) and np.isfinite(hi_y) and lo_y > 0:
        ax.set_ylim(lo_y / 1.5, hi_y * 1.5)
    fig.legend(fontsize=7, loc="outside lower center", ncol=2)
    save_png(fig, path)


def _binned(t: np.ndarray, f: np.ndarray, max_points: int = 5000) -> tuple[np.ndarray, np.ndarray, int]:
    """Per-bin means of a long record (bins wholly inside a gap stay blank, never bridged)."""
    n = f.size
    if n <= 4 * max_points:
        return t, f, 1
    k = n // max_points
    nb = n // k
    blocks = f[: nb * k].reshape(nb, k)
    cnt = np.isfinite(blocks).sum(axis=1)
    f_plot = np.where(cnt > 0, np.nansum(blocks, axis=1) / np.maximum(cnt, 1), np.nan)
    return t[: nb * k].reshape(nb, k).mean(axis=1), f_plot, k


def plot_drift(result: StabilityResult, path: str | os.PathLike) -> None:
    """Frequency vs time with the settling fit (warm-up plus drift), gaps left blank, the settled
    start and the part of the log the deviations use; the residual from the fit below."""
    series = result.series
    fig, (ax, ax2) = subplots(2, 1, figsize=(8.5, 6.5), sharex=True, gridspec_kw={"height_ratios": [2.2, 1]})
    t_abs = series.t_s
    t = t_abs - series.t0_s
    f = series.freq_hz
    fit = result.settling
    model = fit.curve_hz(t_abs)
    t_plot, f_plot, k = _binned(t, f)
    _, r_plot, _ = _binned(t, f - model)
    # plot against a round offset so the axis shows hertz of shift, not five-digit labels
    f_ref = float(np.round(result.mean_hz, 1))
    ax.plot(t_plot, f_plot - f_ref, lw=0.7, color="tab:blue", label="frequency" + (f" ({k}-frame means)" if k > 1 else ""))
    inside = (t_abs >= fit.t_ref_s) & (t_abs <= fit.t_end_s)
    d = result.drift
    drift = (f"settled drift {d.rate_hz_per_min:+.3g} ± {d.u_rate_hz_per_min:.2g} Hz/min" if d.determined
             else "settled drift not determined")
    if fit.n_exp:
        taus = ", ".join(f"{x:.3g} s" for x in fit.taus_s)
        name = f"settling fit: {fit.n_exp} exponential{'s' if fit.n_exp > 1 else ''} (tau {taus}) + line; {drift}"
    else:
        name = f"settling fit: straight line (no warm-up supported); {drift}"
    if np.isfinite(model).any():
        ax.plot(t[inside], model[inside] - f_ref, color="tab:red", lw=1.4, label=name)
    w, sp = result.warmup, result.span
    if w.settled and w.t_settled_s is not None and w.t_settled_s > series.t0_s:
        for a in (ax, ax2):
            a.axvline(w.t_settled_s - series.t0_s, color="tab:purple", ls="--", lw=1.2)
        ax.plot([], [], color="tab:purple", ls="--",
                label=f"settled start {w.warmup_s:.4g} s (warm-up rate < {w.threshold_hz_per_min:.3g} Hz/min)")
    elif not w.settled:
        ax.plot([], [], " ", label="not settled within the log")
    if sp.start_s > series.t0_s:
        ax.axvspan(0, sp.start_s - series.t0_s, color="0.9", lw=0, label="not used for the deviations")
    if result.baselines is not None:
        ax.plot([], [], " ", label="baseline stretches only (gaps elsewhere)")
    ax.set_ylabel(f"frequency - {f_ref:.1f} Hz (Hz)")
    ax.ticklabel_format(axis="y", useOffset=False, style="plain")
    ax.legend(fontsize=7, loc="best")
    ax.grid(True, alpha=0.3)
    ax.set_title(f"Warm-up and drift\n{os.path.basename(result.source.rstrip('/'))}", fontsize=11)
    ax2.plot(t_plot, r_plot, lw=0.6, color="tab:gray")
    ax2.axhline(0, color="tab:red", lw=1)
    ax2.set_ylabel("frequency - fit (Hz)")
    ax2.set_xlabel("time from start of log (s)")
    ax2.grid(True, alpha=0.3)
    fig.tight_layout()
    save_png(fig, path)
