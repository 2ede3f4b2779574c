"""Blocked DTFT of a chunk of frames at one chosen frequency per frame (and one bin below it).

The fine stage needs the spectrum of each frame at two or three arbitrary frequencies, not on the
FFT grid; a direct sum per frequency would cost a complex exponential per sample. Here each frame
is reshaped to rows of DTFT_BLOCK samples, and one small real matrix product per frame applies the
in-row phasors, the row phasors finishing the sums.
"""

from __future__ import annotations

import numpy as np

from coilshift.logger.tracking.plan import Plan
from coilshift.logger.tracking.settings import DTFT_BLOCK


def padded(plan: Plan, frames):
    """The (F, N) frames zero-padded to (F, plan.npad) for :func:`dtft_pair` (no copy if N fits)."""
    if plan.npad == plan.n:
        return frames
    xpad = np.zeros((frames.shape[0], plan.npad))
    xpad[:, :plan.n] = frames
    return xpad


def dtft_pair(plan: Plan, xpad, g_plus):
    """DTFT of each row of ``xpad`` (F, npad) at bins ``g_plus`` and ``g_plus - 1``.

    Returns ((F, 2) complex, (F,) row sums). The frame is reshaped to rows of DTFT_BLOCK
    samples; one small matrix product per frame applies the in-row phasors of both
    frequencies (and a column of ones, which gives the frame sum for free), then the row
    phasors finish the sums. Phasors come from 8 x 8 outer products of exponentials, and
    the second frequency's from the first times a fixed vector.
    """
    nrow = xpad.shape[0]
    theta = -2 * np.pi * g_plus / plan.n  # (F,)
    fine = np.exp(1j * theta[:, None] * plan.step8[:8])  # (F, 8)
    coarse = np.exp(1j * theta[:, None] * (8 * plan.step8[:8]))
    col_p = (coarse[:, :, None] * fine[:, None, :]).reshape(nrow, DTFT_BLOCK)
    col_m = col_p * plan.col_shift  # one bin lower
    w = np.empty((nrow, 5, DTFT_BLOCK))
    w[:, 0], w[:, 1] = col_p.real, col_p.imag
    w[:, 2], w[:, 3] = col_m.real, col_m.imag
    w[:, 4] = 1.0
    inner = np.matmul(xpad.reshape(nrow, plan.rows, DTFT_BLOCK), w.transpose(0, 2, 1))  # (F, rows, 5)
    rfine = np.exp(1j * theta[:, None] * (DTFT_BLOCK * plan.step8[:8]))
    rcoarse = np.exp(1j * theta[:, None] * (8 * DTFT_BLOCK * plan.step8[:plan.rows_hi]))
    row_p = (rcoarse[:, :, None] * rfine[:, None, :]).reshape(nrow, -1)[:, :plan.rows]
    row_m = row_p * plan.row_shift
    out = np.empty((nrow, 2), dtype=complex)
    out[:, 0] = np.einsum("fr,fr->f", inner[:, :, 0] + 1j * inner[:, :, 1], row_p)
    out[:, 1] = np.einsum("fr,fr->f", inner[:, :, 2] + 1j * inner[:, :, 3], row_m)
    return out, inner[:, :, 4].sum(axis=1)
