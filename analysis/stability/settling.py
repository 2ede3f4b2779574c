"""Warm-up and drift together: exponential settling plus a linear drift, by generalised least squares.

Model, with t measured from the first usable sample t1:

    f(t) = f_inf + sum_i a_i exp(-(t - t1) / tau_i) + b (t - t1),   i = 1..k, k = 0, 1 or 2

First-order thermal settling after power-on (Newton's law of cooling for a body heated by its
own dissipation: its temperature, and with it the frequency, approaches equilibrium
exponentially) on top of the slow drift that remains once settled; a second time constant
allows for two thermal masses (the coil and the electronics, say), and k = 0 is the straight
line. The least-squares core is :mod:`.settling_lsq`.

Noise: the fit runs on block means (:mod:`.blocks`: at least four tracker frames per block, at
most 20 000 blocks, so the cost does not grow with the record) weighted by the exact
covariance of white FM plus random-walk FM (:mod:`.gls`), whose two levels are estimated by
REML with a first, unweighted fit's columns as fixed effects (:mod:`.noise_model`).
Uncertainties are the linearised covariance of all parameters (time constants through ln tau,
so their intervals are asymmetric in tau).

How many exponentials the data support is decided by the Bayesian information criterion
(G. Schwarz, "Estimating the dimension of a model", Ann. Statist. 6(2), 1978):
BIC = chi^2 + p ln n with p = 2 + 2k parameters and n block means; the lowest wins, so each
exponential must lower chi^2 by more than 2 ln n to be kept.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from coilshift.analysis.stability import allan
from coilshift.analysis.stability.blocks import Blocks, block_length
from coilshift.analysis.stability.grid import UniformSeries
from coilshift.analysis.stability.noise_model import NoiseModel, agreement, fit_noise_reml
from coilshift.analysis.stability.settling_lsq import KFit, SettlingProblem

MIN_TAU_STEPS = 10  # the shortest time constant searched: this many sample steps, and two blocks
MIN_EXP_BLOCKS = 20  # fewer usable blocks than this: no exponential term is tried
MIN_EXP2_BLOCKS = 40  # ... and no second one below this
BOUND_MARGIN = 0.05  # ln(tau) this close to the shortest searched counts as that limit
BEYOND_RECORD = 10.0  # time constants are searched up to this many record lengths
MAX_EXPONENTIALS = 2


@dataclass
class SettlingFit:
    """The settling model chosen for a record, and what it rests on.

    Attributes
    ----------
    t_ref_s, t_end_s : first and last usable sample (exponentials and drift run from ``t_ref_s``)
    n : block means fitted; ``block_steps`` grid steps per block
    n_exp : exponentials in the chosen model (0: the record is a straight line)
    bic : BIC per number of exponentials tried (0, 1, 2); the lowest was chosen
    f_inf_hz, u_f_inf_hz : the level the warm-up settles to (at t_ref_s, without drift)
    drift_hz_per_s, u_drift_hz_per_s : the settled drift b
    amplitudes_hz, u_amplitudes_hz : a_i, at t_ref_s
    taus_s, u_ln_taus : time constants (increasing) and the standard uncertainty of ln tau_i
    tau_lo_s, tau_hi_s : intervals for the tau_i at ``confidence``
    tau_bound : "upper" when a time constant is longer than the record (the warm-up then cannot
        be told apart from a drift), "lower" when at the shortest searched, else None
    cov_warmup : covariance of (a_1..a_k, ln tau_1..ln tau_k)
    noise : the noise model the fit was weighted with
    note : why fewer exponentials were tried than usual (empty when all were)

    Uncertainties are NaN where the data cannot separate the parameters.
    """

    t_ref_s: float
    t_end_s: float
    n: int
    block_steps: int
    n_exp: int
    bic: dict
    f_inf_hz: float
    u_f_inf_hz: float
    drift_hz_per_s: float
    u_drift_hz_per_s: float
    amplitudes_hz: tuple
    u_amplitudes_hz: tuple
    taus_s: tuple
    u_ln_taus: tuple
    tau_lo_s: tuple
    tau_hi_s: tuple
    tau_bound: str | None
    cov_warmup: np.ndarray = field(repr=False)
    noise: NoiseModel = field(repr=False)
    confidence: float = 0.6827
    note: str = ""

    def curve_hz(self, t_s) -> np.ndarray:
        """The chosen model at times ``t_s`` (on the log's clock)."""
        t = np.asarray(t_s, float) - self.t_ref_s
        out = self.f_inf_hz + self.drift_hz_per_s * t
        for a, tau in zip(self.amplitudes_hz, self.taus_s):
            out = out + a * np.exp(-t / tau)
        return out

    def warmup_rate_hz_per_s(self, t_s) -> np.ndarray:
        """Rate of change of the exponential terms alone (the warm-up, without the drift)."""
        t = np.asarray(t_s, float) - self.t_ref_s
        out = np.zeros(np.shape(t))
        for a, tau in zip(self.amplitudes_hz, self.taus_s):
            out = out - a / tau * np.exp(-t / tau)
        return out

    def to_dict(self) -> dict:
        d = {k: getattr(self, k) for k in self.__dataclass_fields__ if k not in ("noise", "cov_warmup", "bic")}
        d["model"] = ("linear drift", "exponential settling plus linear drift",
                      "two exponential settling terms plus linear drift")[self.n_exp]
        d["bic"] = {str(k): v for k, v in self.bic.items()}
        d["noise"] = self.noise.to_dict()
        return d


def _chosen(kf: KFit, k: int, prob: SettlingProblem, lo: float, span_s: float, z: float) -> dict:
    """The SettlingFit fields of one fitted model (``span_s``: the record's length)."""
    u = np.sqrt(np.where(np.diag(kf.cov) >= 0, np.diag(kf.cov), np.nan))
    span = prob.span
    ln_t = kf.beta[2 + k:]
    bound = None
    if k and np.any(ln_t >= math.log(span_s)):
        bound = "upper"
    elif k and np.any(ln_t <= math.log(lo) + BOUND_MARGIN):
        bound = "lower"
    sel = list(range(2, 2 + 2 * k))
    return dict(n_exp=k, f_inf_hz=prob.y_ref + kf.beta[0], u_f_inf_hz=float(u[0]),
                drift_hz_per_s=float(kf.beta[1] / span), u_drift_hz_per_s=float(u[1] / span),
                amplitudes_hz=tuple(float(a) for a in kf.beta[2:2 + k]),
                u_amplitudes_hz=tuple(float(a) for a in u[2:2 + k]),
                taus_s=tuple(math.exp(x) for x in ln_t), u_ln_taus=tuple(float(a) for a in u[2 + k:]),
                tau_lo_s=tuple(math.exp(x - z * s) for x, s in zip(ln_t, u[2 + k:])),
                tau_hi_s=tuple(math.exp(x + z * s) for x, s in zip(ln_t, u[2 + k:])),
                tau_bound=bound, cov_warmup=kf.cov[np.ix_(sel, sel)])


def _noise_agreement(blocks: Blocks, fit: SettlingFit) -> NoiseModel:
    """Compare the noise model with the overlapping Allan deviation of the block means' residual
    from the fit (blocks span at least four tracker frames, where the frames' overlap no longer
    smooths the noise; block means cost little at any record length)."""
    model = fit.f_inf_hz + fit.drift_hz_per_s * blocks.t_s
    for a, tau in zip(fit.amplitudes_hz, fit.taus_s):
        model = model + a * blocks.exp_means(tau)[0]  # block means of the model, exactly
    grid = np.full(int(blocks.start[-1] // blocks.m) + 1, np.nan)
    grid[blocks.start // blocks.m] = blocks.mean_hz - model
    ms = allan.octave_factors(grid.size)
    dev, _ = allan.oadev(grid, ms)
    segs = UniformSeries(0.0, 1.0, grid, 0, 0, 0, 0.0).segment_lengths()
    return agreement(fit.noise, ms, blocks.m, dev, blocks.tau0_s, segs)


def fit_settling(series: UniformSeries, frame_s: float | None = None, confidence: float = 0.6827,
                 max_exp: int = MAX_EXPONENTIALS, min_exp: int = 0, check_noise: bool = True,
                 tau_range_s: tuple[float, float] | None = None) -> SettlingFit:
    """Fit the line and up to ``max_exp`` settling exponentials to a gridded record; keep the
    BIC's choice.

    Parameters
    ----------
    series : the record on its uniform grid (NaN for gaps; at least three usable samples)
    frame_s : the tracker's frame length, when known (blocks then span at least four frames)
    confidence : level of the intervals given for the time constants
    max_exp : most exponentials tried (0, 1 or 2)
    min_exp : fewest exponentials the choice may settle on (when the record allows that many)
    check_noise : compare the noise model with the residual's Allan deviation (``noise.n_outside``)
    tau_range_s : search the time constants only inside this range (intersected with the usual one)

    Returns
    -------
    SettlingFit (all NaN, with a note, when too few blocks remain to estimate the noise)
    """
    from scipy.special import ndtri

    blocks = Blocks(series, block_length(series.freq_hz.size, series.tau0_s, frame_s))
    tau0 = series.tau0_s
    # time constants beyond the record are searched too (the warm-up then shows as curvature):
    # otherwise such a warm-up would be left in the residual and read as random walk
    lo, hi = max(MIN_TAU_STEPS * tau0, 2 * blocks.m * tau0), BEYOND_RECORD * blocks.span_s
    if tau_range_s is not None:
        lo, hi = max(lo, tau_range_s[0]), max(min(hi, tau_range_s[1]), max(lo, tau_range_s[0]) * 1.01)
    k_max = 0 if blocks.n < MIN_EXP_BLOCKS or blocks.span_s <= 3 * lo else 1 if blocks.n < MIN_EXP2_BLOCKS else 2
    k_max = min(k_max, int(max_exp))
    note = "" if k_max == max_exp else (
        f"{blocks.n} usable blocks of {blocks.m} steps over {blocks.span_s:.4g} s: "
        + ("no warm-up term tried" if k_max == 0 else "at most one warm-up term tried"))
    # first pass, unweighted (white noise: block variance 1/count), with the richest model: its
    # columns are REML's fixed effects (more fixed effects than needed cost REML only degrees of
    # freedom; fewer would leave warm-up in the residual, read as random walk)
    first = SettlingProblem(blocks, 1.0, 0.0)
    cols = first.fit(first.best(k_max, lo, hi, refine=False) if k_max else ()).columns
    sw2, sr2 = fit_noise_reml(blocks.covariance_parts(), blocks.mean_hz, cols)
    common = dict(t_ref_s=blocks.t_first_s, t_end_s=blocks.t_first_s + blocks.span_s, n=blocks.n,
                  block_steps=blocks.m, confidence=confidence)
    if not np.isfinite(sw2 + sr2):
        nan = math.nan
        return SettlingFit(n_exp=0, bic={}, f_inf_hz=nan, u_f_inf_hz=nan, drift_hz_per_s=nan,
                           u_drift_hz_per_s=nan, amplitudes_hz=(), u_amplitudes_hz=(), taus_s=(), u_ln_taus=(),
                           tau_lo_s=(), tau_hi_s=(), tau_bound=None, cov_warmup=np.zeros((0, 0)),
                           noise=NoiseModel(nan, nan, np.zeros(0), 0),
                           note=f"too few usable blocks ({blocks.n}) to estimate the noise", **common)
    # a noiseless record (synthetic) still needs a positive-definite weight: float resolution
    sw2 = max(sw2, (1e-13 * max(abs(float(blocks.mean_hz.mean())), 1.0)) ** 2)
    prob = SettlingProblem(blocks, sw2, sr2)
    fits = {0: prob.fit()}
    for k in range(1, k_max + 1):
        fits[k] = prob.polish(prob.best(k, lo, hi), lo, hi)
    bic = {k: f.chi2 + (2 + 2 * k) * math.log(blocks.n) for k, f in fits.items()}
    k = min((kk for kk in bic if kk >= min(min_exp, k_max)), key=bic.get)
    z = float(ndtri(0.5 + confidence / 2.0))
    fit = SettlingFit(bic=bic, noise=NoiseModel(math.sqrt(sw2 * tau0), math.sqrt(sr2 / tau0), np.zeros(0), 0),
                      note=note, **_chosen(fits[k], k, prob, lo, blocks.span_s, z), **common)
    if check_noise:
        fit.noise = _noise_agreement(blocks, fit)
    return fit
