"""Least-squares sine fits of IEEE Std 1057 (also IEEE Std 1241): three and four parameters.

Model ``x[n] = A cos(w t_n) + B sin(w t_n) + C`` with ``t_n = n / fs``. The three-parameter fit
knows ``w`` and solves a linear least-squares problem; the four-parameter fit starts from an
estimate of ``w`` (an interpolated FFT) and iterates on the linearised model
``[cos wt, sin wt, 1, t(-A sin wt + B cos wt)]``, updating ``w`` by the fourth unknown.
For Gaussian noise the four-parameter fit is close to the Cramer-Rao bound (Handel 2000).

References
----------
IEEE Std 1057-2017, "Standard for Digitizing Waveform Recorders", sine-fit algorithms (4.1.3);
IEEE Std 1241-2010 (ADC testing), same algorithms.
P. Handel, "Properties of the IEEE-STD-1057 four-parameter sine wave fit algorithm",
IEEE Trans. Instrum. Meas. 49(6), 1189-1193, 2000.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class SineFit:
    """Result of a sine fit; ``x ~ amplitude * cos(2 pi freq_hz t + phase_rad) + offset``.

    ``t`` counts from the first sample. ``rms_residual`` is the RMS of the fit residual;
    ``iterations`` and ``converged`` describe the four-parameter iteration (1 and True for the
    three-parameter fit).
    """

    freq_hz: float
    amplitude: float
    phase_rad: float
    offset: float
    rms_residual: float
    iterations: int
    converged: bool


def _solve_normal(cols, x):
    """Least squares per row via normal equations; cols (F, P, N), x (F, N) -> (F, P)."""
    gram = np.einsum("fpn,fqn->fpq", cols, cols)
    rhs = np.einsum("fpn,fn->fp", cols, x)
    # column scaling keeps the Gram matrix well conditioned (the t*sin column is large)
    scale = np.sqrt(np.einsum("fpp->fp", gram))
    scale[scale == 0] = 1.0
    g = gram / (scale[:, :, None] * scale[:, None, :])
    # a whisker of ridge keeps an all-zero column (silent frame) solvable: its coefficient is 0
    g += 1e-13 * np.eye(g.shape[-1])
    sol = np.linalg.solve(g, (rhs / scale)[..., None])[..., 0]
    return sol / scale


def fit_sine3_frames(frames, sample_rate_hz: float, freq_hz):
    """Three-parameter fit (known frequency) of every row of ``frames``.

    Returns
    -------
    a, b, c : ndarray, shape (F,)
        Cosine, sine and offset coefficients, time counted from each row's first sample.
    """
    x = np.atleast_2d(np.asarray(frames, dtype=float))
    f = np.broadcast_to(np.asarray(freq_hz, dtype=float), x.shape[:1])
    t = np.arange(x.shape[1]) / sample_rate_hz
    ph = 2 * np.pi * f[:, None] * t[None, :]
    cols = np.stack([np.cos(ph), np.sin(ph), np.ones_like(ph)], axis=1)
    sol = _solve_normal(cols, x)
    return sol[:, 0], sol[:, 1], sol[:, 2]


def fit_sine4_frames(frames, sample_rate_hz: float, freq_hz_init, max_iter: int = 8,
                     tol_hz: float | None = None):
    """Four-parameter IEEE Std 1057 fit of every row of ``frames``.

    Parameters
    ----------
    frames : array_like, shape (F, N)
    sample_rate_hz : float
    freq_hz_init : array_like, shape (F,) or scalar
        Starting frequencies, e.g. from an interpolated FFT; the fit converges when the start is
        within a fraction of a DFT bin.
    max_iter : int
        Bound on the number of four-parameter iterations.
    tol_hz : float, optional
        Stop when every frequency step is below this. The standard's "step in w below about
        2 pi 1e-6 / Ts" is 1e-6 fs in Hz (48 mHz at 48 kHz), coarser than the noise-limited
        accuracy of a long record, so the default is ``1e-9 * fs``.

    Returns
    -------
    freq_hz, a, b, c, iterations, converged
        Arrays of shape (F,) except ``iterations`` (int). Rows that fail to converge keep the last
        iterate and ``converged`` False.
    """
    x = np.atleast_2d(np.asarray(frames, dtype=float))
    nrow, n = x.shape
    f = np.array(np.broadcast_to(np.asarray(freq_hz_init, dtype=float), (nrow,)), dtype=float)
    if tol_hz is None:
        tol_hz = 1e-9 * sample_rate_hz
    t = np.arange(n) / sample_rate_hz
    a, b, c = fit_sine3_frames(x, sample_rate_hz, f)
    converged = np.zeros(nrow, dtype=bool)
    active = np.ones(nrow, dtype=bool)  # rows stop iterating once done, so each row's result is its own
    it = 0
    for it in range(1, max_iter + 1):
        idx = np.flatnonzero(active)
        ph = 2 * np.pi * f[idx, None] * t[None, :]
        cs, sn = np.cos(ph), np.sin(ph)
        dcol = t[None, :] * (-a[idx, None] * sn + b[idx, None] * cs)
        cols = np.stack([cs, sn, np.ones_like(ph), dcol], axis=1)
        sol = _solve_normal(cols, x[idx])
        a[idx], b[idx], c[idx] = sol[:, 0], sol[:, 1], sol[:, 2]
        step_hz = sol[:, 3] / (2 * np.pi)
        # a wild step means the start was too far off; refuse it rather than jump to another tone
        wild = ~np.isfinite(step_hz) | (np.abs(step_hz) > sample_rate_hz / n)
        f[idx] += np.where(wild, 0.0, step_hz)
        done = ~wild & (np.abs(step_hz) < tol_hz)
        converged[idx] = done
        active[idx] = ~(done | wild)
        if not active.any():
            break
    # the amplitudes belong to the last frequency
    a, b, c = fit_sine3_frames(x, sample_rate_hz, f)
    return f, a, b, c, it, converged


def _to_result(x, fs, f, a, b, c, iterations, converged) -> SineFit:
    t = np.arange(x.shape[0]) / fs
    resid = x - (a * np.cos(2 * np.pi * f * t) + b * np.sin(2 * np.pi * f * t) + c)
    return SineFit(
        freq_hz=float(f),
        amplitude=float(math.hypot(a, b)),
        phase_rad=float(math.atan2(-b, a)),
        offset=float(c),
        rms_residual=float(np.sqrt(np.mean(resid * resid))),
        iterations=int(iterations),
        converged=bool(converged),
    )


def fit_sine3(x, sample_rate_hz: float, freq_hz: float) -> SineFit:
    """IEEE Std 1057 three-parameter fit of one record at a known frequency."""
    x = np.asarray(x, dtype=float).ravel()
    a, b, c = fit_sine3_frames(x[None, :], sample_rate_hz, freq_hz)
    return _to_result(x, sample_rate_hz, freq_hz, a[0], b[0], c[0], 1, True)


def fit_sine4(x, sample_rate_hz: float, freq_hz_init: float, max_iter: int = 8,
              tol_hz: float | None = None) -> SineFit:
    """IEEE Std 1057 four-parameter fit of one record, started at ``freq_hz_init``.

    See :func:`fit_sine4_frames` for the parameters.
    """
    x = np.asarray(x, dtype=float).ravel()
    f, a, b, c, it, conv = fit_sine4_frames(x[None, :], sample_rate_hz, freq_hz_init, max_iter, tol_hz)
    return _to_result(x, sample_rate_hz, f[0], a[0], b[0], c[0], it, conv[0])
