"""The stability result as the text ``coilshift stability`` prints: the settling fit, the settled
start and drift, which part of the log the deviations use and why, and the per-tau table.

Every figure that has no defined uncertainty is printed as "not determined" with the reason.
"""

from __future__ import annotations

import math
from typing import Callable

from coilshift.logger.errors import InputError, setting

from coilshift.analysis.stability.result import StabilityResult


def _render(text: str, name_of: Callable[[str], str]) -> str:
    """Setting markers shown as ``name_of(setting)`` (the command line passes its option names)."""
    return InputError(text).render(name_of)


def _pm(value: float, u: float, fmt: str, ufmt: str = ".2g") -> str:
    return f"{value:{fmt}} ± {u:{ufmt}}" if math.isfinite(u) else f"{value:{fmt}} (uncertainty not determined)"


def _warmup_lines(res: StabilityResult) -> list[str]:
    fit = res.settling
    lines = []
    names = {0: "a straight line", 1: "one exponential", 2: "two exponentials"}
    others = ", ".join(f"{names[k]} {fit.bic[k] - fit.bic[fit.n_exp]:.3g} higher"
                       for k in sorted(fit.bic) if k != fit.n_exp)
    if fit.n_exp == 0:
        lines.append("  warm-up: none supported by the data; the drift is a straight line")
    for i, (a, ua, tau, lo, hi) in enumerate(zip(fit.amplitudes_hz, fit.u_amplitudes_hz, fit.taus_s,
                                                 fit.tau_lo_s, fit.tau_hi_s)):
        head = "  warm-up: " if i == 0 else "           "
        interval = (f"{lo:.4g} .. {hi:.4g} s at {100 * fit.confidence:.4g}%" if math.isfinite(lo) and math.isfinite(hi)
                    else "interval not determined")
        lines.append(f"{head}{_pm(a, ua, '+.4g')} Hz decaying with time constant {tau:.4g} s ({interval})")
    if others:
        lines.append(f"  model chosen by the BIC ({names[fit.n_exp]}; {others})")
    if fit.tau_bound == "lower":
        lines.append(f"  (a time constant sits at the shortest searched, {2 * fit.block_steps * res.tau0_s:.3g} s: "
                     "a transient faster than the fit's blocks)")
    if fit.n_exp:
        lines.append(f"  settles to {_pm(fit.f_inf_hz, fit.u_f_inf_hz, '.6f')} Hz")
    return lines


def _drift_lines(res: StabilityResult, name_of) -> list[str]:
    w, d = res.warmup, res.drift
    lines = []
    if w.settled:
        u = f" ± {w.u_warmup_s:.2g}" if math.isfinite(w.u_warmup_s) and w.u_warmup_s > 0 else ""
        lines.append(f"  settled start: {w.warmup_s:.4g}{u} s after the start of the log: {w.reason}")
    else:
        lines.append(f"  settled start: none within the log: {w.reason}; "
                     + _render(f"{setting('settled_hz_per_min')} sets the threshold", name_of))
    if d.determined:
        lines.append(f"  settled drift: {d.rate_hz_per_min:+.4g} ± {d.u_rate_hz_per_min:.2g} Hz/min (1 sigma), {d.reason}")
    else:
        lines.append(f"  settled drift: not determined ({d.reason})")
    return lines


def _header_lines(res: StabilityResult, name_of) -> list[str]:
    fit = res.settling
    nm = fit.noise
    lines = [f"log: {res.source}",
             f"frames {res.n_frames}, used {res.n_used}, unusable {res.n_unusable}, missing steps {res.n_missing}; "
             f"tau0 {res.tau0_s:.6g} s (time jitter {res.jitter_rms:.3f} tau0 rms); record {res.duration_s:.6g} s"]
    if res.baselines is not None:
        lines.append(res.baselines.text())
    lines.append(f"mean {res.mean_hz:.6f} Hz; fractional values relative to {res.nominal_hz:.6f} Hz")
    lines.append("")
    if math.isfinite(nm.white_fm_hz):
        agree = (f"; outside the measured deviation's 95% interval at {nm.n_outside} of {nm.tau_fit_s.size} "
                 "averaging times" if nm.tau_fit_s.size else "")
        lines.append(f"settling fit: generalised least squares on {fit.n} block means of {fit.block_steps} frames, "
                     f"noise white FM {1000 * nm.white_fm_hz:.3g} mHz at 1 s + random-walk FM "
                     f"{1000 * nm.random_walk_hz:.3g} mHz/sqrt(s) (REML{agree})")
    else:
        lines.append(f"settling fit: not determined ({fit.note})")
    if math.isfinite(nm.white_fm_hz) and not nm.describes_the_data:
        lines.append("  note: the noise model does not describe the measured deviation (flicker FM, or noise the "
                     "tracker's frames shape?); the uncertainties below rest on it and are approximate")
    if fit.note and math.isfinite(nm.white_fm_hz):
        lines.append(f"  ({fit.note})")
    return lines + _warmup_lines(res) + _drift_lines(res, name_of)


def _table_lines(res: StabilityResult) -> list[str]:
    sp = res.span
    lines = ["", f"deviations over {sp.start_s:.6g} .. {sp.end_s:.6g} s ({sp.reason}): {res.span_n_used} usable "
                 f"frames, {res.n_segments} gap-free segment{'s' if res.n_segments != 1 else ''}"
             + ("; settled drift removed first" if res.detrended else ""),
             f"intervals: {100 * res.confidence:.2f}% chi-squared from equivalent degrees of freedom",
             f"noise: {res.noise.method}; '-' where the evidence is ambiguous", ""]
    lines.append(f"{'tau_s':>10} {'ADEV_Hz':>11} {'OADEV_Hz':>11} {'OADEV interval Hz':>25} {'MDEV_Hz':>11} "
                 f"{'TDEV_s':>11} {'OADEV_y':>10} {'terms':>7} {'slope (95%)':>22}  noise")
    inside = res.within_frame()
    nl = res.noise
    for i, tau in enumerate(res.tau_s):
        mark = "*" if inside[i] else " "
        ci = f"{res.ci_lo['oadev'][i]:.4g} .. {res.ci_hi['oadev'][i]:.4g}"
        sl = (f"{nl.slope[i]:+.2f} ({nl.slope_lo[i]:+.2f}..{nl.slope_hi[i]:+.2f})" if math.isfinite(nl.slope[i])
              else "-")
        lines.append(f"{tau:>9.4g}{mark} {res.adev_hz[i]:>11.4g} {res.oadev_hz[i]:>11.4g} {ci:>25} "
                     f"{res.mdev_hz[i]:>11.4g} {res.tdev_s[i]:>11.4g} {res.oadev_hz[i] / res.nominal_hz:>10.3g} "
                     f"{res.n_terms['oadev'][i]:>7d} {sl:>22}  {nl.label[i] or '-'}")
    if inside.any():
        lines.append(f"* shorter than the tracker frame ({1000 * res.frame_s:.4g} ms): overlapping frames share "
                     "samples, so these rows show the tracker's smoothing, not the oscillator (no label)")
    return lines


def _tempco_lines(res: StabilityResult) -> list[str]:
    tc = res.tempco
    if tc is None:
        return []
    where = f"over {tc.temp_min_c:.2f}..{tc.temp_max_c:.2f} degC in the deviations' part of the log, R^2 {tc.r_squared:.3f}"
    if not math.isfinite(tc.u_hz_per_degc):
        return [f"temperature coefficient not determined ({tc.note}; least-squares slope {tc.hz_per_degc:+.4g} "
                f"Hz/degC {where})"]
    return [f"temperature coefficient {tc.hz_per_degc:+.5g} ± {tc.u_hz_per_degc:.2g} Hz/degC "
            f"({tc.ppm_per_degc:+.4g} ppm/degC) {where}"]


def table_text(res: StabilityResult, name_of: Callable[[str], str] = str) -> str:
    """The printed report. ``name_of`` shows a setting's name (the command line: its option)."""
    return "\n".join(_header_lines(res, name_of) + _table_lines(res) + [""] + _tempco_lines(res)) + "\n"
