"""Stability plots: sigma(tau) on log-log axes and frequency vs time with drift and warm-up."""

from __future__ import annotations

import os

import numpy as np

from coilshift.analysis.report.figures import save_png, subplots
from coilshift.analysis.stability.analyse import StabilityResult

# slope of sigma_y(tau) on log-log axes per noise type (SP 1065 Table 11; modified ADEV for PM)
_REFERENCE_SLOPES = (("white FM", -0.5), ("flicker FM", 0.0), ("random-walk FM", 0.5),
                     ("white PM (MDEV)", -1.5), ("drift", 1.0))


def plot_sigma_tau(result: StabilityResult, path: str | os.PathLike) -> None:
    """Log-log Allan, overlapping Allan and modified Allan deviation (Hz, fractional on the right)
    with their confidence intervals as error bars and dashed reference slopes."""
    fig, ax = subplots(figsize=(8.5, 6))
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
    o = result.oadev_hz
    ok = np.flatnonzero(np.isfinite(o) & (o > 0) & ~result.within_frame())
    if ok.size:
        # reference segments through the overlapping-ADEV floor, up to a decade long and kept
        # inside the measured tau range: falling slopes on the left of it, rising on the right
        i_min = ok[np.argmin(o[ok])]
        t_ref, s_ref = tau[i_min], o[i_min]
        t_lo, t_hi = max(t_ref / 10, tau[ok[0]]), min(t_ref * 10, tau[ok[-1]])
        for (name, slope), ls in zip(_REFERENCE_SLOPES, (":", "--", "-.", (0, (1, 3)), (0, (5, 2, 1, 2)))):
            left = slope < 0 if t_lo < t_ref and t_hi > t_ref else t_lo < t_ref
            tt = np.array([t_lo, t_ref]) if left else np.array([t_ref, t_hi])
            if tt[0] == tt[1]:
                continue
            ax.plot(tt, s_ref * (tt / t_ref) ** slope, color="dimgrey", ls=ls, lw=1.0,
                    label=f"slope {slope:+.1f}: {name}")
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
    extra = ", drift removed" if result.detrended else ""
    ax.set_title(f"Frequency stability, {level} intervals{extra}\n{os.path.basename(result.source.rstrip('/'))}",
                 fontsize=11)
    ax.grid(True, which="both", alpha=0.3)
    lo_y = np.nanmin([np.nanmin(result.ci_lo[k]) for k in ("adev", "oadev", "mdev")])
    hi_y = np.nanmax([np.nanmax(result.ci_hi[k]) for k in ("adev", "oadev", "mdev")])
    if np.isfinite(lo_y) and np.isfinite(hi_y) and lo_y > 0:
        ax.set_ylim(lo_y / 1.5, hi_y * 1.5)
    ax.legend(fontsize=8, loc="best", ncol=2)
    fig.tight_layout()
    save_png(fig, path)


def plot_drift(result: StabilityResult, path: str | os.PathLike) -> None:
    """Frequency vs time with the drift line, gaps left blank, and the warm-up marker;
    the local drift rate per window below."""
    series = result.series
    fig, (ax, ax2) = subplots(2, 1, figsize=(8.5, 6.5), sharex=True,
                                  gridspec_kw={"height_ratios": [2.2, 1]})
    t = series.t_s - series.t0_s
    f = series.freq_hz
    n = f.size
    # long records: plot per-bin means so the figure stays readable and the file small
    if n > 20000:
        k = n // 5000
        nb = n // k
        blocks = f[: nb * k].reshape(nb, k)
        cnt = np.isfinite(blocks).sum(axis=1)
        # bins wholly inside a gap stay blank instead of being bridged by the line
        f_plot = np.where(cnt > 0, np.nansum(blocks, axis=1) / np.maximum(cnt, 1), np.nan)
        t_plot = t[: nb * k].reshape(nb, k).mean(axis=1)
        label = f"frequency ({k}-frame means)"
    else:
        t_plot, f_plot, label = t, f, "frequency"
    # plot against a round offset so the axis shows hertz of shift, not five-digit labels
    f_ref = float(np.round(result.mean_hz, 1))
    ax.plot(t_plot, f_plot - f_ref, lw=0.7, color="tab:blue", label=label)
    d = result.drift
    tt = np.array([t[0], t[-1]])
    ax.plot(tt, d.freq_at_mid_hz - f_ref + d.rate_hz_per_min / 60 * (tt + series.t0_s - d.t_mid_s), color="tab:red",
            lw=1.5, label=f"linear drift {d.rate_hz_per_min:+.4g} ± {d.u_rate_hz_per_min:.2g} Hz/min")
    w = result.warmup
    if w.settled and w.warmup_s:
        for a in (ax, ax2):
            a.axvline(w.warmup_s, color="tab:purple", ls="--", lw=1.2)
        ax.plot([], [], color="tab:purple", ls="--", label=f"settled after {w.warmup_s:.4g} s")
    elif not w.settled:
        ax.plot([], [], color="none", label="drift rate never settled below threshold")
    ax.set_ylabel(f"frequency - {f_ref:.1f} Hz (Hz)")
    ax.ticklabel_format(axis="y", useOffset=False, style="plain")
    ax.legend(fontsize=8, loc="best")
    ax.grid(True, alpha=0.3)
    ax.set_title(f"Drift and warm-up\n{os.path.basename(result.source.rstrip('/'))}", fontsize=11)
    tc = w.t_centre_s - series.t0_s
    ax2.fill_between(tc, w.rate_hz_per_min - 2 * w.u_rate_hz_per_min, w.rate_hz_per_min + 2 * w.u_rate_hz_per_min,
                     color="tab:green", alpha=0.2, lw=0, label="± 2 u(rate)")
    ax2.plot(tc, w.rate_hz_per_min, ".-", color="tab:green", ms=3, lw=0.8,
             label=f"rate over {w.window_s:.3g} s windows")
    for s in (-1, 1):
        ax2.axhline(s * w.threshold_hz_per_min, color="grey", ls=":", lw=1)
    ax2.plot([], [], color="grey", ls=":", label=f"± threshold {w.threshold_hz_per_min:.3g} Hz/min")
    ax2.set_ylabel("drift rate (Hz/min)")
    ax2.set_xlabel("time from start of log (s)")
    ax2.legend(fontsize=8, loc="best")
    ax2.grid(True, alpha=0.3)
    fig.tight_layout()
    save_png(fig, path)
